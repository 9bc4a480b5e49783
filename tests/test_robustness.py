"""One K on a plant family: operating points, common stable intervals, parameter boundaries, Monte Carlo."""

import math

import numpy as np
import pytest
import scipy.optimize
import sympy
from hypothesis import given, settings
from hypothesis import strategies as st

from gainboard.core import (
    AnalysisError,
    DesignSpecs,
    Plant,
    SamplingCancelled,
    assign_poles,
    combine_chunks,
    common_entry_intervals,
    discretize_zero_order_hold,
    evaluate_chunk,
    evaluate_operating_points,
    loop_margins,
    parameter_boundaries,
    parse_plant_family_text,
    plan_monte_carlo,
    run_monte_carlo,
    wilson_interval,
)
from gainboard.core._batched_loops import single_input_margins, stability_verdicts

# s³ + 3s² + 2s + g·k1 with K = [1, 0, 0]: the cubic of reference case 8 with an uncertain input gain g.
CUBIC_FAMILY = """
[parameters.g]
nominal = 1.0
low = -1.0
high = 10.0
unit = "1"
[model]
A = [[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [0.0, -2.0, -3.0]]
B = [[0.0], [0.0], ["g"]]
"""
CUBIC_GAIN = [[1.0, 0.0, 0.0]]

# The ZOH double integrator (reference case 9, T = 1) with an uncertain actuator gain g.
SAMPLED_FAMILY = """
[parameters.g]
nominal = 1.0
low = 0.0
high = 3.0
[model]
A = [[1.0, 1.0], [0.0, 1.0]]
B = [["g / 2"], ["g"]]
sample_time = 1.0
"""
SAMPLED_GAIN = [[0.5, 1.0]]


def _routh_hurwitz_interval_of_g():
    """Stable set of g for s³ + 3s² + 2s + g, derived with sympy from the Routh–Hurwitz conditions
    (Ogata, Modern Control Engineering, sec. 5-6; reference case 4): a2 > 0, a0 > 0, a2·a1 > a0."""
    g = sympy.Symbol("g", real=True)
    a2, a1, a0 = 3, 2, g
    return _solve_all([a0 > 0, a2 * a1 - a0 > 0], g) if a2 > 0 else sympy.EmptySet


def _jury_interval_of_g():
    """Stable set of g for the sampled family, from the Jury conditions for z² + a1 z + a0
    (|a0| < 1, 1 + a1 + a0 > 0, 1 − a1 + a0 > 0; Åström & Wittenmark, from memory; reference case 14),
    with the characteristic polynomial of Φ − gΓK computed by sympy."""
    g, z = sympy.symbols("g z", real=True)
    closed = sympy.Matrix([[1, 1], [0, 1]]) - sympy.Matrix([[g / 2], [g]]) * sympy.Matrix([[sympy.Rational(1, 2), 1]])
    a1, a0 = closed.charpoly(z).all_coeffs()[1:]
    return _solve_all([a0 < 1, a0 > -1, 1 + a1 + a0 > 0, 1 - a1 + a0 > 0], g)


def _solve_all(conditions, symbol):
    """The set of real values of ``symbol`` meeting every condition (sympy)."""
    region = sympy.S.Reals
    for condition in conditions:
        region = region.intersect(sympy.solve_univariate_inequality(condition, symbol, relational=False))
    return region


# -- Monte Carlo against closed-form stability regions -------------------------------------------

#: The continuous cubic (Routh–Hurwitz) and the sampled quadratic (Jury), each with its exact stable set of g.
CLOSED_FORM_FAMILIES = pytest.mark.parametrize("text, gain, exact", [
    (CUBIC_FAMILY, CUBIC_GAIN, _routh_hurwitz_interval_of_g),
    (SAMPLED_FAMILY, SAMPLED_GAIN, _jury_interval_of_g),
])


@CLOSED_FORM_FAMILIES
def test_stable_fraction_matches_the_exact_probability_within_its_confidence_interval(text, gain, exact):
    family = parse_plant_family_text(text)
    region = exact()
    low, high = family.parameter("g").low, family.parameter("g").high
    probability = float(sympy.Interval(low, high).intersect(region).measure) / (high - low)
    result = run_monte_carlo(plan_monte_carlo(family, gain, samples=40_000, seed=2024))
    lo, hi = result.stable.interval
    assert lo < probability < hi, (probability, result.stable)
    assert hi - lo < 0.011  # 40 000 samples: the 95 % Wilson interval is about ±0.005 wide
    assert result.failed_samples == 0


