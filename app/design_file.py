"""Design files: a whole design (plant, K, prefilter, integral gains, estimator, specs, notes, gain history) as JSON.

The format is ours and versioned::

    {
      "format": "gainboard-design",
      "version": 2,
      "caution": "...",
      "created": "2026-03-01T09:30:00.000+00:00",
      "modified": "2026-03-01T10:02:13.511+00:00",
      "plant": { ...the keys of a TOML plant file... },
      "gain": {"K": [[...]], "prefilter": [[...]] or null, "integral": [[...]] or null},
      "estimator": {"form": ..., "L": [[...]], ...} or null,   (version 2; see app/estimator_settings.py)
      "specs": { ...the keys of [specs]... } or null,
      "notes": "free text",
      "gain_history": [{"time": "...", "K": [[...]]}, ...]
    }

The plant section has exactly the key structure of a TOML plant file (see the README),
(version 2 adds its optional ``[noise]`` table), so it is validated by the same code (:func:`gainboard.core.plant_from_mapping`); the
one difference is that an unbounded actuator limit is written ``"inf"`` / ``"-inf"``
because JSON has no infinity.

Every float is written with Python's ``repr`` (the shortest text that reads back to
the same double), so saving and loading keeps every bit, including ``-0.0`` and
subnormal numbers. Reading never executes code: it is :func:`json.loads` (with NaN,
Infinity and duplicate keys refused) followed by field-by-field validation, and the
file size is bounded by :data:`MAX_DESIGN_FILE_BYTES`.

Version 2 added the estimator (observer) gain L and its settings, and the plant's noise
intensities. Version 1 files (state feedback only) are still read; files are always
written as version 2.
"""

from __future__ import annotations

import contextlib
import json
import math
import os
import tempfile
from dataclasses import dataclass, field, replace
from datetime import datetime, timezone
from pathlib import Path

import numpy as np

from gainboard import core

from .estimator_settings import EstimatorDesign, estimator_from_mapping, estimator_to_mapping

__all__ = [
    "DESIGN_FORMAT",
    "DESIGN_FORMAT_VERSION",
    "READABLE_DESIGN_VERSIONS",
    "EstimatorDesign",
    "MAX_DESIGN_FILE_BYTES",
    "MAX_GAIN_HISTORY",
    "CONTROL_LAW",
    "Design",
    "DesignFileError",
    "design_to_json",
    "design_from_json",
    "save_design",
    "load_design",
    "plant_to_mapping",
    "write_text_atomically",
    "readable_json",
    "now_timestamp",
    "generator_name",
]

#: Value of the "format" key that marks a gainboard design file.
DESIGN_FORMAT = "gainboard-design"
#: The design-file version this gainboard writes.
DESIGN_FORMAT_VERSION = 2
#: The design-file versions this gainboard reads (1: state feedback only; 2: with the estimator).
READABLE_DESIGN_VERSIONS = (1, 2)
#: Largest design file accepted, in bytes (a 50-state plant with a full gain history is about 1 MB).
MAX_DESIGN_FILE_BYTES = 8_000_000
#: Most gain-history entries kept; older entries are dropped first by :meth:`Design.with_gain`.
MAX_GAIN_HISTORY = 200

#: The control law the stored gains belong to, in words (also written into exports).
CONTROL_LAW = (
    "u = -K x + N r - Ki xi, where K (one row per input, one column per state) acts on the state x, "
    "the prefilter N (one row per input, one column per tracked output) on the reference r, and the "
    "integral gain Ki (one row per input, one column per tracked output) on xi, the integral of the "
    "tracking error r - y (reference minus tracked output; for a sampled design xi[k+1] = xi[k] + T (r[k] - y[k]), "
    "as in gainboard.core.augment_with_integral_action); a design without N or Ki leaves that term out"
)

_TOP_LEVEL_KEYS = {"format", "version", "caution", "created", "modified", "plant", "gain", "specs", "notes", "gain_history",
                   "estimator"}
