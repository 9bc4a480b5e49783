"""The command line: its JSON contract, exit codes and one-line refusals."""

import json
import re
import subprocess
import sys

import numpy as np
import pytest

from gainboard.app.cli import main

# Reference-cases.md case 1: A = companion of s³ + 6s² + 5s + 1, B = e3; poles -2±4j, -10 → K = [199, 55, 8].
# Ogata, Modern Control Engineering, 5th ed., Example 10-1 (from memory).
THIRD_ORDER = """
name = "third-order test plant"
[model]
A = [[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [-1.0, -5.0, -6.0]]
B = [[0.0], [0.0], [1.0]]
C = [[1.0, 0.0, 0.0]]
[states]
initial = [1.0, 0.0, 0.0]
"""


@pytest.fixture
def plant_file(tmp_path):
    path = tmp_path / "third_order.toml"
    path.write_text(THIRD_ORDER)
    return str(path)


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_assign_reproduces_the_textbook_gain(plant_file, capsys):
    code, out, err = run(capsys, "assign", plant_file, "--poles", "-2+4j,-2-4j,-10", "--json")
    assert code == 0 and err == ""
    record = json.loads(out)
    # Ogata, Example 10-1 (from memory): K = [199, 55, 8].
    np.testing.assert_allclose(record["K"], [[199.0, 55.0, 8.0]], rtol=1e-10)
    achieved = record["poles"]
    assert all(len(pole) == 2 for pole in achieved)  # complex numbers are [re, im]
    achieved = sorted((complex(re, im) for re, im in achieved), key=lambda p: (p.real, p.imag))
    np.testing.assert_allclose(achieved, [-10, -2 - 4j, -2 + 4j], atol=1e-9)
    assert record["worst_error"] < 1e-9


def test_assign_prints_a_readable_table_without_json(plant_file, capsys):
    code, out, _ = run(capsys, "assign", plant_file, "--poles", "-2+4j,-2-4j,-10")
    assert code == 0 and "K (rows:" in out and "199" in out


def test_evaluate_reports_the_contract_keys(plant_file, capsys):
    code, out, err = run(capsys, "evaluate", plant_file, "--gain", "[[199, 55, 8]]", "--json")
    assert code == 0, err
    record = json.loads(out)
    for key in ("poles", "stable", "controllable", "uncontrollable_poles", "initial", "step", "margins"):
        assert key in record
    assert record["stable"] is True and record["controllable"] is True and record["uncontrollable_poles"] == []
    for key in ("settling_time", "overshoot_percent", "rise_time", "peak_effort"):
        assert key in record["initial"] and key in record["step"]
    # Closed-loop poles are the requested -2±4j, -10 (Ogata Example 10-1, from memory).
    poles = sorted((complex(re, im) for re, im in record["poles"]), key=lambda p: (p.real, p.imag))
    np.testing.assert_allclose(poles, [-10, -2 - 4j, -2 + 4j], atol=1e-9)


def test_evaluate_exit_code_gates_on_specs(plant_file, tmp_path, capsys):
    easy = tmp_path / "easy.toml"
    easy.write_text("max_settling_time = 10.0\n")
    hard = tmp_path / "hard.toml"
    hard.write_text("max_settling_time = 0.01\n")
    code, out, _ = run(capsys, "evaluate", plant_file, "--gain", "[[199, 55, 8]]", "--specs", str(easy), "--json")
    assert code == 0 and all(check["passed"] for check in json.loads(out)["specs"]["checks"])
    code, out, _ = run(capsys, "evaluate", plant_file, "--gain", "[[199, 55, 8]]", "--specs", str(hard), "--json")
    assert code == 1 and json.loads(out)["specs"]["all_passed"] is False


def test_evaluate_reads_gain_from_a_json_file(plant_file, tmp_path, capsys):
    gain_file = tmp_path / "gain.json"
    gain_file.write_text(json.dumps({"K": [[199, 55, 8]]}))
    code, out, _ = run(capsys, "evaluate", plant_file, "--gain", str(gain_file), "--x0", "0.5,0,0", "--json")
    assert code == 0 and json.loads(out)["stable"] is True


