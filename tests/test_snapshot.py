"""Snapshot links and plant text written back as TOML.

Outside references:
- Python's ``float.__repr__`` is the shortest text that reads back to the same IEEE 754
  double (Python docs, "Floating Point Arithmetic: Issues and Limitations"; Steele & White /
  David Gay's algorithm), so a round trip must keep every bit, -0.0 and subnormals included;
- the standard library's TOML 1.0 reader (``tomllib``) is the independent judge of the plant
  text we write;
- base64url is RFC 4648 §5 and zlib is RFC 1950 (the standard library's ``base64`` and ``zlib``
  decode the links independently of our reader).
"""

from __future__ import annotations

import base64
import json
import math
import pickle
import tomllib
import zlib

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from gainboard import core
from gainboard.app.design_file import Design, DesignFileError, plant_to_mapping
from gainboard.app.plant_text import plant_to_toml
from gainboard.app.snapshot import (
    MAX_SNAPSHOT_CHARACTERS,
    SnapshotError,
    design_from_snapshot,
    snapshot_code,
    snapshot_url,
)
from gainboard.sample_plants import bundled_plant_files

finite = st.floats(allow_nan=False, allow_infinity=False, width=64)
text = st.text(st.characters(blacklist_categories=("Cs",)), max_size=40)


def bits(array) -> bytes:
    return np.asarray(array, dtype=float).tobytes()


@st.composite
def designs(draw):
    n = draw(st.integers(1, 4))
    m = draw(st.integers(1, 2))
    matrix = lambda rows, cols: draw(st.lists(st.lists(finite, min_size=cols, max_size=cols),  # noqa: E731
                                              min_size=rows, max_size=rows))
    plant = core.Plant(A=matrix(n, n), B=matrix(n, m), name=draw(text.filter(str.strip)) or "p",
                       summary=draw(text), description=draw(st.text(max_size=200).filter(lambda t: "\x00" not in t)))
    return Design(plant=plant, gain=matrix(m, n))


def pack(raw: bytes) -> str:
    """Encode bytes the way a link carries them, with the standard library only (RFC 1950, RFC 4648 §5)."""
    return "g1." + base64.urlsafe_b64encode(zlib.compress(raw)).decode().rstrip("=")


# -- snapshot links ----------------------------------------------------------------------------


@settings(max_examples=40, deadline=None)
@given(design=designs())
def test_a_snapshot_reproduces_plant_and_gain_bit_for_bit(design):
    code = snapshot_code(design)
    assert len(code) <= MAX_SNAPSHOT_CHARACTERS
    again = design_from_snapshot(code)
    # IEEE 754 shortest-repr round trip (Python docs): every bit survives.
    assert bits(again.gain) == bits(design.gain)
    assert bits(again.plant.A) == bits(design.plant.A) and bits(again.plant.B) == bits(design.plant.B)
    assert again.plant.name == design.plant.name and again.plant.description == design.plant.description


def test_a_snapshot_decodes_with_the_standard_library_alone():
    plant = core.Plant(A=[[0.0, 1.0], [-4.0, 0.0]], B=[[0.0], [1.0]], name="spring")
    design = Design(plant=plant, gain=[[12.0, 8.0]], notes="private remark")  # case 2: K = [3ω0², 4ω0], ω0 = 2
    code = snapshot_code(design)
    body = code.removeprefix("g1.")
    document = json.loads(zlib.decompress(base64.urlsafe_b64decode(body + "=" * (-len(body) % 4))))
    assert document["gain"]["K"] == [[12.0, 8.0]]
    assert document["notes"] == "" and document["gain_history"] == []  # notes and history stay out of links


def test_a_snapshot_url_keeps_the_page_address_and_replaces_the_query():
    design = Design(plant=core.Plant(A=[[-1.0]], B=[[1.0]]), gain=[[0.5]])
    url = snapshot_url("http://127.0.0.1:5006/?room=lab#top", design)
    assert url.startswith("http://127.0.0.1:5006/?design=g1.") and "room=" not in url and "#" not in url


