"""The compensator's margins beside full-state feedback's, with a plain warning when they are much smaller.

Full-state feedback with K has the margins of the Checks table above; the loop that
really runs, u = −K x̂, has those of the compensator broken at the plant input. Both
come from the core (:func:`gainboard.core.evaluate_compensator`), as does the verdict.
"""

from __future__ import annotations

from html import escape

from ..theme import TABLE_CSS, format_number
from .html_box import HtmlBox

__all__ = ["CompensatorChecks"]

WIDTH = 440


def _cell(value, unit: str = "") -> str:
    if value is None:
        return "—"
    return escape(format_number(value, 4) + unit)


def _rows(full, compensator) -> list[tuple[str, str, str]]:
    rows = []
    for theirs, ours in zip(full.loop_at_a_time, compensator.loop_at_a_time):
        name = escape(ours.input_name)
        rows.append((f"gain margin at '{name}'", _cell(theirs.gain_margin_db_min, " dB"),
                     _cell(ours.gain_margin_db_min, " dB")))
        rows.append((f"phase margin at '{name}'", _cell(theirs.phase_margin_deg, "°"), _cell(ours.phase_margin_deg, "°")))
    rows.append(("disk margin (all inputs at once)", _cell(full.disk_margin), _cell(compensator.disk_margin)))
    return rows


class CompensatorChecks:
    """Margins of full-state feedback and of the compensator, side by side."""

    def __init__(self, state):
        self.state = state
        self.box = HtmlBox(css=TABLE_CSS, width=WIDTH, margin=(4, 5))
        self.panel = self.box.panel

    def refresh(self, evaluation) -> None:
        self.box.object = f"<div class='gb-compensator-checks'>{self._html()}</div>"

    def _html(self) -> str:
        compensator = self.state.estimator_evaluation
        if compensator is None:
            return ('<div class="gb-small">Margins with an estimator: add one (“Estimator L” above the '
                    "pole map) to see what the loop through x̂ really has.</div>")
        full, ours = compensator.state_feedback_margins, compensator.margins
        heading = "<div class='gb-heading'>margins at the plant input: full-state feedback vs. with the estimator</div>"
        if full is None or ours is None:
            text = " ".join(escape(m) for m in compensator.messages if "margins" in m) or "Margins follow on release."
            return heading + f"<div class='gb-small'>{text}</div>"
        if not ours.stable_nominal or not full.stable_nominal:
            table = ""
        else:
            body = "".join(f"<tr><td>{label}</td><td class='num'>{a}</td><td class='num'>{b}</td></tr>"
                           for label, a, b in _rows(full, ours))
            table = ("<table class='gb-table'><tr><th></th><th>full-state feedback</th><th>with the estimator</th></tr>"
                     f"{body}</table>")
        verdict = compensator.margin_comparison
        note = (f"<div class='gb-message gb-message-error'>{escape(verdict.warning)}</div>" if verdict.much_smaller
                else "<div class='gb-small'>The estimator keeps the margins close to full-state feedback's.</div>")
        separation = "" if compensator.closed_loop.separation_holds else (
            "<div class='gb-message gb-message-error'>The loop's poles differ from controller ∪ estimator poles "
            "by more than rounding: treat these numbers with care.</div>")
        return heading + table + note + separation
