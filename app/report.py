"""A standalone HTML design report for design reviews, viewable offline.

One HTML file holds everything: the plant summary, K (and N, Ki) to full precision,
the closed-loop poles with damping ratio, natural frequency and time constant, the
spec checks, the loop margins, the response plots and the pole map. The plots are
Bokeh figures embedded with Bokeh's *inline* resources, so the file fetches nothing
from a network and can be mailed, archived or opened on an offline machine.

Every number comes from :func:`gainboard.core.evaluate_design` (for a design with
integral gains: the plant extended by :func:`gainboard.core.augment_with_integral_action`,
whose reference step comes from :func:`gainboard.core.integral_step_response`).
"""

from __future__ import annotations

import math
from html import escape
from pathlib import Path

import numpy as np

from gainboard import core

from .design_file import Design, DesignFileError, generator_name, write_text_atomically
from .number_text import format_complex, format_number
from .spec_rows import spec_check_rows
from .theme import PALETTE, SAFETY_CAUTION, trace_colour

__all__ = ["design_report_html", "save_design_report"]

_PLOT_WIDTH, _PLOT_HEIGHT = 525, 240

_REPORT_CSS = f"""
body {{ font-family: system-ui, -apple-system, "Segoe UI", sans-serif; background: {PALETTE['paper']};
  color: {PALETTE['ink']}; margin: 0; }}
main {{ max-width: 1080px; margin: 0 auto; padding: 18px 26px 40px 26px; }}
h1 {{ font-size: 24px; margin: 6px 0 2px 0; }}
h2 {{ font-size: 16px; text-transform: uppercase; letter-spacing: 0.06em; color: {PALETTE['muted']};
  border-bottom: 2px solid {PALETTE['rule']}; padding-bottom: 3px; margin: 28px 0 10px 0; }}
h3 {{ font-size: 14px; margin: 16px 0 6px 0; }}
.meta {{ color: {PALETTE['muted']}; font-size: 13px; }}
.caution {{ border-left: 6px solid #c98a1b; background: #fbf3e2; padding: 8px 12px; font-size: 13.5px;
  line-height: 1.45; color: #4a3b1c; border-radius: 3px; margin: 12px 0; }}
.verdict {{ display: flex; gap: 18px; flex-wrap: wrap; font-size: 14px; margin: 8px 0; }}
.verdict span {{ padding: 4px 10px; border-radius: 3px; background: {PALETTE['panel']}; border: 1px solid {PALETTE['rule']}; }}
.pass {{ color: {PALETTE['pass']}; font-weight: 700; }}
.fail {{ color: {PALETTE['fail']}; font-weight: 700; }}
.unknown {{ color: {PALETTE['muted']}; font-style: italic; }}
table {{ border-collapse: collapse; font-size: 13px; margin: 4px 0 10px 0; background: {PALETTE['panel']}; }}
th {{ text-align: left; font-weight: 600; color: {PALETTE['muted']}; border-bottom: 1px solid {PALETTE['rule']};
  padding: 4px 8px; }}
td {{ padding: 4px 8px; border-bottom: 1px solid #ece9e1; vertical-align: top; }}
td.num {{ text-align: right; font-family: ui-monospace, "SFMono-Regular", Menlo, monospace;
  font-variant-numeric: tabular-nums; white-space: nowrap; }}
pre.notes {{ white-space: pre-wrap; background: {PALETTE['panel']}; border: 1px solid {PALETTE['rule']};
  padding: 8px 12px; font-size: 13px; }}
.small {{ font-size: 12px; color: {PALETTE['muted']}; }}
.plots {{ display: flex; flex-wrap: wrap; gap: 12px; }}
footer {{ margin-top: 36px; font-size: 12px; color: {PALETTE['muted']}; }}
@media print {{ body {{ background: white; }} .caution {{ border: 1px solid #c98a1b; }} }}
"""