@pytest.mark.parametrize("code, expected", [
    ("g9.eJwrSS0uAQAEXQHB", "version prefix 'g9'"),
    ("eJwrSS0uAQAEXQHB", "version prefix 'none'"),
    ("g1.eJw$rSS0uAQ", "characters other than letters, digits"),
    ("g1." + "A" * (MAX_SNAPSHOT_CHARACTERS + 1), f"at most {MAX_SNAPSHOT_CHARACTERS} are read"),
    ("g1.AAAA", "damaged|incomplete"),
])
def test_damaged_snapshots_are_refused_saying_why(code, expected):
    with pytest.raises(SnapshotError, match=expected):
        design_from_snapshot(code)


def test_a_cut_short_snapshot_is_refused():
    design = Design(plant=core.Plant(A=[[-1.0]], B=[[1.0]]), gain=[[0.5]])
    code = snapshot_code(design)
    with pytest.raises(SnapshotError, match="cut short|incomplete|damaged"):
        design_from_snapshot(code[: len(code) // 2])


def test_a_snapshot_that_inflates_enormously_is_refused():
    code = pack(b" " * 3_000_000)  # about 3 kB of link, 3 MB inflated
    assert len(code) < MAX_SNAPSHOT_CHARACTERS
    with pytest.raises(SnapshotError, match="inflates to more than"):
        design_from_snapshot(code)


def test_a_snapshot_that_is_not_a_design_is_refused_by_the_design_reader():
    with pytest.raises(DesignFileError, match="not a gainboard design file"):
        design_from_snapshot(pack(b'{"format": "something-else"}'))


executed = []


class _Trap:
    def __reduce__(self):
        return (executed.append, ("code ran",))


def test_a_snapshot_carrying_a_pickle_is_refused_without_running_it():
    with pytest.raises(DesignFileError):
        design_from_snapshot(pack(pickle.dumps(_Trap())))
    assert executed == []


def test_a_design_too_large_for_a_link_says_to_share_the_file():
    rng = np.random.default_rng(7)
    noise = "".join(chr(c) for c in rng.integers(0x4E00, 0x9FFF, size=30_000))  # incompressible text
    design = Design(plant=core.Plant(A=[[-1.0]], B=[[1.0]], description=noise), gain=[[1.0]])
    with pytest.raises(SnapshotError, match="share the design file instead"):
        snapshot_code(design)


# -- plant text written back as TOML ----------------------------------------------------------


def _toml_view(mapping):
    """plant_to_mapping writes unbounded limits as "inf" text for JSON; TOML holds real infinities."""
    inputs = dict(mapping["inputs"])
    for key in ("low", "high"):
        if key in inputs:
            inputs[key] = [float(v) for v in inputs[key]]
    return {**mapping, "inputs": inputs}


@pytest.mark.parametrize("stem", sorted(bundled_plant_files()))
def test_bundled_plants_written_as_toml_read_back_identically(stem):
    plant = core.load_plant_file(bundled_plant_files()[stem])
    written = plant_to_toml(plant)
    # The standard library's TOML reader sees exactly the plant's data.
    assert repr(tomllib.loads(written)) == repr(_toml_view(plant_to_mapping(plant)))
    again = core.parse_plant_text(written)
    assert repr(plant_to_mapping(again)) == repr(plant_to_mapping(plant))


@settings(max_examples=50, deadline=None)
@given(
    values=st.lists(finite, min_size=4, max_size=4),
    name=text.filter(str.strip),
    description=st.text(st.characters(blacklist_categories=("Cs",)), max_size=80),
    low=st.one_of(st.just(-math.inf), st.floats(-1e6, 0)),
)
def test_any_plant_written_as_toml_reads_back_bit_for_bit(values, name, description, low):
    plant = core.Plant(A=[values[:2], values[2:]], B=[[0.0], [1.0]], name=name, description=description,
                       input_limits=[(low, math.inf)])
    written = plant_to_toml(plant)
    parsed = tomllib.loads(written)  # the standard library's TOML 1.0 reader
    assert bits(parsed["model"]["A"]) == bits(plant.A)
    assert parsed["name"] == name and parsed["description"] == description
    assert parsed["inputs"]["high"] == [math.inf]
    assert bits(core.parse_plant_text(written).A) == bits(plant.A)
