"""`gainboard robustness`: one K judged on every operating point and on a Monte Carlo sampling.

The JSON keys are a contract (README, "Command line"). Exit codes: 0 every operating point is
stable and meets the given specs, and the stable fraction reaches the required one; 1 otherwise;
2 bad input (reported by the command line's main on one line).
"""

from __future__ import annotations

import dataclasses
import math
import sys

from gainboard import core

from .cli_output import complex_pairs, emit, format_interval, format_number

DEFAULT_SAMPLES = 10_000
DEFAULT_SEED = 0


def add_robustness_parser(commands, plant_help: str, gain_help: str) -> None:
    """Register the ``robustness`` command on the command line's sub-parsers."""
    parser = commands.add_parser(
        "robustness",
        help="judge K on every operating point of a plant family and on a Monte Carlo sampling of its parameters",
    )
    parser.add_argument("plant", help=plant_help + " with [parameters] and/or [[operating_points]]")
    parser.add_argument("--gain", required=True, help=gain_help)
    parser.add_argument("--samples", type=int, default=DEFAULT_SAMPLES,
                        help=f"number of parameter samples (default {DEFAULT_SAMPLES})")
    parser.add_argument("--seed", type=int, default=DEFAULT_SEED,
                        help=f"seed of the sampling; the same seed gives the same figures (default {DEFAULT_SEED})")
    parser.add_argument("--specs", help="spec file (TOML) to check against (default: the plant file's [specs])")
    parser.add_argument("--scheduler", metavar="ADDRESS",
                        help="address of a running Dask scheduler (tcp://host:8786) to sample on; default: in "
                             "this process for short runs, else a local cluster started and stopped for the run")
    parser.add_argument("--require-stable-fraction", type=float, metavar="F",
                        help="exit 1 when the sampled stable fraction is below F (0..1)")
    parser.add_argument("--json", action="store_true", help="print JSON instead of a table")
    parser.set_defaults(handler=command_robustness)


def _load_family(reference: str) -> core.PlantFamily:
    from gainboard.sample_plants import resolve_plant_reference

    path, _ = resolve_plant_reference(reference)
    return core.load_plant_family_file(path)


def _progress_bar(total: int):
    """A progress bar on stderr, shown only for a run longer than half a second."""
    from tqdm import tqdm

    bar = tqdm(total=total, unit="sample", unit_scale=True, file=sys.stderr, delay=0.5, leave=False,
               desc="sampling")

    def update(done: int, _total: int) -> None:
        bar.update(done - bar.n)

    return bar, update


def command_robustness(args) -> int:
    from .cli import UsageError, parse_gain

    family = _load_family(args.plant)
    gain = parse_gain(args.gain, family.nominal)
    specs = core.load_specs_file(args.specs) if args.specs else family.nominal.specs
    required = args.require_stable_fraction
    if required is not None and not (math.isfinite(required) and 0.0 <= required <= 1.0):
        raise UsageError(f"--require-stable-fraction must lie between 0 and 1, got {required}")

    points = core.evaluate_operating_points(family, gain, specs=specs)
    needs_margins = core.margins_needed(specs)
    result, where, note = None, None, ""
    if family.varying_parameters:
        plan = core.plan_monte_carlo(family, gain, samples=args.samples, seed=args.seed, specs=specs,
                                     include_margins=needs_margins)
        bar, update = _progress_bar(plan.samples)
        try:
            result, where = core.run_monte_carlo_where_fastest(plan, scheduler=args.scheduler, progress=update)
        finally:
            bar.close()
    else:
        note = "no parameter has a range or a spread, so nothing was sampled; the operating points were judged exactly"
    record = robustness_record(family, gain, points, result, where, note, specs is not None)
    emit(record, args.json, robustness_table)
    failed_point = not points.all_stable or (specs is not None and points.all_specs_passed is False)
    too_few = required is not None and (result is None or result.stable.fraction < required)
    return 1 if failed_point or too_few else 0


def _fraction(estimate: core.FractionEstimate) -> dict:
    return {"fraction": estimate.fraction, "interval": list(estimate.interval), "passed": estimate.successes,
            "samples": estimate.trials}


def _boundary_record(family: core.PlantFamily, boundary: core.ParameterBoundary) -> dict:
    return {
        "unit": family.parameter(boundary.name).unit,
        "range": list(boundary.searched_range),
        "nominal": family.parameter(boundary.name).nominal,
        "nominal_stable": boundary.nominal_stable,
        "boundaries": list(boundary.boundaries),
        "brackets": [list(b) for b in boundary.brackets],
        "stable_intervals": [list(i) for i in boundary.stable_intervals],
        "nearest_below": boundary.nearest_below,
        "nearest_above": boundary.nearest_above,
        "note": boundary.note,
    }