# -- numbers and small pieces of HTML ---------------------------------------------------------


def _num(value, digits: int = 6) -> str:
    return escape(format_number(value, digits))


def _exact(value: float) -> str:
    """A gain to every digit (Python's repr reads back to the same double), plain ASCII for copying."""
    return repr(float(value))


def _with_unit(name: str, unit: str) -> str:
    return f"{escape(name)} [{escape(unit)}]" if unit else escape(name)


def _table(header: list[str], rows: list[list[str]], numeric_from: int = 1) -> str:
    head = "".join(f"<th>{cell}</th>" for cell in header)
    body = []
    for row in rows:
        cells = "".join(
            f'<td class="num">{cell}</td>' if index >= numeric_from else f"<td>{cell}</td>" for index, cell in enumerate(row)
        )
        body.append(f"<tr>{cells}</tr>")
    return f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def _matrix_table(matrix, row_labels: list[str], column_labels: list[str], exact: bool) -> str:
    render = _exact if exact else (lambda v: _num(v, 6))
    rows = [[label] + [render(v) for v in row] for label, row in zip(row_labels, np.asarray(matrix))]
    return _table([""] + column_labels, rows)


# -- evaluation -------------------------------------------------------------------------------


def _evaluate(design: Design):
    """Evaluate the design with the core; with integral gains, the extended plant and its own step response."""
    specs = design.effective_specs
    # The report needs neither a selected entry's locus nor every entry's stable interval (the sliders' data).
    options = core.EvaluationOptions(specs=specs, selected_entry=None, include_all_entry_intervals=False)
    if design.integral_gain is None:
        return design.plant, design.gain, core.evaluate_design(design.plant, design.gain, options), None
    extended = core.augment_with_integral_action(design.plant)
    gain = np.hstack([design.gain, design.integral_gain])
    evaluation = core.evaluate_design(extended, gain, options)
    step = None
    if evaluation.closed_loop.stable:
        step = core.integral_step_response(design.plant, gain, horizon=float(evaluation.responses.horizon))
    return extended, gain, evaluation, step


# -- plots ------------------------------------------------------------------------------------


def _figure(title: str, x_label: str, y_label: str, **extra):
    from bokeh.plotting import figure

    fig = figure(
        title=title, width=_PLOT_WIDTH, height=_PLOT_HEIGHT, x_axis_label=x_label, y_axis_label=y_label,
        tools="pan,wheel_zoom,box_zoom,reset,save,hover", toolbar_location="right", **extra,
    )
    fig.background_fill_color = PALETTE["panel"]
    fig.border_fill_color = PALETTE["paper"]
    fig.title.text_font_size = "13px"
    return fig


def _pole_map(plant: core.Plant, evaluation):
    from bokeh.models import Span

    sampled = plant.is_sampled
    closed = np.asarray(evaluation.closed_loop.poles, dtype=complex)
    opened = np.asarray(evaluation.open_loop.poles, dtype=complex)
    everything = np.concatenate([closed, opened])
    finite = everything[np.isfinite(everything)]
    extent = 1.15 if sampled else 1.25 * max(float(np.max(np.abs(finite))) if finite.size else 1.0, 1e-9)
    fig = _figure(
        "Poles: closed loop (bold ×) and open loop (thin ×)" + (" in the z-plane" if sampled else " in the s-plane"),
        "real part" + ("" if sampled else " (1/s)"), "imaginary part" + ("" if sampled else " (rad/s)"),
        match_aspect=True, x_range=(-extent, extent) if sampled else (-extent, 0.35 * extent), y_range=(-extent, extent),
    )
    fig.height = _PLOT_WIDTH if sampled else int(_PLOT_WIDTH * 0.9)
    if evaluation.pole_region is not None:
        for xs, ys in core.region_boundary(evaluation.pole_region, extent):
            fig.patch(list(map(float, xs)), list(map(float, ys)), fill_color=PALETTE["spec_region"], fill_alpha=0.55,
                      line_color=PALETTE["boundary"], legend_label="region the specs ask for")
    if sampled:
        angle = np.linspace(0.0, 2 * math.pi, 361)
        fig.line(np.cos(angle), np.sin(angle), line_color=PALETTE["boundary"], line_width=1.5,
                 legend_label="stability boundary |z| = 1")
    else:
        fig.add_layout(Span(location=0, dimension="height", line_color=PALETTE["boundary"], line_width=1.5))
    fig.add_layout(Span(location=0, dimension="width", line_color=PALETTE["rule"], line_width=1))
    marker = {"marker": "x"}
    fig.scatter(opened.real, opened.imag, size=11, line_width=1.6, line_color=PALETTE["open_loop"],
                legend_label="open loop (K = 0)", **marker)
    fig.scatter(closed.real, closed.imag, size=17, line_width=3.2, line_color=PALETTE["closed_loop"],
                legend_label="closed loop", **marker)
    fig.legend.location = "top_left"
    fig.legend.label_text_font_size = "11px"
    return fig


