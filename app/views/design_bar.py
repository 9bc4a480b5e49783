"""The design bar: K as copyable text, undo/redo, pinning, and typed target poles."""

from __future__ import annotations

from html import escape

import numpy as np
import panel as pn

from gainboard import core

from ..pole_list import parse_pole_list
from ..theme import TABLE_CSS, format_complex, format_gain_text
from .html_box import HtmlBox

__all__ = ["DesignBar", "pole_list_text"]

WIDTH = 350


class DesignBar:
    """K readout and the history and comparison buttons."""

    def __init__(self, state):
        self.state = state
        self.undo_button = pn.widgets.Button(label="↶ Undo", width=70, margin=(2, 3), description="Undo the last gain change")
        self.redo_button = pn.widgets.Button(label="↷ Redo", width=70, margin=(2, 3), description="Redo")
        self.pin_button = pn.widgets.Button(label="Pin", width=48, margin=(2, 3),
                                            description="Keep this design as a ghost to compare against")
        self.unpin_button = pn.widgets.Button(label="Unpin", width=58, margin=(2, 3))
        self.back_button = pn.widgets.Button(label="Use pinned", width=88, margin=(2, 3),
                                             description="Make the pinned design's gain current again")
        self.gain_text = pn.widgets.TextAreaInput(
            label="K (u = −Kx), copy or paste", value="", height=58, width=WIDTH - 10, margin=(2, 5),
            css_classes=["gb-gain-text"],
            stylesheets=[":host textarea { font-family: ui-monospace, monospace; font-size: 12.5px; }"],
        )
        self.apply_gain = pn.widgets.Button(label="Apply K", width=80, margin=(2, 5), color="primary")
        self.copy_gain = pn.widgets.Button(label="Copy K", width=70, margin=(2, 5))
        # which pin is drawn as the ghost (every pin is compared in the Checks tab)
        self.pin_choice = pn.widgets.Select(options=[], width=150, margin=(2, 5), disabled=True,
                                            css_classes=["gb-pin-choice"], description="The pin drawn as ghosts")
        self.pin_choice.param.watch(self._pin_chosen, "value")
        self._syncing_pins = False
        self.copy_gain.js_on_click(args={"source": self.gain_text},
                                   code="navigator.clipboard && navigator.clipboard.writeText(source.value)")
        self.targets = pn.widgets.TextInput(label="Target poles (keyboard alternative to dragging; Enter assigns)",
                                            placeholder="-2+4j, -2-4j, -10", width=WIDTH + 20, margin=(2, 5),
                                            css_classes=["gb-targets"])
        self.assign_button = pn.widgets.Button(label="Assign", width=75, margin=(20, 5, 2, 5), color="primary")

        self.undo_button.on_click(lambda event: self.state.undo())
        self.redo_button.on_click(lambda event: self.state.redo())
        self.pin_button.on_click(lambda event: self.state.pin())
        self.unpin_button.on_click(lambda event: self.state.unpin())
        self.back_button.on_click(lambda event: self.state.adopt_pinned())
        self.apply_gain.on_click(lambda event: self.state.set_gain_text(self.gain_text.value))
        self.assign_button.on_click(lambda event: self._assign())
        self.targets.param.watch(lambda event: self._assign(), "enter_pressed")  # Enter assigns, as the button
        self._targets_filled_for = None  # the design whose poles the box was last filled with
        self.state.param.watch(lambda *events: self.refresh_buttons(), ["undo_depth", "redo_depth", "pinned", "pins"])

        self.panel = pn.Column(
            pn.Row(self.undo_button, self.redo_button, self.pin_button, self.unpin_button, self.back_button, margin=0),
            self.gain_text,
            pn.Row(self.apply_gain, self.copy_gain, self.pin_choice, margin=0),
            margin=0,
        )
        self.placement = HtmlBox(css=TABLE_CSS, width=WIDTH + 110, height=34)
        self.state.param.watch(lambda *events: self.refresh_placement(), "placement_summary")
        self.target_row = pn.Column(pn.Row(self.targets, self.assign_button, margin=0), self.placement.panel, margin=0)

    def _assign(self) -> None:
        # what the box shows is what is sent: the live text, not the value of the last Enter or blur
        text = self.targets.value_input if self.targets.value_input is not None else self.targets.value
        if not (text or "").strip():
            self.state.show_message("Type the target poles first, such as -2+4j, -2-4j, -10 (the box is empty).",
                                    "error")
            return
        try:
            poles = parse_pole_list(text)
        except core.GainboardError as error:
            self.state.show_message(f"Could not place the poles there: {error}", "error")
            return
        self.state.place_poles(poles)

    def refresh_placement(self) -> None:
        summary = self.state.placement_summary
        self.placement.object = (f'<div class="gb-small">Last pole assignment: {escape(summary)}</div>'
                                 if summary else "")

    def refresh_buttons(self) -> None:
        self.undo_button.disabled = self.state.undo_depth == 0
        self.redo_button.disabled = self.state.redo_depth == 0
        has_pin = self.state.pinned is not None
        self.unpin_button.disabled = not has_pin
        self.back_button.disabled = not has_pin
        names = [name for name, _ in self.state.pins]
        self._syncing_pins = True
        try:
            if self.pin_choice.options != names:
                self.pin_choice.options = names
            shown = self.state.pinned_name
            if shown is not None and self.pin_choice.value != shown:
                self.pin_choice.value = shown
            self.pin_choice.disabled = not names
        finally:
            self._syncing_pins = False

    def _pin_chosen(self, event) -> None:
        if not self._syncing_pins and event.new:
            self.state.show_pin(event.new)

    def refresh(self, evaluation) -> None:
        self.gain_text.value = format_gain_text(evaluation.gain)
        compensator = self.state.estimator_evaluation
        editing_estimator = self.state.editing == "estimator" and compensator is not None
        # the typed targets place the poles of the gain being edited
        label = ("Estimator poles (typed; they set L; Enter assigns)" if editing_estimator
                 else "Target poles (keyboard alternative to dragging; Enter assigns)")
        if self.targets.label != label:
            self.targets.label = label
        poles = compensator.estimator_poles.poles if editing_estimator else evaluation.closed_loop.poles
        current = pole_list_text(poles)
        # After every change of the design (K, L, plant, what is edited) the box shows the current
        # poles of the current plant, so the text Assign sends is always on screen; typing replaces it
        # until the design changes again.
        design = (id(evaluation.plant), evaluation.gain.tobytes(), editing_estimator,
                  None if compensator is None else np.asarray(compensator.estimator_poles.poles).tobytes())
        if design != self._targets_filled_for:
            self._targets_filled_for = design
            self.targets.param.update(value=current, value_input=current, placeholder=current)
        self.refresh_buttons()


def pole_list_text(poles) -> str:
    """Poles as the target box reads them back (``-2+4j, -2-4j, -10``), conjugates next to each other."""
    return ", ".join(format_complex(p, 6, plain=True).replace(" ", "") for p in poles)
