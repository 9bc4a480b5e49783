"""Time responses: outputs and actuator effort, linear and with actuator limits.

One response at a time (initial condition, reference step or disturbance) in two
plots that share the time axis: the outputs, and the inputs with their limits.
Solid lines are the linear model, dashed lines the loop with inputs clipped to
their limits, faint lines the pinned design.
"""

from __future__ import annotations

from html import escape

import numpy as np
import panel as pn
from bokeh.models import ColumnDataSource, Range1d
from bokeh.plotting import figure

from ..theme import PALETTE, format_number, trace_colour
from .data_sources import update_source
from .html_box import HtmlBox

__all__ = ["ResponsePlots", "RESPONSE_KINDS"]

#: Button label → attribute of the core's ResponseSet.
RESPONSE_KINDS = {"Initial condition": "initial", "Reference step": "step", "Disturbance": "disturbance"}

PLOT_WIDTH = 420
#: Height of the response description: three lines of .gb-note text.
DESCRIPTION_HEIGHT = 52


def _empty_lines():
    return {"xs": [], "ys": [], "colour": [], "dash": [], "alpha": [], "width": []}


def _response_of(evaluation, kind: str):
    if evaluation is None or evaluation.responses is None:
        return None
    return getattr(evaluation.responses, kind)


def _axes_of(evaluation, kind: str):
    if evaluation is None or evaluation.view_ranges is None:
        return None
    return evaluation.view_ranges.responses.get(kind)


def _finite_list(values) -> np.ndarray:
    # A float array travels to the browser as one binary buffer; Bokeh draws NaN as a gap
    # (the saturated loop marks samples after a blow-up with NaN). Single precision (7
    # digits) is far finer than a pixel and halves what each slider step sends.
    return np.array(values, dtype=np.float32)


def _set_range(axis_range, start: float, end: float) -> None:
    # Bokeh validates every property set even when nothing changes; ranges mostly stay put
    if (axis_range.start, axis_range.end, axis_range.reset_start, axis_range.reset_end) != (start, end, start, end):
        axis_range.update(start=start, end=end, reset_start=start, reset_end=end)