def test_sweep_gives_the_routh_hurwitz_intervals(plant_file, capsys):
    # Reference-cases.md case 5, derived by Routh–Hurwitz: k1 ∈ (−1, 839), k2 ∈ (65/7, ∞).
    code, out, _ = run(capsys, "sweep", plant_file, "--gain", "[[199, 55, 8]]", "--entry", "1,1", "--json")
    record = json.loads(out)
    assert code == 0 and record["entry"] == [1, 1]
    assert len(record["stable_intervals"]) == 1
    np.testing.assert_allclose(record["stable_intervals"][0], [-1.0, 839.0], rtol=1e-9)
    code, out, _ = run(capsys, "sweep", plant_file, "--gain", "[[199, 55, 8]]", "--entry", "1,2", "--json")
    (low, high), = json.loads(out)["stable_intervals"]
    assert low == pytest.approx(65 / 7, rel=1e-9) and high is None  # null for an unbounded end


@pytest.mark.parametrize(
    "argv, message",
    [
        (["assign", "{plant}", "--poles", "-2+4j,-10,-3"], r"4 .*3|3 .*4"),
        (["assign", "{plant}", "--poles", "-2,-3,abc"], r"cannot read pole 'abc'"),
        (["assign", "{plant}", "--poles", "-2,-3"], r"3"),
        (["assign", "/nonexistent/plant.toml", "--poles", "-1,-2,-3"], r"cannot read plant file"),
        (["evaluate", "{plant}", "--gain", "[[1, 2]]"], r"K is 1×2 but must be 1×3"),
        (["evaluate", "{plant}", "--gain", "[[1, 2, oops]]"], r"not valid JSON"),
        (["evaluate", "{plant}", "--gain", "missing.json"], r"cannot read gain file"),
        (["evaluate", "{plant}", "--gain", "[[1, 2, 3]]", "--x0", "1,2"], r"--x0 must be 3 finite numbers"),
        (["evaluate", "{plant}", "--gain", "[[1, 2, 3]]", "--horizon", "-1"], r"--horizon must be a positive"),
        (["sweep", "{plant}", "--gain", "[[1, 2, 3]]", "--entry", "2,1"], r"entry 2,1 is outside K, which is 1×3"),
        (["sweep", "{plant}", "--gain", "[[1, 2, 3]]", "--entry", "one"], r"--entry must be ROW,COL"),
        (["frobnicate"], r"invalid choice"),
    ],
)
def test_bad_input_exits_2_with_one_line_on_stderr(plant_file, capsys, argv, message):
    argv = [a.replace("{plant}", plant_file) for a in argv]
    try:
        code = main(argv)
    except SystemExit as stop:  # argparse's own refusals
        code = stop.code
    out, err = capsys.readouterr()
    assert code == 2
    assert len(err.strip().splitlines()) == 1, err
    assert "Traceback" not in err
    assert re.search(message, err), err


def test_console_script_is_installed_and_refuses_without_traceback(tmp_path):
    result = subprocess.run(
        [sys.executable, "-m", "gainboard.app.cli", "assign", str(tmp_path / "none.toml"), "--poles", "-1"],
        capture_output=True,
        text=True,
    )
    assert result.returncode == 2 and "Traceback" not in result.stderr
    assert len(result.stderr.strip().splitlines()) == 1


def test_assign_can_save_a_design_that_export_turns_into_a_c_header(plant_file, tmp_path, capsys):
    design = tmp_path / "design.json"
    code, _, _ = run(capsys, "assign", plant_file, "--poles", "-2+4j,-2-4j,-10", "--save", str(design))
    assert code == 0 and design.exists()
    header = tmp_path / "gains.h"
    code, out, err = run(capsys, "export", str(design), "--format", "c", "-o", str(header))
    assert code == 0 and out == "" and err == ""
    text = header.read_text()
    # Ogata, Example 10-1 (from memory): K = [199, 55, 8], written with every digit.
    assert "199" in text and "55" in text and "#ifndef" in text


def test_export_refuses_a_missing_design_file(tmp_path, capsys):
    code, _, err = run(capsys, "export", str(tmp_path / "none.json"), "--format", "json")
    assert code == 2 and len(err.strip().splitlines()) == 1 and "cannot read design file" in err