def _trace_figures(title: str, time, outputs, inputs, plant: core.Plant, saturated=None, sampled=False):
    """One figure of the outputs and one of the inputs of a response."""
    output_fig = _figure(f"{title}: outputs", "time (s)", "output")
    for index, name in enumerate(plant.output_names):
        label = f"{name} [{plant.output_units[index]}]" if plant.output_units[index] else name
        output_fig.line(time, outputs[:, index], line_color=trace_colour(index), line_width=2, legend_label=label)
        if saturated is not None and saturated[0] is not None:
            output_fig.line(time, saturated[0][:, index], line_color=trace_colour(index), line_dash="dashed",
                            line_width=1.5, legend_label=f"{label}, inputs clipped to limits")
    input_fig = _figure(f"{title}: actuator inputs", "time (s)", "input")
    draw = input_fig.step if sampled else input_fig.line
    step_mode = {"mode": "after"} if sampled else {}
    for index, name in enumerate(plant.input_names):
        label = f"{name} [{plant.input_units[index]}]" if plant.input_units[index] else name
        draw(time, inputs[:, index], line_color=trace_colour(index), line_width=2, legend_label=label, **step_mode)
        if saturated is not None and saturated[1] is not None:
            draw(time, saturated[1][:, index], line_color=trace_colour(index), line_dash="dashed", line_width=1.5,
                 legend_label=f"{label}, clipped", **step_mode)
        if plant.input_limits is not None:
            from bokeh.models import Span

            for limit in plant.input_limits[index]:
                if math.isfinite(limit):
                    input_fig.add_layout(Span(location=limit, dimension="width", line_color=trace_colour(index),
                                              line_dash="dotted", line_width=1.2))
    for fig in (output_fig, input_fig):
        fig.legend.label_text_font_size = "11px"
        fig.legend.background_fill_alpha = 0.7
        fig.legend.click_policy = "hide"
    return output_fig, input_fig


# -- sections ---------------------------------------------------------------------------------


