"""Design files: exact round trip of every number, versioning, and refusal of malformed files.

Outside references used here:
- Python's float repr is the shortest string that reads back to the same IEEE 754 binary64 value
  (Python 3.1 "What's New", David Gay's correctly rounded conversions; from memory), so every
  finite double — subnormals, ±0, the largest and smallest magnitudes — must survive save/load.
- RFC 8259 (JSON): NaN and Infinity are not JSON numbers; names within an object SHOULD be unique
  (from memory).
- struct.pack("<d") gives the binary64 bits, a check independent of numpy and of our own code.
"""

import ast
import doctest
import math
import pickle
import struct
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from gainboard import core
from gainboard.app import design_file
from gainboard.app.design_file import (
    DESIGN_FORMAT_VERSION,
    MAX_GAIN_HISTORY,
    Design,
    DesignFileError,
    design_from_json,
    design_to_json,
    load_design,
    save_design,
)
from pole_references import NAMED_REFERENCE_PLANT

# Reference-cases.md case 1 (Ogata, Modern Control Engineering, 5th ed., Example 10-1, from memory).
THIRD_ORDER = NAMED_REFERENCE_PLANT
OGATA_GAIN = [[199.0, 55.0, 8.0]]


def bits(value) -> bytes:
    """The binary64 bits of every entry, via struct (independent of numpy's own comparison)."""
    return b"".join(struct.pack("<d", float(v)) for v in np.ravel(np.asarray(value, dtype=float)))


def minimal_document() -> dict:
    return {
        "format": "gainboard-design",
        "version": 1,
        "plant": {"model": {"A": [[-1.0]], "B": [[1.0]]}},
        "gain": {"K": [[2.0]]},
    }


def as_text(document: dict) -> str:
    import json

    return json.dumps(document)


# -- exact round trip --------------------------------------------------------------------------

# Every finite double: hypothesis' floats include subnormals, ±0.0 and the extremes ±1.7976931348623157e308.
finite = st.floats(allow_nan=False, allow_infinity=False)
names = st.text(min_size=0, max_size=12)


@st.composite
def designs(draw):
    n = draw(st.integers(1, 4))
    m = draw(st.integers(1, 3))
    p = draw(st.integers(1, 3))
    q = draw(st.integers(1, 2))

    def matrix(rows, cols):
        return draw(st.lists(st.lists(finite, min_size=cols, max_size=cols), min_size=rows, max_size=rows))

    output_names = tuple(draw(st.lists(names, min_size=p, max_size=p, unique=True)))
    tracked = tuple(draw(st.lists(st.integers(0, p - 1), min_size=1, max_size=min(m, p), unique=True)))
    low = draw(st.lists(st.floats(max_value=0.0, allow_nan=False), min_size=m, max_size=m))
    high = draw(st.lists(st.floats(min_value=0.0, allow_nan=False), min_size=m, max_size=m))
    limits = tuple((lo, hi) if lo < hi else (-1.0, 1.0) for lo, hi in zip(low, high))
    plant_specs = draw(st.none() | st.builds(
        core.DesignSpecs,
        max_settling_time=st.none() | st.floats(0.0, 1e6),
        min_damping_ratio=st.none() | st.floats(0.0, 1.0),
        max_input_magnitude=st.none() | st.lists(st.floats(0.0, 1e9), min_size=m, max_size=m).map(tuple),
        settling_band=st.floats(1e-6, 0.5),
    ))
    plant = core.Plant(
        A=matrix(n, n),
        B=matrix(n, m),
        C=matrix(p, n),
        D=matrix(p, m),
        sample_time=draw(st.none() | st.floats(min_value=5e-324, max_value=1e300)),
        name=draw(names),
        summary=draw(names),
        description=draw(st.text(max_size=40)),
        state_names=tuple(draw(st.lists(names, min_size=n, max_size=n, unique=True))),
        state_units=tuple(draw(st.lists(names, min_size=n, max_size=n))),
        input_names=tuple(draw(st.lists(names, min_size=m, max_size=m, unique=True))),
        input_units=tuple(draw(st.lists(names, min_size=m, max_size=m))),
        output_names=output_names,
        output_units=tuple(draw(st.lists(names, min_size=p, max_size=p))),
        input_limits=draw(st.none() | st.just(limits)),
        initial_state=draw(st.none() | st.lists(finite, min_size=n, max_size=n)),
        tracked_outputs=tracked,
        disturbance_matrix=draw(st.none() | st.just(matrix(n, q))),
        disturbance_step=None,
        specs=plant_specs,
    )
    t = len(tracked)
    history = tuple(
        (f"2026-01-{day:02d}T08:00:00+00:00", matrix(m, n)) for day in range(1, draw(st.integers(0, 3)) + 1)
    )
    return Design(
        plant=plant,
        gain=matrix(m, n),
        prefilter=draw(st.none() | st.just(matrix(m, t))),
        integral_gain=draw(st.none() | st.just(matrix(m, t))),
        specs=draw(st.none() | st.builds(core.DesignSpecs, min_phase_margin_deg=st.floats(0.0, 90.0))),
        notes=draw(st.text(max_size=60)),
        gain_history=history,
    )


