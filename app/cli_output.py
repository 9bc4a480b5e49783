"""Turning core results into the command line's JSON records and readable tables.

The JSON keys are a contract (README, "Command line"); the tables are for people.
Complex numbers are written as ``[re, im]``; infinite or undefined numbers as ``null``.
"""

from __future__ import annotations

import dataclasses
import json
import math
import sys
import unicodedata

import numpy as np

from gainboard import core

from . import number_text


def json_value(value):
    """Convert numpy arrays, complex numbers and non-finite floats into plain JSON values."""
    if isinstance(value, dict):
        return {str(key): json_value(item) for key, item in value.items()}
    if isinstance(value, (list, tuple)):
        return [json_value(item) for item in value]
    if isinstance(value, np.ndarray):
        return [json_value(item) for item in value.tolist()]
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (complex, np.complexfloating)):
        return [json_value(float(value.real)), json_value(float(value.imag))]
    if isinstance(value, (float, np.floating)):
        value = float(value)
        return value if math.isfinite(value) else None
    if isinstance(value, np.integer):
        return int(value)
    return value


def complex_pairs(values) -> list:
    """Poles as ``[[re, im], ...]``."""
    return [json_value(complex(v)) for v in np.ravel(values)]


def printable(text: str) -> str:
    r"""``text`` safe to print on a terminal: control and format characters written as escapes.

    Names, units and notes come from plant and design files, which anyone may write; an
    ESC (or another C0/C1 control character) could move the cursor, recolour or rewrite
    earlier lines, and a bidirectional override could show text in another order than it
    is (the "Trojan Source" trick). Every character of Unicode category Cc (controls) or
    Cf (format: bidi overrides and isolates, zero-width characters) except newline and tab
    is written as ``\xNN`` or ``\uNNNN``.

    Examples
    --------
    >>> printable("cart\x1b[2J pendulum\u202e")
    'cart\\x1b[2J pendulum\\u202e'
    >>> printable("two\nlines")
    'two\nlines'
    """
    def shown(ch: str) -> str:
        if ch in "\n\t" or unicodedata.category(ch) not in ("Cc", "Cf"):
            return ch
        code = ord(ch)
        return f"\\x{code:02x}" if code < 0x100 else f"\\u{code:04x}" if code < 0x10000 else f"\\U{code:08x}"

    return "".join(shown(ch) for ch in text)


def emit(record: dict, as_json: bool, table) -> None:
    """Print ``record`` as JSON, or as the readable table made by ``table(record)``.

    JSON is written with ``ensure_ascii`` (every control and non-ASCII character as a
    ``\\u`` escape, the json module's default); a table goes through :func:`printable`.
    """
    if as_json:
        json.dump(json_value(record), sys.stdout, indent=2, allow_nan=False)
        sys.stdout.write("\n")
    else:
        sys.stdout.write(printable(table(json_value(record))))


def format_number(value, digits: int = 6) -> str:
    """A number for a table (plain text): ``inf``/``-inf`` for unbounded ends, ``—`` for undefined."""
    if isinstance(value, (list, tuple)) and len(value) == 2:
        return format_complex(value)
    return number_text.format_number(value, digits, plain=True)


def format_complex(pair, digits: int = 6) -> str:
    re, im = pair
    return number_text.format_complex(complex(re, im), digits, plain=True)


def format_interval(interval) -> str:
    low, high = interval
    low_text = "-inf" if low is None else format_number(low)
    high_text = "inf" if high is None else format_number(high)
    return f"({low_text}, {high_text})"


def matrix_rows(matrix) -> str:
    return "\n".join("  [" + ", ".join(format_number(v, 8) for v in row) + "]" for row in matrix)


# -- assign ------------------------------------------------------------------------------------


def assignment_record(plant, result) -> dict:
    return {
        "plant": plant.name,
        "sampled": plant.is_sampled,
        "sample_time": plant.sample_time,
        "K": result.gain,
        "poles": complex_pairs(result.achieved),
        "requested": complex_pairs(result.requested),
        "worst_error": result.worst_error,
        "method": result.method,
        "note": result.note,
        "state_order": list(plant.state_names),
        "input_order": list(plant.input_names),
    }