def _plant_section(design: Design) -> str:
    plant = design.plant
    time_base = (f"sampled every T = {_num(plant.sample_time, 8)} s (z-plane)" if plant.is_sampled
                 else "continuous time (s-plane)")
    parts = [
        f"<p><b>{escape(plant.name)}</b>{(' — ' + escape(plant.summary)) if plant.summary else ''}</p>",
        f"<p>{plant.state_count} states, {plant.input_count} input(s), {plant.output_count} output(s); {time_base}.</p>",
    ]
    if plant.description:
        parts.append(f'<pre class="notes">{escape(plant.description)}</pre>')
    initial = plant.initial_state
    parts.append("<h3>States (order of x)</h3>")
    parts.append(_table(["state", "unit", "initial value"], [
        [escape(name), escape(unit), "—" if initial is None else _num(initial[j])]
        for j, (name, unit) in enumerate(zip(plant.state_names, plant.state_units))
    ], numeric_from=2))
    parts.append("<h3>Inputs (order of u)</h3>")
    limits = plant.input_limits or ((-math.inf, math.inf),) * plant.input_count
    parts.append(_table(["input", "unit", "lowest", "highest"], [
        [escape(name), escape(unit), _num(low), _num(high)]
        for name, unit, (low, high) in zip(plant.input_names, plant.input_units, limits)
    ], numeric_from=2))
    parts.append("<h3>Outputs</h3>")
    parts.append(_table(["output", "unit", "tracked by the reference"], [
        [escape(name), escape(unit), "yes" if i in plant.tracked_outputs else "no"]
        for i, (name, unit) in enumerate(zip(plant.output_names, plant.output_units))
    ], numeric_from=3))
    states = [_with_unit(n, u) for n, u in zip(plant.state_names, plant.state_units)]
    inputs = [_with_unit(n, u) for n, u in zip(plant.input_names, plant.input_units)]
    outputs = [_with_unit(n, u) for n, u in zip(plant.output_names, plant.output_units)]
    matrices = [
        ("A (state equation)", plant.A, states, states),
        ("B (inputs into the state equation)", plant.B, states, inputs),
        ("C (outputs from states)", plant.C, outputs, states),
        ("D (feedthrough)", plant.D, outputs, inputs),
    ]
    body = "".join(f"<h3>{title}</h3>" + _matrix_table(m, rows, cols, exact=True) for title, m, rows, cols in matrices)
    parts.append(f"<details><summary>Model matrices (exact values)</summary>{body}</details>")
    return "".join(parts)


def _gain_section(design: Design) -> str:
    plant = design.plant
    inputs = [_with_unit(n, u) for n, u in zip(plant.input_names, plant.input_units)]
    states = [_with_unit(n, u) for n, u in zip(plant.state_names, plant.state_units)]
    references = [_with_unit(plant.output_names[i], plant.output_units[i]) for i in plant.tracked_outputs]
    terms = ["−K x"] + (["+ N r"] if design.prefilter is not None else []) + (["− Ki ξ"] if design.integral_gain is not None else [])
    parts = [
        f"<p>Control law <b>u = {' '.join(terms)}</b>. Values are exact (they read back to the same doubles). "
        "Saturation and integrator anti-windup are the controller's job.</p>",
        "<h3>State-feedback gain K (rows: inputs, columns: states)</h3>",
        _matrix_table(design.gain, inputs, states, exact=True),
    ]
    if design.prefilter is not None:
        parts += ["<h3>Reference prefilter N (columns: tracked outputs)</h3>",
                  _matrix_table(design.prefilter, inputs, references, exact=True)]
    if design.integral_gain is not None:
        sign = "ξ[k+1] = ξ[k] + T (r[k] − y[k])" if plant.is_sampled else "ξ' = r − y"
        parts += [f"<h3>Integral gain Ki (columns: tracked outputs; {sign})</h3>",
                  _matrix_table(design.integral_gain, inputs, references, exact=True)]
    return "".join(parts)


def _pole_section(evaluation, sampled: bool) -> str:
    rows = []
    for description in evaluation.closed_loop.descriptions:
        row = [escape(format_complex(description.value, 6))]
        if sampled:
            row.append(_num(abs(description.value)))
            row.append(escape(format_complex(description.equivalent_continuous, 6)))
        row += [
            _num(description.damping_ratio, 4),
            _num(description.natural_frequency),
            _num(description.time_constant),
            '<span class="pass">stable</span>' if description.stable else '<span class="fail">unstable</span>',
        ]
        rows.append(row)
    header = ["pole z" if sampled else "pole s (1/s)"] + (["|z|", "equivalent s = ln(z)/T"] if sampled else [])
    header += ["damping ratio ζ", "natural frequency ωn (rad/s)", "time constant (s)", ""]
    closed = evaluation.closed_loop
    margin = "1 − largest |z|" if sampled else "slowest decay rate −max Re s (1/s)"
    return (
        f"<p>Stability margin ({margin}): {_num(closed.stability_margin)}; eigenvector condition number "
        f"{_num(closed.eigenvector_condition, 3)} (large means poles sensitive to model errors).</p>"
        + _table(header, rows, numeric_from=0)
    )


