"""The estimator on the command line: `gainboard estimator` and `evaluate --estimator-gain`.

Keys are a contract (README, "Command line"):

``gainboard estimator PLANT --poles "..." [--json]`` prints
``{"L", "poles", "worst_error", "method", "observable", "unobservable_poles", ...}``;
``--kalman [--process-noise W] [--measurement-noise V]`` prints the same keys plus
``"error_covariance"``. ``gainboard evaluate ... --estimator-gain L`` adds
``"compensator": {"poles", "stable", "margins", "initial", ...}`` beside the
full-state-feedback keys.
"""

from __future__ import annotations

import dataclasses
import json
from pathlib import Path

import numpy as np

from gainboard import core

from . import cli_output
from .theme import SAFETY_CAUTION

#: Options of this module whose value may start with '-' (see cli._join_negative_values).
VALUE_OPTIONS = ("--estimator-gain", "--process-noise", "--measurement-noise", "--initial-estimate")
#: ``core.ESTIMATOR_FORMS``, spelled out so that building the parser (``gainboard --help``) does not load
#: the estimator modules and scipy; tests/test_startup.py checks that the two stay equal.
ESTIMATOR_FORM_CHOICES = ("full-order", "prediction", "current", "reduced-order")


class EstimatorUsageError(core.GainboardError):
    """Bad estimator input on the command line (exit code 2, one line)."""


def _json_text(text: str, what: str, file_key: str | None):
    """JSON from inline text, or from a file (optionally under ``file_key``)."""
    source = text
    if not text.lstrip().startswith(("[", "{")) and not _looks_like_number(text):
        try:
            text = Path(text).read_text(encoding="utf-8")
        except OSError as error:
            raise EstimatorUsageError(f"cannot read {what} file {source!r}: {error.strerror or error}") from None
    try:
        data = json.loads(text)
    except json.JSONDecodeError as error:
        raise EstimatorUsageError(f"the {what} {source!r} is not valid JSON ({error.msg})") from None
    if isinstance(data, dict):
        if file_key is None or file_key not in data:
            raise EstimatorUsageError(f"the {what} file {source!r} has no key \"{file_key}\"; expected "
                                      f"{{\"{file_key}\": [[...]]}}")
        data = data[file_key]
    if any(isinstance(v, (bool, str)) for v in np.ravel(np.array(data, dtype=object))):
        raise EstimatorUsageError(f"the {what} must contain numbers only, got {data!r}")
    return data


def _looks_like_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def parse_estimator_gain(text: str, plant: core.Plant, form: str | None) -> np.ndarray:
    """L from an inline JSON array of rows or a JSON file ``{"L": [[...]]}``, checked against the plant."""
    return core.check_estimator_gain(plant, _json_text(text, "estimator gain", "L"), form)


def parse_noise(text: str | None, what: str):
    """A noise intensity from inline JSON: a matrix of rows, a flat list of variances or one number."""
    return None if text is None else _json_text(text, what, None)


def estimator_record(plant: core.Plant, result: core.EstimatorResult) -> dict:
    record = {
        "plant": plant.name,
        "sampled": plant.is_sampled,
        "sample_time": plant.sample_time,
        "L": result.gain,
        "poles": cli_output.complex_pairs(result.error_poles),
        "requested": None if result.requested is None else cli_output.complex_pairs(result.requested),
        "worst_error": result.worst_error,
        "method": result.method,
        "observable": result.observable,
        "unobservable_poles": cli_output.complex_pairs(result.unobservable_poles),
        "form": result.form,
        "design": result.design,
        "note": result.note,
        "state_order": list(plant.state_names),
        "output_order": list(plant.output_names),
        "caution": SAFETY_CAUTION,
    }
    if result.error_covariance is not None:
        record["error_covariance"] = result.error_covariance
        record["predicted_error_covariance"] = result.predicted_error_covariance
        record["process_noise"] = result.noise.process
        record["measurement_noise"] = result.noise.measurement
        record["noise_source"] = result.noise.source
        record["riccati_residual"] = result.riccati_residual
    return record


