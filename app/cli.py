"""The `gainboard` command line.

A contract for scripts and CI jobs: command names, options and JSON keys are
kept stable (see the README). Exit codes: 0 success (and every given spec met),
1 a given spec failed, 2 bad input or an impossible request — with one line on
stderr and never a traceback.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
from pathlib import Path

import numpy as np

import gainboard
from gainboard import core

from . import cli_estimator, cli_output
from .pole_list import parse_pole_list
from .robustness_command import add_robustness_parser

#: Options whose value may start with '-' (negative poles, gains, states).
_VALUE_OPTIONS = ("--poles", "--gain", "--x0", "--entry", "--range") + cli_estimator.VALUE_OPTIONS


#: Environment variables by which a user sets the BLAS thread count (respected by `serve`).
_BLAS_THREAD_VARIABLES = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")


class UsageError(Exception):
    """Bad command-line input; reported on one line with exit code 2."""


# -- parsing helpers ---------------------------------------------------------------------------


def _join_negative_values(argv: list[str]) -> list[str]:
    """Let ``--poles -2+4j,-2-4j`` through: argparse would read the value as an option."""
    joined, index = [], 0
    while index < len(argv):
        token = argv[index]
        if token in _VALUE_OPTIONS and index + 1 < len(argv):
            joined.append(f"{token}={argv[index + 1]}")
            index += 2
        else:
            joined.append(token)
            index += 1
    return joined


#: What standard input ("-") was given to, so a second reader is refused instead of reading nothing.
_stdin_reader: list[str] = []


def read_standard_input(what: str) -> str:
    """The whole of standard input, for the one argument given as ``-``."""
    if _stdin_reader:
        raise UsageError(f"standard input is already the {_stdin_reader[0]}; give the {what} as a file")
    _stdin_reader.append(what)
    return sys.stdin.read()


def _json_document(text: str, source: str):
    try:
        return json.loads(text)
    except json.JSONDecodeError as error:
        raise UsageError(f"{source} is not valid JSON ({error.msg} at line {error.lineno})") from None


def plant_from_text(text: str, source: str) -> core.Plant:
    """A plant from plant-file text: TOML, a JSON plant (the same keys as the TOML) or a design file."""
    if not text.lstrip().startswith("{"):
        return core.parse_plant_text(text, source)
    data = _json_document(text, source)
    if not isinstance(data, dict):
        raise UsageError(f"{source} must be a JSON object with the keys of a plant file")
    from .design_file import DESIGN_FORMAT, design_from_json
    from .export import GAIN_EXPORT_FORMAT

    if data.get("format") == DESIGN_FORMAT:
        design = design_from_json(text, source)
        return design.plant.with_changes(specs=design.effective_specs)  # gate on the design's own specs
    if data.get("format") == GAIN_EXPORT_FORMAT:
        raise UsageError(f"{source} is an exported gain file, not a plant; give it with --gain")
    return core.plant_from_mapping(data, source)


def resolve_plant(reference: str) -> core.Plant:
    """Load a plant from ``-`` (standard input), a file (TOML, JSON plant or design file) or a bundled name."""
    if reference == "-":
        return plant_from_text(read_standard_input("plant"), "the plant on standard input")
    if reference.lower().endswith(".json"):
        path = Path(reference)
        try:
            text = path.read_text(encoding="utf-8")
        except OSError as error:
            raise UsageError(f"cannot read plant file {reference!r}: {error.strerror or error}") from None
        return plant_from_text(text, f"plant file {reference!r}")
    from gainboard.sample_plants import resolve_plant_reference

    path, _ = resolve_plant_reference(reference)
    return core.load_plant_file(path)


def resolve_model(args) -> core.Plant:
    """The plant of ``args.plant``: its nominal model, or the model of ``--operating-point NAME``."""
    name = getattr(args, "operating_point", None)
    if name is None:
        return resolve_plant(args.plant)
    if args.plant == "-" or args.plant.lower().endswith(".json"):
        raise UsageError("--operating-point needs a TOML plant file with [[operating_points]]")
    from gainboard.sample_plants import resolve_plant_reference

    path, _ = resolve_plant_reference(args.plant)
    return core.load_plant_family_file(path).model(name).plant


def _check_state_order(given, plant: core.Plant, source: str, what: str = "states") -> None:
    """Refuse a gain whose state (or input) order is not the plant's: K of one plant must not run on another."""
    expected = list(plant.state_names if what == "states" else plant.input_names)
    given = [str(name) for name in given]
    if given != expected:
        raise UsageError(
            f"the gain in {source} is for the {what} [{', '.join(given)}] ({len(given)}), but the plant "
            f"{plant.name!r} has the {what} [{', '.join(expected)}] ({len(expected)}); use a gain designed for this plant"
        )