def _spec_section(evaluation) -> str:
    report = evaluation.spec_report
    if report is None or not report.checks:
        return "<p>No specs were given for this design.</p>"
    rows = spec_check_rows(report, detail_column=True, digits=6)
    return (
        "<table><thead><tr><th>spec</th><th>required</th><th>achieved</th><th>result</th><th>decided by</th></tr>"
        f"</thead><tbody>{rows}</tbody></table>"
    )


def _margin_section(evaluation) -> str:
    margins = evaluation.margins
    if margins is None:
        return "<p>Margins were not computed for this design.</p>"
    if not margins.stable_nominal:
        return f"<p>The closed loop is unstable, so margins are not meaningful. {escape(margins.note)}</p>"
    rows = []
    if margins.input_count == 1:
        rows += [
            ["gain margin, increase (dB)", _num(margins.gain_margin_increase_db, 4)],
            ["gain margin, decrease (dB)", _num(margins.gain_margin_decrease_db, 4)],
            ["phase margin (degrees)", _num(margins.phase_margin_deg, 4)],
            ["gain crossover frequency (rad/s)", _num(margins.crossover_frequency, 4)],
            ["delay margin (s)", _num(margins.delay_margin, 4)],
        ]
    rows += [
        ["disk margin α (all inputs at once)", _num(margins.disk_margin, 4)],
        ["disk phase margin (degrees)", _num(margins.disk_phase_margin_deg, 4)],
        ["peak input sensitivity ‖S‖∞", _num(margins.peak_sensitivity, 4)],
    ]
    parts = ["<p>Loop broken at the plant input.</p>", _table(["margin", "value"], rows)]
    if margins.input_count > 1:
        per_loop = [
            [escape(loop.input_name), _num(loop.gain_margin_increase_db, 4), _num(loop.gain_margin_decrease_db, 4),
             _num(loop.phase_margin_deg, 4), _num(loop.delay_margin, 4)]
            for loop in margins.loop_at_a_time
        ]
        parts += ["<h3>One loop at a time (the others closed)</h3>",
                  _table(["input", "gain margin up (dB)", "gain margin down (dB)", "phase margin (°)", "delay margin (s)"],
                         per_loop)]
    if margins.note:
        parts.append(f'<p class="small">{escape(margins.note)}</p>')
    return "".join(parts)


def _metrics_table(response) -> str:
    rows = [
        [escape(m.output_name), _num(m.rise_time, 4), _num(m.settling_time, 4), _num(m.overshoot_percent, 4),
         _num(m.peak_value, 4), _num(m.steady_state_error, 4)]
        for m in response.output_metrics
    ]
    outputs = _table(["output", "rise time (s)", "settling time (s)", "overshoot (%)", "peak", "steady-state error"], rows)
    effort = [[escape(m.input_name), _num(m.peak_magnitude, 4), _num(m.peak_time, 4), _num(m.energy, 4)]
              for m in response.input_metrics]
    inputs = _table(["input", "peak |u|", "at time (s)", "∫u² dt"], effort)
    warnings = [
        f"{escape(v.input_name)} leaves its range ({_num(v.low)} … {_num(v.high)}) by up to "
        f"{_num(v.worst_excess, 4)} ({_num(v.worst_excess_percent, 3)} %), first at t = {_num(v.first_time, 4)} s"
        for v in response.limit_violations if v.exceeded
    ]
    warning = ('<p class="fail">' + "<br>".join(warnings) + "</p>") if warnings else ""
    return outputs + inputs + warning