_REQUIRED_KEYS = ("format", "version", "plant", "gain")
_GAIN_KEYS = {"K", "prefilter", "integral"}


class DesignFileError(core.GainboardError, ValueError):
    """A design file cannot be read or written (unknown version, missing key, wrong shape, ...)."""


def generator_name() -> str:
    """"gainboard <version>" for the notes in written files ("gainboard" when run from a source tree)."""
    try:
        from importlib.metadata import PackageNotFoundError, version

        return f"gainboard {version('gainboard')}"
    except (ImportError, PackageNotFoundError):
        return "gainboard"


def now_timestamp() -> str:
    """The current time as an ISO 8601 string in UTC with milliseconds, e.g. ``2026-03-01T09:30:00.000+00:00``."""
    return datetime.now(timezone.utc).isoformat(timespec="milliseconds")


def _check_timestamp(value, what: str) -> str:
    if not isinstance(value, str):
        raise DesignFileError(f"{what} must be an ISO 8601 date-time string such as 2026-03-01T09:30:00+00:00, got {value!r}")
    try:
        datetime.fromisoformat(value)
    except ValueError:
        raise DesignFileError(
            f"{what} {value!r} is not an ISO 8601 date-time; write it like 2026-03-01T09:30:00+00:00"
        ) from None
    return value


def _frozen_matrix(matrix: np.ndarray) -> np.ndarray:
    out = np.array(matrix, dtype=float, copy=True)
    out.setflags(write=False)
    return out


def _reference_matrix(plant: core.Plant, value, what: str) -> np.ndarray | None:
    """Check an inputs × tracked-outputs matrix (prefilter N or integral gain Ki)."""
    if value is None:
        return None
    m, t = plant.input_count, len(plant.tracked_outputs)
    try:
        matrix = np.array(value, dtype=float)
    except (TypeError, ValueError):
        raise core.GainError(f"the {what} must be a {m}×{t} matrix of numbers (inputs × tracked outputs), got {value!r}") from None
    if matrix.ndim == 0 and m == 1 and t == 1:
        matrix = matrix.reshape(1, 1)
    if matrix.ndim == 1 and m == 1:
        matrix = matrix.reshape(1, -1)
    if matrix.shape != (m, t):
        found = "×".join(str(s) for s in matrix.shape) or "a single number"
        raise core.GainError(
            f"the {what} is {found} but must be {m}×{t} (one row per input, one column per tracked output)"
        )
    if not np.all(np.isfinite(matrix)):
        raise core.GainError(f"the {what} has a non-finite entry (inf or nan); every entry must be a finite number")
    return _frozen_matrix(matrix)