class ResponsePlots:
    """The responses panel of one session."""

    def __init__(self, state):
        self.state = state
        self.kind = pn.widgets.RadioButtonGroup(
            options=list(RESPONSE_KINDS), value="Initial condition", color="light",
            variant="outline", margin=(4, 5), label="response",
        )
        self.output_source = ColumnDataSource(_empty_lines())
        self.input_source = ColumnDataSource(_empty_lines())
        self.limit_source = ColumnDataSource({"xs": [], "ys": [], "colour": []})
        self.output_figure = self._figure("outputs", "output", 190, name="response_outputs")
        self.input_figure = self._figure("actuator effort", "input", 165, name="response_inputs")
        self.input_figure.x_range = self.output_figure.x_range
        for fig, source in ((self.output_figure, self.output_source), (self.input_figure, self.input_source)):
            fig.multi_line("xs", "ys", source=source, line_color="colour", line_dash="dash",
                           line_alpha="alpha", line_width="width")
        self.input_figure.multi_line("xs", "ys", source=self.limit_source, line_color="colour",
                                     line_dash="dotted", line_width=1.6, line_alpha=0.9)
        self.legend = HtmlBox(css=_css(), width=PLOT_WIDTH + 40)
        # Fixed height (three lines, then a scroll bar): limit warnings come and go while a
        # slider moves, and a box that changes height makes the browser lay out the page again.
        self.description = HtmlBox(css=_css(), width=PLOT_WIDTH + 40, height=DESCRIPTION_HEIGHT)
        self.metrics = HtmlBox(css=_css(), width=PLOT_WIDTH + 40, margin=(2, 5))
        self.kind.param.watch(lambda event: self.refresh(self.state.evaluation), "value")
        self.panel = pn.Column(
            self.kind,
            pn.pane.Bokeh(self.output_figure, margin=(0, 5)),
            pn.pane.Bokeh(self.input_figure, margin=(0, 5)),
            self.legend.panel,
            self.description.panel,
            self.metrics.panel,
            margin=0,
        )

    def _figure(self, title: str, what: str, height: int, name: str):
        fig = figure(
            width=PLOT_WIDTH + 40, height=height, x_range=Range1d(0, 1), y_range=Range1d(-1, 1),
            tools="xwheel_zoom,xpan,reset",
            toolbar_location=None, name=name, background_fill_color="#fdfcf9",
            border_fill_color=PALETTE["paper"], outline_line_color=PALETTE["rule"],
        )
        fig.title.text = title
        fig.title.text_color = PALETTE["muted"]
        fig.title.text_font_style = "normal"
        fig.title.text_font_size = "12px"
        fig.grid.grid_line_color = "#ece8de"
        fig.axis.major_label_text_color = PALETTE["muted"]
        fig.axis.axis_line_color = PALETTE["rule"]
        fig.xaxis.axis_label = "time (s)" if what == "input" else None
        fig.axis.axis_label_text_font_style = "normal"
        fig.axis.axis_label_text_color = PALETTE["muted"]
        fig.toolbar.logo = None
        fig.min_border_left = 55
        return fig

    @property
    def kind_name(self) -> str:
        return RESPONSE_KINDS[self.kind.value]

    def refresh(self, evaluation, *, texts: bool = True) -> None:
        """Redraw the chosen response of ``evaluation`` (and of the pinned design); ``texts=False``: plots only."""
        kind = self.kind_name
        response = _response_of(evaluation, kind)
        plant = evaluation.plant
        pinned = self.state.pinned if self.state.pinned is not None and self.state.pinned.plant is plant else None
        ghost = _response_of(pinned, kind)
        outputs, inputs, limits = _empty_lines(), _empty_lines(), {"xs": [], "ys": [], "colour": []}
        # The ranges come with the evaluation (whole steps, kept or growing during a drag: see
        # gainboard.core.view_ranges) and follow the traces, not the limit lines: a limit far
        # away would flatten a small effort into a line. A pinned design's traces are shown too.
        axes = _axes_of(evaluation, kind)
        if axes is not None:
            axes = axes.joined(_axes_of(pinned, kind))
        end_time = axes.time_end if axes is not None else 1.0
        if response is not None:
            self._add_traces(outputs, response.time, response.outputs, response.saturated_outputs, ghost, "outputs")
            self._add_traces(inputs, response.time, response.inputs, response.saturated_inputs, ghost, "inputs")
            if plant.input_limits is not None:
                for j, (low, high) in enumerate(plant.input_limits):
                    for level in (low, high):
                        if np.isfinite(level):
                            limits["xs"].append([0.0, end_time])
                            limits["ys"].append([level, level])
                            limits["colour"].append(trace_colour(j))
        _set_range(self.output_figure.x_range, 0.0, end_time)
        if axes is not None:
            _set_range(self.output_figure.y_range, *axes.outputs)
            _set_range(self.input_figure.y_range, *axes.inputs)
        self.output_source.data = outputs
        self.input_source.data = inputs
        update_source(self.limit_source, limits)
        if texts:
            self._refresh_text(evaluation, response, ghost is not None)

    def refresh_texts(self, evaluation) -> None:
        """Only the legend, description and metrics of the chosen response."""
        kind = self.kind_name
        pinned = self.state.pinned if self.state.pinned is not None and self.state.pinned.plant is evaluation.plant else None
        self._refresh_text(evaluation, _response_of(evaluation, kind), _response_of(pinned, kind) is not None)

    def _add_traces(self, lines, time, linear, saturated, ghost, which: str) -> None:
        time = _finite_list(time)
        linear = np.asarray(linear, dtype=float)
        for k in range(linear.shape[1]):
            colour = trace_colour(k)
            if ghost is not None:
                ghost_values = np.asarray(getattr(ghost, which), dtype=float)
                if ghost_values.ndim == 2 and k < ghost_values.shape[1]:
                    lines["xs"].append(_finite_list(ghost.time))
                    lines["ys"].append(_finite_list(ghost_values[:, k]))
                    lines["colour"].append(PALETTE["pinned"])
                    lines["dash"].append("solid")
                    lines["alpha"].append(0.45)
                    lines["width"].append(1.6)
            lines["xs"].append(time)
            lines["ys"].append(_finite_list(linear[:, k]))
            lines["colour"].append(colour)
            lines["dash"].append("solid")
            lines["alpha"].append(1.0)
            lines["width"].append(2.0)
            if saturated is not None:
                lines["xs"].append(time)
                lines["ys"].append(_finite_list(np.asarray(saturated, dtype=float)[:, k]))
                lines["colour"].append(colour)
                lines["dash"].append("dashed")
                lines["alpha"].append(0.95)
                lines["width"].append(2.0)

    def _refresh_text(self, evaluation, response, has_ghost: bool) -> None:
        plant = evaluation.plant
        swatches = []
        for k, name in enumerate(plant.output_names):
            unit = plant.output_units[k]
            swatches.append(f'<span class="sw" style="background:{trace_colour(k)}"></span>{escape(name)}'
                            + (f" ({escape(unit)})" if unit else ""))
        inputs = []
        for j, name in enumerate(plant.input_names):
            unit = plant.input_units[j]
            inputs.append(f'<span class="sw" style="background:{trace_colour(j)}"></span>{escape(name)}'
                          + (f" ({escape(unit)})" if unit else ""))
        styles = "solid: linear model"
        if plant.input_limits is not None:
            styles += " · dashed: inputs clipped at their limits (dotted lines)"
        if has_ghost:
            styles += " · faint violet: pinned design"
        self.legend.object = (
            f'<div class="gb-legend">outputs: {" ".join(swatches)}<br>inputs: {" ".join(inputs)}'
            f"<br>{styles}</div>"
        )
        notes = []
        responses = evaluation.responses
        if response is None:
            reason = responses.step_unavailable_reason if responses is not None else ""
            notes.append(f"No reference step response: {escape(reason)}" if reason else "No response available.")
        else:
            notes.append(escape(response.description))
            if response.diverged_at is not None:
                notes.append(f'<span class="gb-fail">The linear loop blows up at t = {format_number(response.diverged_at)} s;'
                             " the plot ends there.</span>")
            for violation in response.limit_violations:
                if violation.exceeded:
                    notes.append(
                        f'<span class="gb-fail">{escape(violation.input_name)} exceeds its limit</span> '
                        f"first at {format_number(violation.first_time)} s, by up to "
                        f"{format_number(violation.worst_excess_percent, 3)} %"
                    )
        if responses is not None and responses.diverging and responses.diverging_reason:
            notes.append(f'<span class="gb-fail">Unstable: {escape(responses.diverging_reason)}</span>')
        self.description.object = '<div class="gb-note gb-description">' + "<br>".join(notes) + "</div>"
        self.metrics.object = self._metrics_table(response)

    def _metrics_table(self, response) -> str:
        if response is None:
            return ""
        rows = []
        for metric in response.output_metrics:
            rows.append(
                "<tr>"
                f"<td>{escape(metric.output_name)}</td>"
                f'<td class="num">{format_number(metric.settling_time)}</td>'
                f'<td class="num">{format_number(metric.rise_time)}</td>'
                f'<td class="num">{format_number(metric.overshoot_percent, 3)}</td>'
                f'<td class="num">{format_number(metric.peak_value)}</td>'
                f'<td class="num">{format_number(metric.steady_state_error)}</td>'
                "</tr>"
            )
        peaks = ", ".join(
            f"{escape(m.input_name)} {format_number(m.peak_magnitude)}" for m in response.input_metrics
        )
        return (
            '<table class="gb-table"><tr><th>output</th><th>settling (s)</th><th>rise (s)</th>'
            "<th>overshoot (%)</th><th>peak</th><th>final error</th></tr>"
            + "".join(rows) + f"</table><div class='gb-legend'>peak |u|: {peaks}</div>"
        )


def _css() -> str:
    return f"""
.gb-legend {{ font-size: 11.5px; color: {PALETTE['muted']}; line-height: 1.5; }}
.gb-legend .sw {{ display: inline-block; width: 12px; height: 4px; margin: 0 3px 2px 8px; vertical-align: middle; }}
.gb-note {{ font-size: 12px; color: {PALETTE['ink']}; line-height: 1.4; }}
.gb-description {{ height: {DESCRIPTION_HEIGHT}px; overflow-y: auto; }}
.gb-fail {{ color: {PALETTE['fail']}; font-weight: 600; }}
table.gb-table {{ border-collapse: collapse; font-size: 12px; width: 100%; }}
table.gb-table th {{ text-align: left; font-weight: 600; color: {PALETTE['muted']};
  border-bottom: 1px solid {PALETTE['rule']}; padding: 2px 5px; }}
table.gb-table td {{ padding: 2px 5px; border-bottom: 1px solid #ece9e1; }}
table.gb-table td.num {{ text-align: right; font-family: ui-monospace, monospace; }}
"""
