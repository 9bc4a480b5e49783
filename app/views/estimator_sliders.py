"""One slider per entry of the estimator gain L, with its exact stable range.

The same controls as the K sliders (:mod:`gainboard.app.views.gain_sliders`): name
(state ← output) and units, a number box, a slider whose range comes from the core
(the K-slider rules applied on the dual plant), and a strip drawing the values of the
entry (others fixed) for which the estimation error dies out.
"""

from __future__ import annotations

from html import escape

import numpy as np
import panel as pn

from ..theme import PALETTE, estimator_entry_symbol
from .gain_sliders import SLIDER_WIDTH, EntryActions, GainSliders, PromptSlider, _interval_text, interval_strip_svg
from .html_box import HtmlBox

__all__ = ["EstimatorSliders", "estimator_entry_units"]


def estimator_entry_units(plant, row: int, col: int, units) -> str:
    """Units of l_ij: state units (``units[row]``) per output unit (x̂ is corrected by L × the output error)."""
    state_unit = units[row]
    output_unit = plant.output_units[col]
    if state_unit and output_unit:
        return f"{state_unit}/{output_unit}"
    if state_unit:
        return f"{state_unit} per unit of {plant.output_names[col]}"
    if output_unit:
        return f"1/{output_unit}"
    return ""


class _EstimatorEntry(EntryActions):
    def __init__(self, owner: "EstimatorSliders", row: int, col: int):
        self.owner, self.row, self.col = owner, row, col
        self.symbol = estimator_entry_symbol(row, col)
        self.label = pn.pane.HTML("", width=160, margin=(2, 4, 0, 4), stylesheets=[GainSliders.css])
        self.number = pn.widgets.FloatInput(value=0.0, width=122, margin=(2, 4), label="",
                                            css_classes=[f"gb-l-number-{row + 1}-{col + 1}"])
        self.locus_button = pn.widgets.Button(label="locus", color="light", width=56, margin=(2, 0),
                                              description=f"Show the locus of {self.symbol} on the pole map")
        self.slider = PromptSlider(start=-1.0, end=1.0, value=0.0, step=0.01, show_value=False, label="",
                                   width=SLIDER_WIDTH, margin=(0, 4, 0, 8), bar_color=PALETTE["estimator"],
                                   css_classes=[f"gb-l-slider-{row + 1}-{col + 1}"])
        self.strip = HtmlBox(css=GainSliders.css, width=SLIDER_WIDTH + 10, margin=(0, 4, 0, 8))
        self.panel = pn.Column(pn.Row(self.label, self.number, self.locus_button, margin=0), self.slider,
                               self.strip.panel, margin=(2, 0, 6, 0))
        self._connect(lambda: owner.state.select_estimator_entry(row, col))

    @property
    def key(self):
        return ("estimator entry", self.row, self.col)

    def apply(self, value: float, live: bool = False) -> None:
        self.owner.state.set_estimator_entry(self.row, self.col, value, live=live)

    def show(self, compensator, value: float, selected: bool, names, units) -> None:
        plant = compensator.plant
        slider_range = compensator.slider_ranges[(self.row, self.col)]
        intervals = (compensator.entry_intervals or {}).get((self.row, self.col))
        unit_text = estimator_entry_units(plant, self.row, self.col, units)
        name = f"{escape(names[self.row])} ← {escape(plant.output_names[self.col])}"
        self.label.object = (f'<div class="gb-entry-label"><span class="gb-k">{self.symbol}</span> {name}'
                             + (f'<br><span class="gb-units">{escape(unit_text)}</span>' if unit_text else "")
                             + "</div>")
        self._show_value(value, slider_range, selected)
        low, high = slider_range.low, slider_range.high
        badge = ""
        if intervals is not None:
            badge = ('<span class="gb-pass">✓ error dies out</span> · ' if intervals.current_is_stable
                     else '<span class="gb-fail">✗ error grows</span> · ')
        self.strip.object = (f'<div>{interval_strip_svg(low, high, value, intervals)}</div>'
                             f'<div class="gb-interval-text">{badge}{_interval_text(self.symbol, intervals, high - low)}'
                             "</div>")


class EstimatorSliders:
    """All entries of L (empty without an estimator)."""

    def __init__(self, state, scheduler):
        self.state = state
        self.scheduler = scheduler
        self.syncing = False
        self._controls: dict = {}
        self._shape = None
        self.panel = pn.Column(margin=0, sizing_mode="stretch_width")

    def refresh(self, evaluation) -> None:
        compensator = self.state.estimator_evaluation
        if compensator is None:
            if self._shape is not None:
                self.panel.objects, self._controls, self._shape = [], {}, None
            return
        gain = np.asarray(compensator.estimator_gain, dtype=float)
        if gain.shape != self._shape:
            rows, cols = gain.shape
            self._controls = {(i, j): _EstimatorEntry(self, i, j) for i in range(rows) for j in range(cols)}
            self.panel.objects = [c.panel for c in self._controls.values()]
            self._shape = gain.shape
        names, units = compensator.gain_row_names, compensator.gain_row_units
        selected = compensator.selected_entry or (self.state.estimator_selected_entry
                                                  if self.state.editing == "estimator" else None)
        self.syncing = True
        try:
            for (i, j), controls in self._controls.items():
                controls.show(compensator, float(gain[i, j]), selected == (i, j), names, units)
        finally:
            self.syncing = False
