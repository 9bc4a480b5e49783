"""The LQR comparison: editable weights (Bryson's rule by default) and adopting its K."""

from __future__ import annotations

import math
from html import escape

import numpy as np
import panel as pn

from gainboard import core

from ..theme import format_complex, format_gain_text, format_number
from .html_box import HtmlBox
from ..theme import TABLE_CSS

__all__ = ["LqrPanel", "parse_weight_list"]

WIDTH = 350


def parse_weight_list(text: str, count: int, what: str) -> list[float]:
    """Read ``count`` comma-separated non-negative numbers (the diagonal of a weight matrix).

    Raises
    ------
    AnalysisError
        With a message naming the field, the count found and expected.

    Examples
    --------
    >>> parse_weight_list("1, 2.5, 0", 3, "Q")
    [1.0, 2.5, 0.0]
    """
    pieces = [p for p in text.replace(";", ",").split(",") if p.strip()]
    try:
        values = [float(p) for p in pieces]
    except ValueError:
        raise core.AnalysisError(f"{what} must be {count} numbers separated by commas, got {text.strip()!r}") from None
    if len(values) != count:
        raise core.AnalysisError(f"{what} needs {count} numbers (one per {'state' if what.startswith('Q') else 'input'}), got {len(values)}")
    if not all(math.isfinite(v) and v >= 0 for v in values):
        raise core.AnalysisError(f"{what} must contain finite numbers ≥ 0, got {text.strip()!r}")
    return values


class LqrPanel:
    """LQR weights, result and adoption."""

    def __init__(self, state):
        self.state = state
        self.q_input = pn.widgets.TextInput(label="Q diagonal (one weight per state)", width=WIDTH - 10, margin=(2, 5))
        self.r_input = pn.widgets.TextInput(label="R diagonal (one weight per input)", width=WIDTH - 10, margin=(2, 5))
        self.compute_button = pn.widgets.Button(label="Compute LQR", color="primary", width=120, margin=(4, 5))
        self.bryson_button = pn.widgets.Button(label="Bryson weights", width=120, margin=(4, 5))
        self.adopt_button = pn.widgets.Button(label="Adopt LQR gain", color="success", width=130, margin=(4, 5))
        self.result = HtmlBox(css=TABLE_CSS, width=WIDTH - 10, margin=(2, 5))
        self._shown_weights = (None, None)  # the texts last written from the state's weights
        self.compute_button.on_click(lambda event: self._compute())
        self.bryson_button.on_click(lambda event: self._bryson())
        self.adopt_button.on_click(lambda event: self.state.adopt_lqr())
        self.state.param.watch(lambda *events: self.refresh_result(), ["lqr_result", "lqr_weights"])
        self.panel = pn.Column(
            pn.pane.HTML(
                '<div class="gb-note">Linear-quadratic regulator for cost ∫ xᵀQx + uᵀRu (a sum for sampled plants). '
                "Bryson's rule sets each weight to 1/(largest acceptable value)². Its poles show as ochre × on the map.</div>",
                stylesheets=[TABLE_CSS], width=WIDTH - 10, margin=(4, 5),
            ),
            self.q_input,
            self.r_input,
            pn.Row(self.compute_button, self.bryson_button, margin=0),
            self.result.panel,
            self.adopt_button,
            margin=0,
        )

    def _compute(self) -> None:
        plant = self.state.plant
        if (self.q_input.value, self.r_input.value) == self._shown_weights and self.state.lqr_weights is not None:
            # the boxes show the state's weights rounded for reading: use them at full precision
            self.state.compute_lqr()
            return
        try:
            q = parse_weight_list(self.q_input.value, plant.state_count, "Q diagonal")
            r = parse_weight_list(self.r_input.value, plant.input_count, "R diagonal")
        except core.GainboardError as error:
            self.state.show_message(f"Could not compute the LQR design: {error}", "error")
            return
        self.state.compute_lqr(np.diag(q), np.diag(r))

    def _bryson(self) -> None:
        self.state.reset_lqr_weights()
        self.refresh_weights()

    def refresh_weights(self) -> None:
        weights = self.state.lqr_weights
        if weights is None:
            self.q_input.value, self.r_input.value = "", ""
            self._shown_weights = (None, None)
            return
        Q, R = weights
        # shown to 6 digits; "Compute LQR" on unedited boxes uses the weights themselves
        self.q_input.value = ", ".join(f"{v:.6g}" for v in np.diag(Q))
        self.r_input.value = ", ".join(f"{v:.6g}" for v in np.diag(R))
        self._shown_weights = (self.q_input.value, self.r_input.value)

    def refresh_result(self) -> None:
        result = self.state.lqr_result
        self.adopt_button.disabled = result is None
        if result is None:
            self.result.object = '<div class="gb-small">Press “Compute LQR” to compare.</div>'
            return
        poles = ", ".join(format_complex(p, 4) for p in self.state.lqr_poles)
        self.result.object = (
            '<div class="gb-heading">LQR gain</div>'
            f'<div class="gb-note" style="font-family: ui-monospace, monospace">K = {escape(format_gain_text(result.gain))}</div>'
            f'<div class="gb-note">closed-loop poles: {poles}</div>'
            f'<div class="gb-small">weights: {escape(result.weights_source)}; Riccati residual '
            f"{format_number(result.riccati_residual, 2)}</div>"
        )

    def refresh(self, evaluation) -> None:
        if self.state.plant is not getattr(self, "_plant", None):
            self._plant = self.state.plant
            self.refresh_weights()
        self.refresh_result()