def _prefilter_note(design: Design, used) -> str:
    """Say which N the step response used, and whether the design's own N differs from it."""
    if used is None:
        return ""
    used = np.asarray(used, dtype=float)
    text = " The step uses N = " + escape("; ".join(", ".join(format_number(v, 6) for v in row) for row in used))
    text += ", computed for zero steady-state error on the tracked outputs."
    stored = design.prefilter
    if stored is not None and stored.shape == used.shape:
        scale = max(float(np.max(np.abs(used))), float(np.max(np.abs(stored))), np.finfo(float).tiny)
        if float(np.max(np.abs(stored - used))) > 1e-9 * scale:
            text += (' <span class="fail">The design\'s stored N differs from it</span>: with the stored N the '
                     "tracked outputs would not settle on the reference in this model.")
    return text


# -- the document -----------------------------------------------------------------------------


def _inline_bokeh_scripts() -> str:
    """BokehJS itself, inline, and nothing else.

    Not ``Resources.render()``: once Panel is imported in the same process (the workbench),
    it adds its own extension files to every Resources object as *paths* relative to a server,
    which a standalone file cannot load — and a report must open offline.
    """
    from bokeh.resources import Resources

    scripts = Resources(mode="inline", components=["bokeh"]).js_raw
    return "\n".join(f'<script type="text/javascript">{code}</script>' for code in scripts)