def assert_same_design(original: Design, loaded: Design):
    a, b = original.plant, loaded.plant
    for key in ("A", "B", "C", "D", "disturbance_matrix"):
        assert bits(getattr(a, key)) == bits(getattr(b, key)), key
        assert getattr(a, key).shape == getattr(b, key).shape, key
    assert (a.initial_state is None) == (b.initial_state is None)
    if a.initial_state is not None:
        assert bits(a.initial_state) == bits(b.initial_state)
    assert (a.sample_time is None) == (b.sample_time is None)
    if a.sample_time is not None:
        assert bits(a.sample_time) == bits(b.sample_time)
    for key in ("name", "summary", "description", "state_names", "state_units", "input_names", "input_units",
                "output_names", "output_units", "tracked_outputs", "disturbance_names", "disturbance_units", "specs"):
        assert getattr(a, key) == getattr(b, key), key
    assert bits(a.disturbance_step) == bits(b.disturbance_step)
    assert (a.input_limits is None) == (b.input_limits is None)
    if a.input_limits is not None:
        assert bits(a.input_limits) == bits(b.input_limits)
    assert bits(original.gain) == bits(loaded.gain) and original.gain.shape == loaded.gain.shape
    for key in ("prefilter", "integral_gain"):
        x, y = getattr(original, key), getattr(loaded, key)
        assert (x is None) == (y is None), key
        if x is not None:
            assert bits(x) == bits(y) and x.shape == y.shape, key
    assert original.specs == loaded.specs
    assert original.notes == loaded.notes
    assert original.created == loaded.created and original.modified == loaded.modified
    assert len(original.gain_history) == len(loaded.gain_history)
    for (when_a, gain_a), (when_b, gain_b) in zip(original.gain_history, loaded.gain_history):
        assert when_a == when_b and bits(gain_a) == bits(gain_b)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(designs())
def test_saving_and_loading_keeps_every_bit_of_every_number(tmp_path_factory, design):
    # Python float repr round-trips binary64 exactly (from memory, see module docstring).
    path = tmp_path_factory.mktemp("designs") / "design.json"
    save_design(design, path)
    loaded = load_design(path)
    assert_same_design(design, loaded)
    assert design_to_json(loaded) == path.read_text(encoding="utf-8")  # a second save changes nothing


@pytest.mark.parametrize("value", [5e-324, -5e-324, 2.2250738585072014e-308, 1.7976931348623157e308,
                                   -1.7976931348623157e308, -0.0, 0.1, 1 / 3, math.pi * 1e-300])
def test_extreme_doubles_survive_in_K(value):
    # Smallest subnormal, smallest normal, largest finite (IEEE 754 binary64 limits, from memory), and −0.0.
    design = Design(plant=THIRD_ORDER, gain=[[value, -value, 1.0]])
    loaded = design_from_json(design_to_json(design))
    assert bits(loaded.gain) == bits(design.gain)
    assert math.copysign(1.0, loaded.gain[0, 0]) == math.copysign(1.0, value)  # the sign of zero is kept


def test_plant_from_a_toml_plant_file_survives_a_design_file(tmp_path):
    # The README's plant-file example (our own format) loaded by the core, saved in a design, loaded again.
    text = """
name = "Balancing cart"
[model]
A = [[0.0, 1.0], [-2.0, -3.0]]
B = [[0.0], [1.0]]
C = [[1.0, 0.0]]
sample_time = 0.001
[states]
names = ["position", "velocity"]
units = ["m", "m/s"]
initial = [0.1, 0.0]
[inputs]
names = ["motor voltage"]
units = ["V"]
low = [-12.0]
high = [12.0]
[outputs]
names = ["position"]
units = ["m"]
tracked = ["position"]
[disturbance]
matrix = [[0.0], [1.0]]
names = ["load force"]
units = ["N"]
step = [0.5]
[specs]
max_settling_time = 2.0
max_input_magnitude = [12.0]
"""
    plant = core.parse_plant_text(text)
    design = Design(plant=plant, gain=[[3.0, 0.25]], prefilter=[[5.0]], notes="bench test on 3 March")
    save_design(design, tmp_path / "cart.json")
    assert_same_design(design, load_design(tmp_path / "cart.json"))