def assignment_table(record: dict) -> str:
    lines = [
        f"Plant: {record['plant']}" + (f" (sampled, T = {record['sample_time']} s)" if record["sampled"] else ""),
        f"Method: {record['method']}",
    ]
    if record["note"]:
        lines.append(f"Note: {record['note']}")
    lines.append("K (rows: " + ", ".join(record["input_order"]) + "; columns: " + ", ".join(record["state_order"]) + "):")
    lines.append(matrix_rows(record["K"]))
    lines.append(f"{'requested pole':>26}  {'achieved pole':>26}")
    for requested, achieved in zip(record["requested"], record["poles"]):
        lines.append(f"{format_complex(requested):>26}  {format_complex(achieved):>26}")
    lines.append(f"Worst placement error: {format_number(record['worst_error'], 3)}")
    return "\n".join(lines) + "\n"


def _verdict_words(verdict: str, stable: str, unstable: str) -> str:
    """The one stability verdict in words; a loop on the boundary is named as such, and not stable."""
    if verdict == core.ON_THE_BOUNDARY:
        return "ON THE BOUNDARY (a pole within rounding of the stability boundary: not stable)" \
            if stable.isupper() else "on the boundary: not stable"
    return stable if verdict == core.STABLE else unstable


# -- sweep -------------------------------------------------------------------------------------


def sweep_record(plant, gain, entry, intervals, locus=None) -> dict:
    """The record of ``gainboard sweep``; ``intervals`` is a :class:`gainboard.EntryIntervals` (snapped ends).

    ``"entry"`` counts from 1 as in k_ij; ``"locus"`` is there only when a locus is given.
    """
    row, col = entry
    record = {
        "plant": plant.name,
        "entry": [row + 1, col + 1],
        "entry_label": f"k{row + 1}{col + 1}: {plant.input_names[row]} from {plant.state_names[col]}",
        "current_value": float(gain[row, col]),
        "current_is_stable": intervals.current_is_stable,
        "current_verdict": intervals.current_verdict,
        "stable_intervals": [[low, high] for low, high in intervals.stable_intervals],
        "crossings": [
            {"gain": value, "point": json_value(complex(crossing.point))}
            for value, crossing in zip(intervals.crossing_gains, intervals.crossings)
        ],
        "never_stable_reason": intervals.never_stable_reason,
    }
    if locus is not None:
        record["locus"] = {
            "gains": locus.gains,
            "poles": [complex_pairs(row_of_poles) for row_of_poles in locus.poles],
            "start_poles": complex_pairs(locus.start_poles),
            "end_poles": complex_pairs(locus.end_poles),
        }
    return record


def sweep_table(record: dict) -> str:
    lines = [
        f"Plant: {record['plant']}",
        f"Entry {record['entry_label']} (current value {format_number(record['current_value'])}, "
        + _verdict_words(record["current_verdict"], "stable", "NOT stable")
        + ")",
    ]
    if record["stable_intervals"]:
        lines.append("Stable for values in: " + " ∪ ".join(format_interval(i) for i in record["stable_intervals"]))
    else:
        lines.append("Stable for no value of this entry. " + (record["never_stable_reason"] or ""))
    if record["crossings"]:
        lines.append("Boundary crossings (value: pole on the boundary):")
        for crossing in record["crossings"]:
            lines.append(f"  {format_number(crossing['gain'])}: {format_complex(crossing['point'])}")
    locus = record["locus"]
    lines.append(f"Locus from {format_number(locus['gains'][0])} to {format_number(locus['gains'][-1])} "
                 f"({len(locus['gains'])} points); use --json for the points.")
    return "\n".join(lines) + "\n"


# -- plants ------------------------------------------------------------------------------------


