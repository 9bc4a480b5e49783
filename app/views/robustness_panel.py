"""The robustness views: operating points, the sampled cloud, envelopes, common ranges, sampling.

Everything shown comes from a :class:`~gainboard.app.robustness_state.RobustnessState`; the
callbacks here only set that state. The operating points' poles and the cloud of sampled poles
are drawn on the workbench's own pole map (one marker shape per point, the cloud as faint
dots that stay legible at 10 000 samples); the rest lives in the "Robust" tab.
"""

from __future__ import annotations

import math
from html import escape

import numpy as np
import panel as pn
from bokeh.models import ColumnDataSource
from bokeh.plotting import figure

from ..robustness_state import MAX_SAMPLES, SAMPLING_CAUTION
from ..theme import TABLE_CSS, entry_symbol, format_number, trace_colour
from .data_sources import update_source
from .gain_sliders import SLIDER_WIDTH, interval_strip_svg
from .html_box import HtmlBox

__all__ = ["RobustnessPanel", "POINT_MARKERS"]

#: Marker shape per operating point on the pole map (nominal is the map's own closed-loop ×).
POINT_MARKERS = ("square", "triangle", "diamond", "inverted_triangle", "hex", "star", "plus", "circle_cross")
#: Unicode glyph shown beside each point's name, matching its marker.
POINT_GLYPHS = {"square": "□", "triangle": "△", "diamond": "◇", "inverted_triangle": "▽", "hex": "⬡",
                "star": "☆", "plus": "+", "circle_cross": "⊕"}
POINT_COLOUR = "#1d4e89"
CLOUD_COLOUR = "#6b4c9a"
MOVED_COLOUR = "#c2484f"
WIDTH = 460

CSS = TABLE_CSS + f"""
.gb-caution-small {{ font-size: 11.5px; color: #4a3b1c; background: #fbf3e2; border-left: 4px solid #c98a1b;
  padding: 3px 8px; border-radius: 3px; line-height: 1.35; }}
.gb-glyph {{ color: {POINT_COLOUR}; font-weight: 700; }}
"""


def _marker(index: int) -> str:
    return POINT_MARKERS[(index - 1) % len(POINT_MARKERS)]


def _verdict(passed) -> str:
    if passed is None:
        return '<span class="gb-unknown">—</span>'
    return '<span class="gb-pass">✓</span>' if passed else '<span class="gb-fail">✗</span>'


def _fraction_row(name: str, estimate) -> str:
    low, high = estimate.interval
    return (f"<tr><td>{escape(name)}</td><td class='num'>{estimate.fraction:.4f}</td>"
            f"<td class='num'>[{low:.4f}, {high:.4f}]</td></tr>")