@dataclass(frozen=True, eq=False)
class Design:
    """One state-feedback design: the plant, its gains, specs, notes and how K got there.

    Parameters
    ----------
    plant : gainboard.core.Plant
        The plant the design is for (kept whole: matrices, sample time, names, units,
        limits, initial state, tracked outputs, disturbance, suggested specs).
    gain : array_like, shape (m, n)
        State-feedback gain K of u = -K x (inputs × states).
    prefilter : array_like, shape (m, t), optional
        Reference prefilter N (inputs × tracked outputs), ``t = len(plant.tracked_outputs)``.
    integral_gain : array_like, shape (m, t), optional
        Gain Ki on the integrals of the tracking errors; see :data:`CONTROL_LAW`.
    estimator : EstimatorDesign, optional
        The estimator (observer) gain L and its settings; ``None`` for full-state feedback.
        With it the controller is the compensator u = −K x̂ (+ N r − Ki ξ).
    specs : gainboard.core.DesignSpecs, optional
        The specs this design is checked against (``None``: none chosen; see :attr:`effective_specs`).
    notes : str
        Free text for the team (rationale, test results, open points).
    gain_history : tuple of (str, ndarray)
        Gains this design has had, oldest first, each with the ISO 8601 time it was set;
        at most :data:`MAX_GAIN_HISTORY` entries.
    created, modified : str
        ISO 8601 date-times (UTC by default).
    format_version : int
        Design-file format version it was read from (one of :data:`READABLE_DESIGN_VERSIONS`);
        files are always written as :data:`DESIGN_FORMAT_VERSION`.

    Examples
    --------
    >>> plant = core.Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]])
    >>> design = Design(plant=plant, gain=[[1.0, 2.0]])
    >>> design.with_gain([[4.0, 4.0]], when="2026-03-01T09:30:00+00:00").gain.tolist()
    [[4.0, 4.0]]
    """

    plant: core.Plant
    gain: np.ndarray
    prefilter: np.ndarray | None = None
    integral_gain: np.ndarray | None = None
    estimator: EstimatorDesign | None = None
    specs: core.DesignSpecs | None = None
    notes: str = ""
    gain_history: tuple = ()
    created: str = field(default_factory=now_timestamp)
    modified: str = field(default_factory=now_timestamp)
    format_version: int = DESIGN_FORMAT_VERSION

    def __post_init__(self):
        set_ = lambda key, value: object.__setattr__(self, key, value)  # noqa: E731
        if not isinstance(self.plant, core.Plant):
            raise DesignFileError(f"a design needs a gainboard.core.Plant, got {type(self.plant).__name__}")
        set_("gain", _frozen_matrix(self.plant.check_gain(self.gain)))
        set_("prefilter", _reference_matrix(self.plant, self.prefilter, "prefilter N"))
        set_("integral_gain", _reference_matrix(self.plant, self.integral_gain, "integral gain Ki"))
        if self.estimator is not None:
            if not isinstance(self.estimator, EstimatorDesign):
                raise DesignFileError(f"estimator must be EstimatorDesign or None, got {type(self.estimator).__name__}")
            set_("estimator", self.estimator.checked_for(self.plant))
        if self.specs is not None and not isinstance(self.specs, core.DesignSpecs):
            raise DesignFileError(f"specs must be gainboard.core.DesignSpecs or None, got {type(self.specs).__name__}")
        if not isinstance(self.notes, str):
            raise DesignFileError(f"notes must be text, got {type(self.notes).__name__}")
        history = tuple(self.gain_history)
        if len(history) > MAX_GAIN_HISTORY:
            raise DesignFileError(
                f"the gain history has {len(history)} entries; at most {MAX_GAIN_HISTORY} are kept "
                "(Design.with_gain drops the oldest)"
            )
        checked = []
        for index, entry in enumerate(history):
            if not isinstance(entry, (tuple, list)) or len(entry) != 2:
                raise DesignFileError(f"gain history entry {index + 1} must be a (time, K) pair, got {entry!r}")
            when = _check_timestamp(entry[0], f"the time of gain history entry {index + 1}")
            try:
                past_gain = self.plant.check_gain(entry[1])
            except core.GainError as error:
                raise core.GainError(f"gain history entry {index + 1}: {error}") from None
            checked.append((when, _frozen_matrix(past_gain)))
        set_("gain_history", tuple(checked))
        _check_timestamp(self.created, "the creation time")
        _check_timestamp(self.modified, "the modification time")
        if isinstance(self.format_version, bool) or self.format_version not in READABLE_DESIGN_VERSIONS:
            raise DesignFileError(
                f"design format version {self.format_version!r} is not known; this gainboard "
                f"writes version {DESIGN_FORMAT_VERSION} and reads versions "
                f"{', '.join(str(v) for v in READABLE_DESIGN_VERSIONS)}"
            )

    @property
    def effective_specs(self) -> core.DesignSpecs | None:
        """The design's own specs, or else the plant's suggested specs (or None)."""
        return self.specs if self.specs is not None else self.plant.specs

    def with_gain(self, gain, when: str | None = None) -> "Design":
        """Return the design with K replaced and the new K recorded in the gain history.

        The history keeps the newest :data:`MAX_GAIN_HISTORY` entries. Setting the
        same K again (bit for bit) adds no entry.

        Parameters
        ----------
        gain : array_like, shape (m, n)
            The new K.
        when : str, optional
            ISO 8601 time of the change; now (UTC) when omitted.
        """
        when = now_timestamp() if when is None else when
        new_gain = self.plant.check_gain(gain)
        history = self.gain_history
        if not (self.gain.shape == new_gain.shape and self.gain.tobytes() == new_gain.tobytes()):
            history = (history + ((when, new_gain),))[-MAX_GAIN_HISTORY:]
        return replace(self, gain=new_gain, gain_history=history, modified=when)

    def with_changes(self, **changes) -> "Design":
        """Return a copy with fields replaced (validated again) and the modification time set to now."""
        changes.setdefault("modified", now_timestamp())
        return replace(self, **changes)


