"""The loop broken at the plant input, over frequency: magnitude and phase, the polar plot, the margins read.

For the chosen input i (the other inputs' loops closed) the view draws L_i(jω) — sampled
plants up to the Nyquist frequency π/T — as magnitude (dB) and phase against frequency
and as a polar plot around the critical point −1, with the gain and phase margins marked
where the core read them, and the largest singular value of the input sensitivity
S = (I + L)⁻¹ with its peak. Every number comes from the evaluation (``loop_frequency``
and ``margins``); the view only converts to dB and degrees to draw.
"""

from __future__ import annotations

import math
from html import escape

import numpy as np
import panel as pn
from bokeh.models import ColumnDataSource, Range1d, Span
from bokeh.plotting import figure

from ..theme import PALETTE, TABLE_CSS, format_number, trace_colour
from .data_sources import update_source
from .html_box import HtmlBox
from .responses import style_plot

__all__ = ["LoopResponse", "loop_summary_html"]

PLOT_WIDTH = 460


def _decibels(values) -> np.ndarray:
    with np.errstate(divide="ignore"):
        return 20.0 * np.log10(np.abs(values))


class LoopResponse:
    """The loop frequency-response tab of one session."""

    def __init__(self, state):
        self.state = state
        self.loop_choice = pn.widgets.Select(label="loop broken at input", options={"input 1": 0}, width=260,
                                             margin=(4, 5), css_classes=["gb-loop-choice"])
        self.loop_choice.param.watch(lambda event: self.refresh(self.state.evaluation), "value")
        common = dict(tools="pan,wheel_zoom,reset", toolbar_location=None, background_fill_color="#fdfcf9",
                      border_fill_color=PALETTE["paper"], outline_line_color=PALETTE["rule"])
        self.magnitude = figure(width=PLOT_WIDTH, height=170, x_axis_type="log", name="loop_magnitude", **common)
        self.phase = figure(width=PLOT_WIDTH, height=150, x_axis_type="log", name="loop_phase",
                            x_range=self.magnitude.x_range, **common)
        self.polar = figure(width=PLOT_WIDTH, height=300, name="loop_polar", match_aspect=True,
                            x_range=Range1d(-3, 1), y_range=Range1d(-2, 2), **common)
        style_plot(self.magnitude, "magnitude of L(jω) and of the input sensitivity S", None, "dB")
        style_plot(self.phase, "phase of L(jω)", "frequency ω (rad/s)", "degrees")
        style_plot(self.polar, "polar plot of L(jω) around the critical point −1", "real part", "imaginary part")

        self.curve = ColumnDataSource({"w": [], "db": [], "deg": [], "sdb": []}, name="loop_curve")
        self.polar_curve = ColumnDataSource({"x": [], "y": [], "mx": [], "my": []}, name="loop_polar_curve")
        self.gain_marks = ColumnDataSource({"w": [], "db": [], "deg": [], "x": [], "y": [], "label": []},
                                           name="loop_gain_crossovers")
        self.phase_marks = ColumnDataSource({"w": [], "db": [], "deg": [], "x": [], "y": [], "label": []},
                                            name="loop_phase_crossovers")
        self.peak_mark = ColumnDataSource({"w": [], "sdb": []}, name="loop_sensitivity_peak")
        self.margin_segments = ColumnDataSource({"w0": [], "db0": [], "w1": [], "db1": []})
        self.phase_segments = ColumnDataSource({"w0": [], "d0": [], "w1": [], "d1": []})
        self.circle_source = ColumnDataSource({"x": [0.0], "y": [0.0]})
        colour, sensitivity_colour = trace_colour(0), PALETTE["pinned"]

        self.magnitude.line("w", "db", source=self.curve, line_color=colour, line_width=2)
        self.magnitude.line("w", "sdb", source=self.curve, line_color=sensitivity_colour, line_width=1.6,
                            line_dash="dashed")
        self.magnitude.add_layout(Span(location=0, dimension="width", line_color=PALETTE["boundary"]))
        self.magnitude.segment("w0", "db0", "w1", "db1", source=self.margin_segments, line_color=PALETTE["fail"],
                               line_width=2)
        self.magnitude.scatter("w", "db", source=self.gain_marks, marker="circle", size=8, color=PALETTE["arrow"])
        self.magnitude.scatter("w", "db", source=self.phase_marks, marker="square", size=8, color=PALETTE["fail"])
        self.magnitude.scatter("w", "sdb", source=self.peak_mark, marker="triangle", size=10, color=sensitivity_colour)

        self.phase.line("w", "deg", source=self.curve, line_color=colour, line_width=2)
        self.phase.segment("w0", "d0", "w1", "d1", source=self.phase_segments, line_color=PALETTE["arrow"],
                           line_width=2)
        self.phase.scatter("w", "deg", source=self.gain_marks, marker="circle", size=8, color=PALETTE["arrow"])
        self.phase.scatter("w", "deg", source=self.phase_marks, marker="square", size=8, color=PALETTE["fail"])
        self.phase_line = Span(location=-180, dimension="width", line_color=PALETTE["boundary"], line_dash="dashed")
        self.phase.add_layout(self.phase_line)

        self.polar.circle("x", "y", radius=1.0, source=self.circle_source, fill_alpha=0,
                          line_color=PALETTE["boundary"], line_dash="dotted")
        self.polar.line("x", "y", source=self.polar_curve, line_color=colour, line_width=2)
        self.polar.line("mx", "my", source=self.polar_curve, line_color=colour, line_width=1, line_dash="dashed",
                        line_alpha=0.6)
        self.polar.scatter([-1.0], [0.0], marker="cross", size=16, line_width=3, color=PALETTE["fail"])
        self.polar.scatter("x", "y", source=self.gain_marks, marker="circle", size=8, color=PALETTE["arrow"])
        self.polar.scatter("x", "y", source=self.phase_marks, marker="square", size=8, color=PALETTE["fail"])
        self.polar.add_layout(Span(location=0, dimension="width", line_color=PALETTE["rule"]))
        self.polar.add_layout(Span(location=0, dimension="height", line_color=PALETTE["rule"]))

        self.summary = HtmlBox(css=TABLE_CSS, width=PLOT_WIDTH, margin=(2, 5), name="loop_summary",
                               css_classes=["gb-loop-summary"])
        self.panel = pn.Column(
            self.loop_choice,
            self.summary.panel,
            pn.pane.Bokeh(self.magnitude, margin=(0, 5)),
            pn.pane.Bokeh(self.phase, margin=(0, 5)),
            pn.pane.Bokeh(self.polar, margin=(0, 5)),
            pn.pane.HTML(_KEY, stylesheets=[TABLE_CSS], width=PLOT_WIDTH, margin=(2, 5)),
            margin=0,
        )

    def refresh(self, evaluation) -> None:
        """Draw the chosen input's loop from the evaluation (kept as drawn while a quicker one is shown)."""
        plant = evaluation.plant
        options = {f"input {i + 1}: {name}": i for i, name in enumerate(plant.input_names)}
        if self.loop_choice.options != options:
            self.loop_choice.options = options
            if self.loop_choice.value not in options.values():
                self.loop_choice.value = 0
        response = evaluation.loop_frequency
        if response is None:
            return  # a quick evaluation (during a gesture): the complete one follows
        index = int(self.loop_choice.value or 0)
        loop = response.loops[index]
        omega = response.frequencies
        degrees = np.degrees(np.unwrap(np.angle(loop)))
        # unwrapped phase shown near the −180° line the margins are read against
        shift = 360.0 * round((degrees[0] + 180.0) / 360.0) if np.isfinite(degrees[0]) else 0.0
        degrees = degrees - shift
        update_source(self.curve, {"w": omega, "db": _decibels(loop), "deg": degrees,
                                   "sdb": _decibels(response.sensitivity_gain)})
        update_source(self.polar_curve, {"x": loop.real, "y": loop.imag, "mx": loop.real, "my": -loop.imag})
        self._marks(response, index, omega, degrees)
        self._fit_polar(loop)
        self.summary.object = loop_summary_html(evaluation, index)

    def _marks(self, response, index: int, omega, degrees) -> None:
        empty = {"w": [], "db": [], "deg": [], "x": [], "y": [], "label": []}
        crossings = response.crossings[index] if response.crossings is not None else None
        if crossings is None:
            for source in (self.gain_marks, self.phase_marks):
                update_source(source, empty)
            update_source(self.margin_segments, {"w0": [], "db0": [], "w1": [], "db1": []})
            update_source(self.phase_segments, {"w0": [], "d0": [], "w1": [], "d1": []})
            update_source(self.peak_mark, {"w": [], "sdb": []})
            return

        def on_curve(frequencies):  # the drawn (unwrapped) phase branch at those frequencies
            return np.interp(np.log(frequencies), np.log(omega), degrees) if len(frequencies) else np.zeros(0)

        def marks(frequencies, values):
            shown = on_curve(frequencies)
            exact = np.degrees(np.angle(values))
            wrapped = exact + 360.0 * np.round((shown - exact) / 360.0)  # same value, on the drawn branch
            return {"w": frequencies, "db": _decibels(values), "deg": wrapped, "x": values.real, "y": values.imag,
                    "label": [format_number(f, 4) for f in frequencies]}

        gain = marks(crossings.gain_crossover_frequencies, crossings.gain_crossover_values)
        phase = marks(crossings.phase_crossover_frequencies, crossings.phase_crossover_values)
        update_source(self.gain_marks, gain)
        update_source(self.phase_marks, phase)
        # the gain margin read at each phase crossover: from |L| up (or down) to 0 dB
        update_source(self.margin_segments, {"w0": phase["w"], "db0": phase["db"], "w1": phase["w"],
                                             "db1": np.zeros(len(phase["w"]))})
        # the phase margin read at each gain crossover: from the phase to the nearest −180° (mod 360°)
        target = -180.0 + 360.0 * np.round((np.asarray(gain["deg"]) + 180.0) / 360.0)
        update_source(self.phase_segments, {"w0": gain["w"], "d0": gain["deg"], "w1": gain["w"], "d1": target})
        peak, where = response.peak_sensitivity, response.peak_sensitivity_frequency
        if peak is not None and where is not None and 0 < where < math.inf:
            update_source(self.peak_mark, {"w": [where], "sdb": [20.0 * math.log10(peak)]})
        else:
            update_source(self.peak_mark, {"w": [], "sdb": []})

    def _fit_polar(self, loop) -> None:
        """Frame the critical point, the unit circle and the curve, clipped where |L| runs off to infinity."""
        finite = loop[np.isfinite(loop)]
        near = finite[np.abs(finite) < 10.0]  # common practice, no source: past |L| = 10 only the direction matters
        xs = np.concatenate([[-1.5, 1.2], near.real])
        ys = np.concatenate([[-1.2, 1.2], near.imag, -near.imag])
        x0, x1, y0, y1 = float(xs.min()), float(xs.max()), float(ys.min()), float(ys.max())
        pad_x, pad_y = 0.08 * (x1 - x0), 0.08 * (y1 - y0)
        self.polar.x_range.update(start=x0 - pad_x, end=x1 + pad_x)
        self.polar.y_range.update(start=y0 - pad_y, end=y1 + pad_y)