@CLOSED_FORM_FAMILIES
def test_parameter_boundaries_match_the_exact_ones(text, gain, exact):
    family = parse_plant_family_text(text)
    region = exact()
    searched = sympy.Interval(*family.parameter("g").sweep_range)
    exact_ends = sorted(float(e) for e in region.boundary if e in searched)  # closed range: an end at g = 0 counts
    found = parameter_boundaries(family, gain)["g"]
    assert len(found.boundaries) == len(exact_ends)
    for value, bracket, end in zip(found.boundaries, found.brackets, exact_ends):
        assert value == pytest.approx(end, abs=1e-9)
        assert bracket[0] <= value <= bracket[1] and bracket[1] - bracket[0] < 1e-12 * max(1.0, abs(end))
    stable_inside = sympy.Interval(*found.stable_intervals[0])
    assert float(stable_inside.measure) == pytest.approx(float(region.intersect(searched).measure), abs=1e-9)


def test_the_same_seed_gives_bit_identical_figures_whatever_order_runs_the_chunks():
    family = parse_plant_family_text(CUBIC_FAMILY)
    plan = plan_monte_carlo(family, CUBIC_GAIN, samples=12_345, seed=99, chunk_size=1000, keep_poles=50,
                            specs=DesignSpecs(min_damping_ratio=0.3), include_margins=True)
    forward = run_monte_carlo(plan)
    backward = combine_chunks(plan, [evaluate_chunk(plan, i) for i in reversed(range(plan.chunk_count))])
    assert forward.stable == backward.stable and forward.spec_pass == backward.spec_pass
    assert forward.worst == backward.worst
    np.testing.assert_array_equal(forward.poles, backward.poles)
    other = run_monte_carlo(plan_monte_carlo(family, CUBIC_GAIN, samples=12_345, seed=100, chunk_size=1000))
    assert other.stable.successes != forward.stable.successes


def test_worst_samples_are_the_minima_over_every_sample_evaluated_one_by_one():
    family = parse_plant_family_text(CUBIC_FAMILY)
    plan = plan_monte_carlo(family, CUBIC_GAIN, samples=300, seed=5, chunk_size=64, keep_poles=300,
                            specs=DesignSpecs(min_damping_ratio=0.2))
    result = run_monte_carlo(plan)
    margins = []
    for index in range(300):
        chunk = index // 64
        from gainboard.core._monte_carlo import _chunk_parameters

        g = _chunk_parameters(plan, chunk)["g"][index % 64]
        poles = np.linalg.eigvals(family.plant_at({"g": g}).A - family.plant_at({"g": g}).B @ np.array(CUBIC_GAIN))
        margins.append(-poles.real.max())
    worst = result.worst["stability_margin"]
    assert worst.index == int(np.argmin(margins))
    assert worst.value == pytest.approx(min(margins), abs=1e-12)
    assert result.stable.successes == sum(m > 1e-12 for m in margins)


def test_samples_that_cannot_be_evaluated_are_counted_and_reported_not_raised():
    family = parse_plant_family_text(CUBIC_FAMILY.replace('["g"]', '["sqrt(g)"]'))
    result = run_monte_carlo(plan_monte_carlo(family, CUBIC_GAIN, samples=2000, seed=1))
    exact_share = 1.0 / 11.0  # sqrt(g) is not real for g < 0: one eleventh of [−1, 10]
    assert wilson_interval(result.failed_samples, 2000).interval[0] < exact_share < wilson_interval(
        result.failed_samples, 2000).interval[1]
    index, values, entry = result.failed_examples[0]
    assert values["g"] < 0 and entry == "[model] B row 3, column 1"
    assert result.stable.successes + result.failed_samples <= 2000


def test_progress_is_reported_and_a_cancelled_run_stops():
    family = parse_plant_family_text(CUBIC_FAMILY)
    plan = plan_monte_carlo(family, CUBIC_GAIN, samples=5000, seed=3, chunk_size=1000)
    seen = []
    run_monte_carlo(plan, progress=lambda done, total: seen.append((done, total)))
    assert seen == [(1000 * (i + 1), 5000) for i in range(5)]
    with pytest.raises(SamplingCancelled, match="cancelled after 2 of 5 chunks"):
        run_monte_carlo(plan, cancelled=lambda: len(seen) >= 7, progress=lambda d, t: seen.append(d))


@pytest.mark.parametrize("kwargs, message", [
    ({"samples": 0}, "number of samples must be a whole number from 1"),
    ({"samples": 10, "seed": -1}, "seed must be a whole number ≥ 0"),
    ({"samples": 10, "chunk_size": 0}, "chunk size must be"),
    ({"samples": 10, "confidence": 1.5}, "confidence level"),
])
def test_bad_sampling_requests_are_refused(kwargs, message):
    family = parse_plant_family_text(CUBIC_FAMILY)
    kwargs = {"seed": 1, **kwargs}
    with pytest.raises(AnalysisError, match=message):
        plan_monte_carlo(family, CUBIC_GAIN, **kwargs)


