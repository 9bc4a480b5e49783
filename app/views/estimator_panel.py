"""The Estimator tab: the estimator form, L as text, the Kalman weights, and one slider per entry of L.

The Kalman weights are the analogue of the LQR tab: process-noise and measurement-noise
intensities (diagonals; the plant file's ``[noise]`` by default), a button that designs
the steady-state Kalman filter and makes its gain the current L, and the estimation-
error covariance it predicts. Which poles an estimator cannot move, and why, comes
from the core's observability report.
"""

from __future__ import annotations

from html import escape

import numpy as np
import panel as pn

from gainboard import core

from ..theme import TABLE_CSS, format_gain_text, format_number
from .html_box import HtmlBox
from .lqr_panel import parse_weight_list

__all__ = ["EstimatorPanel"]

WIDTH = 350


def _diagonal_text(matrix) -> str:
    return ", ".join(format_number(float(v), 6) for v in np.diag(np.asarray(matrix, dtype=float)))


class EstimatorPanel:
    """Form, L readout, Kalman design and the L sliders (given as ``sliders``)."""

    def __init__(self, state, sliders):
        self.state = state
        self.sliders = sliders
        self.form = pn.widgets.Select(label="Estimator form", options=[], width=WIDTH - 10, margin=(2, 5))
        self.gain_text = pn.widgets.TextAreaInput(
            label="L (x̂ corrected by L × output error), copy or paste", value="", height=70, width=WIDTH - 10,
            margin=(2, 5), stylesheets=[":host textarea { font-family: ui-monospace, monospace; font-size: 12.5px; }"],
            css_classes=["gb-estimator-text"])
        self.apply_gain = pn.widgets.Button(label="Apply L", width=80, margin=(2, 5), color="primary")
        self.remove = pn.widgets.Button(label="Full-state feedback", width=150, margin=(2, 5),
                                        description="Remove the estimator (the design measures every state)")
        self.process = pn.widgets.TextInput(label="Process noise W diagonal (one per state)", width=WIDTH - 10,
                                            margin=(2, 5))
        self.measurement = pn.widgets.TextInput(label="Measurement noise V diagonal (one per output)", width=WIDTH - 10,
                                                margin=(2, 5))
        self.kalman_button = pn.widgets.Button(label="Design Kalman L", width=140, margin=(4, 5), color="success")
        self.summary = HtmlBox(css=TABLE_CSS, width=WIDTH - 10, margin=(2, 5))
        self._syncing = False
        self._plant = None
        self.form.param.watch(self._form_chosen, "value")
        self.apply_gain.on_click(lambda event: self.state.set_estimator_text(self.gain_text.value))
        self.remove.on_click(lambda event: self.state.disable_estimator())
        self.kalman_button.on_click(lambda event: self._kalman())
        heading = lambda text: pn.pane.HTML(f'<div class="gb-heading">{text}</div>',  # noqa: E731
                                            stylesheets=[TABLE_CSS], margin=(6, 5, 0, 5))
        self.panel = pn.Column(
            self.form, self.gain_text, pn.Row(self.apply_gain, self.remove, margin=0),
            heading("Kalman weights"), self.process, self.measurement, self.kalman_button,
            self.summary.panel,
            heading("estimator gain entries"), self.sliders.panel,
            margin=0, width=WIDTH + 10,
        )

    def _form_chosen(self, event) -> None:
        if self._syncing or not event.new:
            return
        if self.state.estimator is None:
            self.state.enable_estimator(event.new)
        elif event.new != self.state.estimator.form:
            self.state.set_estimator_form(event.new)

    def _kalman(self) -> None:
        plant = self.state.plant
        try:
            process = parse_weight_list(self.process.value or "", plant.state_count, "W")
            measurement = parse_weight_list(self.measurement.value or "", plant.output_count, "V")
        except core.GainboardError as error:
            self.state.show_message(f"Could not read the Kalman weights: {error}", "error")
            return
        self.state.design_kalman(process, measurement)

    def refresh(self, evaluation) -> None:
        plant = evaluation.plant
        compensator = self.state.estimator_evaluation
        settings = self.state.estimator
        forms = ["prediction", "current", "reduced-order"] if plant.is_sampled else ["full-order", "reduced-order"]
        self._syncing = True
        try:
            if self.form.options != forms:
                self.form.options = forms
            chosen = settings.form if settings is not None else forms[0]
            if self.form.value != chosen:
                self.form.value = chosen
        finally:
            self._syncing = False
        self.gain_text.value = format_gain_text(settings.gain) if settings is not None else ""
        self.remove.disabled = settings is None
        if plant is not self._plant:  # the weights start from the plant's noise (or the unit defaults)
            self._plant = plant
            noise = self.state.default_kalman_weights()
            self.process.value = _diagonal_text(noise.process)
            self.measurement.value = _diagonal_text(noise.measurement)
        self.summary.object = self._summary(compensator)
        self.sliders.refresh(evaluation)

    def _summary(self, compensator) -> str:
        if compensator is None:
            return ('<div class="gb-small">No estimator: the design assumes every state is measured. Switch to '
                    '“Estimator L” above the pole map, pick a form, or design a Kalman filter.</div>')
        settings = self.state.estimator
        parts = [f"<div class='gb-small'><b>{escape(compensator.form)}</b> estimator, L by "
                 f"{escape(settings.method)}. {escape(compensator.observability.note)}</div>"]
        for mode in compensator.observability.modes:
            if not mode.observable or mode.margin < core.WEAK_STRUCTURE_MARGIN:
                parts.append(f"<div class='gb-small'>• {escape(mode.explanation)}</div>")
        result = self.state.kalman_result
        if settings.method == "steady-state Kalman filter" and result is not None:
            variances = np.diag(result.error_covariance)
            rows = "".join(
                f"<tr><td>{escape(name)}</td><td class='num'>{format_number(float(value), 4)}</td>"
                f"<td>{escape(unit)}²</td></tr>" if unit else
                f"<tr><td>{escape(name)}</td><td class='num'>{format_number(float(value), 4)}</td><td></td></tr>"
                for name, value, unit in zip(compensator.plant.state_names, variances, compensator.plant.state_units))
            parts.append("<table class='gb-table'><tr><th>state</th><th>steady-state error variance</th><th></th></tr>"
                         f"{rows}</table>")
        return "".join(parts)