# -- plant <-> plant-file mapping -------------------------------------------------------------


def _rows(matrix: np.ndarray) -> list:
    # float() turns numpy scalars into Python floats, whose repr is the exact shortest text.
    return [[float(v) for v in row] for row in np.asarray(matrix, dtype=float)]


def _flat(values) -> list:
    return [float(v) for v in values]


def _limit_to_json(value: float):
    if math.isinf(value):
        return "inf" if value > 0 else "-inf"
    return float(value)


def _limit_from_json(value, where: str):
    if value in ("inf", "-inf"):
        return math.inf if value == "inf" else -math.inf
    if isinstance(value, str):
        raise DesignFileError(f"{where} contains {value!r}; write a number, or \"inf\" / \"-inf\" for an unbounded limit")
    return value


def _specs_to_mapping(specs: core.DesignSpecs) -> dict:
    mapping = {}
    for name in core.DesignSpecs.field_names():
        value = getattr(specs, name)
        if value is None:
            continue
        mapping[name] = _flat(value) if isinstance(value, tuple) else float(value)
    return mapping


def plant_to_mapping(plant: core.Plant) -> dict:
    """The plant as the mapping a TOML plant file parses to (JSON-ready: ``±inf`` limits as text).

    ``gainboard.core.plant_from_mapping`` rebuilds the same plant from it (after
    :func:`design_from_json` has turned ``"inf"`` back into a number). Tracked outputs are
    recorded by name, which is unambiguous because a Plant refuses repeated output names.
    """
    model = {"A": _rows(plant.A), "B": _rows(plant.B), "C": _rows(plant.C), "D": _rows(plant.D)}
    if plant.is_sampled:
        model["sample_time"] = float(plant.sample_time)
    states = {"names": list(plant.state_names), "units": list(plant.state_units)}
    if plant.initial_state is not None:
        states["initial"] = _flat(plant.initial_state)
    inputs = {"names": list(plant.input_names), "units": list(plant.input_units)}
    if plant.input_limits is not None:
        inputs["low"] = [_limit_to_json(low) for low, _ in plant.input_limits]
        inputs["high"] = [_limit_to_json(high) for _, high in plant.input_limits]
    outputs = {
        "names": list(plant.output_names),
        "units": list(plant.output_units),
        "tracked": [plant.output_names[i] for i in plant.tracked_outputs],
    }
    disturbance = {
        "names": list(plant.disturbance_names),
        "units": list(plant.disturbance_units),
        "step": _flat(plant.disturbance_step),
    }
    E, B = plant.disturbance_matrix, plant.B
    # Written only when it differs from B, so "disturbance enters with the inputs" survives a round trip.
    if E.shape != B.shape or E.tobytes() != B.tobytes():
        disturbance["matrix"] = _rows(E)
    mapping = {
        "name": plant.name,
        "summary": plant.summary,
        "description": plant.description,
        "model": model,
        "states": states,
        "inputs": inputs,
        "outputs": outputs,
        "disturbance": disturbance,
    }
    if plant.noise is not None:
        mapping["noise"] = {"process": _rows(plant.noise.process), "measurement": _rows(plant.noise.measurement)}
    if plant.specs is not None:
        if not isinstance(plant.specs, core.DesignSpecs):
            raise DesignFileError(f"the plant's specs must be DesignSpecs to be saved, got {type(plant.specs).__name__}")
        mapping["specs"] = _specs_to_mapping(plant.specs)
    return mapping