def robustness_record(family, gain, points, result, where, note: str, specs_given: bool) -> dict:
    """The JSON record of a robustness run (keys documented in the README)."""
    record = {
        "plant": family.nominal.name,
        "K": gain,
        "samples": result.samples if result else 0,
        "seed": result.seed if result else None,
        "confidence": result.stable.confidence if result else None,
        "stable_fraction": result.stable.fraction if result else None,
        "stable_fraction_interval": list(result.stable.interval) if result else None,
        "spec_pass_fraction": {name: _fraction(e) for name, e in result.spec_pass.items()} if result else {},
        "specs_not_sampled": dict(result.specs_not_sampled) if result else {},
        "worst": {
            figure: {"value": sample.value, "sample": sample.index, "parameters": sample.parameters}
            for figure, sample in (result.worst.items() if result else ())
        },
        "failed_samples": result.failed_samples if result else 0,
        "failed_examples": [
            {"sample": index, "parameters": values, "entry": entry}
            for index, values, entry in (result.failed_examples if result else ())
        ],
        "on_boundary_samples": result.on_boundary if result else 0,
        "operating_points": [
            {
                "name": point.name,
                "values": point.values,
                "stable": point.stable,
                "stability_margin": point.evaluation.closed_loop.stability_margin,
                "poles": complex_pairs(point.poles),
                "margins": dataclasses.asdict(point.evaluation.margins) if point.evaluation.margins else None,
                "specs": ({"all_passed": point.evaluation.spec_report.all_passed,
                           "checks": [dataclasses.asdict(c) for c in point.evaluation.spec_report.checks]}
                          if specs_given and point.evaluation.spec_report is not None else None),
                "peak_effort": list(point.peak_effort),
            }
            for point in points.points
        ],
        "parameter_boundaries": {
            name: _boundary_record(family, boundary)
            for name, boundary in (result.parameter_boundaries.items() if result else
                                   core.parameter_boundaries(family, gain).items())
        },
        "executed_on": where,
        "note": note,
        "caution": core.SAMPLING_CAUTION,
    }
    return record


def robustness_table(record: dict) -> str:
    """The record for people."""
    lines = [f"Plant: {record['plant']}", "", "Operating points:"]
    for point in record["operating_points"]:
        verdict = "stable" if point["stable"] else "NOT stable"
        specs = point["specs"]
        spec_text = "" if specs is None else ("; specs met" if specs["all_passed"] else "; specs NOT met")
        lines.append(f"  {point['name']}: {verdict} (stability margin {format_number(point['stability_margin'])})"
                     f"{spec_text}")
    if record["samples"]:
        low, high = record["stable_fraction_interval"]
        lines += ["", f"Monte Carlo: {record['samples']} samples, seed {record['seed']} ({record['executed_on']})",
                  f"  stable fraction {record['stable_fraction']:.4f}, "
                  f"{record['confidence']:.0%} confidence interval [{low:.4f}, {high:.4f}]"]
        for name, fraction in record["spec_pass_fraction"].items():
            lo, hi = fraction["interval"]
            lines.append(f"  {name}: pass fraction {fraction['fraction']:.4f} [{lo:.4f}, {hi:.4f}]")
        for name, reason in record["specs_not_sampled"].items():
            lines.append(f"  {name}: {reason}")
        for figure, worst in record["worst"].items():
            values = ", ".join(f"{k} = {format_number(v)}" for k, v in worst["parameters"].items())
            lines.append(f"  worst {figure}: {format_number(worst['value'])} at sample {worst['sample']} ({values})")
        if record["failed_samples"]:
            lines.append(f"  {record['failed_samples']} samples could not be evaluated (counted as not stable), e.g. "
                         f"{record['failed_examples'][0]['entry']} at {record['failed_examples'][0]['parameters']}")
    elif record["note"]:
        lines += ["", record["note"]]
    if record["parameter_boundaries"]:
        lines += ["", "Stable ranges of each parameter, the others at nominal:"]
        for name, boundary in record["parameter_boundaries"].items():
            stable = " ∪ ".join(format_interval(i) for i in boundary["stable_intervals"]) or "none"
            lines.append(f"  {name} in {format_interval(boundary['range'])} {boundary['unit']}: stable for {stable}")
    lines += ["", record["caution"]]
    return "\n".join(lines) + "\n"
