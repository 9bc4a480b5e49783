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

__all__ = ["ResponsePlots", "RESPONSE_KINDS", "style_plot"]

#: Button label → attribute of the core's ResponseSet.
RESPONSE_KINDS = {"Initial condition": "initial", "Reference step": "step", "Disturbance": "disturbance"}

PLOT_WIDTH = 420
#: Height of the response description: three lines of .gb-note text.
DESCRIPTION_HEIGHT = 52


#: Line styles: (colour, dash, alpha, width) of a trace.
LINEAR, SATURATED, GHOST, SAMPLED = "linear", "saturated", "ghost", "sampled"


def _style(kind: str, index: int) -> tuple:
    if kind == GHOST:
        return (PALETTE["pinned"], "solid", 0.45, 1.6)
    if kind == SAMPLED:
        return (trace_colour(index), "dotdash", 0.85, 1.7)
    return (trace_colour(index), "solid" if kind == LINEAR else "dashed", 1.0 if kind == LINEAR else 0.95, 2.0)


class TraceSet:
    """The lines of one figure that share one time axis, each in a column of one data source.

    A slider step changes the values, rarely the time axis: only the columns that
    changed are sent to the browser (Bokeh sends the columns named in a ``data.update``),
    so the time axis is not sent again on every step, as it was when each line carried
    its own copy (a twelfth of the bytes of a 12-state step per copy).
    """

    def __init__(self, figure, *, level: str = "glyph", name: str | None = None, held: bool = False):
        self.figure = figure
        self.level = level
        #: Drawn as a staircase held from each sample to the next (an input through a ZOH).
        self.held = held
        self.source = ColumnDataSource({"t": np.zeros(0, dtype=np.float32)}, name=name)
        self.renderers: list = []
        self.styles: tuple = ()

    def show(self, time, traces) -> None:
        """Draw ``traces`` (a list of (values, style)) against ``time``."""
        styles = tuple(style for _, style in traces)
        data = {"t": _finite_list(time) if traces else np.zeros(0, dtype=np.float32)}
        data.update({f"y{k}": _finite_list(values) for k, (values, _) in enumerate(traces)})
        if styles != self.styles:
            self._rebuild(styles, data)
            return
        current = self.source.data
        changed = {key: column for key, column in data.items()
                   if key not in current or not np.array_equal(current[key], column, equal_nan=True)}
        if not changed:
            return
        if "t" in changed and len(changed["t"]) != len(current["t"]):
            self.source.data = data  # a new length: every column at once
        else:
            self.source.data.update(changed)

    def _rebuild(self, styles, data) -> None:
        self.figure.renderers = [r for r in self.figure.renderers if r not in self.renderers]
        self.source.data = data
        draw = (lambda *args, **kwargs: self.figure.step(*args, mode="after", **kwargs)) if self.held \
            else self.figure.line
        self.renderers = [
            draw("t", f"y{k}", source=self.source, line_color=colour, line_dash=dash, line_alpha=alpha,
                 line_width=width, level=self.level)
            for k, (colour, dash, alpha, width) in enumerate(styles)
        ]
        self.styles = styles


def _response_of(evaluation, kind: str):
    if evaluation is None or evaluation.responses is None:
        return None
    return getattr(evaluation.responses, kind)


def _traces(response, which: str, saturated_which: str | None, *, kind: str = LINEAR):
    """(time, [(values, style), ...]) of one response's outputs or inputs (none when it is None)."""
    if response is None:
        return np.zeros(0), []
    linear = np.asarray(getattr(response, which), dtype=float)
    saturated = getattr(response, saturated_which) if saturated_which is not None else None
    traces = []
    for k in range(linear.shape[1] if linear.ndim == 2 else 0):
        traces.append((linear[:, k], _style(kind, k)))
        if saturated is not None:
            traces.append((np.asarray(saturated, dtype=float)[:, k], _style(SATURATED, k)))
    return response.time, traces


