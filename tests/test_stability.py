"""The one stability decision: stable / on the boundary / unstable, the same everywhere.

Reference: exact characteristic polynomials computed by sympy from integer (so exactly
representable) companion realisations, and their exact roots (sympy). Each loop below has
poles exactly on the stability boundary; every view of it must say "on the boundary".
"""

import json
import math

import numpy as np
import pytest
import sympy

from gainboard import core
from gainboard.app.cli import main
from gainboard.core._batched_loops import stability_verdicts

S, Z = sympy.symbols("s z")


def _chain(n: int, sample_time=None) -> core.Plant:
    """n integrators in a chain (x1' = x2, …, xn' = u): A − BK is the companion matrix of K."""
    A = np.diag(np.ones(n - 1), 1)
    B = np.zeros((n, 1))
    B[-1, 0] = 1.0
    return core.Plant(A=A, B=B, sample_time=sample_time, name="chain")


def _exact_characteristic_polynomial(plant: core.Plant, K, variable):
    # sympy with exact integers: the floats of A, B, K are integers, so nothing is rounded
    A = sympy.Matrix(plant.A.astype(int).tolist())
    B = sympy.Matrix(plant.B.astype(int).tolist())
    gain = sympy.Matrix(np.asarray(K, dtype=int).tolist())
    return sympy.expand((A - B * gain).charpoly(variable).as_expr())


# (K on the chain, the exact closed-loop polynomial it must give, sample time)
BOUNDARY_CASES = {
    # s⁴ + 119s² + 2168: roots ±j·√((119 ± √5489)/2), all four on the imaginary axis (sympy below)
    "four imaginary roots": ([[2168, 0, 119, 0]], S**4 + 119 * S**2 + 2168, None),
    # (s+2)(s+3)(s²+4): ±2j on the axis
    "pair at ±2j": ([[24, 20, 10, 5]], sympy.expand((S + 2) * (S + 3) * (S**2 + 4)), None),
    # s·(s³+45s²+59s+2064): a pole at s = 0 (the cubic is Hurwitz: 45·59 > 2064, Routh)
    "pole at the origin": ([[0, 2064, 59, 45]], sympy.expand(S * (S**3 + 45 * S**2 + 59 * S + 2064)), None),
    # z² − z + 1: roots e^{±jπ/3} on the unit circle
    "sampled pair on the unit circle": ([[1, -1]], Z**2 - Z + 1, 0.5),
}


@pytest.mark.parametrize("name", list(BOUNDARY_CASES))
def test_the_exact_boundary_cases_are_on_the_boundary_everywhere(name):
    K, polynomial, sample_time = BOUNDARY_CASES[name]
    n = len(K[0])
    plant = _chain(n, sample_time)
    variable = Z if sample_time else S
    # outside reference: sympy's exact characteristic polynomial and exact roots
    assert sympy.expand(_exact_characteristic_polynomial(plant, K, variable) - polynomial) == 0
    roots = sympy.Poly(polynomial, variable).all_roots()
    if sample_time:
        assert all(sympy.simplify(sympy.Abs(r) - 1) == 0 for r in roots)  # sympy: |e^{±jπ/3}| = 1 exactly
    else:
        assert max(sympy.re(r) for r in roots) == 0  # sympy: largest real part exactly 0

    report = core.analyze_closed_loop(plant, K)
    assert report.verdict == core.ON_THE_BOUNDARY and not report.stable and report.on_boundary
    assert any(d.verdict == core.ON_THE_BOUNDARY for d in report.descriptions)  # the pole table
    assert all(d.verdict != core.UNSTABLE for d in report.descriptions)

    evaluation = core.evaluate_design(plant, K, core.EvaluationOptions(
        selected_entry=(0, 0), specs=core.DesignSpecs()))
    assert evaluation.closed_loop.verdict == core.ON_THE_BOUNDARY
    stable_check = [c for c in evaluation.spec_report.checks if c.name == "stable"][0]
    assert not stable_check.passed and "on the boundary" in stable_check.detail
    if evaluation.margins is not None:
        assert "not stable" in evaluation.margins.note

    sweep = core.entry_stable_intervals(plant, K, 0, 0)
    assert sweep.current_verdict == core.ON_THE_BOUNDARY and not sweep.current_is_stable
    assert not sweep.contains(float(K[0][0]))

    closed = (plant.A - plant.B @ np.asarray(K, dtype=float))[None]
    assert stability_verdicts(closed, sample_time)[2][0] == 0  # batched (robustness, Monte Carlo)