def parse_gain(text: str, plant: core.Plant) -> np.ndarray:
    """Read K: inline JSON rows, ``-`` (standard input) or a file: ``{"K": ...}``, an exported gain file or a design file.

    Exported gain files and design files name their state order; it must be the plant's.
    """
    source = "standard input" if text == "-" else repr(text)
    if text == "-":
        text = read_standard_input("gain")
    elif not text.lstrip().startswith(("[", "{")):
        path = Path(text)
        try:
            text = path.read_text(encoding="utf-8")
        except OSError as error:
            raise UsageError(f"cannot read gain file {source}: {error.strerror or error}") from None
        source = f"gain file {source}"
    try:
        data = json.loads(text)
    except json.JSONDecodeError as error:
        raise UsageError(f"the gain {source} is not valid JSON ({error.msg}); give [[k11, k12, ...]] or a file with {{\"K\": ...}}") from None
    if isinstance(data, dict):
        from .design_file import DESIGN_FORMAT, design_from_json

        if data.get("format") == DESIGN_FORMAT:
            design = design_from_json(text, source)
            _check_state_order(design.plant.state_names, plant, source)
            _check_state_order(design.plant.input_names, plant, source, "inputs")
            return plant.check_gain(design.gain)
        if "K" not in data:
            raise UsageError(f"the gain {source} has no key \"K\"; expected {{\"K\": [[...]]}}, an exported gain file or a design file")
        if "state_order" in data:
            _check_state_order(data["state_order"], plant, source)
        if "input_order" in data:
            _check_state_order(data["input_order"], plant, source, "inputs")
        data = data["K"]
    if not isinstance(data, list) or any(isinstance(v, (bool, str)) for v in np.ravel(np.array(data, dtype=object))):
        raise UsageError(f"the gain must be a list of rows of numbers such as [[199, 55, 8]], got {data!r}")
    return plant.check_gain(data)


def parse_vector(text: str, length: int, what: str) -> np.ndarray:
    """Parse a comma-separated or JSON list of ``length`` numbers."""
    cleaned = text.strip().strip("[]")
    try:
        values = [float(v) for v in cleaned.split(",") if v.strip()]
    except ValueError:
        raise UsageError(f"{what} must be {length} numbers separated by commas, got {text!r}") from None
    if len(values) != length or not all(math.isfinite(v) for v in values):
        raise UsageError(f"{what} must be {length} finite numbers (one per state), got {len(values)}: {text!r}")
    return np.array(values)


def parse_entry(text: str, plant: core.Plant) -> tuple[int, int]:
    """Parse ``ROW,COL`` counted from 1 (as in k_ij) into zero-based indices, checked against K's shape."""
    try:
        row, col = (int(v) for v in text.split(","))
    except ValueError:
        raise UsageError(f"--entry must be ROW,COL counted from 1 such as 1,2; got {text!r}") from None
    m, n = plant.input_count, plant.state_count
    if not (1 <= row <= m and 1 <= col <= n):
        raise UsageError(f"entry {row},{col} is outside K, which is {m}×{n} (rows 1..{m}, columns 1..{n})")
    return row - 1, col - 1


def parse_range(text: str) -> tuple[float, float]:
    """Parse ``LOW,HIGH`` into a sweep range."""
    try:
        low, high = (float(v) for v in text.split(","))
    except ValueError:
        raise UsageError(f"--range must be LOW,HIGH such as -10,50; got {text!r}") from None
    if not (math.isfinite(low) and math.isfinite(high) and low < high):
        raise UsageError(f"--range needs finite LOW < HIGH, got {text!r}")
    return low, high


# -- commands ----------------------------------------------------------------------------------


