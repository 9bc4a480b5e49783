"""Reading plant files (TOML) and spec files into checked objects.

The format is documented in the README ("Plant files"). Reading never executes
code: it is TOML parsed by the standard library, then validated field by field.
"""

from __future__ import annotations

import tomllib
from pathlib import Path

from ._errors import EstimatorError, PlantError
from ._noise import noise_intensities
from ._plant import Plant
from ._specs import DesignSpecs

__all__ = ["load_plant_file", "parse_plant_text", "plant_from_mapping", "specs_from_mapping", "load_specs_file"]

#: Largest plant file accepted, in bytes: a plant of 50 states is a few kB.
MAX_PLANT_FILE_BYTES = 2_000_000

_TOP_LEVEL_KEYS = {"name", "summary", "description", "model", "states", "inputs", "outputs", "disturbance", "specs",
                   "noise"}
_SECTION_KEYS = {
    "model": {"A", "B", "C", "D", "sample_time"},
    "states": {"names", "units", "initial"},
    "inputs": {"names", "units", "low", "high"},
    "outputs": {"names", "units", "tracked"},
    "disturbance": {"matrix", "names", "units", "step"},
    "noise": {"process", "measurement"},
}


def _section(data: dict, key: str) -> dict:
    section = data.get(key, {})
    if not isinstance(section, dict):
        raise PlantError(f"[{key}] must be a table (a section headed [{key}]), not {type(section).__name__}")
    unknown = set(section) - _SECTION_KEYS[key]
    if unknown:
        raise PlantError(
            f"[{key}] has unknown key(s) {sorted(unknown)}; allowed keys are {sorted(_SECTION_KEYS[key])}"
        )
    return section


def _string_list(section: dict, table: str, key: str):
    value = section.get(key)
    if value is None:
        return None
    if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
        raise PlantError(f"[{table}] {key} must be a list of strings, got {value!r}")
    return tuple(value)


def _number_list(section: dict, table: str, key: str):
    value = section.get(key)
    if value is None:
        return None
    if not isinstance(value, list) or not all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in value):
        raise PlantError(f"[{table}] {key} must be a flat list of numbers, got {value!r}")
    return tuple(float(v) for v in value)


def specs_from_mapping(data: dict) -> DesignSpecs:
    """Build :class:`DesignSpecs` from a mapping (a ``[specs]`` table or a spec file)."""
    if not isinstance(data, dict):
        raise PlantError(f"[specs] must be a table, not {type(data).__name__}")
    allowed = set(DesignSpecs.field_names())
    unknown = set(data) - allowed
    if unknown:
        raise PlantError(f"[specs] has unknown key(s) {sorted(unknown)}; allowed keys are {sorted(allowed)}")
    return DesignSpecs(**data)


def _noise_from_section(section: dict):
    """[noise]: process (n×n or n variances) and measurement (p×p or p variances), both required."""
    missing = [key for key in ("process", "measurement") if key not in section]
    if missing:
        raise PlantError(f"[noise] needs both process and measurement; {' and '.join(missing)} is missing")
    try:
        return noise_intensities(section["process"], section["measurement"], source="plant file")
    except EstimatorError as error:
        raise PlantError(f"[noise]: {error}") from None


def plant_from_mapping(data: dict, source: str = "plant file") -> Plant:
    """Build a :class:`Plant` from parsed plant-file data.

    Parameters
    ----------
    data : dict
        The parsed TOML document.
    source : str
        Name used in messages (usually the file name).

    Raises
    ------
    PlantError
        With a message prefixed by ``source`` that names the key at fault.

    Notes
    -----
    A plant file with ``[parameters]``, ``[[operating_points]]`` or expression entries
    describes a family of models; this returns its nominal model (see ``load_plant_family_file``).
    """
    from ._plant_family import is_family_mapping, plant_family_from_mapping

    if is_family_mapping(data):
        return plant_family_from_mapping(data, source).nominal
    try:
        return _plant_from_mapping(data)
    except PlantError as error:
        raise PlantError(f"{source}: {error}") from None


