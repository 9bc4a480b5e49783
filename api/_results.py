"""Results of the Python API: the core's result with its plant, a short summary and the CLI's record.

Each class wraps one core result (every attribute of it stays readable, e.g. ``result.gain``)
and adds:

- ``repr()``: a summary that fits on one screen (never the whole plant);
- ``_repr_html_()``: the same summary as a compact table for notebooks;
- ``to_dict()``: exactly the JSON record that the command line prints with ``--json``
  (the command line calls ``to_dict()`` itself, so the two cannot drift apart). The record
  follows the command line's contract: complex numbers as ``[re, im]``, non-finite numbers as
  ``None`` and gain entries counted from 1 (key ``"entry"``); attributes stay 0-based.
"""

from __future__ import annotations

import html

import numpy as np

__all__ = ["Assignment", "Evaluation", "EntryIntervals", "snap_to_zero"]


def _text(value) -> str:
    if isinstance(value, np.ndarray) and value.ndim == 2:
        return np.array2string(value, precision=6, max_line_width=96, threshold=200)
    if isinstance(value, (np.ndarray, list, tuple)):
        return ", ".join(_text(item) for item in np.ravel(np.asarray(value, dtype=object))) or "—"
    if isinstance(value, (complex, np.complexfloating)):
        value = complex(value)
        if value.imag == 0:
            return f"{value.real:.6g}"
        return f"{value.real:.6g}{value.imag:+.6g}j"
    if isinstance(value, (float, np.floating)):
        return f"{float(value):.6g}"
    return str(value)


class _Result:
    """Shared behaviour: attribute access falls through to the core result; summaries from ``_rows``."""

    _title = "result"

    def __init__(self, plant, result):
        self.plant = plant
        self.result = result

    def __getattr__(self, name):
        if name in ("plant", "result") or name.startswith("__"):
            raise AttributeError(name)
        return getattr(self.result, name)

    def _rows(self) -> list[tuple[str, object]]:  # pragma: no cover - every subclass defines it
        raise NotImplementedError

    def to_dict(self) -> dict:
        """The command line's JSON record of this result (plain lists, floats, strings, None)."""
        from gainboard.app.cli_output import json_value

        return json_value(self._record())

    def __repr__(self) -> str:
        lines = [f"{self._title} — {self.plant.name}"]
        for label, value in self._rows():
            text = _text(value)
            if "\n" in text:
                lines.append(f"  {label}:")
                lines.extend("    " + line for line in text.splitlines())
            else:
                lines.append(f"  {label}: {text}")
        return "\n".join(lines)

    def _repr_html_(self) -> str:
        cells = "".join(
            f"<tr><th style='text-align:left'>{html.escape(label)}</th>"
            f"<td style='text-align:left'><pre style='margin:0'>{html.escape(_text(value))}</pre></td></tr>"
            for label, value in self._rows()
        )
        return f"<table><caption>{html.escape(self._title)} — {html.escape(self.plant.name)}</caption>{cells}</table>"


class Assignment(_Result):
    """K from pole assignment (:func:`gainboard.assign_poles`), with the plant it was computed for."""

    _title = "pole assignment"

    def _record(self) -> dict:
        from gainboard.app.cli_output import assignment_record

        return assignment_record(self.plant, self.result)

    def _rows(self):
        result = self.result
        rows = [("method", result.method), ("K", np.asarray(result.gain)),
                ("achieved poles", result.achieved), ("worst placement error", result.worst_error)]
        if result.note:
            rows.append(("note", result.note))
        return rows


class Evaluation(_Result):
    """Everything known about a design (:func:`gainboard.evaluate_design`): poles, responses, margins, specs."""

    _title = "design evaluation"

    def __init__(self, result):
        super().__init__(result.plant, result)

    def _record(self) -> dict:
        from gainboard.app.cli_output import evaluation_record

        return evaluation_record(self.result, specs_given=True)

    def _rows(self):
        result = self.result
        loop = result.closed_loop
        rows = [("closed loop", "stable" if loop.stable else "UNSTABLE"), ("poles", loop.poles),
                ("stability margin", loop.stability_margin)]
        step = result.responses.step
        if step is not None:
            settling = [m.settling_time for i, m in enumerate(step.output_metrics) if i in self.plant.tracked_outputs]
            rows.append(("step settling time (s)", max(settling) if settling else None))
        if result.spec_report is not None:
            failed = [check.description for check in result.spec_report.checks if check.passed is False]
            rows.append(("specs", "all pass" if result.spec_report.all_passed else "FAIL: " + "; ".join(failed)))
        rows.extend(("note", message) for message in result.messages[:3])
        return rows


def snap_to_zero(value: float, tolerance: float) -> float:
    """``0.0`` for a finite ``value`` with ``|value| <= tolerance``, else ``value`` unchanged.

    The ends of a stable interval are only resolved to the core's ``gain_tolerance``
    (crossings closer than it are one crossing), so an end within it of 0 — typically
    ±1e-16 from round-off where the exact end is 0 — is reported as exactly 0.
    """
    return 0.0 if np.isfinite(value) and abs(value) <= tolerance else value


class EntryIntervals(_Result):
    """Exact stable intervals of one gain entry (:func:`gainboard.entry_stable_intervals`).

    ``entry`` is (row, col), 0-based. ``stable_intervals`` and the crossing gains are the
    core's with ends within ``gain_tolerance`` of 0 snapped to exactly 0 (see :func:`snap_to_zero`).
    """

    _title = "stable intervals of one gain entry"

    def __init__(self, plant, gain, result):
        super().__init__(plant, result)
        self.gain = np.asarray(gain, dtype=float)

    @property
    def stable_intervals(self) -> tuple[tuple[float, float], ...]:
        tolerance = self.result.gain_tolerance
        return tuple((snap_to_zero(low, tolerance), snap_to_zero(high, tolerance)) for low, high in self.result.intervals)

    @property
    def crossing_gains(self) -> tuple[float, ...]:
        return tuple(snap_to_zero(c.gain, self.result.gain_tolerance) for c in self.result.crossings)

    def contains(self, value: float) -> bool:
        """True when ``value`` lies inside one of the (open, snapped) stable intervals."""
        return any(low < value < high for low, high in self.stable_intervals)

    def _record(self, locus=None) -> dict:
        from gainboard.app.cli_output import sweep_record

        return sweep_record(self.plant, self.gain, self.result.entry, self, locus)

    def to_dict(self, locus=None) -> dict:
        """The record of ``gainboard sweep --json``; the ``"locus"`` key only when a locus is given.

        ``"entry"`` in the record counts from 1 as in k_ij (the command line's contract).
        """
        from gainboard.app.cli_output import json_value

        return json_value(self._record(locus))

    def _rows(self):
        row, col = self.result.entry
        intervals = " ∪ ".join(f"({_text(low)}, {_text(high)})" for low, high in self.stable_intervals) or "none"
        return [("entry (0-based)", f"K[{row}, {col}]: {self.plant.input_names[row]} from {self.plant.state_names[col]}"),
                ("current value", f"{_text(self.result.current_value)} "
                                  f"({'stable' if self.result.current_is_stable else 'NOT stable'})"),
                ("stable for", intervals)]