def _save_design_if_asked(args, plant: core.Plant, gain: np.ndarray, notes: str) -> None:
    if getattr(args, "save", None):
        from .design_file import Design, save_design

        design = Design(plant=plant, gain=gain, notes=notes).with_gain(gain)
        save_design(design, args.save)


def command_assign(args) -> int:
    plant = resolve_plant(args.plant)
    result = gainboard.assign_poles(plant, parse_pole_list(args.poles))
    _save_design_if_asked(args, plant, result.gain, f"Poles assigned by {result.method}: {args.poles}")
    cli_output.emit(result.to_dict(), args.json, cli_output.assignment_table)
    return 0


def command_evaluate(args) -> int:
    plant = resolve_model(args)
    gain = parse_gain(args.gain, plant)
    specs = core.load_specs_file(args.specs) if args.specs else plant.specs
    x0 = parse_vector(args.x0, plant.state_count, "--x0") if args.x0 else None
    if args.horizon is not None and not (math.isfinite(args.horizon) and args.horizon > 0):
        raise UsageError(f"--horizon must be a positive number of seconds, got {args.horizon}")
    sample_time = args.sample_time
    if sample_time is not None:
        if not (math.isfinite(sample_time) and sample_time > 0):
            raise UsageError(f"--sample-time must be a positive, finite number of seconds, got {sample_time}")
        if plant.is_sampled:
            raise UsageError(f"--sample-time checks a continuous design run through a hold, but {plant.name!r} is "
                             f"already sampled (T = {plant.sample_time:g} s)")
    options = core.EvaluationOptions(
        selected_entry=None,
        initial_state=x0,
        horizon=args.horizon,
        specs=specs,
        include_all_entry_intervals=False,
        emulation_sample_time=sample_time,
    )
    evaluation = gainboard.evaluate_design(plant, gain, options)
    record = evaluation.to_dict()
    cli_estimator.add_compensator_to_evaluation(args, plant, evaluation, record)
    cli_output.emit(record, args.json, cli_estimator.evaluation_table)
    spec_report = evaluation.spec_report
    return 1 if spec_report is not None and not spec_report.all_passed else 0


def command_sweep(args) -> int:
    plant = resolve_model(args)
    gain = parse_gain(args.gain, plant)
    row, col = parse_entry(args.entry, plant)
    intervals = gainboard.entry_stable_intervals(plant, gain, row, col)
    low, high = parse_range(args.range) if args.range else core.default_entry_range(plant, gain, row, col)
    locus = core.entry_locus(plant, gain, row, col, low, high)
    record = intervals.to_dict(locus)
    cli_output.emit(record, args.json, cli_output.sweep_table)
    return 0


def command_export(args) -> int:
    from .design_file import design_from_json, load_design, write_text_atomically
    from .export import export_design

    if args.design == "-":
        design = design_from_json(read_standard_input("design"), "the design on standard input")
    else:
        design = load_design(args.design)
    text = export_design(design, args.format, sample_time=args.sample_time, sampled_form=args.sampled_form,
                         prefix=args.prefix)
    if args.output and args.output != "-":
        write_text_atomically(Path(args.output), text)
    else:
        sys.stdout.write(text)
    return 0


def command_plants(args) -> int:
    from gainboard.sample_plants import bundled_plant_files

    records = []
    for stem, path in sorted(bundled_plant_files().items()):
        plant = core.load_plant_file(path)
        records.append(
            {
                "name": stem,
                "title": plant.name,
                "summary": plant.summary,
                "states": plant.state_count,
                "inputs": plant.input_count,
                "sampled": plant.is_sampled,
                "path": str(path),
            }
        )
    cli_output.emit({"plants": records}, args.json, cli_output.plants_table)
    return 0


def limit_blas_to_one_thread() -> None:
    """Single-threaded BLAS for the server process, unless the user chose a thread count.

    Plants are small (n ≲ 50): multi-threaded BLAS only adds thread hand-off cost on such
    matrices (measured: one workbench evaluation 440–775 ms threaded vs 140–250 ms single-threaded
    on a busy 2-core machine). Only ``gainboard serve`` does this, in its own process, with
    threadpoolctl (numpy is already loaded here); importing gainboard never does.
    """
    if any(variable in os.environ for variable in _BLAS_THREAD_VARIABLES):
        return
    from threadpoolctl import threadpool_limits

    threadpool_limits(limits=1, user_api="blas")
    # Worker processes started by the server inherit the choice before their numpy loads.
    os.environ.update(dict.fromkeys(_BLAS_THREAD_VARIABLES, "1"))