def _plant_from_json_mapping(data, source: str) -> core.Plant:
    if not isinstance(data, dict):
        raise DesignFileError(f"{source}: \"plant\" must be an object with the keys of a plant file, got {type(data).__name__}")
    inputs = data.get("inputs")
    if isinstance(inputs, dict):
        inputs = dict(inputs)
        for key in ("low", "high"):
            if isinstance(inputs.get(key), list):
                inputs[key] = [_limit_from_json(v, f"{source}: plant [inputs] {key}") for v in inputs[key]]
        data = {**data, "inputs": inputs}
    try:
        return core.plant_from_mapping(data, f"{source}: plant")
    except core.PlantError as error:
        raise DesignFileError(str(error)) from None


def _same_bits(a, b) -> bool:
    if a is None or b is None:
        return a is None and b is None
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    return a.shape == b.shape and a.tobytes() == b.tobytes()


def _plant_differences(original: core.Plant, rebuilt: core.Plant) -> list[str]:
    """Names of the plant fields that did not survive the mapping bit for bit."""
    differences = [key for key in ("A", "B", "C", "D", "disturbance_matrix", "initial_state") if not _same_bits(getattr(original, key), getattr(rebuilt, key))]
    noises = (original.noise, rebuilt.noise)
    if (noises[0] is None) != (noises[1] is None) or (noises[0] is not None and not (
            _same_bits(noises[0].process, noises[1].process) and _same_bits(noises[0].measurement, noises[1].measurement))):
        differences.append("noise")
    for key in (
        "sample_time", "name", "summary", "description", "state_names", "state_units", "input_names",
        "input_units", "output_names", "output_units", "input_limits", "tracked_outputs",
        "disturbance_names", "disturbance_units", "disturbance_step", "specs",
    ):
        if getattr(original, key) != getattr(rebuilt, key):
            differences.append(key)
    return differences


# -- JSON text ---------------------------------------------------------------------------------


def _is_scalar(value) -> bool:
    return not isinstance(value, (list, dict))


def readable_json(value, ascii_only: bool = False) -> str:
    """JSON text of plain data with objects indented and each list of numbers (a matrix row) on one line.

    Floats are written with ``repr`` (exact); NaN and infinity are refused (ValueError).

    Examples
    --------
    >>> print(readable_json({"K": [[1.0, -0.0]]}))
    {
      "K": [
        [1.0, -0.0]
      ]
    }
    """
    return _dump(value, 0, ascii_only)


def _dump(value, depth: int, ascii_only: bool) -> str:
    """JSON with objects indented and lists of numbers (matrix rows) kept on one line each."""
    pad, inner = "  " * depth, "  " * (depth + 1)
    plain = lambda v: json.dumps(v, allow_nan=False, ensure_ascii=ascii_only)  # noqa: E731
    if isinstance(value, dict):
        if not value:
            return "{}"
        items = [f"{inner}{plain(str(key))}: {_dump(item, depth + 1, ascii_only)}" for key, item in value.items()]
        return "{\n" + ",\n".join(items) + "\n" + pad + "}"
    if isinstance(value, list):
        if all(_is_scalar(item) for item in value):
            return "[" + ", ".join(plain(item) for item in value) + "]"
        items = [inner + _dump(item, depth + 1, ascii_only) for item in value]
        return "[\n" + ",\n".join(items) + "\n" + pad + "]"
    return plain(value)