def test_a_stable_and_an_unstable_loop_are_called_so():
    # s³ + 6s² + 11s + 6 = (s+1)(s+2)(s+3) (sympy factor), and s³ − 6s² + 11s − 6 = (s−1)(s−2)(s−3)
    plant = _chain(3)
    assert sympy.factor(_exact_characteristic_polynomial(plant, [[6, 11, 6]], S)) == (S + 1) * (S + 2) * (S + 3)
    assert core.analyze_closed_loop(plant, [[6, 11, 6]]).verdict == core.STABLE
    assert core.analyze_closed_loop(plant, [[-6, 11, -6]]).verdict == core.UNSTABLE


def test_the_band_is_derived_from_the_matrix_norm_and_size():
    # the rule of core/_stability.py: 100 · n · eps · ‖M‖_F (our own derivation, see its notes)
    eps = np.finfo(float).eps
    assert core.boundary_tolerance(8.0, 4) == pytest.approx(100 * 4 * eps * 8.0, rel=1e-15)
    band = core.boundary_tolerance(1.0, 2)
    assert core.decide_stability([-0.5 * band, -1.0], 1.0, 2, None).verdict == core.ON_THE_BOUNDARY
    assert core.decide_stability([0.5 * band, -1.0], 1.0, 2, None).verdict == core.ON_THE_BOUNDARY
    assert core.decide_stability([-2.0 * band, -1.0], 1.0, 2, None).verdict == core.STABLE
    assert core.decide_stability([2.0 * band, -1.0], 1.0, 2, None).verdict == core.UNSTABLE
    # sampled: the distance is 1 − |z|
    assert core.decide_stability([1.0 - 0.5 * band], 1.0, 2, 0.1).verdict == core.ON_THE_BOUNDARY
    assert core.decide_stability([1.0 - 2.0 * band], 1.0, 2, 0.1).verdict == core.STABLE


def _write_chain_file(tmp_path, n, sample_time=None):
    A = np.diag(np.ones(n - 1), 1).tolist()
    B = [[0.0]] * (n - 1) + [[1.0]]
    text = f'name = "chain"\n[model]\nA = {A}\nB = {B}\n'
    if sample_time:
        text += f"sample_time = {sample_time}\n"
    path = tmp_path / "chain.toml"
    path.write_text(text)
    return str(path)


@pytest.mark.parametrize("name", list(BOUNDARY_CASES))
def test_evaluate_and_sweep_json_say_on_the_boundary(name, tmp_path, capsys):
    K, _, sample_time = BOUNDARY_CASES[name]
    path = _write_chain_file(tmp_path, len(K[0]), sample_time)
    main(["evaluate", path, "--gain", json.dumps(K), "--json"])
    record = json.loads(capsys.readouterr().out)
    assert record["stable"] is False and record["on_boundary"] is True
    assert record["stability_verdict"] == "on the boundary"
    main(["sweep", path, "--gain", json.dumps(K), "--entry", "1,1", "--json"])
    sweep = json.loads(capsys.readouterr().out)
    assert sweep["current_is_stable"] is False and sweep["current_verdict"] == "on the boundary"
    assert not any(low < K[0][0] < high for low, high in sweep["stable_intervals"])
    main(["evaluate", path, "--gain", json.dumps(K)])
    assert "ON THE BOUNDARY" in capsys.readouterr().out