def command_serve(args) -> int:
    from .access import access_settings
    from .server import serve_workbench

    limit_blas_to_one_thread()

    # Refuse a server without a login on a non-loopback address, and a broken plant, before starting.
    access_settings(args.address, password_file=args.password_file, token=args.token,
                    cookie_secret_file=args.cookie_secret_file, require_login=args.require_login)
    if args.plant is not None:
        resolve_plant(args.plant)
    serve_workbench(args.plant, address=args.address, port=args.port, show=not args.no_show,
                    password_file=args.password_file, token=args.token, cookie_secret_file=args.cookie_secret_file,
                    require_login=args.require_login, allow_websocket_origin=args.allow_websocket_origin or ())
    return 0


class _VersionAction(argparse.Action):
    """``--version``: print the installed version (read from package metadata only when asked)."""

    def __init__(self, option_strings, dest=argparse.SUPPRESS, default=argparse.SUPPRESS, help=None):  # noqa: A002
        super().__init__(option_strings, dest=dest, default=default, nargs=0, help=help)

    def __call__(self, parser, namespace, values, option_string=None):
        import gainboard

        print(f"gainboard {gainboard.__version__}")
        parser.exit()


class _OneLineErrorParser(argparse.ArgumentParser):
    """Report usage mistakes on one line (the command-line contract), not argparse's usage block."""

    def error(self, message):
        print(f"{self.prog}: {message} (see `{self.prog} --help`)", file=sys.stderr)
        raise SystemExit(2)