def test_unbounded_actuator_limit_is_written_as_text_and_read_back():
    # RFC 8259 has no infinity, so ±inf limits are written "inf"/"-inf" (our format's rule).
    plant = THIRD_ORDER.with_changes(input_limits=((-math.inf, 5.0),))
    text = design_to_json(Design(plant=plant, gain=OGATA_GAIN))
    assert '"-inf"' in text and "Infinity" not in text
    assert design_from_json(text).plant.input_limits == ((-math.inf, 5.0),)


def test_disturbance_that_enters_with_the_inputs_stays_so():
    # Without an explicit disturbance matrix, B is used (plant-file rule); the file must not freeze a copy.
    text = design_to_json(Design(plant=THIRD_ORDER, gain=OGATA_GAIN))
    assert '"matrix"' not in text
    loaded = design_from_json(text)
    assert bits(loaded.plant.disturbance_matrix) == bits(THIRD_ORDER.B)
    assert loaded.plant.disturbance_names == ("drive force",)


def test_names_with_lone_surrogates_still_make_valid_utf8_files(tmp_path):
    plant = THIRD_ORDER.with_changes(name="broken \ud800 name")
    path = save_design(Design(plant=plant, gain=OGATA_GAIN), tmp_path / "odd.json")
    path.read_bytes().decode("utf-8")  # strict UTF-8 (RFC 8259 §8.1 requires UTF-8 between systems)
    assert load_design(path).plant.name == "broken \ud800 name"


# -- the gain history --------------------------------------------------------------------------


def test_gain_history_records_each_new_gain_and_keeps_the_newest():
    design = Design(plant=THIRD_ORDER, gain=OGATA_GAIN)
    for k in range(MAX_GAIN_HISTORY + 5):
        design = design.with_gain([[float(k), 1.0, 1.0]], when=f"2026-02-01T10:00:{k % 60:02d}+00:00")
    assert len(design.gain_history) == MAX_GAIN_HISTORY
    assert design.gain_history[-1][1][0, 0] == MAX_GAIN_HISTORY + 4
    assert design.gain_history[0][1][0, 0] == 5  # the five oldest were dropped
    again = design.with_gain(design.gain, when="2026-02-02T00:00:00+00:00")
    assert len(again.gain_history) == MAX_GAIN_HISTORY  # the same K again adds no entry
    assert again.gain_history[-1][0] == design.gain_history[-1][0] == "2026-02-01T10:00:24+00:00"
    assert again.modified == "2026-02-02T00:00:00+00:00"


def test_design_arrays_are_read_only_copies():
    source = np.array(OGATA_GAIN)
    design = Design(plant=THIRD_ORDER, gain=source)
    source[0, 0] = 0.0
    assert design.gain[0, 0] == 199.0
    with pytest.raises(ValueError, match="read-only"):
        design.gain[0, 0] = 1.0