class RobustnessPanel:
    """The "Robust" tab and the operating-point layers of the pole map for one session.

    Parameters
    ----------
    robust : RobustnessState
    pole_figure : bokeh figure
        The workbench's pole map, which gets the operating-point, cloud and moved-parameter layers.
    response_figure : bokeh figure, optional
        The workbench's output-response plot, which gets the band each output sweeps over the
        operating points (see :meth:`show_response_band`).
    """

    def __init__(self, robust, pole_figure, response_figure=None):
        self.robust = robust
        self.band_source = ColumnDataSource({"xs": [], "ys": [], "colour": []}, name="response_bands")
        self._band_kind = "initial"
        if response_figure is not None:  # an underlay, like the cloud: the traces stay first and on top
            response_figure.patches("xs", "ys", source=self.band_source, fill_color="colour", fill_alpha=0.16,
                                    line_alpha=0, name="operating_point_bands", level="underlay")
        self.cloud_source = ColumnDataSource({"x": [], "y": []}, name="sampled_cloud")
        self.points_source = ColumnDataSource({"x": [], "y": [], "marker": [], "name": []}, name="operating_points")
        self.moved_source = ColumnDataSource({"x": [], "y": []}, name="moved_parameter_poles")
        # faint enough that 10 000 overlapping samples shade a density rather than a solid blot; drawn as an
        # underlay (below every glyph) without reordering the map's renderers, which others look up by place
        pole_figure.scatter("x", "y", source=self.cloud_source, size=2.5, color=CLOUD_COLOUR, alpha=0.05,
                            line_alpha=0, name="cloud", level="underlay")
        pole_figure.scatter("x", "y", source=self.points_source, marker="marker", size=11, fill_alpha=0,
                            line_color=POINT_COLOUR, line_width=2.0, name="operating_point_poles")
        pole_figure.scatter("x", "y", source=self.moved_source, marker="circle", size=12, fill_alpha=0,
                            line_color=MOVED_COLOUR, line_width=2.2, name="moved_parameter")

        self.summary = HtmlBox(css=CSS, width=WIDTH, name="robust_summary")
        self.points_table = HtmlBox(css=CSS, width=WIDTH, name="operating_points_table")
        self.envelope_source = ColumnDataSource({"x": [], "lower": [], "upper": []})
        self.traces_source = ColumnDataSource({"xs": [], "ys": [], "colour": []})
        self.envelope_figure = figure(width=WIDTH - 20, height=170, toolbar_location=None, name="envelope",
                                      x_axis_label="time (s)", title="reference step over the operating points")
        self.envelope_figure.varea("x", "lower", "upper", source=self.envelope_source, fill_color=POINT_COLOUR,
                                   fill_alpha=0.18)
        self.envelope_figure.multi_line("xs", "ys", source=self.traces_source, line_color="colour", line_width=1.4)
        self.strips = HtmlBox(css=CSS, width=WIDTH, name="common_ranges")

        self.parameter_choice = pn.widgets.Select(label="parameter", options=[], width=200, margin=(2, 5),
                                                  css_classes=["gb-robust-parameter"])
        self.parameter_slider = pn.widgets.FloatSlider(label="value", start=0.0, end=1.0, value=0.0, step=0.01,
                                                       width=230, margin=(2, 5), css_classes=["gb-robust-value"])
        self.moved_text = HtmlBox(css=CSS, width=WIDTH, name="moved_parameter_text")
        self.samples = pn.widgets.IntInput(label="samples", value=robust.samples, start=1, end=MAX_SAMPLES,
                                           width=110, margin=(2, 5), css_classes=["gb-robust-samples"])
        self.seed = pn.widgets.IntInput(label="seed", value=robust.seed, start=0, width=90, margin=(2, 5),
                                        css_classes=["gb-robust-seed"])
        self.scheduler = pn.widgets.TextInput(label="Dask scheduler (optional)", placeholder="tcp://host:8786",
                                              value=robust.scheduler, width=200, margin=(2, 5),
                                              css_classes=["gb-robust-scheduler"])
        self.run_button = pn.widgets.Button(label="Sample", color="primary", width=90, margin=(20, 5, 2, 5))
        self.cancel_button = pn.widgets.Button(label="Cancel", width=80, margin=(20, 5, 2, 5), disabled=True)
        self.progress = pn.indicators.Progress(value=0, max=1000, width=WIDTH - 20, height=12, margin=(4, 5),
                                               visible=False)
        self.result_box = HtmlBox(css=CSS, width=WIDTH, name="sampling_result")

        self._syncing = False
        self.parameter_choice.param.watch(self._parameter_chosen, "value")
        self.parameter_slider.param.watch(self._parameter_moved, "value_throttled")
        self.run_button.on_click(lambda event: self._run())
        self.cancel_button.on_click(lambda event: robust.cancel_sampling())
        robust.param.watch(lambda *e: self.refresh(), ["revision", "moved", "result", "result_is_current", "message"])
        robust.param.watch(lambda *e: self._show_progress(), ["progress", "running"])

        heading = lambda text: pn.pane.HTML(f'<div class="gb-heading">{text}</div>', stylesheets=[CSS],  # noqa: E731
                                            margin=(2, 5, 0, 5))
        self.panel = pn.Column(
            self.summary.panel,
            heading("operating points"), self.points_table.panel,
            pn.pane.Bokeh(self.envelope_figure, margin=(0, 5)),
            heading("gain ranges stable at every operating point"), self.strips.panel,
            heading("move one parameter (the others at nominal)"),
            pn.Row(self.parameter_choice, self.parameter_slider, margin=0), self.moved_text.panel,
            heading("Monte Carlo sampling"),
            pn.Row(self.samples, self.seed, self.run_button, self.cancel_button, margin=0),
            self.scheduler, self.progress, self.result_box.panel,
            margin=0, width=WIDTH + 10,
        )
        self.refresh()

    # -- user actions: only set state ------------------------------------------------------------

    def _parameter_chosen(self, event) -> None:
        if self._syncing or not event.new:
            return
        family = self.robust.family
        if family is not None and event.new in family.parameter_names:
            self.robust.move_parameter(event.new, family.parameter(event.new).nominal)

    def _parameter_moved(self, event) -> None:
        if self._syncing or event.new is None:
            return
        self.robust.move_parameter(self.robust.moved_parameter, float(event.new))

    def _run(self) -> None:
        self.robust.param.update(samples=int(self.samples.value or 1), seed=int(self.seed.value or 0),
                                 scheduler=self.scheduler.value or "")
        self.robust.start_sampling()

    # -- refreshing from the state ---------------------------------------------------------------

    def show_response_band(self, kind: str | None = None) -> None:
        """Shade, on the response plot, the band each output of response ``kind`` sweeps over the points."""
        self._band_kind = kind or self._band_kind
        xs, ys, colours = [], [], []
        for index, envelope in enumerate(self.robust.envelopes.get(self._band_kind, ()) if self.robust.report else ()):
            if envelope is None:
                continue
            keep = np.isfinite(envelope.lower) & np.isfinite(envelope.upper)
            time = envelope.time[keep]
            # one polygon per output: along the upper edge, back along the lower one
            xs.append(np.concatenate([time, time[::-1]]).astype(np.float32))
            ys.append(np.concatenate([envelope.upper[keep], envelope.lower[keep][::-1]]).astype(np.float32))
            colours.append(trace_colour(index))
        update_source(self.band_source, {"xs": xs, "ys": ys, "colour": colours})

    def _show_progress(self) -> None:
        robust = self.robust
        self.progress.visible = robust.running
        self.progress.value = int(round(1000 * robust.progress))
        self.run_button.disabled = robust.running
        self.cancel_button.disabled = not robust.running

    def refresh(self) -> None:
        robust = self.robust
        self._show_progress()
        family, report = robust.family, robust.report
        if family is None or report is None:
            note = robust.message or robust.family_note
            self.summary.object = (f'<div class="gb-note">{escape(note)} Add <code>[parameters]</code> and '
                                   '<code>[[operating_points]]</code> to the plant file to judge K on a family '
                                   '(see the README).</div>')
            for box in (self.points_table, self.strips, self.moved_text, self.result_box):
                box.object = ""
            for source in (self.cloud_source, self.points_source, self.moved_source):
                update_source(source, {key: [] for key in source.data})
            update_source(self.envelope_source, {"x": [], "lower": [], "upper": []})
            update_source(self.traces_source, {"xs": [], "ys": [], "colour": []})
            return
        self.show_response_band()
        self._refresh_summary(family, report)
        self._refresh_points(report)
        self._refresh_envelope()
        self._refresh_strips()
        self._refresh_parameter(family)
        self._refresh_result()

    def _refresh_summary(self, family, report) -> None:
        rows = []
        for p in family.parameters:
            if p.distribution == "uniform":
                spread = f"uniform {format_number(p.low, 4)} … {format_number(p.high, 4)}"
            elif p.distribution == "fixed":
                spread = "fixed (operating points only)"
            else:
                spread = f"normal, std {format_number(p.std, 3)}"
                if p.low is not None or p.high is not None:
                    spread += f", within {format_number(p.low, 4)} … {format_number(p.high, 4)}"
            rows.append(f"<tr><td>{escape(p.name)}</td><td class='num'>{format_number(p.nominal, 5)}</td>"
                        f"<td>{escape(p.unit)}</td><td>{escape(spread)}</td></tr>")
        verdict = ('<span class="gb-pass">stable at every operating point</span>' if report.all_stable
                   else f'<span class="gb-fail">NOT stable at every operating point</span> (worst: '
                        f'{escape(report.worst_point)})')
        legend = ("On the pole map: × nominal, " + ", ".join(
            f"<span class='gb-glyph'>{POINT_GLYPHS[_marker(i)]}</span> {escape(point.name)}"
            for i, point in enumerate(report.points) if i > 0)
            + ", <span style='color:" + CLOUD_COLOUR + "'>faint dots</span> sampled models, "
            "<span style='color:" + MOVED_COLOUR + "'>○</span> the moved parameter. On the response plots, "
            "shaded bands: the range of each output over the operating points.")
        self.summary.object = (
            f"<div class='gb-note'>{verdict}</div><div class='gb-small'>{legend}</div>"
            "<table class='gb-table'><tr><th>parameter</th><th>nominal</th><th>unit</th><th>sampled as</th></tr>"
            + "".join(rows) + "</table>"
        )

    def _refresh_points(self, report) -> None:
        xs, ys, markers, names, rows = [], [], [], [], []
        for index, point in enumerate(report.points):
            evaluation = point.evaluation
            if index > 0:  # the nominal poles are the map's own closed-loop crosses
                for pole in np.asarray(point.poles, dtype=complex):
                    xs.append(float(pole.real))
                    ys.append(float(pole.imag))
                    markers.append(_marker(index))
                    names.append(point.name)
            glyph = "×" if index == 0 else POINT_GLYPHS[_marker(index)]
            margins = evaluation.margins
            gain_margin = margins.gain_margin_db_min if margins is not None and margins.gain_margin_db_min is not None \
                else None
            phase = margins.phase_margin_deg if margins is not None and margins.phase_margin_deg is not None else None
            specs = evaluation.spec_report.all_passed if evaluation.spec_report is not None else None
            rows.append(
                f"<tr><td><span class='gb-glyph'>{glyph}</span> {escape(point.name)}</td>"
                f"<td>{_verdict(point.stable)}</td>"
                f"<td class='num'>{format_number(evaluation.closed_loop.stability_margin, 3)}</td>"
                f"<td class='num'>{format_number(gain_margin, 3)}</td><td class='num'>{format_number(phase, 3)}</td>"
                f"<td class='num'>{', '.join(format_number(v, 3) for v in point.peak_effort)}</td>"
                f"<td>{_verdict(specs)}</td></tr>"
            )
        update_source(self.points_source, {"x": xs, "y": ys, "marker": markers, "name": names})
        self.points_table.object = (
            "<table class='gb-table'><tr><th>model</th><th>stable</th><th>stability margin</th>"
            "<th>gain margin (dB)</th><th>phase margin (°)</th><th>peak |u|</th><th>specs</th></tr>"
            + "".join(rows) + "</table>"
        )

    def _refresh_envelope(self) -> None:
        envelope = self.robust.envelope
        if envelope is None:
            update_source(self.envelope_source, {"x": [], "lower": [], "upper": []})
            update_source(self.traces_source, {"xs": [], "ys": [], "colour": []})
            return
        self.envelope_figure.title.text = (f"{'reference step' if envelope.kind == 'step' else 'initial condition'}"
                                           f": {envelope.output_name} over the operating points (band)")
        update_source(self.envelope_source, {"x": envelope.time, "lower": envelope.lower, "upper": envelope.upper})
        names = list(envelope.traces)
        update_source(self.traces_source, {
            "xs": [envelope.traces[n][0] for n in names], "ys": [envelope.traces[n][1] for n in names],
            "colour": [trace_colour(i) for i in range(len(names))]})

    def _refresh_strips(self) -> None:
        common = self.robust.common or {}
        gain = self.robust.design.gain
        parts = []
        for (row, col), found in sorted(common.items()):
            low, high = self.robust.strip_range(row, col)  # the slider's own range
            value = float(gain[row, col])
            inside = any(a < value < b for a, b in found.intervals)
            span = high - low  # rounding noise far below the slider's span reads 0, as under the sliders
            text = " or ".join(f"{format_number(a, scale=span)} &lt; {entry_symbol(row, col)} &lt; {format_number(b, scale=span)}"
                               if math.isfinite(a) or math.isfinite(b) else "any value"
                               for a, b in found.intervals) or "no value"
            limits = sorted(set(found.limiting_model.values()))
            parts.append(
                f"<div><b>{entry_symbol(row, col)}</b> {interval_strip_svg(low, high, value, found, SLIDER_WIDTH)}"
                f"<div class='gb-small'>{'<span class=gb-pass>✓</span>' if inside else '<span class=gb-fail>✗</span>'}"
                f" stable at every point for {text}"
                + (f"; ends set by {escape(', '.join(limits))}" if limits else "") + "</div></div>")
        self.strips.object = "".join(parts)

    def _refresh_parameter(self, family) -> None:
        robust = self.robust
        self._syncing = True
        try:
            names = list(family.parameter_names)
            if self.parameter_choice.options != names:
                self.parameter_choice.options = names
            if robust.moved_parameter in names:
                self.parameter_choice.value = robust.moved_parameter
                parameter = family.parameter(robust.moved_parameter)
                low, high = parameter.sweep_range
                if high <= low:  # a fixed parameter: let it move ±20 % around nominal
                    span = abs(parameter.nominal) * 0.2 or 1.0
                    low, high = parameter.nominal - span, parameter.nominal + span
                self.parameter_slider.param.update(start=low, end=high, step=(high - low) / 200,
                                                   value=min(max(robust.moved_value, low), high),
                                                   label=f"{parameter.name} ({parameter.unit})" if parameter.unit
                                                   else parameter.name)
        finally:
            self._syncing = False
        moved = robust.moved
        if moved is None:
            update_source(self.moved_source, {"x": [], "y": []})
            self.moved_text.object = f"<div class='gb-small'>{escape(robust.message)}</div>"
            return
        poles = np.asarray(moved.poles, dtype=complex)
        update_source(self.moved_source, {"x": poles.real.tolist(), "y": poles.imag.tolist()})
        verdict = "holds: stable" if moved.stable else "breaks: NOT stable"
        css = "gb-pass" if moved.stable else "gb-fail"
        self.moved_text.object = (
            f"<div class='gb-note'>At {escape(robust.moved_parameter)} = {format_number(robust.moved_value, 5)} "
            f"the design <span class='{css}'>{verdict}</span> (stability margin "
            f"{format_number(moved.stability_margin, 3)}); its poles are the red ○ on the pole map.</div>")

    def _refresh_result(self) -> None:
        robust = self.robust
        result = robust.result
        caution = f"<div class='gb-caution-small'>{escape(SAMPLING_CAUTION)}</div>"
        note = f"<div class='gb-small'>{escape(robust.message)}</div>" if robust.message else ""
        if result is None:
            update_source(self.cloud_source, {"x": [], "y": []})
            self.result_box.object = note + caution
            return
        poles = np.asarray(result.poles, dtype=complex).ravel()
        update_source(self.cloud_source, {"x": poles.real.astype(np.float32), "y": poles.imag.astype(np.float32)})
        stale = "" if robust.result_is_current else (
            "<div class='gb-fail'>K, the plant or the specs changed since this sampling: sample again.</div>")
        varying = {p.name for p in robust.family.varying_parameters}  # the fixed ones say nothing here
        rows = [_fraction_row("stable", result.stable)]
        rows += [_fraction_row(name, e) for name, e in result.spec_pass.items()]
        rows += [f"<tr><td>{escape(name)}</td><td colspan='2' class='gb-small'>{escape(reason)}</td></tr>"
                 for name, reason in result.specs_not_sampled.items()]
        worst = "".join(
            f"<tr><td>{escape(figure)}</td><td class='num'>{format_number(sample.value, 4)}</td>"
            f"<td class='gb-small'>sample {sample.index}: "
            + escape(", ".join(f"{k} = {format_number(v, 4)}" for k, v in sample.parameters.items() if k in varying))
            + "</td></tr>" for figure, sample in result.worst.items())
        failed = (f"<div class='gb-small'>{result.failed_samples} samples could not be evaluated (counted as not "
                  "stable).</div>") if result.failed_samples else ""
        self.result_box.object = (
            stale + note
            + f"<div class='gb-small'>{result.samples} samples, seed {result.seed}. The cloud on the pole map shows "
              f"{min(result.samples, len(result.poles))} sampled models.</div>"
            + f"<table class='gb-table gb-robust-fractions'><tr><th>share of samples</th><th>fraction</th>"
              f"<th>{result.stable.confidence:.0%} Wilson interval</th></tr>" + "".join(rows) + "</table>"
            + "<table class='gb-table'><tr><th>worst sample of</th><th>value</th><th>parameters</th></tr>"
            + worst
            + "</table>" + failed + caution)