def build_parser() -> argparse.ArgumentParser:
    parser = _OneLineErrorParser(
        prog="gainboard",
        description="Design state-feedback gains K (u = -Kx) of linear plants. "
        "Designs from linear models must be validated on the real system with safe limits.",
    )
    parser.add_argument("--version", action=_VersionAction, help="print the installed version and exit")
    commands = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    plant_help = ("plant file (TOML, or JSON with the same keys), a design file, - for standard input, "
                  "or the name of a bundled plant (see `gainboard plants`)")
    gain_help = ('K as an inline JSON array of rows such as "[[199, 55, 8]]", or a JSON file: {"K": [[...]]}, '
                 "an exported gain file or a design file (their state order must be the plant's); - for standard input")
    point_help = "use this operating point's model of the plant file instead of the nominal one"

    assign = commands.add_parser("assign", help="compute K that places the closed-loop poles at targets")
    assign.add_argument("plant", help=plant_help)
    assign.add_argument("--poles", required=True, help='target poles, e.g. "-2+4j,-2-4j,-10" (z values for sampled plants)')
    assign.add_argument("--json", action="store_true", help="print JSON instead of a table")
    assign.add_argument("--save", metavar="DESIGN", help="also write a design file (JSON) with the plant and K")
    assign.set_defaults(handler=command_assign)

    evaluate = commands.add_parser("evaluate", help="poles, responses, margins and spec checks of a given K")
    evaluate.add_argument("plant", help=plant_help)
    evaluate.add_argument("--gain", required=True, help=gain_help)
    evaluate.add_argument("--x0", help="initial state for the regulation response, e.g. 0.1,0,0 (default: the plant file's)")
    evaluate.add_argument("--specs", help="spec file (TOML) to check against (default: the plant file's [specs])")
    evaluate.add_argument("--horizon", type=float, help="simulation length in seconds (default: from the slowest pole)")
    evaluate.add_argument("--operating-point", metavar="NAME", help=point_help)
    evaluate.add_argument("--sample-time", type=float, metavar="T",
                          help="also check K run by a sampled controller through a zero-order hold every T seconds "
                               "(continuous plants): z-plane poles, stability, largest stable T")
    evaluate.add_argument("--json", action="store_true", help="print JSON instead of a table")
    cli_estimator.add_evaluate_options(evaluate)
    evaluate.set_defaults(handler=command_evaluate)

    cli_estimator.add_estimator_command(commands, plant_help, gain_help)

    sweep = commands.add_parser("sweep", help="exact stable range and pole locus of one gain entry k_ij")
    sweep.add_argument("plant", help=plant_help)
    sweep.add_argument("--gain", required=True, help=gain_help)
    sweep.add_argument("--entry", required=True, help="ROW,COL of the entry, counted from 1 as in k_ij")
    sweep.add_argument("--range", help="LOW,HIGH of the locus sweep (default: around the current value)")
    sweep.add_argument("--operating-point", metavar="NAME", help=point_help)
    sweep.add_argument("--json", action="store_true", help="print JSON instead of a table")
    sweep.set_defaults(handler=command_sweep)

    add_robustness_parser(commands, plant_help, gain_help)

    export = commands.add_parser("export", help="write K from a design file where it is used (firmware, scripts, reviews)")
    export.add_argument("design", help="design file (JSON), saved by the workbench or `assign --save`; - for standard input")
    export.add_argument("--format", required=True, choices=("json", "csv", "c", "python", "html"),
                        help="json, csv, c (a C header), python (a snippet) or html (a standalone design report)")
    export.add_argument("-o", "--output", help="write to this file (- or omitted: standard output)")
    export.add_argument("--prefix", metavar="NAME",
                        help="identifier prefix of the C names and of the Python function (default for C: from the plant name)")
    export.add_argument("--sample-time", type=float, metavar="T",
                        help="controller period in seconds for a continuous design with an estimator "
                             "(the compensator is discretised and the file says how)")
    export.add_argument("--sampled-form", choices=("prediction", "current"), default="prediction",
                        help="sampled estimator form for a continuous full-order design (default: prediction)")
    export.set_defaults(handler=command_export)

    plants = commands.add_parser("plants", help="list the bundled sample plants")
    plants.add_argument("--json", action="store_true", help="print JSON instead of a table")
    plants.set_defaults(handler=command_plants)

    serve = commands.add_parser("serve", help="open the workbench in the browser")
    serve.add_argument("plant", nargs="?", help=plant_help + " (default: a bundled plant)")
    serve.add_argument("--address", default="127.0.0.1", help="address to listen on (default: loopback only)")
    serve.add_argument("--port", type=int, default=0, help="port to listen on (default: a free port)")
    serve.add_argument("--no-show", action="store_true", help="do not open a browser tab")
    serve.add_argument("--password-file", metavar="FILE",
                       help="file whose first line is the team password (or set GAINBOARD_PASSWORD); "
                            "a login is required on any address but loopback")
    serve.add_argument("--token", action="store_true",
                       help="generate an access token and print a sign-in link to share")
    serve.add_argument("--require-login", action="store_true",
                       help="ask for the password or token even on the loopback address")
    serve.add_argument("--cookie-secret-file", metavar="FILE",
                       help="file whose first line signs sign-in cookies (or set GAINBOARD_COOKIE_SECRET); "
                            "give several servers the same one to share sign-ins (default: new at each start)")
    serve.add_argument("--allow-websocket-origin", metavar="HOST[:PORT]", action="append",
                       help="another host name under which pages are served (an alias or a proxy); repeatable")
    serve.set_defaults(handler=command_serve)
    return parser


def main(argv: list[str] | None = None) -> int:
    """Entry point of the ``gainboard`` console script."""
    argv = _join_negative_values(list(sys.argv[1:] if argv is None else argv))
    _stdin_reader.clear()
    args = build_parser().parse_args(argv)
    try:
        return args.handler(args)
    except (UsageError, core.GainboardError) as error:
        print(cli_output.printable(f"gainboard {args.command}: {error}"), file=sys.stderr)  # names from files
        return 2
    except KeyboardInterrupt:
        return 130
    except BrokenPipeError:
        # the reader went away (`gainboard … --json | head`): not an error of ours, and no
        # traceback. Python's documented recipe (library/signal.html, "Note on SIGPIPE"):
        # point stdout at devnull so that the flush at exit does not raise again.
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return 1


if __name__ == "__main__":  # pragma: no cover - exercised through the console script
    sys.exit(main())