# -- refusals ----------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("change", "message"),
    [
        ({"version": 3}, r"version 3 is not known; this gainboard reads versions 1, 2\. It was written by a newer"),
        ({"version": 0}, r"version 0 is not known"),
        ({"version": "1"}, r"\"version\" must be a whole number, found '1'"),
        ({"version": True}, r"\"version\" must be a whole number"),
        ({"format": "something-else"}, r"not a gainboard design file .*found 'something-else'"),
        ({"surprise": 1}, r"unknown key\(s\) \['surprise'\]"),
        ({"gain": {"K": [[1.0, 2.0]]}}, r"K is 1×2 but must be 1×1"),
        ({"gain": {"K": [[1.0], [2.0, 3.0]]}}, r"gain K has rows of different lengths"),
        ({"gain": {"K": [["1.0"]]}}, r"gain K contains '1.0', which is not a number"),
        ({"gain": {"K": [[1.0]], "N": [[1.0]]}}, r"\"gain\" has unknown key\(s\) \['N'\]"),
        ({"gain": {"prefilter": [[1.0]]}}, r"\"gain\" must give \"K\""),
        ({"gain": {"K": [[1.0]], "prefilter": [[1.0, 2.0]]}}, r"prefilter N is 1×2 but must be 1×1"),
        ({"plant": {"model": {"A": [[-1.0]]}}}, r"plant: \[model\] must give B"),
        ({"plant": {"model": {"A": [[-1.0, 0.0]], "B": [[1.0]]}}}, r"A is 1×2 but must be square"),
        ({"plant": {"model": {"A": [[-1.0]], "B": [[1.0]]}, "inputs": {"low": ["-infinity"], "high": [1.0]}}},
         r"\[inputs\] low contains '-infinity'; write a number, or \"inf\""),
        ({"specs": {"max_overshoot": 5}}, r"\[specs\] has unknown key\(s\) \['max_overshoot'\]"),
        ({"notes": 5}, r"\"notes\" must be text"),
        ({"created": "yesterday"}, r"\"created\" 'yesterday' is not an ISO 8601 date-time"),
        ({"gain_history": [{"time": "2026-01-01T00:00:00", "K": [[1.0, 2.0]]}]}, r"gain history entry 1: K is 1×2"),
        ({"gain_history": [{"K": [[1.0]]}]}, r"gain_history entry 1 must be"),
        ({"gain_history": [{"time": "2026-01-01T00:00:00", "K": [[1.0]]}] * (MAX_GAIN_HISTORY + 1)},
         rf"has {MAX_GAIN_HISTORY + 1} entries; at most {MAX_GAIN_HISTORY}"),
    ],
)
def test_malformed_design_files_are_refused_with_a_message_naming_the_fault(change, message):
    document = {**minimal_document(), **change}
    with pytest.raises(DesignFileError, match=message):
        design_from_json(as_text(document), "bad.json")


@pytest.mark.parametrize("missing", ["format", "plant", "gain"])
def test_missing_required_keys_are_named(missing):
    document = minimal_document()
    del document[missing]
    expected = "not a gainboard design file" if missing == "format" else rf"required key\(s\) \['{missing}'\] are missing"
    with pytest.raises(DesignFileError, match=expected):
        design_from_json(as_text(document))


def test_version_and_format_are_written_first():
    text = design_to_json(Design(plant=THIRD_ORDER, gain=OGATA_GAIN))
    assert text.startswith('{\n  "format": "gainboard-design",\n  "version": 2,')
    assert DESIGN_FORMAT_VERSION == 2


@pytest.mark.parametrize(
    ("text", "message"),
    [
        # RFC 8259 §6: NaN and Infinity are not permitted as numbers (from memory).
        ('{"format": "gainboard-design", "version": 1, "plant": {}, "gain": {"K": [[NaN]]}}', r"contains NaN"),
        ('{"format": "gainboard-design", "version": 1, "plant": {}, "gain": {"K": [[-Infinity]]}}', r"contains -Infinity"),
        # RFC 8259 §4: names SHOULD be unique; we refuse rather than silently keep one.
        ('{"format": "gainboard-design", "version": 1, "version": 1}', r"the key 'version' appears twice"),
        ('{"format": "gainboard-design", "version": 1,', r"not valid JSON"),
        ("[1, 2, 3]", r"not a gainboard design file .*found 'list'"),
        ('{"format": "gainboard-design", "version": 1, "plant": {"model": {"A": [[1e400]], "B": [[1.0]]}}, '
         '"gain": {"K": [[1.0]]}}', r"A has a non-finite entry"),
        ("[" * 100_000 + "]" * 100_000, r"cannot be read as a design file|not valid JSON"),
    ],
)
def test_text_that_is_not_a_valid_design_is_refused(text, message):
    with pytest.raises(DesignFileError, match=message):
        design_from_json(text)


def test_oversized_files_are_refused_before_reading(tmp_path, monkeypatch):
    monkeypatch.setattr(design_file, "MAX_DESIGN_FILE_BYTES", 2_000)
    path = tmp_path / "huge.json"
    path.write_text(" " * 2_001 + as_text(minimal_document()))
    with pytest.raises(DesignFileError, match=r"huge.json: larger than"):
        load_design(path)
    with pytest.raises(DesignFileError, match=r"larger than"):
        design_from_json(" " * 2_001 + as_text(minimal_document()))


