"""Tables: closed-loop poles, spec checks with pass/fail, loop margins and plant structure."""

from __future__ import annotations

from html import escape

import panel as pn

from ..refresh_policy import detail_options
from ..spec_rows import spec_check_rows
from ..theme import TABLE_CSS, format_complex, format_number, pole_time_text
from .html_box import HtmlBox

__all__ = ["PoleTable", "ChecksTable"]

WIDTH = 470


def _pole_rows(descriptions, movable, sampled: bool, kind: str) -> str:
    rows = []
    for index, (description, can_move) in enumerate(zip(descriptions, movable)):
        value = complex(description.value)
        cells = [f'<td class="num">{index + 1}</td>', f'<td class="num pole">{format_complex(value, 5)}</td>']
        if sampled:
            cells.append(f'<td class="num">{format_complex(description.equivalent_continuous, 4)}</td>')
        cells += [
            f'<td class="num">{format_number(description.damping_ratio, 3)}</td>',
            f'<td class="num">{format_number(description.natural_frequency, 4)}</td>',
            f'<td class="num">{pole_time_text(description)}</td>',
            '<td>' + ('<span class="gb-pass">stable</span>' if description.stable
                      else f'<span class="gb-fail">{description.verdict}</span>') + "</td>",
            "<td>" + ("yes" if can_move else '<span class="gb-fixed">no (uncontrollable)</span>') + "</td>",
        ]
        rows.append(
            f'<tr class="gb-pole-row" data-kind="{kind}" data-real="{value.real!r}" data-imag="{value.imag!r}">'
            + "".join(cells) + "</tr>"
        )
    return "".join(rows)


def _pole_table(descriptions, movable, sampled: bool, kind: str) -> str:
    header = "<th>#</th><th>pole" + (" z" if sampled else " s") + "</th>"
    if sampled:
        header += "<th>as s = ln z / T</th>"
    header += "<th>damping ratio</th><th>natural freq. (rad/s)</th><th title='time to decay by a factor e; for an unstable pole the time to grow by e'>time constant / growth time (s)</th><th>stability</th><th>movable</th>"
    return (f'<table class="gb-table gb-poles-{kind}"><tr>{header}</tr>'
            + _pole_rows(descriptions, movable, sampled, kind) + "</table>")


class PoleTable:
    """Closed-loop and open-loop poles with damping, frequency, time constant and movability."""

    def __init__(self, state):
        self.state = state
        self.pane = HtmlBox(css=TABLE_CSS, width=WIDTH, margin=(4, 5), name="pole_table")
        self.panel = pn.Column(self.pane.panel, margin=0)

    def refresh(self, evaluation) -> None:
        sampled = evaluation.plant.is_sampled
        closed = evaluation.closed_loop
        movable = self.state.closed_loop_movable()
        open_loop = evaluation.open_loop
        open_movable = tuple(evaluation.structure.pole_movable)
        summary = (
            '<span class="gb-pass">closed loop stable</span>' if closed.stable
            else f'<span class="gb-fail">closed loop {closed.verdict}</span>'
        )
        margin_word = "largest |z|" if sampled else "slowest decay rate"
        html = [
            '<div class="gb-heading">closed-loop poles</div>',
            f'<div class="gb-note">{summary} · {margin_word}: {format_number(closed.stability_margin, 4)}</div>',
            _pole_table(closed.descriptions, movable, sampled, "closed"),
            '<div class="gb-heading">open-loop poles (K = 0)</div>',
            _pole_table(open_loop.descriptions, open_movable, sampled, "open"),
        ]
        if evaluation.messages:
            html.append('<div class="gb-heading">notes</div>')
            html.append('<div class="gb-note">' + "<br>".join(escape(m) for m in evaluation.messages) + "</div>")
        self.pane.object = "".join(html)


