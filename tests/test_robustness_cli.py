"""`gainboard robustness` and `--operating-point`: JSON keys, exit codes and one-line refusals."""

import json

import numpy as np
import pytest

from gainboard.app.cli import main

from test_robustness import THREE_POINTS

CONTRACT_KEYS = {"samples", "seed", "stable_fraction", "stable_fraction_interval", "spec_pass_fraction", "worst",
                 "failed_samples", "operating_points", "parameter_boundaries"}


@pytest.fixture
def family_file(tmp_path):
    path = tmp_path / "cubic_family.toml"
    path.write_text(THREE_POINTS)  # s³ + 3s² + 2s + g·k1; points g = 0.5, 2.5, 7.0
    return path


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_robustness_prints_the_contract_keys_and_exits_1_on_an_unstable_operating_point(family_file, capsys):
    code, out, err = run(capsys, "robustness", family_file, "--gain", "[[1, 0, 0]]", "--samples", "4000",
                         "--seed", "11", "--json")
    record = json.loads(out)
    assert CONTRACT_KEYS <= set(record)
    assert code == 1  # g = 7 is past the Routh–Hurwitz limit 0 < g < 6 (reference case 4)
    points = {p["name"]: p for p in record["operating_points"]}
    assert [p["stable"] for p in points.values()] == [True, True, True, False]
    assert all(len(pole) == 2 for pole in points["heavy"]["poles"])
    assert record["samples"] == 4000 and record["seed"] == 11
    low, high = record["stable_fraction_interval"]
    assert low < 6 / 11 < high  # g uniform on [−1, 10], stable on (0, 6)
    boundary = record["parameter_boundaries"]["g"]
    assert boundary["boundaries"] == pytest.approx([0.0, 6.0], abs=1e-9)
    assert "never a proof" in record["caution"]


def test_robustness_exits_0_when_every_point_holds_and_1_below_the_required_fraction(family_file, capsys):
    text = family_file.read_text().replace("g = 7.0", "g = 5.0")
    family_file.write_text(text)
    common = ["robustness", family_file, "--gain", "[[1, 0, 0]]", "--samples", "3000", "--json"]
    assert run(capsys, *common)[0] == 0
    assert run(capsys, *common, "--require-stable-fraction", "0.5")[0] == 0
    assert run(capsys, *common, "--require-stable-fraction", "0.6")[0] == 1  # true fraction is 6/11 ≈ 0.545


def test_robustness_prints_a_table_with_the_caution(family_file, capsys):
    code, out, _ = run(capsys, "robustness", family_file, "--gain", "[[1, 0, 0]]", "--samples", "1000")
    assert "overdriven: NOT stable" in out and "confidence interval" in out and "never a proof" in out


@pytest.mark.parametrize("extra, message", [
    (("--samples", "0"), "number of samples must be a whole number"),
    (("--require-stable-fraction", "1.5"), "--require-stable-fraction must lie between 0 and 1"),
    (("--seed", "-3"), "seed must be a whole number"),
])
def test_robustness_refuses_bad_input_on_one_line_with_exit_2(family_file, capsys, extra, message):
    code, out, err = run(capsys, "robustness", family_file, "--gain", "[[1, 0, 0]]", *extra)
    assert code == 2 and out == "" and message in err and err.count("\n") == 1


def test_evaluate_and_sweep_use_the_named_operating_point(family_file, capsys):
    code, out, _ = run(capsys, "evaluate", family_file, "--gain", "[[1, 0, 0]]", "--operating-point", "heavy",
                       "--json")
    poles = [complex(re, im) for re, im in json.loads(out)["poles"]]
    np.testing.assert_allclose(np.poly(poles).real, [1, 3, 2, 2.5], atol=1e-12)  # s³ + 3s² + 2s + 2.5
    code, out, _ = run(capsys, "sweep", family_file, "--gain", "[[1, 0, 0]]", "--entry", "1,1",
                       "--operating-point", "heavy", "--json")
    # Routh–Hurwitz: 0 < 2.5·k1 < 6
    assert json.loads(out)["stable_intervals"] == [pytest.approx([0.0, 6 / 2.5], abs=1e-9)]
    code, out, err = run(capsys, "evaluate", family_file, "--gain", "[[1, 0, 0]]", "--operating-point", "medium")
    assert code == 2 and "no operating point 'medium'" in err and "heavy" in err


def test_a_family_with_operating_points_only_is_judged_exactly_and_not_sampled(tmp_path, capsys):
    path = tmp_path / "points_only.toml"
    path.write_text(THREE_POINTS.replace("low = -1.0\nhigh = 10.0\n", ""))  # g fixed: nothing to sample
    code, out, _ = run(capsys, "robustness", path, "--gain", "[[1, 0, 0]]", "--json")
    record = json.loads(out)
    assert code == 1 and record["samples"] == 0 and record["stable_fraction"] is None
    assert "nothing was sampled" in record["note"] and len(record["operating_points"]) == 4
    # asking for a stable fraction that was never measured fails rather than passing silently
    code, _, _ = run(capsys, "robustness", path, "--gain", "[[0.1, 0, 0]]", "--require-stable-fraction", "0.5")
    assert code == 1