def _design_document(design: Design) -> dict:
    from .theme import SAFETY_CAUTION

    return {
        "format": DESIGN_FORMAT,
        "version": DESIGN_FORMAT_VERSION,
        "caution": SAFETY_CAUTION,
        "created": design.created,
        "modified": design.modified,
        "plant": plant_to_mapping(design.plant),
        "gain": {
            "K": _rows(design.gain),
            "prefilter": None if design.prefilter is None else _rows(design.prefilter),
            "integral": None if design.integral_gain is None else _rows(design.integral_gain),
        },
        "estimator": estimator_to_mapping(design.estimator),
        "specs": None if design.specs is None else _specs_to_mapping(design.specs),
        "notes": design.notes,
        "gain_history": [{"time": when, "K": _rows(past)} for when, past in design.gain_history],
    }


def design_to_json(design: Design) -> str:
    """The design-file text of ``design`` (JSON, every float exact).

    Raises
    ------
    DesignFileError
        If some part of the plant cannot be written so that it reads back identically
        (e.g. a tracked output whose name is shared with another output).

    Examples
    --------
    >>> plant = core.Plant(A=[[-1.0]], B=[[1.0]])
    >>> text = design_to_json(Design(plant=plant, gain=[[0.1]]))
    >>> design_from_json(text).gain.tolist()
    [[0.1]]
    """
    if not isinstance(design, Design):
        raise DesignFileError(f"design_to_json needs a Design, got {type(design).__name__}")
    document = _design_document(design)
    # A self-check rather than trust: whatever the mapping cannot carry is refused here, not lost later.
    rebuilt = _plant_from_json_mapping(json.loads(json.dumps(document["plant"])), "design")
    lost = _plant_differences(design.plant, rebuilt)
    if lost:
        raise DesignFileError(
            f"the plant's {', '.join(lost)} would not read back identically from a design file; "
            "please report this with the plant file"
        )
    text = readable_json(document) + "\n"
    try:
        text.encode("utf-8")
    except UnicodeEncodeError:  # lone surrogates in a name: escape everything so the file stays valid UTF-8
        text = readable_json(document, ascii_only=True) + "\n"
    return text


def _refuse_constant(name: str):
    raise DesignFileError(f"contains {name}, which is not a JSON number; every number must be finite")


def _unique_keys(pairs):
    seen = {}
    for key, value in pairs:
        if key in seen:
            raise DesignFileError(f"the key {key!r} appears twice in one object; keep one of them")
        seen[key] = value
    return seen


def _matrix_from_json(value, what: str):
    if not isinstance(value, list) or not all(isinstance(row, list) for row in value):
        raise DesignFileError(f"{what} must be a list of rows such as [[1.0, 2.0]], got {value!r}"[:300])
    for row in value:
        for entry in row:
            if isinstance(entry, bool) or not isinstance(entry, (int, float)):
                raise DesignFileError(f"{what} contains {entry!r}, which is not a number"[:300])
    lengths = {len(row) for row in value}
    if len(lengths) > 1:
        raise DesignFileError(f"{what} has rows of different lengths {sorted(lengths)}")
    return value