def estimator_table(record: dict) -> str:
    lines = [
        f"Plant: {record['plant']}" + (f" (sampled, T = {record['sample_time']} s)" if record["sampled"] else ""),
        f"Estimator: {record['form']}, {record['design']} ({record['method']})",
        f"Note: {record['note']}",
        "L (rows: " + ", ".join(record["state_order"]) + "; columns: " + ", ".join(record["output_order"]) + "):",
        cli_output.matrix_rows(record["L"]),
        "Estimator poles: " + ", ".join(cli_output.format_complex(p) for p in record["poles"]),
    ]
    if not record["observable"]:
        lines.append("Unobservable poles (no estimator moves them): "
                     + ", ".join(cli_output.format_complex(p) for p in record["unobservable_poles"]))
    if record["worst_error"] is not None:
        lines.append(f"Worst placement error: {cli_output.format_number(record['worst_error'], 3)}")
    if "error_covariance" in record:
        lines.append("Steady-state estimation-error covariance:")
        lines.append(cli_output.matrix_rows(record["error_covariance"]))
        lines.append(f"Noise: {record['noise_source']}; Riccati residual "
                     f"{cli_output.format_number(record['riccati_residual'], 3)}")
    lines.append(f"Caution: {record['caution']}")
    return "\n".join(lines) + "\n"


def command_estimator(args) -> int:
    from .cli import parse_gain, resolve_plant
    from .pole_list import parse_pole_list

    plant = resolve_plant(args.plant)
    if (args.poles is None) == (not args.kalman):
        raise EstimatorUsageError("give either --poles \"...\" (pole assignment) or --kalman (steady-state Kalman filter)")
    if not args.kalman and (args.process_noise or args.measurement_noise):
        raise EstimatorUsageError("--process-noise and --measurement-noise belong to --kalman")
    if args.kalman:
        result = core.design_kalman_estimator(
            plant, parse_noise(args.process_noise, "process noise"),
            parse_noise(args.measurement_noise, "measurement noise"), form=args.form)
    else:
        result = core.assign_estimator_poles(plant, parse_pole_list(args.poles), form=args.form)
    if args.save:
        if args.gain is None:
            raise EstimatorUsageError("--save needs --gain K as well: a design file holds the compensator u = -K x̂")
        from .design_file import Design, EstimatorDesign, save_design

        gain = parse_gain(args.gain, plant)
        settings = EstimatorDesign.from_result(result, poles=None if args.kalman else parse_pole_list(args.poles))
        design = Design(plant=plant, gain=gain, estimator=settings,
                        notes=f"Estimator by {result.method} ({result.form}).").with_gain(gain)
        save_design(design, args.save)
    cli_output.emit(estimator_record(plant, result), args.json, estimator_table)
    return 0


def add_estimator_command(commands, plant_help: str, gain_help: str) -> None:
    """Register `gainboard estimator` (called from cli.build_parser)."""
    estimator = commands.add_parser("estimator", help="compute the estimator (observer) gain L of the measured outputs")
    estimator.add_argument("plant", help=plant_help)
    estimator.add_argument("--poles", help='estimator poles, e.g. "-10,-11,-12,-13" (z values for sampled plants)')
    estimator.add_argument("--kalman", action="store_true", help="steady-state Kalman filter from noise intensities")
    estimator.add_argument("--process-noise", metavar="W",
                           help="process noise W as JSON: n×n rows or n variances (default: the plant's [noise], "
                                "else unit intensity)")
    estimator.add_argument("--measurement-noise", metavar="V",
                           help="measurement noise V as JSON: p×p rows or p variances (default: the plant's [noise], "
                                "else unit intensity)")
    estimator.add_argument("--form", choices=ESTIMATOR_FORM_CHOICES,
                           help="full-order (continuous, default), prediction (sampled, default), current (sampled) "
                                "or reduced-order")
    estimator.add_argument("--gain", help="K, needed with --save: " + gain_help)
    estimator.add_argument("--save", metavar="DESIGN", help="also write a design file with the plant, K and L")
    estimator.add_argument("--json", action="store_true", help="print JSON instead of a table")
    estimator.set_defaults(handler=command_estimator)