def design_report_html(design: Design) -> str:
    """The design review report of ``design`` as one standalone HTML document.

    The document embeds Bokeh's JavaScript and styles inline (no network access when
    viewed) and carries the safety caution at the top and the bottom.

    Parameters
    ----------
    design : Design

    Returns
    -------
    str
        The HTML text (UTF-8).

    Raises
    ------
    DesignFileError
        If ``design`` is not a :class:`Design`.
    GainboardError
        If the core cannot evaluate the design (its message says why).
    """
    if not isinstance(design, Design):
        raise DesignFileError(f"a report needs a Design, got {type(design).__name__}")
    from bokeh.embed import components

    plant = design.plant
    evaluated_plant, _, evaluation, integral_step = _evaluate(design)
    sampled = plant.is_sampled

    figures = {"pole_map": _pole_map(evaluated_plant, evaluation)}
    response_blocks = []
    responses = evaluation.responses
    for response in responses.responses:
        if design.integral_gain is not None and response.kind == "step":
            continue  # replaced by the integral-action step below
        title = {"initial": "Initial-condition response", "step": "Reference step",
                 "disturbance": "Disturbance step"}.get(response.kind, response.kind)
        saturated = (response.saturated_outputs, response.saturated_inputs) if response.saturated_inputs is not None else None
        out_fig, in_fig = _trace_figures(title, response.time, response.outputs, response.inputs, evaluated_plant,
                                         saturated, sampled)
        figures[f"{response.kind}_outputs"], figures[f"{response.kind}_inputs"] = out_fig, in_fig
        description = escape(response.description)
        if response.kind == "step":
            description += _prefilter_note(design, responses.prefilter)
        response_blocks.append((response.kind, title, description, _metrics_table(response)))
    if integral_step is not None:
        out_fig, in_fig = _trace_figures("Reference step with integral action", integral_step.times,
                                         integral_step.reference_outputs, integral_step.reference_inputs, plant,
                                         None, sampled)
        figures["integral_outputs"], figures["integral_inputs"] = out_fig, in_fig
        errors = integral_step.steady_state_error_reference
        note = "Unit step of every tracked reference, from rest."
        if errors is not None:
            note += " Final tracking error r − y: " + ", ".join(_num(e, 3) for e in errors) + "."
        response_blocks.append(("integral", "Reference step with integral action", escape(note), ""))
    elif design.integral_gain is None and responses.step is None and responses.step_unavailable_reason:
        response_blocks.append(("", "Reference step", escape(responses.step_unavailable_reason), ""))

    script, divs = components(figures)
    closed = evaluation.closed_loop
    report = evaluation.spec_report
    if report is None or not report.checks:
        spec_verdict = '<span class="unknown">no specs given</span>'
    else:
        spec_verdict = '<span class="pass">every spec met</span>' if report.all_passed else '<span class="fail">some specs not met</span>'
    verdict = (
        '<div class="verdict">'
        + ('<span class="pass">closed loop stable</span>' if closed.stable else '<span class="fail">closed loop unstable</span>')
        + spec_verdict
        + ("<span>with integral action</span>" if design.integral_gain is not None else "")
        + "</div>"
    )
    caution = f'<div class="caution"><b>Caution.</b> {escape(SAFETY_CAUTION)}</div>'
    messages = list(evaluation.messages)
    if design.integral_gain is not None:
        # The extended plant has no static-prefilter step; the integral-action step below replaces it.
        messages = [m for m in messages if m != f"No reference step: {responses.step_unavailable_reason}"]
    notes_from_core = (
        "<h2>Notes from the analysis</h2><ul>" + "".join(f"<li>{escape(m)}</li>" for m in messages) + "</ul>"
        if messages else ""
    )

    response_html = []
    for kind, title, description, metrics in response_blocks:
        plots = f'<div class="plots">{divs[f"{kind}_outputs"]}{divs[f"{kind}_inputs"]}</div>' if kind else ""
        response_html.append(f"<h3>{escape(title)}</h3><p class='small'>{description}</p>{plots}{metrics}")

    history = ""
    if design.gain_history:
        rows = [[escape(when), escape("; ".join(", ".join(_exact(v) for v in row) for row in gain))]
                for when, gain in design.gain_history[-20:]]
        history = (f"<h3>Gain history (latest {len(rows)} of {len(design.gain_history)})</h3>"
                   + _table(["set at", "K (rows separated by ;)"], rows, numeric_from=1))

    integral_spec_note = ""
    if design.integral_gain is not None and report is not None and report.checks:
        integral_spec_note = (
            '<p class="small">With integral action the checks above are made on the extended plant\'s '
            "initial-condition and disturbance responses; the reference step with integral action (under "
            "Responses) is not part of them, so judge step specs from its plot.</p>"
        )
    title = f"Design review: {plant.name}"
    body = f"""<main>
<header>
<h1>{escape(title)}</h1>
<p class="meta">Design created {escape(design.created)}, last modified {escape(design.modified)}.
Report made by {escape(generator_name())}; every figure is computed from the linear model.</p>
</header>
{caution}
{verdict}
<h2>Plant</h2>
{_plant_section(design)}
<h2>Gains</h2>
{_gain_section(design)}
<h2>Closed-loop poles</h2>
{_pole_section(evaluation, sampled)}
<div class="plots">{divs['pole_map']}</div>
<h2>Specs</h2>
{_spec_section(evaluation)}
{integral_spec_note}
<h2>Margins</h2>
{_margin_section(evaluation)}
<h2>Responses</h2>
{''.join(response_html)}
{notes_from_core}
<h2>Notes</h2>
{f'<pre class="notes">{escape(design.notes)}</pre>' if design.notes else '<p>No notes.</p>'}
{history}
<footer>
{caution}
<p>Standalone report: the plots are embedded, nothing is loaded from a network.</p>
</footer>
</main>"""
    return f"""<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{escape(title)}</title>
<style>{_REPORT_CSS}</style>
{_inline_bokeh_scripts()}
</head>
<body>
{body}
{script}
</body>
</html>
"""


def save_design_report(design: Design, path) -> Path:
    """Write the HTML report of ``design`` to ``path`` (atomically)."""
    try:
        return write_text_atomically(path, design_report_html(design))
    except OSError as error:
        raise DesignFileError(f"cannot write the report {str(path)!r}: {error.strerror or error}") from None
