"""The spec checks as rows of an HTML table, shared by the workbench's checks table and the HTML report."""

from __future__ import annotations

from html import escape

from .number_text import format_number

__all__ = ["verdict_html", "spec_check_rows"]


def verdict_html(passed, prefix: str = "") -> str:
    """"pass", "fail" or "not evaluated" (None), in spans of class ``{prefix}pass`` and so on."""
    if passed is None:
        return f'<span class="{prefix}unknown">not evaluated</span>'
    return f'<span class="{prefix}pass">pass</span>' if passed else f'<span class="{prefix}fail">fail</span>'


def spec_check_rows(report, *, prefix: str = "", detail_column: bool = False, digits: int = 4,
                    extra_columns=()) -> str:
    """One ``<tr>`` per check: spec (subject), required, achieved, verdict; what decided it as a tooltip or a column.

    ``extra_columns``: more cells per row (each a list of texts, one per check), such as a pinned
    design's achieved values.

    Examples
    --------
    >>> from gainboard import core
    >>> specs = core.DesignSpecs(min_damping_ratio=0.5)
    >>> report = core.check_specs(specs, [-1 + 1j, -1 - 1j], None, None)
    >>> "pass" in spec_check_rows(report)
    True
    """
    rows = []
    for index, check in enumerate(report.checks):
        extra = "".join(f'<td class="num">{escape(column[index])}</td>' for column in extra_columns)
        subject = f" ({escape(check.subject)})" if check.subject else ""
        detail = f'<td class="small">{escape(check.detail)}</td>' if detail_column else ""
        rows.append(
            f'<tr title="{escape(check.detail)}"><td>{escape(check.description)}{subject}</td>'
            f'<td class="num">{escape(format_number(check.required, digits))}</td>'
            f'<td class="num">{escape(format_number(check.achieved, digits))}</td>'
            f"<td>{verdict_html(check.passed, prefix)}</td>{detail}{extra}</tr>"
        )
    return "".join(rows)