def test_a_family_without_a_varying_parameter_has_nothing_to_sample():
    family = parse_plant_family_text(CUBIC_FAMILY.replace("low = -1.0\nhigh = 10.0\n", ""))
    with pytest.raises(AnalysisError, match="nothing to sample"):
        plan_monte_carlo(family, CUBIC_GAIN, samples=10, seed=1)


def test_wilson_interval_inverts_the_score_test():
    # reference: the interval is {p : |p̂ − p| ≤ z·sqrt(p(1 − p)/N)} (Wilson 1927), found here by root finding
    z = 1.959963984540054
    for successes, trials in ((0, 20), (3, 20), (81, 263), (999, 1000), (1000, 1000)):
        estimate = wilson_interval(successes, trials)
        p_hat = successes / trials
        score = lambda p: abs(p_hat - p) - z * math.sqrt(p * (1 - p) / trials)  # noqa: E731
        low = 0.0 if successes == 0 else scipy.optimize.brentq(score, 1e-12, p_hat - 1e-12, xtol=1e-14)
        high = 1.0 if successes == trials else scipy.optimize.brentq(score, p_hat + 1e-12, 1 - 1e-12, xtol=1e-14)
        assert estimate.interval == pytest.approx((low, high), abs=1e-9)


# -- batched margins ------------------------------------------------------------------------------


