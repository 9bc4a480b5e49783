"""`gainboard evaluate --sample-time T`: the continuous K run through a ZOH, in the JSON contract.

Reference (shared/reference-cases.md, cases 9 and 14): the ZOH double integrator Φ = [[1, T], [0, 1]],
Γ = [T²/2, T]ᵀ (Franklin, Powell & Workman, from memory) closed by K = [k1, k2] has the characteristic
polynomial z² + (k1T²/2 + k2T − 2) z + (1 + k1T²/2 − k2T) (derived by hand); Jury's conditions
(Åström & Wittenmark, from memory) give stability exactly for T < min(2k2/k1, 2/k2) when that is where
a0 = 1 or 1 − a1 + a0 = 0 first binds: K = [1, 1] → T < 2, K = [1, 3] → T < 2/3.
"""

import json

import numpy as np
import pytest
import scipy.signal

from gainboard.app.cli import main

DOUBLE_INTEGRATOR = """
name = "double integrator"
[model]
A = [[0.0, 1.0], [0.0, 0.0]]
B = [[0.0], [1.0]]
C = [[1.0, 0.0]]
[states]
initial = [1.0, 0.0]
"""


@pytest.fixture
def plant_file(tmp_path):
    path = tmp_path / "double_integrator.toml"
    path.write_text(DOUBLE_INTEGRATOR)
    return str(path)


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


@pytest.mark.parametrize("gain, largest", [("[[1, 1]]", 2.0), ("[[1, 3]]", 2.0 / 3.0)])
def test_sample_time_adds_the_sampled_loop_with_the_exact_largest_stable_sample_time(plant_file, capsys, gain,
                                                                                     largest):
    code, out, err = run(capsys, "evaluate", plant_file, "--gain", gain, "--sample-time", "0.1", "--json")
    assert code == 0 and err == ""
    sampled = json.loads(out)["sampled"]
    assert sampled["sample_time"] == 0.1 and sampled["stable"] is True
    assert sampled["largest_stable_sample_time"] == pytest.approx(largest, rel=1e-8)  # Jury, derived (above)
    # z-plane poles: eig(Φ − ΓK) with scipy.signal.cont2discrete's ZOH as the reference
    Ad, Bd, *_ = scipy.signal.cont2discrete((np.array([[0.0, 1.0], [0.0, 0.0]]), np.array([[0.0], [1.0]]),
                                             np.eye(2), np.zeros((2, 1))), 0.1, method="zoh")
    expected = np.sort_complex(np.linalg.eigvals(Ad - Bd @ np.array(json.loads(gain), float)))
    shown = np.sort_complex([complex(re, im) for re, im in sampled["poles"]])
    np.testing.assert_allclose(shown, expected, atol=1e-12)


def test_an_unstable_sampled_loop_is_reported_as_unstable(plant_file, capsys):
    code, out, _ = run(capsys, "evaluate", plant_file, "--gain", "[[1, 1]]", "--sample-time", "2.5", "--json")
    sampled = json.loads(out)["sampled"]
    assert sampled["stable"] is False and sampled["largest_stable_sample_time"] == pytest.approx(2.0, rel=1e-8)


def test_a_loop_that_never_loses_stability_gives_null_and_the_bound_searched(tmp_path, capsys):
    # x' = −x + u with K = 1/2: z = e^{−T} − (1 − e^{−T})/2 = 1.5e^{−T} − 0.5 ∈ (−0.5, 1) for every T > 0
    # (case 10's Φ, Γ for a = 1; derived), so no sample time loses stability.
    path = tmp_path / "lag.toml"
    path.write_text('name = "lag"\n[model]\nA = [[-1.0]]\nB = [[1.0]]\nC = [[1.0]]\n[states]\ninitial = [1.0]\n')
    code, out, _ = run(capsys, "evaluate", str(path), "--gain", "[[0.5]]", "--sample-time", "0.1", "--json")
    sampled = json.loads(out)["sampled"]
    assert sampled["stable"] is True and sampled["largest_stable_sample_time"] is None
    assert sampled["searched_up_to"] > 100


@pytest.mark.parametrize("bad", ["0", "-0.1", "nan", "inf"])
def test_an_invalid_sample_time_exits_2_with_one_line(plant_file, capsys, bad):
    code, out, err = run(capsys, "evaluate", plant_file, "--gain", "[[1, 1]]", f"--sample-time={bad}", "--json")
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and "--sample-time must be a positive, finite number of seconds" in err


def test_the_table_names_the_sampled_loop(plant_file, capsys):
    code, out, _ = run(capsys, "evaluate", plant_file, "--gain", "[[1, 3]]", "--sample-time", "0.1")
    assert "sampled through a ZOH at T = 0.1 s: STABLE; stable for T up to 0.666667 s" in out