def plants_table(record: dict) -> str:
    lines = []
    for plant in record["plants"]:
        kind = "sampled" if plant["sampled"] else "continuous"
        lines.append(f"{plant['name']:<24} {plant['states']} states, {plant['inputs']} input(s), {kind}: {plant['summary']}")
    return "\n".join(lines) + "\n"


# -- evaluate ----------------------------------------------------------------------------------


def _worst(values, pick=max):
    """The worst of several per-output figures, ignoring undefined ones (None when all are undefined)."""
    finite = [v for v in values if v is not None and not (isinstance(v, float) and math.isnan(v))]
    return pick(finite) if finite else None


def response_record(response, outputs) -> dict | None:
    """Summary of one response: worst figures over ``outputs`` plus the per-output and per-input details.

    The top-level figures are the worst over the outputs considered (largest settling time,
    overshoot and rise time) and the largest peak |u| over the inputs, so a script can gate
    on one number; the lists keep every detail.
    """
    if response is None:
        return None
    metrics = [response.output_metrics[i] for i in outputs]
    efforts = response.input_metrics
    return {
        "settling_time": _worst(m.settling_time for m in metrics),
        "overshoot_percent": _worst(m.overshoot_percent for m in metrics),
        "rise_time": _worst(m.rise_time for m in metrics),
        "peak_effort": _worst(u.peak_magnitude for u in efforts),
        "limit_exceeded": any(v.exceeded for v in response.limit_violations),
        "outputs": [dataclasses.asdict(m) for m in metrics],
        "inputs": [dataclasses.asdict(u) for u in efforts],
        "limit_violations": [dataclasses.asdict(v) for v in response.limit_violations if v.exceeded],
    }


def evaluation_record(evaluation, specs_given: bool) -> dict:
    plant, responses = evaluation.plant, evaluation.responses
    every_output = range(plant.output_count)
    record = {
        "plant": plant.name,
        "sampled": plant.is_sampled,
        "sample_time": plant.sample_time,
        "K": evaluation.gain,
        "poles": complex_pairs(evaluation.closed_loop.poles),
        "pole_details": [
            {
                "pole": complex(d.value),
                "damping_ratio": d.damping_ratio,
                "natural_frequency": d.natural_frequency,
                "time_constant": d.time_constant,
                "stable": d.stable,
                "verdict": d.verdict,
            }
            for d in evaluation.closed_loop.descriptions
        ],
        "stable": evaluation.closed_loop.stable,
        "stability_verdict": evaluation.closed_loop.verdict,
        "on_boundary": evaluation.closed_loop.on_boundary,
        "boundary_tolerance": evaluation.closed_loop.boundary_tolerance,
        "stability_margin": evaluation.closed_loop.stability_margin,
        "controllable": evaluation.structure.controllable,
        "uncontrollable_poles": complex_pairs(evaluation.structure.uncontrollable_poles),
        "observable": evaluation.structure.observable,
        "diverging": responses.diverging,
        "initial": response_record(responses.initial, every_output),
        "step": response_record(responses.step, plant.tracked_outputs),
        "step_unavailable_reason": responses.step_unavailable_reason or None,
        "disturbance": response_record(responses.disturbance, every_output),
        "prefilter": responses.prefilter,
        "margins": dataclasses.asdict(evaluation.margins) if evaluation.margins is not None else None,
        "messages": list(evaluation.messages),
    }
    if evaluation.emulation is not None:
        record["sampled"] = emulation_record(evaluation.emulation)
    if specs_given and evaluation.spec_report is not None:
        report = evaluation.spec_report
        record["specs"] = {
            "all_passed": report.all_passed,
            "checks": [dataclasses.asdict(check) for check in report.checks],
        }
    return record


