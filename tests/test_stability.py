"""The one stability decision: stable / on the boundary / unstable, the same everywhere.

Reference: exact characteristic polynomials computed by sympy from integer (so exactly
representable) companion realisations, and their exact roots (sympy). Each loop below has
poles exactly on the stability boundary; every view of it must say "on the boundary".
"""

import json
import math
from pathlib import Path

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


# ---------------------------------------------------------------------------------------------
# Tangency ends to full precision, and the current value agreeing with the intervals
# ---------------------------------------------------------------------------------------------
def _touching_plant(lower_rows):
    """A realisation T·C·T⁻¹ of the companion C of s³ − 3s² − 3s − 7 (dyadic T: floats exact).

    Changing entry (0, 0) by v gives s³ + (v−3)s² + (v−3)s + (2v−7) (checked with sympy in the
    test). Routh–Hurwitz: stable iff v > 3, v > 7/2 and (v−3)² − (2v−7) = (v−4)² > 0, so the
    stable set is (7/2, 4) ∪ (4, ∞); at v = 4 the poles ±j touch the axis (derived by hand from
    the Routh array; sympy confirms the polynomial).
    """
    companion = np.array([[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [7.0, 3.0, 3.0]])
    T = np.array([[2.0, 1.0, 1.0], lower_rows[0], lower_rows[1]])
    return core.Plant(A=T @ companion @ np.linalg.inv(T), B=T @ np.array([[0.0], [0.0], [1.0]]))


TOUCHING_REALISATIONS = [((0.0, 1.0, 0.0), (0.0, 0.0, 1.0)), ((0.0, 1.0, 0.5), (0.0, 0.0, 1.0))]


@pytest.mark.parametrize("rows", TOUCHING_REALISATIONS)
@pytest.mark.parametrize("current", [0.0, 3.9, 10.0, 100.0, -50.0])
def test_a_touching_end_is_found_to_full_precision(rows, current):
    plant = _touching_plant(rows)
    v = sympy.symbols("v")
    # the entries are dyadic, so the floats convert to sympy rationals exactly
    A = sympy.Matrix([[sympy.Rational(x) for x in row] for row in plant.A.tolist()])
    B = sympy.Matrix([[sympy.Rational(x) for x in row] for row in plant.B.tolist()])
    K = sympy.Matrix([[v, 0, 0]])
    # sympy: the exact closed-loop polynomial of the family
    assert sympy.expand((A - B * K).charpoly(S).as_expr()
                        - (S**3 + (v - 3) * S**2 + (v - 3) * S + (2 * v - 7))) == 0
    result = core.entry_stable_intervals(plant, [[current, 0.0, 0.0]], 0, 0)
    (a, b), (c, d) = result.intervals
    # the touch is a double root: before the refinement it was off by up to 6e-8 (√eps level);
    # now by rounding of the data, a few eps times the size of the gains involved
    scale = max(abs(current), 4.0)
    assert b == pytest.approx(4.0, abs=64 * np.finfo(float).eps * scale)
    assert c == b and a == pytest.approx(3.5, abs=64 * np.finfo(float).eps * scale) and d == math.inf


@pytest.mark.parametrize("rows", TOUCHING_REALISATIONS)
def test_at_exactly_the_touching_value_the_loop_is_on_the_boundary_and_in_no_interval(rows):
    plant = _touching_plant(rows)
    result = core.entry_stable_intervals(plant, [[4.0, 0.0, 0.0]], 0, 0)
    # at v = 4: s³ + s² + s + 1 = (s + 1)(s² + 1) (sympy factor): poles ±j on the axis
    assert sympy.factor(S**3 + S**2 + S + 1) == (S + 1) * (S**2 + 1)
    assert result.current_verdict == core.ON_THE_BOUNDARY
    assert not result.contains(4.0)
    assert result.intervals[0][0] == pytest.approx(3.5, rel=1e-12)
    assert result.intervals[-1][1] == math.inf


# ---------------------------------------------------------------------------------------------
# The published benchmark models (COMPleib 1.1, Leibfritz 2004) in /work/shared/edge-cases
# ---------------------------------------------------------------------------------------------
EDGE_CASES = Path("/work/shared/edge-cases")


def _edge_case(name):
    if not (EDGE_CASES / f"{name}.toml").exists():
        pytest.skip("the shared edge-case models are not on this machine")
    plant = core.load_plant_file(EDGE_CASES / f"{name}.toml")
    K = np.array(json.loads((EDGE_CASES / f"{name}-gain.json").read_text())["K"])
    return plant, K


def test_roc4_gives_one_wide_interval_without_an_index_error():
    plant, K = _edge_case("ROC4")
    result = core.entry_stable_intervals(plant, K, 0, 0)
    # edge-cases/README.md: 50-digit bisection gives one interval of about [−7.887987e9, 1.6770825e10].
    # The ends are ill-conditioned (poles approach transfer-function zeros near the axis); in
    # double precision they come out within 1e-3 relative.
    assert len(result.intervals) == 1
    low, high = result.intervals[0]
    assert low == pytest.approx(-7.887987e9, rel=1e-3) and high == pytest.approx(1.6770825e10, rel=1e-3)
    assert result.current_is_stable and result.contains(result.current_value)


def test_bdt1_current_value_and_interval_agree():
    plant, K = _edge_case("BDT1")
    result = core.entry_stable_intervals(plant, K, 0, 0)
    # edge-cases/README.md: 50-digit bisection puts the stable interval at about
    # [−4.901528e11, −4.900534e11], containing the current value −4.90139e11
    assert len(result.intervals) == 1
    low, high = result.intervals[0]
    assert low == pytest.approx(-4.901528e11, rel=2e-6) and high == pytest.approx(-4.900534e11, rel=2e-6)
    assert result.current_is_stable and result.contains(K[0, 0])


def _suite_cases():
    """Every plant and gain of this file, the bundled plants with an LQR gain, and the edge cases."""
    cases = []
    for K, _, sample_time in BOUNDARY_CASES.values():
        cases.append((_chain(len(K[0]), sample_time), np.asarray(K, dtype=float)))
    for rows in TOUCHING_REALISATIONS:
        for current in (0.0, 3.6, 4.0, 10.0):
            cases.append((_touching_plant(rows), np.array([[current, 0.0, 0.0]])))
    from gainboard.sample_plants import bundled_plant_files

    for path in bundled_plant_files().values():
        plant = core.load_plant_file(path)
        try:
            cases.append((plant, core.design_lqr(plant).gain))
        except core.GainboardError:
            pass
    for name in ("ROC4", "BDT1"):
        if (EDGE_CASES / f"{name}.toml").exists():
            cases.append(_edge_case(name))
    return cases


def test_the_current_verdict_agrees_with_the_intervals_on_every_case():
    checked = 0
    for plant, K in _suite_cases():
        for row in range(plant.input_count):
            for col in range(plant.state_count):
                result = core.entry_stable_intervals(plant, K, row, col)
                where = f"{plant.name} entry ({row}, {col}) = {K[row, col]!r}"
                assert result.current_is_stable == result.contains(float(K[row, col])), where
                assert result.current_verdict == core.analyze_closed_loop(plant, K).verdict or (
                    # the sweep judges its own computation of the same poles; both use the one band
                    result.current_verdict != core.STABLE) == (not core.analyze_closed_loop(plant, K).stable), where
                checked += 1
    assert checked > 50


# ---------------------------------------------------------------------------------------------
# Extreme finite entries: one line on stderr, never a traceback or a RuntimeWarning
# ---------------------------------------------------------------------------------------------
EXTREME_PLANTS = {
    # issue 11 item 3: a traceback in sweep and five RuntimeWarnings in assign before
    "huge": 'name = "huge"\n[model]\nA = [[1e300, 1e300], [1e300, -1e300]]\nB = [[0.0], [1.0]]\n',
    # issue 11 item 3: "SVD did not converge" tracebacks in evaluate and assign before
    "subnormal": 'name = "subnormal"\n[model]\nA = [[1e-310, 1.0], [-2.0, -3.0]]\nB = [[0.0], [1e-310]]\n',
}


@pytest.mark.parametrize("name", list(EXTREME_PLANTS))
@pytest.mark.parametrize("command", [["sweep", "--gain", "[[1, 1]]", "--entry", "1,1"],
                                     ["assign", "--poles", "-1,-2"],
                                     ["evaluate", "--gain", "[[1, 1]]"]])
def test_extreme_entries_are_refused_in_one_line(name, command, tmp_path):
    import subprocess
    import sys

    path = tmp_path / f"{name}.toml"
    path.write_text(EXTREME_PLANTS[name])
    argv = [sys.executable, "-m", "gainboard.app.cli", command[0], str(path), *command[1:]]
    finished = subprocess.run(argv, capture_output=True, text=True, timeout=120)
    lines = finished.stderr.splitlines()
    assert finished.returncode == 2 and len(lines) == 1, finished.stderr
    assert "Traceback" not in finished.stderr and "Warning" not in finished.stderr
    assert ("too large" in lines[0]) if name == "huge" else ("smallest normal double" in lines[0])


def test_an_extreme_gain_is_refused_where_analyses_start_but_a_plant_keeps_any_double():
    plant = _chain(2)
    with pytest.raises(core.GainError, match="too large"):
        core.entry_stable_intervals(plant, [[1e200, 1.0]], 0, 0)
    with pytest.raises(core.AnalysisError, match="too large"):
        core.evaluate_design(plant, [[1e200, 1.0]])
    # files and exports keep every finite double: building the plant is not refused
    core.Plant(A=[[5e-324, 1.0], [0.0, 1.7976931348623157e308]], B=[[0.0], [1.0]])


# ---------------------------------------------------------------------------------------------
# Cosmetics of the command line (issue 11 item 9)
# ---------------------------------------------------------------------------------------------
def test_the_unstable_message_says_its_prefix_once():
    plant = _chain(3)
    # s³ − 6s² + 11s − 6 = (s − 1)(s − 2)(s − 3): unstable (sympy factor in the test above)
    evaluation = core.evaluate_design(plant, [[-6.0, 11.0, -6.0]])
    unstable = [m for m in evaluation.messages if "unstable" in m.lower()]
    assert unstable and all(m.lower().count("the closed loop is unstable") == 1 for m in unstable)


def test_piping_json_into_a_reader_that_stops_early_gives_no_traceback(tmp_path):
    import subprocess
    import sys

    path = _write_chain_file(tmp_path, 4)
    argv = [sys.executable, "-m", "gainboard.app.cli", "sweep", path, "--gain", "[[24, 50, 35, 10]]",
            "--entry", "1,1", "--json"]
    # the reader takes one line and closes the pipe, like `| head -1`
    writer = subprocess.Popen(argv, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    first = writer.stdout.readline()
    writer.stdout.close()
    _, error = writer.communicate(timeout=120)
    assert first.strip() == b"{"
    assert b"Traceback" not in error and b"BrokenPipe" not in error, error.decode()


def test_the_multiplicity_refusal_states_the_real_limit():
    # PBH: rank(A − BK − λI) ≥ n − rank(B), so a pole's geometric multiplicity is at most the
    # number of inputs; its algebraic multiplicity can reach n (Jordan blocks; Kailath, Linear
    # Systems, 1980, §3.2, from memory). Two inputs, four states, a pole requested four times.
    A = np.diag(np.ones(3), 1)
    B = np.array([[0.0, 0.0], [1.0, 0.0], [0.0, 0.0], [0.0, 1.0]])
    with pytest.raises(core.PlacementError) as refused:
        core.assign_poles(core.Plant(A=A, B=B), [-2.0, -2.0, -2.0, -2.0])
    message = str(refused.value)
    assert "up to 4 times" in message and "at most 2 independent eigenvectors" in message
    assert "Jordan block" in message and "at most 2 closed-loop poles can coincide" not in message


# ---------------------------------------------------------------------------------------------
# Unstable responses: overflow handled and reported, no RuntimeWarning (issue 12)
# ---------------------------------------------------------------------------------------------
@pytest.mark.parametrize("limits", [None, ((-1.0, 1.0),)])
@pytest.mark.parametrize("pole", [842.0, 1485.9])
def test_an_overflowing_unstable_response_is_reported_without_warnings(pole, limits):
    import warnings

    # x' = x + u with u = −Kx, K = 1 − pole: x(t) = e^{pole·t} (derived); over a 1000 s horizon
    # e^{842·1000} is far beyond the largest double, 1.8e308 (IEEE 754, from memory)
    plant = core.Plant(A=[[1.0]], B=[[1.0]], C=[[1.0]], input_limits=limits)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        result = core.simulate_responses(plant, [[1.0 - pole]], horizon=1000.0)
        evaluation = core.evaluate_design(plant, [[1.0 - pole]], core.EvaluationOptions(horizon=1000.0))
    assert result.diverging and evaluation.responses.diverging
    initial = result.initial
    assert initial.diverged_at is not None and 0.0 < initial.diverged_at < 1000.0
    assert np.all(np.isfinite(initial.states)) and np.all(np.isfinite(initial.outputs))
    # the trajectory shown follows e^{pole·t} up to where it was cut (closed form above)
    shown = initial.time <= initial.diverged_at
    np.testing.assert_allclose(initial.states[shown, 0], np.exp(pole * initial.time[shown]), rtol=1e-6)