def design_from_json(text: str, source: str = "design file") -> Design:
    """Read and validate design-file text.

    Parameters
    ----------
    text : str
        The JSON text of a design file.
    source : str
        Name for messages (usually the file name).

    Returns
    -------
    Design

    Raises
    ------
    DesignFileError
        For text over :data:`MAX_DESIGN_FILE_BYTES`, invalid JSON, NaN or Infinity, a
        different "format", an unknown "version", missing or unknown keys, and any
        plant, gain or spec that fails validation; the message names the key.
    """
    if not isinstance(text, str):
        raise DesignFileError(f"{source}: design-file text must be a string, got {type(text).__name__}")
    if len(text) > MAX_DESIGN_FILE_BYTES or len(text.encode("utf-8", errors="surrogatepass")) > MAX_DESIGN_FILE_BYTES:
        raise DesignFileError(
            f"{source}: larger than {MAX_DESIGN_FILE_BYTES // 1_000_000} MB; a design file is far smaller — is it really one?"
        )
    try:
        data = json.loads(text.removeprefix("\ufeff"), parse_constant=_refuse_constant, object_pairs_hook=_unique_keys)
    except DesignFileError as error:
        raise DesignFileError(f"{source}: {error}") from None
    except json.JSONDecodeError as error:
        raise DesignFileError(f"{source}: not valid JSON ({error.msg} at line {error.lineno}, column {error.colno})") from None
    except (ValueError, RecursionError) as error:  # e.g. an integer with thousands of digits, absurd nesting
        raise DesignFileError(f"{source}: cannot be read as a design file ({type(error).__name__}: {error})"[:400]) from None
    try:
        return _design_from_document(data, source)
    except DesignFileError:
        raise
    except core.GainboardError as error:
        raise DesignFileError(f"{source}: {error}") from None


def _design_from_document(data, source: str) -> Design:
    if not isinstance(data, dict) or data.get("format") != DESIGN_FORMAT:
        found = data.get("format") if isinstance(data, dict) else type(data).__name__
        raise DesignFileError(
            f"{source}: not a gainboard design file (expected \"format\": \"{DESIGN_FORMAT}\", found {found!r})"
        )
    version = data.get("version")
    if isinstance(version, bool) or not isinstance(version, int):
        raise DesignFileError(f"{source}: \"version\" must be a whole number, found {version!r}")
    if version not in READABLE_DESIGN_VERSIONS:
        newer = " It was written by a newer gainboard; update gainboard to open it." if version > DESIGN_FORMAT_VERSION else ""
        raise DesignFileError(
            f"{source}: design format version {version} is not known; this gainboard reads versions "
            f"{', '.join(str(v) for v in READABLE_DESIGN_VERSIONS)}.{newer}"
        )
    if version == 1 and "estimator" in data:
        raise DesignFileError(f"{source}: \"estimator\" is new in design format version 2, but this file says version 1")
    missing = [key for key in _REQUIRED_KEYS if key not in data]
    if missing:
        raise DesignFileError(f"{source}: the required key(s) {missing} are missing")
    unknown = set(data) - _TOP_LEVEL_KEYS
    if unknown:
        raise DesignFileError(f"{source}: unknown key(s) {sorted(unknown)}; allowed keys are {sorted(_TOP_LEVEL_KEYS)}")

    plant = _plant_from_json_mapping(data["plant"], source)

    gains = data["gain"]
    if not isinstance(gains, dict):
        raise DesignFileError(f"{source}: \"gain\" must be an object {{\"K\": [[...]], ...}}, got {type(gains).__name__}")
    unknown = set(gains) - _GAIN_KEYS
    if unknown:
        raise DesignFileError(f"{source}: \"gain\" has unknown key(s) {sorted(unknown)}; allowed are {sorted(_GAIN_KEYS)}")
    if "K" not in gains:
        raise DesignFileError(f"{source}: \"gain\" must give \"K\"")
    gain = _matrix_from_json(gains["K"], f"{source}: gain K")
    prefilter = gains.get("prefilter")
    prefilter = None if prefilter is None else _matrix_from_json(prefilter, f"{source}: gain prefilter")
    integral = gains.get("integral")
    integral = None if integral is None else _matrix_from_json(integral, f"{source}: gain integral")

    try:
        estimator = estimator_from_mapping(data.get("estimator"), f"{source}: estimator")
    except core.GainboardError as error:
        raise DesignFileError(str(error)) from None

    specs = data.get("specs")
    if specs is not None:
        try:
            specs = core.specs_from_mapping(specs)
        except core.PlantError as error:
            raise DesignFileError(f"{source}: {error}") from None

    notes = data.get("notes", "")
    if not isinstance(notes, str):
        raise DesignFileError(f"{source}: \"notes\" must be text, got {type(notes).__name__}")

    raw_history = data.get("gain_history", [])
    if not isinstance(raw_history, list):
        raise DesignFileError(f"{source}: \"gain_history\" must be a list of {{\"time\": ..., \"K\": ...}} entries")
    history = []
    for index, entry in enumerate(raw_history):
        if not isinstance(entry, dict) or set(entry) != {"time", "K"}:
            raise DesignFileError(f"{source}: gain_history entry {index + 1} must be {{\"time\": ..., \"K\": [[...]]}}")
        history.append((entry["time"], _matrix_from_json(entry["K"], f"{source}: gain_history entry {index + 1} K")))

    created = data.get("created", now_timestamp())
    modified = data.get("modified", created)
    return Design(
        plant=plant,
        gain=gain,
        prefilter=prefilter,
        integral_gain=integral,
        estimator=estimator,
        specs=specs,
        notes=notes,
        gain_history=tuple(history),
        created=_check_timestamp(created, f"{source}: \"created\""),
        modified=_check_timestamp(modified, f"{source}: \"modified\""),
        format_version=version,
    )