def emulation_record(emulation) -> dict:
    """``evaluate --sample-time``: the continuous K run through a ZOH (``sampled`` in the JSON).

    ``largest_stable_sample_time`` is null when no loss of stability was found up to
    ``searched_up_to`` seconds (or, with ``searched_up_to`` null, when the continuous design
    itself is unstable and nothing was searched).
    """
    check = emulation.check
    largest = emulation.largest_stable_sample_time
    return {
        "sample_time": emulation.sample_time,
        "poles": complex_pairs(emulation.sampled.closed_loop.poles),
        "stable": emulation.stable,
        "largest_stable_sample_time": None if largest is None or math.isinf(largest) else largest,
        "searched_up_to": check.searched_up_to,
        "equivalent_continuous_poles": complex_pairs(check.equivalent_continuous_poles),
        "worst_damping_change": check.worst_damping_change,
        "note": check.note,
    }


def evaluation_table(record: dict) -> str:
    sampled_plant = record["sampled"] is True
    lines = [
        f"Plant: {record['plant']}" + (f" (sampled, T = {record['sample_time']} s)" if sampled_plant else ""),
        "Closed loop: " + _verdict_words(record["stability_verdict"], "STABLE", "UNSTABLE")
        + ("" if record["controllable"] else "; uncontrollable poles: "
           + ", ".join(format_complex(p) for p in record["uncontrollable_poles"])),
        f"{'pole':>24}  {'damping':>8}  {'ωn (rad/s)':>10}  {'τ (s)':>10}",
    ]
    for detail in record["pole_details"]:
        lines.append(
            f"{format_complex(detail['pole']):>24}  {format_number(detail['damping_ratio'], 4):>8}  "
            f"{format_number(detail['natural_frequency'], 5):>10}  {format_number(detail['time_constant'], 5):>10}"
        )
    for kind in ("initial", "step", "disturbance"):
        summary = record[kind]
        if summary is None:
            if kind == "step" and record["step_unavailable_reason"]:
                lines.append(f"step: not available ({record['step_unavailable_reason']})")
            continue
        lines.append(
            f"{kind}: settling {format_number(summary['settling_time'], 4)} s, overshoot "
            f"{format_number(summary['overshoot_percent'], 4)} %, rise {format_number(summary['rise_time'], 4)} s, "
            f"peak |u| {format_number(summary['peak_effort'], 4)}" + ("  LIMIT EXCEEDED" if summary["limit_exceeded"] else "")
        )
    margins = record["margins"]
    if margins:
        if margins.get("gain_margin_db_min") is not None or margins.get("phase_margin_deg") is not None:
            lines.append(
                f"margins: gain {format_number(margins['gain_margin_db_min'], 4)} dB, "
                f"phase {format_number(margins['phase_margin_deg'], 4)}°, delay {format_number(margins['delay_margin'], 4)} s"
            )
        if margins.get("disk_margin") is not None:
            lines.append(f"disk margin: {format_number(margins['disk_margin'], 4)}")
        if margins.get("note"):
            lines.append(f"margins note: {margins['note']}")
    if "specs" in record:
        lines.append("specs: " + ("ALL PASS" if record["specs"]["all_passed"] else "FAIL"))
        for check in record["specs"]["checks"]:
            verdict = {True: "pass", False: "FAIL", None: "not evaluated"}[check["passed"]]
            lines.append(f"  {verdict:>13}  {check['description']}: required {format_number(check['required'], 4)}, "
                         f"achieved {format_number(check['achieved'], 4)}")
    if isinstance(record["sampled"], dict):
        lines.extend(_emulation_lines(record["sampled"]))
    lines.extend(f"note: {message}" for message in record["messages"])
    return "\n".join(lines) + "\n"


def _emulation_lines(sampled: dict) -> list[str]:
    largest, bound = sampled["largest_stable_sample_time"], sampled["searched_up_to"]
    if largest is not None:
        reach = f"stable for T up to {format_number(largest, 6)} s"
    elif bound is not None:
        reach = f"no loss of stability found for T up to {format_number(bound, 4)} s"
    else:
        reach = "the continuous design itself is unstable"
    return [
        f"sampled through a ZOH at T = {format_number(sampled['sample_time'])} s: "
        + ("STABLE" if sampled["stable"] else "UNSTABLE") + f"; {reach}",
        "  z-plane poles: " + ", ".join(format_complex(p) for p in sampled["poles"]),
    ]
