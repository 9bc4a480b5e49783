"""Command-line interop (issue 12): standard input and output, JSON plants, design and gain files as inputs,
refusal of a gain made for another plant, plain CSV and identifier prefixes.

The numbers are checked against the TOML route of the same plant (the contract tested in test_cli.py
against Ogata's Example 10-1) and against Python's own csv/json readers.
"""

from __future__ import annotations

import csv
import io
import json
import re
import tomllib

import pytest

from gainboard.app.cli import main
from gainboard.sample_plants import bundled_plant_files

GAIN = "[[-3.5, -9.1, -43.0, -8.4]]"
POLES = "-2+1j,-2-1j,-3,-4"


def run(capsys, monkeypatch, *argv, stdin: str | None = None):
    if stdin is not None:
        monkeypatch.setattr("sys.stdin", io.StringIO(stdin))
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture
def saved(tmp_path, capsys, monkeypatch):
    """A design file of cart_pendulum, its exported JSON gain file and the TOML plant text."""
    design = tmp_path / "design.json"
    gains = tmp_path / "gains.json"
    assert run(capsys, monkeypatch, "assign", "cart_pendulum", "--poles", POLES, "--save", str(design))[0] == 0
    assert run(capsys, monkeypatch, "export", str(design), "--format", "json", "-o", str(gains))[0] == 0
    return design, gains, bundled_plant_files()["cart_pendulum"].read_text(encoding="utf-8")


def evaluate_json(capsys, monkeypatch, *argv, stdin=None):
    code, out, err = run(capsys, monkeypatch, "evaluate", *argv, "--json", stdin=stdin)
    assert code in (0, 1), err
    return json.loads(out)


def test_plant_and_gain_from_standard_input_match_the_file_route(saved, capsys, monkeypatch):
    design, gains, toml_text = saved
    by_name = evaluate_json(capsys, monkeypatch, "cart_pendulum", "--gain", GAIN)
    assert evaluate_json(capsys, monkeypatch, "-", "--gain", GAIN, stdin=toml_text) == by_name
    from_file = evaluate_json(capsys, monkeypatch, "cart_pendulum", "--gain", str(gains))
    assert evaluate_json(capsys, monkeypatch, "cart_pendulum", "--gain", "-", stdin=gains.read_text()) == from_file


def test_standard_input_serves_one_argument_only(saved, capsys, monkeypatch):
    _, _, toml_text = saved
    code, _, err = run(capsys, monkeypatch, "evaluate", "-", "--gain", "-", stdin=toml_text)
    assert code == 2 and "standard input is already the plant" in err


def test_a_json_plant_with_the_toml_keys_is_the_same_plant(tmp_path, capsys, monkeypatch):
    path = bundled_plant_files()["maglev_ball"]
    json_path = tmp_path / "maglev.json"
    json_path.write_text(json.dumps(tomllib.loads(path.read_text(encoding="utf-8"))))
    gain = "[[-800, -20, 15]]"
    assert (evaluate_json(capsys, monkeypatch, str(json_path), "--gain", gain)
            == evaluate_json(capsys, monkeypatch, "maglev_ball", "--gain", gain))


def test_a_design_file_is_a_plant_and_a_gain(saved, capsys, monkeypatch):
    design, gains, _ = saved
    via_design = evaluate_json(capsys, monkeypatch, str(design), "--gain", str(design))
    via_gain_file = evaluate_json(capsys, monkeypatch, "cart_pendulum", "--gain", str(gains))
    assert via_design == via_gain_file and via_design["stable"]


@pytest.mark.parametrize("which", ["design", "gains"])
def test_a_gain_of_another_plant_is_refused_naming_both_orders(saved, capsys, monkeypatch, which):
    design, gains, _ = saved
    source = design if which == "design" else gains
    code, out, err = run(capsys, monkeypatch, "evaluate", "maglev_ball", "--gain", str(source))
    assert code == 2 and out == ""
    assert "cart position, cart velocity, rod angle, rod angular velocity" in err  # the gain file's order
    assert "gap deviation, ball velocity, coil current deviation" in err  # the plant's order
    assert len(err.strip().splitlines()) == 1


def test_a_renamed_state_is_refused_even_when_the_count_fits(saved, tmp_path, capsys, monkeypatch):
    _, gains, _ = saved
    record = json.loads(gains.read_text())
    record["state_order"][0] = "cart angle"
    other = tmp_path / "other.json"
    other.write_text(json.dumps(record))
    code, _, err = run(capsys, monkeypatch, "evaluate", "cart_pendulum", "--gain", str(other))
    assert code == 2 and "cart angle" in err


def test_export_reads_standard_input_and_writes_standard_output(saved, capsys, monkeypatch):
    design, _, _ = saved
    code, to_file_text, _ = run(capsys, monkeypatch, "export", str(design), "--format", "c")
    code, out, _ = run(capsys, monkeypatch, "export", "-", "--format", "c", "-o", "-", stdin=design.read_text())
    assert code == 0 and out == to_file_text and "static const double" in out


def test_csv_export_is_read_by_plain_csv_readers_and_keeps_the_caution(saved, capsys, monkeypatch):
    design, _, _ = saved
    code, out, _ = run(capsys, monkeypatch, "export", str(design), "--format", "csv")
    assert code == 0 and not out.startswith("#")
    rows = list(csv.DictReader(io.StringIO(out)))  # Python's csv module with default options
    assert [row["matrix"] for row in rows] == ["K"] * 4
    assert [float(row["value"]) for row in rows] == pytest.approx(json.loads(design.read_text())["gain"]["K"][0])
    assert "emergency stop" in " ".join(rows[0]["notes"].split()) and all(row["notes"] == "" for row in rows[1:])


def test_prefix_names_the_c_and_python_identifiers(saved, capsys, monkeypatch):
    design, _, _ = saved
    _, header, _ = run(capsys, monkeypatch, "export", str(design), "--format", "c", "--prefix", "pitch_loop")
    assert "#define PITCH_LOOP_STATE_COUNT 4" in header and re.search(r"\bpitch_loop_K\b", header)
    _, snippet, _ = run(capsys, monkeypatch, "export", str(design), "--format", "python", "--prefix", "pitch_loop")
    namespace = {}
    exec(compile(snippet, "snippet", "exec"), namespace)  # noqa: S102 - our own export, read back by Python
    assert len(namespace["pitch_loop_feedback"]([0.0, 0.0, 0.1, 0.0])) == 1


@pytest.mark.parametrize("prefix", ["9lives", "two words", "class", "x" * 29])
def test_an_invalid_prefix_is_refused_in_one_line(saved, capsys, monkeypatch, prefix):
    design, _, _ = saved
    code, out, err = run(capsys, monkeypatch, "export", str(design), "--format", "c", "--prefix", prefix)
    assert code == 2 and out == "" and "prefix" in err and len(err.strip().splitlines()) == 1