def style_plot(fig, title: str, x_label: str | None = None, y_label: str | None = None) -> None:
    """The look of the workbench's plots (responses, loop frequency response): muted title, axes and grid."""
    fig.title.text = title
    fig.title.text_color = PALETTE["muted"]
    fig.title.text_font_style = "normal"
    fig.title.text_font_size = "12px"
    fig.grid.grid_line_color = "#ece8de"
    fig.axis.major_label_text_color = PALETTE["muted"]
    fig.axis.axis_line_color = PALETTE["rule"]
    fig.xaxis.axis_label = x_label
    if y_label is not None:
        fig.yaxis.axis_label = y_label
    fig.axis.axis_label_text_font_style = "normal"
    fig.axis.axis_label_text_color = PALETTE["muted"]
    fig.toolbar.logo = None
    fig.min_border_left = 55


def _emulated(evaluation):
    """The sampled loop of the emulation check (a DesignEvaluation), or None."""
    emulation = getattr(evaluation, "emulation", None)
    return emulation.sampled if emulation is not None else None


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
        self.limit_source = ColumnDataSource({"xs": [], "ys": [], "colour": []})
        self.output_figure = self._figure("outputs", "output", 190, name="response_outputs")
        self.input_figure = self._figure("actuator effort", "input", 165, name="response_inputs")
        self.input_figure.x_range = self.output_figure.x_range
        self.input_figure.multi_line("xs", "ys", source=self.limit_source, line_color="colour",
                                     line_dash="dotted", line_width=1.6, line_alpha=0.9)
        # The design's traces (the first renderers of each figure: tests and the benchmark
        # watch the outputs' data) and, below them, the pinned design's.
        self.output_traces = TraceSet(self.output_figure, name="response_output_traces")
        self.input_traces = TraceSet(self.input_figure)
        self.output_ghosts = TraceSet(self.output_figure, level="underlay")
        self.input_ghosts = TraceSet(self.input_figure, level="underlay")
        # The emulation check's sampled loop (the continuous K through a ZOH), over the design's traces.
        self.output_sampled = TraceSet(self.output_figure, name="response_sampled_outputs")
        self.input_sampled = TraceSet(self.input_figure, held=True)
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
        style_plot(fig, title, "time (s)" if what == "input" else None)
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
        limits = {"xs": [], "ys": [], "colour": []}
        # The ranges come with the evaluation (whole steps, kept or growing during a drag: see
        # gainboard.core.view_ranges) and follow the traces, not the limit lines: a limit far
        # away would flatten a small effort into a line. A pinned design's traces are shown too.
        axes = _axes_of(evaluation, kind)
        if axes is not None:
            axes = axes.joined(_axes_of(pinned, kind))
            if evaluation.emulation is not None and evaluation.emulation.stable:  # a blow-up would flatten the rest
                axes = axes.joined(_axes_of(_emulated(evaluation), kind))
        end_time = axes.time_end if axes is not None else 1.0
        if response is not None:
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
        self.output_traces.show(*_traces(response, "outputs", "saturated_outputs"))
        self.input_traces.show(*_traces(response, "inputs", "saturated_inputs"))
        self.output_ghosts.show(*_traces(ghost, "outputs", None, kind=GHOST))
        self.input_ghosts.show(*_traces(ghost, "inputs", None, kind=GHOST))
        sampled = _response_of(_emulated(evaluation), kind)
        self.output_sampled.show(*_traces(sampled, "outputs", None, kind=SAMPLED))
        self.input_sampled.show(*_traces(sampled, "inputs", None, kind=SAMPLED))
        update_source(self.limit_source, limits)
        if texts:
            self._refresh_text(evaluation, response, ghost is not None)

    def refresh_texts(self, evaluation) -> None:
        """Only the legend, description and metrics of the chosen response."""
        kind = self.kind_name
        pinned = self.state.pinned if self.state.pinned is not None and self.state.pinned.plant is evaluation.plant else None
        self._refresh_text(evaluation, _response_of(evaluation, kind), _response_of(pinned, kind) is not None)

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
        emulation = getattr(evaluation, "emulation", None)
        if emulation is not None:
            styles += (f" · dot-dashed: this K run through a ZOH at T = {format_number(emulation.sample_time)} s"
                       " (inputs held between samples)")
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