class ChecksTable:
    """Spec checks (required, achieved, pass/fail) and the loop margins."""

    def __init__(self, state):
        self.state = state
        self.pane = HtmlBox(css=TABLE_CSS, width=WIDTH, margin=(4, 5), name="checks_table")
        # the same specs over a plant family's operating points and its sampling (see show_family)
        self.family_pane = HtmlBox(css=TABLE_CSS, width=WIDTH, margin=(4, 5), name="checks_over_points")
        self.panel = pn.Column(self.pane.panel, self.family_pane.panel, margin=0)

    def show_family(self, over_points, sampling, sampling_is_current: bool, caution: str) -> None:
        """The specs' worst cases over the operating points and, after a sampling, their pass fractions."""
        if not over_points:
            self.family_pane.object = ""
            return
        rows = []
        for spec in over_points:
            label = escape(spec.name + (f" ({spec.subject})" if spec.subject else ""))
            verdict = "gb-pass" if spec.passed_points == spec.points else "gb-fail"
            rows.append(f'<tr><td>{label}</td><td class="num">{format_number(spec.required)}</td>'
                        f'<td class="num">{format_number(spec.worst_achieved)}</td><td>{escape(spec.worst_point)}</td>'
                        f'<td class="{verdict}">{spec.passed_points} of {spec.points}</td></tr>')
        html = ['<div class="gb-heading">over the operating points</div>',
                '<table class="gb-table gb-specs-over-points"><tr><th>spec</th><th>required</th><th>worst</th>'
                '<th>at</th><th>met at</th></tr>' + "".join(rows) + "</table>"]
        if sampling is not None:
            stale = "" if sampling_is_current else '<div class="gb-fail">K or the plant changed since this sampling.</div>'
            fractions = [("stable", sampling.stable), *sampling.spec_pass.items()]
            body = "".join(f'<tr><td>{escape(name)}</td><td class="num">{e.fraction:.4f}</td>'
                           f'<td class="num">[{e.interval[0]:.4f}, {e.interval[1]:.4f}]</td></tr>'
                           for name, e in fractions)
            html += [f'<div class="gb-heading">pass fractions of {sampling.samples} sampled models</div>', stale,
                     f'<table class="gb-table gb-pass-fractions"><tr><th>spec</th><th>fraction</th>'
                     f'<th>{sampling.stable.confidence:.0%} interval</th></tr>' + body + "</table>",
                     f'<div class="gb-small">{escape(caution)}</div>']
        self.family_pane.object = "".join(html)

    def refresh(self, evaluation) -> None:
        html = ['<div class="gb-heading">specs</div>']
        report = evaluation.spec_report
        pins = [(name, pin) for name, pin in self.state.pins if pin.plant is evaluation.plant]
        heads = "".join(f'<th class="gb-pin-column">{escape(name)}</th>' for name, _ in pins)
        if report is None or not report.checks:
            html.append('<div class="gb-note">This plant has no specs to check against.</div>')
        else:
            verdict = ('<span class="gb-pass">every spec met</span>' if report.all_passed
                       else '<span class="gb-fail">some specs not met</span>')
            html.append(f'<div class="gb-note">{verdict}</div>')
            rows = spec_check_rows(report, prefix="gb-", extra_columns=[_pinned_achieved(report, pin)
                                                                         for _, pin in pins])
            html.append('<table class="gb-table gb-specs"><tr><th>spec</th><th>required</th><th>achieved</th>'
                        f"<th>result</th>{heads}</tr>" + rows + "</table>")
        html.append('<div class="gb-heading">margins (loop broken at the plant input)</div>')
        if evaluation.margins is None and detail_options(self.state.detail).gesture:
            html.append('<div class="gb-note">Margins follow when the design is complete '
                        '(on release, or a moment after the page opens).</div>')
        else:
            html.append(_margins_html(evaluation.margins, [(name, pin.margins) for name, pin in pins]))
        if pins:
            html.append('<div class="gb-heading">this design beside the pins</div>')
            html.append(_comparison_html(evaluation, pins))
        others = len(self.state.pins) - len(pins)
        if others:
            html.append(f'<div class="gb-small">{others} pin(s) belong to another plant or time domain and are '
                        "not compared here.</div>")
        self.pane.object = "".join(html)