def test_a_pickle_is_refused_and_never_unpickled(tmp_path):
    class Tripwire:
        def __reduce__(self):  # would run on unpickling
            return (Path(tmp_path / "tripped").write_text, ("ran",))

    path = tmp_path / "design.json"
    path.write_bytes(pickle.dumps(Tripwire()))
    with pytest.raises(DesignFileError, match=r"not UTF-8 text|not valid JSON"):
        load_design(path)
    assert not (tmp_path / "tripped").exists()


def test_reading_modules_contain_no_code_execution_or_unpickling():
    # Our own rule ("reading never executes code"), checked on the source: no eval/exec/compile, no pickle-like readers.
    forbidden_calls = {"eval", "exec", "compile", "__import__"}
    forbidden_modules = {"pickle", "marshal", "shelve", "dill", "yaml"}
    for module in ("design_file.py", "autosave.py"):
        tree = ast.parse((Path(design_file.__file__).parent / module).read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, ast.Call) and isinstance(node.func, ast.Name):
                assert node.func.id not in forbidden_calls, f"{module} calls {node.func.id}"
            if isinstance(node, (ast.Import, ast.ImportFrom)):
                imported = {alias.name.split(".")[0] for alias in node.names} | {(getattr(node, "module", "") or "").split(".")[0]}
                assert not imported & forbidden_modules, f"{module} imports {imported & forbidden_modules}"


def test_saving_keeps_the_permissions_of_an_existing_file(tmp_path):
    import stat

    path = save_design(Design(plant=THIRD_ORDER, gain=OGATA_GAIN), tmp_path / "shared.json")
    assert stat.S_IMODE(path.stat().st_mode) == 0o644  # a new design file is readable by teammates
    path.chmod(0o640)
    save_design(Design(plant=THIRD_ORDER, gain=OGATA_GAIN), path)
    assert stat.S_IMODE(path.stat().st_mode) == 0o640
    assert [p.name for p in tmp_path.iterdir()] == ["shared.json"]  # no temporary file left behind


def test_missing_and_non_utf8_files_are_refused(tmp_path):
    with pytest.raises(DesignFileError, match=r"cannot read design file .*nothing.json"):
        load_design(tmp_path / "nothing.json")
    (tmp_path / "latin1.json").write_bytes('{"notes": "caf\xe9"}'.encode("latin-1"))
    with pytest.raises(DesignFileError, match=r"latin1.json: not UTF-8 text"):
        load_design(tmp_path / "latin1.json")


def test_a_tracked_output_cannot_share_its_name_so_designs_stay_unambiguous():
    # Tracked outputs are stored by name, so the plant itself refuses repeated names.
    with pytest.raises(core.PlantError, match=r"output names must all differ, but \['speed'\]"):
        core.Plant(A=[[-1.0, 0.0], [0.0, -2.0]], B=[[1.0], [1.0]], output_names=("speed", "speed"),
                   tracked_outputs=(1,))


@pytest.mark.parametrize(
    ("kwargs", "error", "message"),
    [
        ({"gain": [[1.0, 2.0]]}, core.GainError, r"K is 1×2 but must be 1×3"),
        ({"gain": [[1.0, math.nan, 2.0]]}, core.GainError, r"non-finite"),
        ({"gain": OGATA_GAIN, "prefilter": [[1.0], [2.0]]}, core.GainError, r"prefilter N is 2×1 but must be 1×1"),
        ({"gain": OGATA_GAIN, "integral_gain": [[math.inf]]}, core.GainError, r"integral gain Ki has a non-finite"),
        ({"gain": OGATA_GAIN, "created": "noon"}, DesignFileError, r"creation time 'noon' is not an ISO 8601"),
        ({"gain": OGATA_GAIN, "format_version": 3}, DesignFileError, r"version 3 is not known"),
        ({"gain": OGATA_GAIN, "specs": {"max_settling_time": 1.0}}, DesignFileError, r"specs must be gainboard.core.DesignSpecs"),
        ({"gain": OGATA_GAIN, "gain_history": (("2026-01-01T00:00:00", [[1.0]]),)}, core.GainError,
         r"gain history entry 1: K is 1×1"),
    ],
)
def test_designs_are_validated_when_built(kwargs, error, message):
    with pytest.raises(error, match=message):
        Design(plant=THIRD_ORDER, **kwargs)


def test_docstring_examples_of_the_file_modules_run():
    from gainboard.app import autosave, export

    for module in (design_file, autosave, export):
        result = doctest.testmod(module, optionflags=doctest.NORMALIZE_WHITESPACE)
        assert result.failed == 0 and result.attempted > 0, module.__name__