def test_batched_margins_match_the_textbook_loop():
    # reference case 19: K/(s(s+1)(s+2)) at k = 1: gain margin 6 (15.563 dB), phase margin 53.411°
    A = np.array([[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [0.0, -2.0, -3.0]])
    B = np.array([[0.0], [0.0], [1.0]])
    K = np.array([[1.0, 0.0, 0.0]])
    poles, _, _ = stability_verdicts((A - B @ K)[None], None)
    gain_db, phase = single_input_margins(A[None], B[None], K, poles, None)
    assert gain_db[0] == pytest.approx(20 * math.log10(6), rel=1e-9)
    assert phase[0] == pytest.approx(53.411, abs=1e-3)


def test_batched_margins_of_the_lqr_double_integrator():
    # reference case 18: double integrator, Q = I, R = 1, K = [1, √3]: phase margin 72.3756°, gain margin ∞
    A = np.array([[0.0, 1.0], [0.0, 0.0]])
    B = np.array([[0.0], [1.0]])
    K = np.array([[1.0, math.sqrt(3.0)]])
    poles, _, _ = stability_verdicts((A - B @ K)[None], None)
    gain_db, phase = single_input_margins(A[None], B[None], K, poles, None)
    assert phase[0] == pytest.approx(72.3756, abs=1e-4) and math.isinf(gain_db[0])


@settings(deadline=None, max_examples=25)
@given(st.integers(0, 2**32 - 1), st.sampled_from([None, 0.1]))
def test_batched_margins_agree_with_the_single_model_margins(seed, sample_time):
    rng = np.random.default_rng(seed)
    A, B = rng.normal(size=(4, 4)), rng.normal(size=(4, 1))
    plant = Plant(A=A, B=B)
    K = assign_poles(plant, -rng.uniform(0.5, 3.0, 4)).gain
    if sample_time is not None:
        plant = discretize_zero_order_hold(plant, sample_time)
    reference = loop_margins(plant, K)
    poles, _, verdict = stability_verdicts((plant.A - plant.B @ K)[None], sample_time)
    gain_db, phase = single_input_margins(plant.A[None], plant.B[None], K, poles, sample_time)
    assert verdict[0] == 1
    assert gain_db[0] == pytest.approx(reference.gain_margin_db_min, rel=1e-6, abs=1e-9)
    assert phase[0] == pytest.approx(reference.phase_margin_deg, rel=1e-6, abs=1e-9)


# -- operating points ------------------------------------------------------------------------------

THREE_POINTS = CUBIC_FAMILY + """
[[operating_points]]
name = "light"
values = { g = 0.5 }
[[operating_points]]
name = "heavy"
values = { g = 2.5 }
[[operating_points]]
name = "overdriven"
values = { g = 7.0 }
"""


def test_every_operating_point_is_judged_with_its_own_model():
    family = parse_plant_family_text(THREE_POINTS)
    report = evaluate_operating_points(family, CUBIC_GAIN, specs=DesignSpecs(min_damping_ratio=0.1))
    assert [p.name for p in report.points] == ["nominal", "light", "heavy", "overdriven"]
    # Routh–Hurwitz (reference case 4): stable for 0 < g < 6
    assert [p.stable for p in report.points] == [True, True, True, False]
    assert report.all_stable is False and report.worst_point == "overdriven" and report.all_specs_passed is False
    heavy = report.points[2]
    np.testing.assert_allclose(np.poly(heavy.poles), [1.0, 3.0, 2.0, 2.5], atol=1e-12)
    assert heavy.evaluation.margins is not None and len(heavy.peak_effort) == 1


def test_common_intervals_equal_brute_force_over_the_operating_points():
    family = parse_plant_family_text(THREE_POINTS.replace("g = 7.0", "g = 4.0"))
    K = np.array([[1.5, 0.7, 0.2]])
    common = common_entry_intervals(family, K)
    plants = [model.plant for model in family.models()]
    for (row, col), found in common.items():
        values = np.linspace(-30.0, 30.0, 6001)
        for value in values:
            if any(abs(value - end) < 1e-6 for pair in found.intervals for end in pair):
                continue
            trial = K.copy()
            trial[row, col] = value
            # brute force: every model's poles from numpy's eigenvalues
            every = all(np.linalg.eigvals(p.A - p.B @ trial).real.max() < 0 for p in plants)
            inside = any(low < value < high for low, high in found.intervals)
            assert every == inside, (row, col, value)
    assert common[(0, 0)].limiting_model  # some model sets each end


def test_spec_checks_over_points_give_each_specs_worst_point_and_pass_count():
    family = parse_plant_family_text(THREE_POINTS)
    specs = DesignSpecs(min_damping_ratio=0.3, max_overshoot_percent=20.0)
    report = evaluate_operating_points(family, CUBIC_GAIN, specs=specs, include_margins=False)
    from gainboard.core import spec_checks_over_points

    over = {spec.name: spec for spec in spec_checks_over_points(report)}
    # brute force: every point's own check of the same spec
    for name, spec in over.items():
        checks = [(p.name, c) for p in report.points for c in p.evaluation.spec_report.checks if c.name == name]
        assert spec.points == len(checks) and spec.passed_points == sum(c.passed is True for _, c in checks)
    # the overdriven point (g = 7, past the Routh–Hurwitz limit 6) is the worst for stability and damping
    assert over["stable"].worst_point == "overdriven" and over["stable"].passed_points == 3
    assert over["min_damping_ratio"].worst_point == "overdriven"
    smallest = min(c.achieved for p in report.points for c in p.evaluation.spec_report.checks
                   if c.name == "min_damping_ratio")
    assert over["min_damping_ratio"].worst_achieved == smallest


def test_response_envelope_contains_every_points_response_and_touches_the_extremes():
    from gainboard.core import response_envelope

    family = parse_plant_family_text(THREE_POINTS.replace("g = 7.0", "g = 4.0"))
    report = evaluate_operating_points(family, CUBIC_GAIN, include_margins=False)
    envelope = response_envelope(report, "initial", 0)
    stacked = []
    for point in report.points:
        time, values = point.evaluation.responses.initial.time, point.evaluation.responses.initial.outputs[:, 0]
        inside = envelope.time <= time[-1]
        # reference: numpy's linear interpolation of each point's own response onto the band's grid
        on_grid = np.interp(envelope.time[inside], time, values)
        assert np.all(envelope.lower[inside] <= on_grid + 1e-12) and np.all(on_grid <= envelope.upper[inside] + 1e-12)
        stacked.append(np.where(inside, np.interp(envelope.time, time, values), np.nan))
    np.testing.assert_array_equal(envelope.upper, np.nanmax(np.vstack(stacked), axis=0))
    np.testing.assert_array_equal(envelope.lower, np.nanmin(np.vstack(stacked), axis=0))


@settings(deadline=None, max_examples=30)
@given(st.integers(0, 2**32 - 1), st.sampled_from([None, 0.2]))
def test_batched_verdicts_agree_with_the_single_model_report_away_from_the_boundary(seed, sample_time):
    from gainboard.core import analyze_state_matrix

    rng = np.random.default_rng(seed)
    stack = rng.normal(size=(20, 4, 4)) * (0.5 if sample_time else 1.0)
    _, margin, verdict = stability_verdicts(stack, sample_time)
    for matrix, m, v in zip(stack, margin, verdict):
        report = analyze_state_matrix(matrix, sample_time)
        assert m == pytest.approx(report.stability_margin, abs=1e-12)
        if abs(m) > 1e-9:
            assert (v == 1) == report.stable


def test_a_pole_exactly_on_the_boundary_gets_the_boundary_verdict():
    # double integrator with K = [0, 1]: poles 0 and −1 (continuous); ZOH of it, T = 1 (reference case 9),
    # with K = [0, 1]: z = 1 is a pole (Φ − ΓK keeps the first column of Φ)
    continuous = np.array([[[0.0, 1.0], [0.0, -1.0]]])
    sampled = np.array([[[1.0, 0.5], [0.0, 0.0]]])
    assert stability_verdicts(continuous, None)[2][0] == 0
    assert stability_verdicts(sampled, 1.0)[2][0] == 0
