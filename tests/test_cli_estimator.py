"""`gainboard estimator` and `evaluate --estimator-gain`: the JSON contract, exit codes, one-line refusals."""

import json
import math

import numpy as np
import pytest

from gainboard.app.cli import main

# Reference case 19 (reference-cases.md): A = [[0, 20.6], [1, 0]], C = [0, 1], both estimator poles at −10
# → L = [120.6, 20]ᵀ (det(sI − A + LC) = s² + l2 s + l1 − 20.6, derived by hand).
PENDULUM = """
name = "pendulum-like test plant"
[model]
A = [[0.0, 20.6], [1.0, 0.0]]
B = [[1.0], [0.0]]
C = [[0.0, 1.0]]
[states]
initial = [0.0, 0.1]
"""

# Reference case 21: ẋ = −x + w, y = x + v, W = V = 1 → P = √2 − 1 (derived; scipy's solver agrees).
SCALAR = """
[model]
A = [[-1.0]]
B = [[1.0]]
[noise]
process = [1.0]
measurement = [1.0]
"""


@pytest.fixture
def pendulum(tmp_path):
    path = tmp_path / "pendulum.toml"
    path.write_text(PENDULUM)
    return str(path)


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_estimator_by_poles_prints_the_contract_keys_and_the_textbook_gain(pendulum, capsys):
    code, out, err = run(capsys, "estimator", pendulum, "--poles", "-10,-10", "--json")
    assert code == 0 and err == ""
    record = json.loads(out)
    assert {"L", "poles", "worst_error", "method", "observable", "unobservable_poles"} <= set(record)
    np.testing.assert_allclose(record["L"], [[120.6], [20.0]], rtol=1e-12)  # case 19
    assert record["poles"] == [[-10.0, 0.0], [-10.0, 0.0]] or np.allclose(record["poles"], [[-10, 0], [-10, 0]])
    assert record["observable"] is True and record["unobservable_poles"] == []
    assert record["form"] == "full-order"


def test_estimator_by_kalman_reads_the_plant_noise_table_and_reports_the_error_covariance(tmp_path, capsys):
    path = tmp_path / "scalar.toml"
    path.write_text(SCALAR)
    code, out, err = run(capsys, "estimator", str(path), "--kalman", "--json")
    assert code == 0, err
    record = json.loads(out)
    assert record["error_covariance"][0][0] == pytest.approx(math.sqrt(2) - 1, rel=1e-12)  # case 21
    assert record["L"][0][0] == pytest.approx(math.sqrt(2) - 1, rel=1e-12)
    assert record["noise_source"] == "W and V from the plant" and record["worst_error"] is None
    code, out, _ = run(capsys, "estimator", str(path), "--kalman", "--measurement-noise", "[[2.0]]", "--json")
    # V = 2: −2P + 1 − P²/2 = 0 → P = −2 + √6 (derived by hand)
    assert json.loads(out)["error_covariance"][0][0] == pytest.approx(math.sqrt(6) - 2, rel=1e-12)


def test_estimator_table_is_readable(pendulum, capsys):
    code, out, _ = run(capsys, "estimator", pendulum, "--poles", "-10,-10")
    assert code == 0 and "L (rows: x1, x2; columns: y1)" in out and "Estimator poles: -10, -10" in out
    assert "emergency stops" in out  # the caution travels with every gain handed out


@pytest.mark.parametrize("argv, message", [
    (["--poles", "-1,-2,-3"], "3 estimator poles were given but 2"),
    (["--poles", "-1,-2", "--kalman"], "either --poles"),
    ([], "either --poles"),
    (["--kalman", "--process-noise", "[[1, 0], [0, -1]]"], "positive semidefinite"),
    (["--kalman", "--measurement-noise", "[0]"], "positive definite"),
    (["--kalman", "--measurement-noise", "[[1, 0], [0, 4]]"], "V is 2×2 but the plant has 1 outputs"),
    (["--kalman", "--process-noise", "[[1, 2], [3, 4]]"], "must be symmetric"),
    (["--poles", "-1,-2", "--process-noise", "[1, 1]"], "belong to --kalman"),
    (["--poles", "-1,-2", "--form", "current"], "not for a continuous plant"),
    (["--poles", "-1,-2", "--save", "x.json"], "--save needs --gain"),
])
def test_bad_estimator_input_exits_2_with_one_line(pendulum, capsys, argv, message):
    code, out, err = run(capsys, "estimator", pendulum, *argv)
    assert code == 2 and out == ""
    assert message in err and err.count("\n") == 1


def test_unobservable_target_exits_2_naming_the_hidden_pole(tmp_path, capsys):
    path = tmp_path / "hidden.toml"
    path.write_text("[model]\nA = [[-1.0, 0.0], [0.0, -2.0]]\nB = [[1.0], [1.0]]\nC = [[1.0, 0.0]]\n")
    code, _, err = run(capsys, "estimator", str(path), "--poles", "-5,-6")
    assert code == 2 and "pole -2 cannot be moved by the estimator (unobservable" in err


def test_evaluate_with_an_estimator_gain_adds_the_compensator_and_keeps_full_state_keys(pendulum, tmp_path, capsys):
    gain_file = tmp_path / "estimator.json"
    gain_file.write_text(json.dumps({"L": [[120.6], [20.0]]}))
    code, out, err = run(capsys, "evaluate", pendulum, "--gain", "[[30, 100]]", "--estimator-gain", str(gain_file),
                         "--json")
    assert code == 0, err
    record = json.loads(out)
    assert len(record["poles"]) == 2  # top level: full-state feedback
    compensator = record["compensator"]
    assert len(compensator["poles"]) == 4 and compensator["stable"] is True
    assert set(record["margins"]) == set(compensator["margins"])  # same keys as the top-level margins
    assert "initial" in compensator and compensator["separation_holds"] is True
    # separation (case 22): the 4 poles are eig(A − BK) ∪ {−10, −10}
    full = np.sort_complex([complex(*p) for p in record["poles"]] + [-10, -10])
    got = np.sort_complex([complex(*p) for p in compensator["poles"]])
    np.testing.assert_allclose(got, full, atol=1e-4)  # a double pole at −10 splits by about √eps
    # inline L and a wrong shape
    code, out, err = run(capsys, "evaluate", pendulum, "--gain", "[[30, 100]]", "--estimator-gain", "[[1, 2]]")
    assert code == 2 and "L is 1×2 but must be 2×1" in err
    code, out, err = run(capsys, "evaluate", pendulum, "--gain", "[[30, 100]]", "--initial-estimate", "0,0")
    assert code == 2 and "need --estimator-gain" in err


def test_evaluate_table_shows_the_compensator_section(pendulum, capsys):
    code, out, _ = run(capsys, "evaluate", pendulum, "--gain", "[[30, 100]]", "--estimator-gain", "[[120.6], [20]]")
    assert code == 0 and "Compensator (full-order estimator): STABLE" in out


def test_estimator_save_writes_a_version_two_design_file_with_k_and_l(pendulum, tmp_path, capsys):
    from gainboard.app.design_file import load_design

    target = tmp_path / "design.json"
    code, _, err = run(capsys, "estimator", pendulum, "--poles", "-10,-10", "--gain", "[[30, 100]]",
                       "--save", str(target))
    assert code == 0, err
    design = load_design(target)
    np.testing.assert_allclose(design.estimator.gain, [[120.6], [20.0]], rtol=1e-12)  # case 19
    assert design.estimator.poles == (-10.0, -10.0) and design.gain.tolist() == [[30.0, 100.0]]