# -- files -------------------------------------------------------------------------------------


def write_text_atomically(path, text: str, private: bool = False) -> Path:
    """Write ``text`` (UTF-8) to ``path`` so that readers see the old file or the new one, never half.

    The text goes to a temporary file in the same folder (named ``.<name>.*.tmp``), is
    flushed to disk, then moved over ``path`` with :func:`os.replace`. A crash leaves at
    most a stray temporary file, never a damaged ``path``.

    Parameters
    ----------
    path : str or pathlib.Path
        The file to write.
    text : str
        Its new contents.
    private : bool
        Readable by the user only (mode 0600). Otherwise an existing file keeps its
        permissions and a new one is readable by everyone (0644), like a file saved by an editor.
    """
    path = Path(path)
    if private:
        mode = 0o600
    else:
        try:
            mode = path.stat().st_mode & 0o7777
        except OSError:
            mode = 0o644
    handle, temporary = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        os.chmod(temporary, mode)
        with os.fdopen(handle, "w", encoding="utf-8", newline="\n") as stream:
            stream.write(text)
            stream.flush()
            os.fsync(stream.fileno())
        os.replace(temporary, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(temporary)
        raise
    return path


def save_design(design: Design, path) -> Path:
    """Write ``design`` to a design file at ``path`` (atomically; see :func:`write_text_atomically`).

    Raises
    ------
    DesignFileError
        If the design cannot be written exactly or the file cannot be written.
    """
    text = design_to_json(design)
    try:
        return write_text_atomically(path, text)
    except OSError as error:
        raise DesignFileError(f"cannot write design file {str(path)!r}: {error.strerror or error}") from None


def load_design(path) -> Design:
    """Read and validate a design file.

    Raises
    ------
    DesignFileError
        If the file is missing, too large, not UTF-8, or malformed (see :func:`design_from_json`).
    """
    path = Path(path)
    try:
        if path.stat().st_size > MAX_DESIGN_FILE_BYTES:
            raise DesignFileError(
                f"{path.name}: larger than {MAX_DESIGN_FILE_BYTES // 1_000_000} MB; a design file is far smaller"
            )
        with path.open("rb") as stream:
            raw = stream.read(MAX_DESIGN_FILE_BYTES + 1)  # bounded even if the file grows meanwhile
    except OSError as error:
        raise DesignFileError(f"cannot read design file {str(path)!r}: {error.strerror or error}") from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise DesignFileError(f"{path.name}: not UTF-8 text; a design file is JSON text") from None
    return design_from_json(text, path.name)