_KEY = (
    '<div class="gb-small">solid: L(jω) for ω ≥ 0 (polar: dashed for ω &lt; 0) · dashed violet: σ<sub>max</sub> of the '
    "input sensitivity S = (I + L)⁻¹ · ● gain crossover |L| = 1, with the phase margin read there (blue bar) · "
    "■ phase crossover (L real and negative), with the gain margin read there (red bar) · ▲ peak ‖S‖∞ · "
    "red + the critical point −1. Margins describe the linear model only: validate on the real system with safe "
    "limits and emergency stops.</div>"
)


def loop_summary_html(evaluation, index: int) -> str:
    """The margins of the loop broken at input ``index`` and the disk margin at the input, in words."""
    margins = evaluation.margins
    response = evaluation.loop_frequency
    plant = evaluation.plant
    lines = []
    if response is not None and response.nyquist_frequency is not None:
        lines.append(f"Sampled every {format_number(plant.sample_time)} s: frequencies up to the Nyquist "
                     f"frequency π/T = {format_number(response.nyquist_frequency, 4)} rad/s.")
    if margins is None:
        lines.append("Margins are computed with the complete evaluation.")
    elif not margins.stable_nominal:
        lines.append('<span class="gb-fail">The closed loop is unstable</span>: margins mean nothing until it is '
                     "stabilised; the curves still show the loop.")
    else:
        loop = margins.loop_at_a_time[index]
        name = escape(loop.input_name)
        up, down = loop.gain_margin_increase, loop.gain_margin_decrease
        gains = []
        gains.append("any increase" if math.isinf(up) else
                     f"×{format_number(up, 4)} ({format_number(loop.gain_margin_increase_db, 4)} dB)")
        gains.append("any decrease" if down == 0 else
                     f"×{format_number(down, 4)} ({format_number(loop.gain_margin_decrease_db, 4)} dB)")
        lines.append(f"Loop at input {index + 1} ({name}), the others closed — gain may change by "
                     f"{' or '.join(gains)} before instability"
                     + (f"; read at ω = {', '.join(format_number(w, 4) for w in loop.phase_crossover_frequencies)}"
                        " rad/s" if loop.phase_crossover_frequencies else "") + ".")
        if math.isinf(loop.phase_margin_deg):
            lines.append("Phase margin: none needed (|L| never equals 1).")
        else:
            lines.append(f"Phase margin <b class='gb-phase-margin'>{format_number(loop.phase_margin_deg, 4)}°</b> at "
                         f"ω = {format_number(loop.crossover_frequency, 4)} rad/s; delay margin "
                         f"{format_number(loop.delay_margin, 4)} s.")
        if margins.disk_margin is not None:
            lines.append(
                f"1/‖S‖∞ at the input (S = (I + L)⁻¹, all inputs at once): <b>{format_number(margins.disk_margin, 4)}"
                f"</b>; peak ‖S‖∞ = {format_number(margins.peak_sensitivity, 4)} at ω = "
                f"{format_number(margins.peak_sensitivity_frequency, 4)} rad/s.")
    return '<div class="gb-note">' + "<br>".join(lines) + "</div>"