def add_evaluate_options(evaluate) -> None:
    """The estimator options of `gainboard evaluate` (called from cli.build_parser)."""
    evaluate.add_argument("--estimator-gain", metavar="L",
                          help='estimator gain L as an inline JSON array of rows or a JSON file {"L": [[...]]}: adds '
                               'the observer-based compensator u = -K x̂ to the output')
    evaluate.add_argument("--estimator-form", choices=ESTIMATOR_FORM_CHOICES, help="the form L belongs to")
    evaluate.add_argument("--initial-estimate", metavar="X",
                          help="estimate at the start of the initial response, e.g. 0,0,0,0 (default: zero)")


def compensator_record(evaluation: core.CompensatorEvaluation) -> dict:
    plant, responses = evaluation.plant, evaluation.responses
    every_output = range(plant.output_count)
    loop = evaluation.closed_loop
    initial = cli_output.response_record(responses.initial.loop, every_output)
    initial["largest_estimation_error"] = np.max(np.abs(responses.initial.estimation_errors), axis=0)
    return {
        "form": evaluation.form,
        "L": evaluation.estimator_gain,
        "poles": cli_output.complex_pairs(loop.report.poles),
        "stable": loop.report.stable,
        "estimator_poles": cli_output.complex_pairs(evaluation.estimator_poles.poles),
        "separation_holds": loop.separation_holds,
        "separation_error": loop.separation_error,
        "margins": dataclasses.asdict(evaluation.margins) if evaluation.margins is not None else None,
        "margins_much_smaller": evaluation.margin_comparison.much_smaller,
        "initial": initial,
        "initial_estimate": responses.initial_estimate,
        "step": None if responses.step is None else cli_output.response_record(responses.step.loop, plant.tracked_outputs),
        "disturbance": cli_output.response_record(responses.disturbance.loop, every_output),
        "messages": list(evaluation.messages),
    }


def compensator_table_lines(record: dict) -> list[str]:
    lines = ["Compensator (" + record["form"] + " estimator): "
             + ("STABLE" if record["stable"] else "UNSTABLE")
             + ("" if record["separation_holds"] else " — separation check FAILED")]
    lines.append("  estimator poles: " + ", ".join(cli_output.format_complex(p) for p in record["estimator_poles"]))
    margins = record["margins"]
    if margins:
        if margins.get("gain_margin_db_min") is not None:
            lines.append(f"  margins: gain {cli_output.format_number(margins['gain_margin_db_min'], 4)} dB, phase "
                         f"{cli_output.format_number(margins['phase_margin_deg'], 4)}°")
        if margins.get("disk_margin") is not None:
            lines.append(f"  disk margin: {cli_output.format_number(margins['disk_margin'], 4)}")
    initial = record["initial"]
    lines.append(f"  initial (wrong estimate): settling {cli_output.format_number(initial['settling_time'], 4)} s, "
                 f"peak |u| {cli_output.format_number(initial['peak_effort'], 4)}")
    lines.extend(f"  note: {message}" for message in record["messages"])
    return lines


def add_compensator_to_evaluation(args, plant: core.Plant, evaluation, record: dict) -> None:
    """With --estimator-gain, evaluate the compensator and add its record (the top-level keys stay full-state)."""
    if args.estimator_gain is None:
        if args.estimator_form or args.initial_estimate:
            raise EstimatorUsageError("--estimator-form and --initial-estimate need --estimator-gain")
        return
    from .cli import parse_vector

    L = parse_estimator_gain(args.estimator_gain, plant, args.estimator_form)
    n = plant.state_count
    estimate = parse_vector(args.initial_estimate, n, "--initial-estimate") if args.initial_estimate else None
    start = parse_vector(args.x0, n, "--x0") if args.x0 else None
    options = core.EstimatorOptions(form=args.estimator_form, initial_estimate=estimate, initial_state=start,
                                    horizon=args.horizon, include_all_entry_intervals=False)
    compensator = core.evaluate_compensator(plant, evaluation.gain, L, options,
                                            state_feedback_margins=evaluation.margins)
    record["compensator"] = compensator_record(compensator)


def evaluation_table(record: dict) -> str:
    """The evaluate table, with the compensator's lines when --estimator-gain was given."""
    text = cli_output.evaluation_table(record)
    if "compensator" in record:
        text += "\n".join(compensator_table_lines(record["compensator"])) + "\n"
    return text
