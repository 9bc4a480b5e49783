"""Choosing and editing the plant: bundled plants, a file from disk, the TOML in place, sampling."""

from __future__ import annotations

from html import escape

import numpy as np
import panel as pn

from ..plant_catalogue import bundled_plant_catalogue
from ..theme import TABLE_CSS, format_complex, format_number
from .html_box import HtmlBox
from .sampling_check import SamplingCheckPanel

__all__ = ["PlantPanel"]

WIDTH = 350


class PlantPanel:
    """Plant controls of one session."""

    def __init__(self, state):
        self.state = state
        try:
            catalogue = bundled_plant_catalogue()
        except Exception:  # no bundled plants installed: the other ways to load still work
            catalogue = ()
        self._summaries = {entry.stem: entry.summary for entry in catalogue}
        # Each choice reads "name — one-line summary"; the value is the short name `gainboard serve` takes.
        options = {f"{entry.name} — {entry.summary}" if entry.summary else entry.name: entry.stem
                   for entry in catalogue}
        self.bundled = pn.widgets.Select(label="Sample plant", options=options, width=WIDTH - 10, margin=(2, 5),
                                         css_classes=["gb-bundled"])
        self.bundled_summary = HtmlBox(css=TABLE_CSS, width=WIDTH - 100, margin=(2, 5), name="bundled_summary")
        self.open_button = pn.widgets.Button(label="Open", color="primary", width=80, margin=(2, 5))
        self.file_input = pn.widgets.FileInput(accept=".toml", width=WIDTH - 10, margin=(2, 5), label="plant file",
                                               css_classes=["gb-plant-file"])
        self.editor = pn.widgets.TextAreaInput(
            label="Plant file text (TOML)", value="", height=230, width=WIDTH - 10, margin=(2, 5),
            stylesheets=[":host textarea { font-family: ui-monospace, monospace; font-size: 12px; }"],
        )
        self.apply_button = pn.widgets.Button(label="Apply edits", color="primary", width=110, margin=(2, 5))
        self.sampling = SamplingCheckPanel(state)
        self.structure = HtmlBox(css=TABLE_CSS, width=WIDTH - 10, margin=(2, 5))
        self.description = HtmlBox(css=TABLE_CSS, width=WIDTH - 10, margin=(2, 5))

        self.open_button.on_click(lambda event: self._open_bundled())
        self.bundled.param.watch(lambda event: self._show_bundled_summary(), "value")
        self.file_input.param.watch(self._file_chosen, "value")
        self.apply_button.on_click(lambda event: self.state.load_plant_text(self.editor.value, "edited plant"))

        heading = lambda text: pn.pane.HTML(f'<div class="gb-heading">{text}</div>',  # noqa: E731
                                            stylesheets=[TABLE_CSS], margin=(4, 5, 0, 5))
        self.panel = pn.Column(
            heading("open"),
            self.bundled,
            pn.Row(self.bundled_summary.panel, self.open_button, margin=0),
            pn.pane.HTML('<div class="gb-small">or load a plant file (TOML) from disk:</div>',
                         stylesheets=[TABLE_CSS], margin=(2, 5)),
            self.file_input,
            heading("structure"),
            self.structure.panel,
            heading("time base"),
            self.sampling.panel,
            heading("edit in place"),
            self.editor,
            self.apply_button,
            heading("about this plant"),
            self.description.panel,
            margin=0,
        )

    def _show_bundled_summary(self) -> None:
        stem = self.bundled.value
        summary = self._summaries.get(stem, "")
        self.bundled_summary.object = (f'<div class="gb-small"><code>{escape(stem or "")}</code>: {escape(summary)}</div>'
                                       if stem else "")

    def _open_bundled(self) -> None:
        if self.bundled.value:
            self.state.load_plant_reference(self.bundled.value)

    def _file_chosen(self, event) -> None:
        if event.new:
            self.state.load_plant_bytes(event.new, self.file_input.filename or "uploaded file")

    def refresh(self, evaluation) -> None:
        """Show the current plant's text, structure and description."""
        stems = set(self.bundled.options.values()) if isinstance(self.bundled.options, dict) else set()
        if self.state.plant_label in stems and self.bundled.value != self.state.plant_label:
            self.bundled.value = self.state.plant_label
        self._show_bundled_summary()
        if self.editor.value != self.state.plant_text:
            self.editor.value = self.state.plant_text
        self.structure.object = structure_summary_html(evaluation)
        plant = evaluation.plant
        self.sampling.refresh(evaluation)
        text = escape(plant.description or plant.summary or "No description in the plant file.")
        self.description.object = f'<div class="gb-note" style="white-space: pre-wrap;">{text}</div>'


def structure_summary_html(evaluation) -> str:
    """Which open-loop poles a gain can move, in words."""
    structure = evaluation.structure
    plant = evaluation.plant
    fixed = [format_complex(p, 4) for p in np.asarray(structure.uncontrollable_poles, complex)]
    lines = [
        f"{plant.state_count} states, {plant.input_count} input(s), {plant.output_count} output(s); "
        + (f"sampled every {format_number(plant.sample_time)} s (z-plane)." if plant.is_sampled
           else "continuous time (s-plane)."),
    ]
    if structure.controllable:
        lines.append('<span class="gb-pass">Every pole can be moved</span> by some gain (controllable).')
    else:
        lines.append(
            f'<span class="gb-fail">{len(fixed)} pole(s) cannot be moved</span> by any gain: '
            f"{', '.join(fixed)} (uncontrollable; framed on the pole map)."
        )
    if structure.nearly_uncontrollable:
        lines.append(
            "Some poles are barely reachable from the inputs (controllability margin "
            f"{format_number(structure.controllability_margin, 3)}): moving them needs very large gains."
        )
    return '<div class="gb-note">' + "<br>".join(lines) + "</div>"