def _plant_from_mapping(data: dict) -> Plant:
    unknown = set(data) - _TOP_LEVEL_KEYS
    if unknown:
        raise PlantError(f"unknown top-level key(s) {sorted(unknown)}; allowed keys are {sorted(_TOP_LEVEL_KEYS)}")
    if "model" not in data:
        raise PlantError("the required [model] table is missing; it must give at least A and B")
    model = _section(data, "model")
    for key in ("A", "B"):
        if key not in model:
            raise PlantError(f"[model] must give {key}")
    states = _section(data, "states")
    inputs = _section(data, "inputs")
    outputs = _section(data, "outputs")
    disturbance = _section(data, "disturbance")
    for key in ("name", "summary", "description"):
        if key in data and not isinstance(data[key], str):
            raise PlantError(f"{key} must be a string, got {data[key]!r}")

    low, high = _number_list(inputs, "inputs", "low"), _number_list(inputs, "inputs", "high")
    if (low is None) != (high is None):
        raise PlantError("[inputs] low and high must be given together (one pair of lists of limits)")
    limits = None
    if low is not None:
        if len(low) != len(high):
            raise PlantError(f"[inputs] low has {len(low)} entries but high has {len(high)}; give one per input")
        limits = tuple(zip(low, high))

    output_names = _string_list(outputs, "outputs", "names")
    tracked = None
    tracked_names = _string_list(outputs, "outputs", "tracked")
    if tracked_names is not None:
        known = output_names or tuple(f"y{i + 1}" for i in range(len(model.get("C", model["A"]))))
        missing = [name for name in tracked_names if name not in known]
        if missing:
            raise PlantError(f"[outputs] tracked names {missing} are not output names; outputs are {list(known)}")
        tracked = tuple(known.index(name) for name in tracked_names)

    specs = specs_from_mapping(data["specs"]) if "specs" in data else None
    return Plant(
        noise=_noise_from_section(_section(data, "noise")) if "noise" in data else None,
        A=model["A"],
        B=model["B"],
        C=model.get("C"),
        D=model.get("D"),
        sample_time=model.get("sample_time"),
        name=data.get("name", "plant"),
        summary=data.get("summary", ""),
        description=data.get("description", ""),
        state_names=_string_list(states, "states", "names"),
        state_units=_string_list(states, "states", "units"),
        initial_state=_number_list(states, "states", "initial"),
        input_names=_string_list(inputs, "inputs", "names"),
        input_units=_string_list(inputs, "inputs", "units"),
        input_limits=limits,
        output_names=output_names,
        output_units=_string_list(outputs, "outputs", "units"),
        tracked_outputs=tracked,
        disturbance_matrix=disturbance.get("matrix"),
        disturbance_names=_string_list(disturbance, "disturbance", "names"),
        disturbance_units=_string_list(disturbance, "disturbance", "units"),
        disturbance_step=_number_list(disturbance, "disturbance", "step"),
        specs=specs,
    )


def parse_plant_text(text: str, source: str = "plant file") -> Plant:
    """Parse and validate the TOML text of a plant file.

    Examples
    --------
    >>> plant = parse_plant_text('[model]\\nA = [[-1.0]]\\nB = [[1.0]]\\n')
    >>> plant.state_count
    1
    """
    return plant_from_mapping(toml_document(text, source), source)


def toml_document(text: str, source: str) -> dict:
    """The parsed TOML of a plant file's text, refusing oversized text and bad TOML (shared by the readers)."""
    if len(text.encode("utf-8", errors="replace")) > MAX_PLANT_FILE_BYTES:
        raise PlantError(f"{source}: the file is larger than {MAX_PLANT_FILE_BYTES // 1000} kB; is it really a plant file?")
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        raise PlantError(f"{source}: not valid TOML ({error})") from None


def load_plant_file(path) -> Plant:
    """Read and validate a plant file.

    Parameters
    ----------
    path : str or pathlib.Path
        A TOML plant file (format in the README).

    Returns
    -------
    Plant

    Raises
    ------
    PlantError
        If the file cannot be read or any key is malformed; the message names the
        file and the key.
    """
    path = Path(path)
    return parse_plant_text(read_plant_file_text(path), path.name)


def read_plant_file_text(path: Path) -> str:
    """The text of a plant file, refusing an oversized or unreadable file (shared by the readers)."""
    try:
        if path.stat().st_size > MAX_PLANT_FILE_BYTES:
            raise PlantError(f"{path.name}: the file is larger than {MAX_PLANT_FILE_BYTES // 1000} kB")
        return path.read_text(encoding="utf-8")
    except OSError as error:
        raise PlantError(f"cannot read plant file {str(path)!r}: {error.strerror or error}") from None
    except UnicodeDecodeError:
        raise PlantError(f"{path.name}: not a UTF-8 text file; a plant file is TOML text") from None


def load_specs_file(path) -> DesignSpecs:
    """Read a spec file: TOML with the keys of :class:`DesignSpecs` at top level or under ``[specs]``."""
    path = Path(path)
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except OSError as error:
        raise PlantError(f"cannot read spec file {str(path)!r}: {error.strerror or error}") from None
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as error:
        raise PlantError(f"{path.name}: not valid TOML ({error})") from None
    try:
        return specs_from_mapping(data.get("specs", data))
    except PlantError as error:
        raise PlantError(f"{path.name}: {error}") from None