def _pinned_achieved(report, pin) -> list[str]:
    """The pin's achieved value for each check of ``report`` (matched by spec and subject), as cells."""
    found = {}
    if pin.spec_report is not None:
        found = {(c.description, c.subject): c for c in pin.spec_report.checks}
    cells = []
    for check in report.checks:
        other = found.get((check.description, check.subject))
        cells.append(format_number(other.achieved) if other is not None else "—")
    return cells


def _peak_and_settling(evaluation) -> tuple:
    """(slowest settling time, peak |u|) of the reference step (initial condition when there is none)."""
    responses = evaluation.responses
    response = responses.step if responses.step is not None else responses.initial
    if response is None:
        return None, None
    settling = max((m.settling_time for m in response.output_metrics), default=None)
    peak = max((m.peak_magnitude for m in response.input_metrics), default=None)
    return settling, peak


def _comparison_html(evaluation, pins) -> str:
    """Settling, peak effort and margins of the current design and of each pin, side by side."""
    designs = [("this design", evaluation), *pins]
    values = []
    for _, design in designs:
        settling, peak = _peak_and_settling(design)
        margins = design.margins
        values.append([settling, peak,
                       None if margins is None else margins.phase_margin_deg,
                       None if margins is None else margins.gain_margin_db_min,
                       None if margins is None else margins.disk_margin])
    labels = ["slowest settling, step (s)", "peak |u|, step", "phase margin (deg)", "smallest gain margin (dB)",
              "1/‖S‖∞ at the input"]
    head = "".join(f"<th>{escape(name)}</th>" for name, _ in designs)
    body = "".join(
        f"<tr><td>{label}</td>" + "".join(f'<td class="num">{format_number(v[row])}</td>' for v in values) + "</tr>"
        for row, label in enumerate(labels)
    )
    return f'<table class="gb-table gb-pin-comparison"><tr><th></th>{head}</tr>{body}</table>'


def _margins_html(margins, pins=()) -> str:
    """The margins table; ``pins``: (name, margins) of pinned designs, one more column each."""
    if margins is None:
        return '<div class="gb-note">Margins are not available for this design.</div>'
    if not margins.stable_nominal:
        return f'<div class="gb-note">The closed loop is unstable, so margins are not meaningful. {escape(margins.note)}</div>'
    rows = [
        ("gain margin, increase (dB)", "gain_margin_increase_db"),
        ("gain margin, decrease (dB)", "gain_margin_decrease_db"),
        ("phase margin (deg)", "phase_margin_deg"),
        ("crossover frequency (rad/s)", "crossover_frequency"),
        ("delay margin (s)", "delay_margin"),
        ("disk margin 1/‖S‖∞ at the input", "disk_margin"),
        ("peak input sensitivity ‖S‖∞", "peak_sensitivity"),
    ]

    def cell(source, field):
        value = getattr(source, field, None) if source is not None and source.stable_nominal else None
        return f'<td class="num">{format_number(value) if value is not None else "—"}</td>'

    head = ("<tr><th></th><th>this design</th>" + "".join(f"<th>{escape(name)}</th>" for name, _ in pins) + "</tr>"
            if pins else "")
    body = "".join(
        f"<tr><td>{label}</td>{cell(margins, field)}" + "".join(cell(pinned, field) for _, pinned in pins) + "</tr>"
        for label, field in rows
    )
    note = f'<div class="gb-small">{escape(margins.note)}</div>' if margins.note else ""
    scope = ("every input at once (disk margin); gain and phase margins one loop at a time"
             if margins.input_count > 1 else "single input")
    return f'<table class="gb-table gb-margins">{head}{body}</table><div class="gb-small">{scope}</div>{note}'
