"""Spec checks and pole regions, checked against textbook second-order results and scipy/mpmath.

References: /work/shared/reference-cases.md (numbered cases), the standard second-order
formulas (Ogata, Modern Control Engineering, sec. 5-3), the mapping z = e^{sT} (Franklin,
Powell & Workman, Digital Control of Dynamic Systems, from memory), mpmath and scipy as
reference libraries.
"""

import math
from types import SimpleNamespace

import mpmath
import numpy as np
import pytest
import scipy.integrate
import scipy.optimize
from hypothesis import given, settings
from hypothesis import strategies as st

from gainboard.core import AnalysisError, DesignSpecs, Plant
from gainboard.core._responses import simulate_responses
from gainboard.core._spec_checks import (
    check_specs,
    damping_ratio_for_overshoot,
    damping_ratio_of_pole,
    pole_in_region,
    pole_region,
    region_boundary,
)


def second_order_design(zeta, wn, **extra):
    """Double integrator with K = [ωn², 2ζωn]: closed loop s² + 2ζωn s + ωn²."""
    plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]], **extra)
    K = [[wn**2, 2 * zeta * wn]]
    poles = np.array([complex(-zeta * wn, wn * math.sqrt(1 - zeta**2)), complex(-zeta * wn, -wn * math.sqrt(1 - zeta**2))])
    return plant, K, poles


def by_name(report, name):
    found = [c for c in report.checks if c.name == name]
    assert len(found) == 1
    return found[0]


# -- checks on the ζ = 0.5, ωn = 1 loop (case 20: settling 8.0764 s, overshoot 16.303 %) -------------------------
@pytest.fixture(scope="module")
def half_damped():
    # a small disturbance: its |u| = 0.25|y + ẏ| ≤ 0.25(1.163 + 1/0.866) < 0.6 stays below the step's 1
    # (bounds of the unit-step y and ẏ of the standard second-order system, Ogata sec. 5-3; derived by hand)
    plant, K, poles = second_order_design(0.5, 1.0, disturbance_step=(0.25,))
    return poles, simulate_responses(plant, K)


def test_second_order_design_passes_specs_it_meets(half_damped):
    poles, responses = half_damped
    specs = DesignSpecs(max_settling_time=8.1, max_overshoot_percent=16.4, min_damping_ratio=0.5,
                        max_input_magnitude=(1.01,))
    report = check_specs(specs, poles, responses)
    assert report.all_passed, report
    # Case 20 (reference-cases.md): exact 2 % settling 8.0764 s and overshoot 16.303 %
    assert by_name(report, "max_settling_time").achieved == pytest.approx(8.0764, rel=2e-5)
    assert by_name(report, "max_overshoot_percent").achieved == pytest.approx(16.303, rel=2e-4)
    # ζ of the poles −0.5 ± j√3/2 is 0.5 (ζ = −Re s/|s|, Ogata sec. 5-3)
    assert by_name(report, "min_damping_ratio").achieved == pytest.approx(0.5, rel=1e-12)
    # largest |u|: u(0) = N r = ωn² = 1 in the step and u(0) = −K x0 = −1 from x0 = (1, 0) (case 3 formula, derived)
    assert by_name(report, "max_input_magnitude").achieved == pytest.approx(1.0, rel=1e-12)
    assert by_name(report, "stable").passed


@pytest.mark.parametrize(
    "specs, failing",
    [
        (DesignSpecs(max_settling_time=8.0), "max_settling_time"),  # case 20: 8.0764 > 8.0
        (DesignSpecs(max_overshoot_percent=16.2), "max_overshoot_percent"),  # case 20: 16.303 > 16.2
        (DesignSpecs(min_damping_ratio=0.51), "min_damping_ratio"),  # ζ = 0.5 exactly (Ogata sec. 5-3)
        (DesignSpecs(max_input_magnitude=(0.99,)), "max_input_magnitude"),  # |u(0)| = ωn² = 1 (derived)
    ],
)
def test_second_order_design_fails_specs_it_misses(half_damped, specs, failing):
    poles, responses = half_damped
    report = check_specs(specs, poles, responses)
    assert not report.all_passed
    assert [c.name for c in report.failed] == [failing]


def test_settling_with_another_band_is_measured_again(half_damped):
    poles, responses = half_damped
    report = check_specs(DesignSpecs(max_settling_time=10.0, settling_band=0.05), poles, responses)
    zeta, wn = 0.5, 1.0
    wd = wn * math.sqrt(1 - zeta**2)

    def error(t):  # exact unit-step error y − 1 of the standard second-order system (Ogata sec. 5-3)
        return -math.exp(-zeta * wn * t) * (math.cos(wd * t) + zeta / math.sqrt(1 - zeta**2) * math.sin(wd * t))

    # Reference: the last crossing of |y − 1| = 0.05, bracketed on a fine grid and solved with scipy.optimize.brentq
    t = np.linspace(0.01, 14.0, 20001)
    outside = np.flatnonzero(np.abs([error(v) for v in t]) > 0.05)
    last = outside[-1]
    level = math.copysign(0.05, error(t[last]))
    exact = scipy.optimize.brentq(lambda v: error(v) - level, t[last], t[last + 1], xtol=1e-14)
    # the recomputation interpolates with straight lines between grid points (h = 0.035): about h² accurate
    assert by_name(report, "max_settling_time").achieved == pytest.approx(exact, rel=1e-3)


def test_settling_spec_longer_than_an_unsettled_horizon_is_not_evaluated():
    plant, K, poles = second_order_design(0.5, 1.0)
    responses = simulate_responses(plant, K, horizon=2.0)
    # after 2 s the ζ = 0.5 step is still far from its 2 % band (case 20: settles at 8.0764 s)
    undecided = by_name(check_specs(DesignSpecs(max_settling_time=10.0), poles, responses), "max_settling_time")
    assert undecided.passed is None and "simulate longer" in undecided.detail
    failed = by_name(check_specs(DesignSpecs(max_settling_time=1.0), poles, responses), "max_settling_time")
    assert failed.passed is False and failed.achieved == math.inf


def test_unstable_design_fails_stability_and_response_specs():
    plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]])
    K = [[1.0, -0.5]]  # s² − 0.5 s + 1: Routh–Hurwitz, a sign change in the coefficients means instability
    responses = simulate_responses(plant, K)
    poles = np.linalg.eigvals(plant.A - plant.B @ np.array(K))
    report = check_specs(DesignSpecs(max_settling_time=100.0, max_overshoot_percent=50.0), poles, responses)
    assert by_name(report, "stable").passed is False
    assert by_name(report, "max_settling_time").passed is False
    assert by_name(report, "max_overshoot_percent").passed is False
    assert by_name(report, "stable").achieved == pytest.approx(0.25, rel=1e-12)  # Re s = 0.5/2 (quadratic formula)


def test_checks_without_responses_or_margins_are_not_evaluated():
    poles = np.array([-1.0 + 1.0j, -1.0 - 1.0j])
    specs = DesignSpecs(max_settling_time=5.0, max_overshoot_percent=5.0, max_input_magnitude=(2.0,),
                        min_gain_margin_db=6.0, min_phase_margin_deg=45.0)
    report = check_specs(specs, poles)
    assert by_name(report, "stable").passed  # Re s = −1 < 0 (definition of stability, common practice)
    assert {c.name for c in report.not_evaluated} == {
        "max_settling_time", "max_overshoot_percent", "max_input_magnitude", "min_gain_margin_db",
        "min_phase_margin_deg"}
    assert all("not evaluated" in c.detail for c in report.not_evaluated)
    assert report.all_passed is False


def test_margins_are_compared_with_their_specs():
    poles = np.array([-1.0 + 1.0j, -1.0 - 1.0j])
    # Case 19: loop K/(s(s+1)(s+2)), k = 1 has gain margin 6 (15.563 dB); case 18: an LQR design has phase
    # margin 72.3756° (Safonov & Athans 1977; values from reference-cases.md)
    margins = SimpleNamespace(gain_margin_db_min=20 * math.log10(6.0), phase_margin_deg=72.3756)
    report = check_specs(DesignSpecs(min_gain_margin_db=12.0, min_phase_margin_deg=60.0), poles, margins=margins)
    assert report.all_passed
    assert by_name(report, "min_gain_margin_db").achieved == pytest.approx(15.563, abs=5e-4)
    report = check_specs(DesignSpecs(min_gain_margin_db=16.0, min_phase_margin_deg=75.0), poles, margins=margins)
    assert {c.name for c in report.failed} == {"min_gain_margin_db", "min_phase_margin_deg"}
    no_phase = SimpleNamespace(gain_margin_db_min=math.inf, phase_margin_deg=None)
    report = check_specs(DesignSpecs(min_gain_margin_db=6.0, min_phase_margin_deg=45.0), poles, margins=no_phase)
    assert by_name(report, "min_gain_margin_db").passed is True
    assert by_name(report, "min_phase_margin_deg").passed is None


def test_overshoot_is_not_evaluated_without_a_reference_step():
    plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], C=[[0.0, 1.0]])
    K = [[1.0, 2.0]]
    responses = simulate_responses(plant, K)  # velocity output: zero DC gain, no prefilter (final-value theorem)
    check = by_name(check_specs(DesignSpecs(max_overshoot_percent=10.0), [-1.0, -1.0], responses),
                    "max_overshoot_percent")
    assert check.passed is None and "singular" in check.detail


def test_input_magnitude_spec_of_the_wrong_length_is_refused(half_damped):
    poles, responses = half_damped
    with pytest.raises(AnalysisError, match=r"gives 2 number\(s\) but the plant has 1 input"):
        check_specs(DesignSpecs(max_input_magnitude=(1.0, 2.0)), poles, responses)


def test_no_specs_checks_stability_only():
    report = check_specs(None, [-2.0, -3.0])
    assert [c.name for c in report.checks] == ["stable"] and report.all_passed


def test_bad_poles_are_refused():
    with pytest.raises(AnalysisError, match=r"non-empty list of finite"):
        check_specs(None, [])


# -- sampled loops ----------------------------------------------------------------------------------------------
def test_damping_of_sampled_poles_uses_s_equal_ln_z_over_t():
    T, zeta, wn = 0.1, 0.5, 2.0
    s = complex(-zeta * wn, wn * math.sqrt(1 - zeta**2))
    # Reference: z = e^{sT} computed with mpmath (mapping from Franklin, Powell & Workman, from memory)
    z = complex(mpmath.exp(mpmath.mpc(s.real, s.imag) * T))
    poles = np.array([z, z.conjugate()])
    assert damping_ratio_of_pole(z, T) == pytest.approx(zeta, rel=1e-12)
    assert check_specs(DesignSpecs(min_damping_ratio=0.5), poles, sample_time=T).all_passed
    assert not check_specs(DesignSpecs(min_damping_ratio=0.5001), poles, sample_time=T).all_passed
    stable = by_name(check_specs(None, poles, sample_time=T), "stable")
    assert stable.achieved == pytest.approx(math.exp(-zeta * wn * T), rel=1e-12)  # |z| = e^{−ζωn T}


def test_damping_of_a_negative_real_sampled_pole():
    T = 0.2
    # z = −0.5 is s = ln(0.5)/T + jπ/T, so ζ = −ln 0.5/√(ln² 0.5 + π²) (derived by hand from z = e^{sT})
    expected = -math.log(0.5) / math.sqrt(math.log(0.5) ** 2 + math.pi**2)
    assert damping_ratio_of_pole(-0.5, T) == pytest.approx(expected, rel=1e-12)
    assert damping_ratio_of_pole(0.0, T) == 1.0  # z = 0: s → −∞, a real pole


def test_unstable_sampled_pole_fails_stability():
    report = check_specs(None, [1.05, 0.5], sample_time=0.1)
    assert report.all_passed is False and by_name(report, "stable").achieved == pytest.approx(1.05)


# -- pole regions --------------------------------------------------------------------------------------------------
def test_overshoot_formula_inverts_to_the_damping_ratio():
    for zeta in (0.2, 0.5, 0.6, 0.9):
        overshoot = 100 * math.exp(-math.pi * zeta / math.sqrt(1 - zeta**2))  # Ogata sec. 5-3
        assert damping_ratio_for_overshoot(overshoot) == pytest.approx(zeta, rel=1e-12)
    # case 20 quotes 16.303 % for ζ = 0.5 and 2.838 % for ζ = 0.75 (rounded values)
    assert damping_ratio_for_overshoot(16.303) == pytest.approx(0.5, rel=1e-4)
    assert damping_ratio_for_overshoot(2.838) == pytest.approx(0.75, rel=1e-4)
    assert damping_ratio_for_overshoot(0.0) == 1.0


def test_pole_region_from_settling_and_overshoot_specs():
    region = pole_region(DesignSpecs(max_settling_time=4.0, max_overshoot_percent=16.303, min_damping_ratio=0.3))
    # σ = −ln(0.02)/4 = 0.97801 (rule of thumb for the slowest pole, common practice, no source)
    assert region.min_decay_rate == pytest.approx(-math.log(0.02) / 4.0, rel=1e-14)
    assert region.min_decay_rate == pytest.approx(0.97801, abs=1e-5)
    # the overshoot spec gives ζ = 0.5, stricter than the damping spec 0.3 (case 20 values)
    assert region.min_damping_ratio == pytest.approx(0.5, rel=1e-4)
    looser = pole_region(DesignSpecs(max_overshoot_percent=16.303, min_damping_ratio=0.7))
    assert looser.min_damping_ratio == 0.7 and looser.min_decay_rate == 0.0


def test_empty_specs_give_the_stability_region():
    region = pole_region(None)
    assert (region.min_decay_rate, region.min_damping_ratio) == (0.0, 0.0)
    assert pole_in_region(region, -1e-3 + 5.0j) and not pole_in_region(region, 1e-3)  # open left half-plane
    assert not pole_in_region(region, 0.0)
    sampled = pole_region(None, sample_time=0.1)
    assert pole_in_region(sampled, 0.99j) and not pole_in_region(sampled, 1.01)  # open unit disk


@settings(max_examples=60, deadline=None)
@given(
    zeta=st.floats(0.05, 0.99),
    wn=st.floats(0.1, 20.0),
    zeta_min=st.floats(0.0, 0.95),
    settling=st.floats(0.5, 20.0),
)
def test_pole_membership_in_s_and_z_matches_damping_and_decay(zeta, wn, zeta_min, settling):
    specs = DesignSpecs(max_settling_time=settling, min_damping_ratio=zeta_min)
    region = pole_region(specs)
    sigma = -math.log(0.02) / settling
    s = complex(-zeta * wn, wn * math.sqrt(1 - zeta**2))  # pole of ζ, ωn in polar form (Ogata sec. 5-3)
    expected = zeta >= zeta_min and zeta * wn >= sigma
    margin = min(abs(zeta - zeta_min), abs(zeta * wn - sigma) / sigma)
    if margin < 1e-6:
        return  # on the boundary within rounding: either answer is right
    assert pole_in_region(region, s) == expected
    assert pole_in_region(region, s.conjugate()) == expected
    # Sampled: the same pole mapped by z = e^{sT} (mpmath as reference), T small enough that |Im s| T < π
    T = 0.5 / wn
    z = complex(mpmath.exp(mpmath.mpc(s.real, s.imag) * T))
    sampled_region = pole_region(specs, sample_time=T)
    assert pole_in_region(sampled_region, z) == expected
    assert sampled_region.radius == pytest.approx(math.exp(-sigma * T), rel=1e-14)


def shoelace_area(x, y):
    """Area of a closed polygon (shoelace formula, common practice)."""
    return 0.5 * abs(np.dot(x[:-1], y[1:]) - np.dot(x[1:], y[:-1]))


def test_s_plane_region_outline_has_the_exact_area():
    region = pole_region(DesignSpecs(max_settling_time=-math.log(0.02), min_damping_ratio=0.5))  # σ = 1
    extent = 10.0
    [(x, y)] = region_boundary(region, extent)
    assert (x[0], y[0]) == (x[-1], y[-1])
    slope = math.tan(math.acos(0.5))
    # Reference: scipy.integrate.quad of the region's height 2·min(x tan(arccos ζ), extent) for x from σ to extent
    area, _ = scipy.integrate.quad(lambda v: 2 * min(v * slope, extent), 1.0, extent, points=[extent / slope])
    assert shoelace_area(x, y) == pytest.approx(area, rel=1e-12)
    for vx, vy in zip(x, y):
        assert pole_in_region(region, complex(vx, vy))  # every corner lies in the (closed) region


def test_z_plane_region_outline_has_the_exact_area():
    T = 0.2
    region = pole_region(DesignSpecs(max_settling_time=4.0, min_damping_ratio=0.4), sample_time=T)
    [(x, y)] = region_boundary(region)
    radius = region.radius
    cot = 0.4 / math.sqrt(1 - 0.4**2)
    # Reference: scipy.integrate.quad of ½ρ(θ)² with ρ = min(e^{−σT}, e^{−|θ| cot(arccos ζ)}) (z = e^{sT} mapping)
    switch = -math.log(radius) / cot
    area, _ = scipy.integrate.quad(lambda t: 0.5 * min(radius, math.exp(-abs(t) * cot)) ** 2, -math.pi, math.pi,
                                   points=[-switch, switch])
    assert shoelace_area(x, y) == pytest.approx(area, rel=1e-4)  # 721-point outline of a curved region
    z = x + 1j * y
    assert np.all(np.abs(z) <= radius * (1 + 1e-12))
    for point in z[::37]:
        assert pole_in_region(region, point * (1 - 1e-7))


def test_full_damping_region_is_a_segment_of_the_real_axis():
    region = pole_region(DesignSpecs(max_settling_time=3.912, max_overshoot_percent=0.0))
    [(x, y)] = region_boundary(region, 5.0)
    assert np.all(y == 0.0) and x.min() == -5.0 and x.max() == pytest.approx(-1.0, rel=1e-4)
    assert pole_in_region(region, -2.0) and not pole_in_region(region, complex(-2.0, 1e-3))


def test_region_outside_the_view_has_no_outline():
    region = pole_region(DesignSpecs(max_settling_time=0.1))  # σ ≈ 39 per second
    assert region_boundary(region, 10.0) == []


def test_pole_region_refusals():
    with pytest.raises(AnalysisError, match=r"settling time of 0 s cannot be met"):
        pole_region(DesignSpecs(max_settling_time=0.0))
    with pytest.raises(AnalysisError, match=r"sample time must be a positive number"):
        pole_region(None, sample_time=-0.1)
    with pytest.raises(AnalysisError, match=r"view extent must be a positive number"):
        region_boundary(pole_region(None), -1.0)
    with pytest.raises(AnalysisError, match=r"no z-plane radius"):
        pole_region(None).radius


def test_margin_specs_of_a_multi_input_loop_use_the_disk_margin():
    # Batch reactor of Kautsky, Nichols & Van Dooren (1985), reference-cases.md case 21, with an LQR gain
    # (R = I): the multivariable LQR loop keeps a disk margin of at least 1 (Safonov & Athans 1977,
    # reference-cases.md case 18), i.e. every input's gain may change at once within (1/2, ∞) →
    # at least 20·log10(2) ≈ 6.02 dB. The disk gain range (1/(1+α), 1/(1−α)) is from Seiler, Packard &
    # Gahinet (2020), from memory.
    import gainboard.core as core

    plant = core.Plant(
        A=[[1.380, -0.2077, 6.715, -5.676], [-0.5814, -4.290, 0.0, 0.6750],
           [1.067, 4.273, -6.654, 5.893], [0.0480, 4.273, 1.343, -2.104]],
        B=[[0.0, 5.679], [1.136, 1.136], [0.0, 0.0], [-3.146, 0.0]],
    )
    gain = core.design_lqr(plant, np.eye(4), np.eye(2)).gain
    margins = core.loop_margins(plant, gain)
    assert margins.gain_margin_db_min is None  # several inputs: no single-loop figure
    specs = core.DesignSpecs(min_gain_margin_db=6.0, min_phase_margin_deg=30.0)
    report = core.check_specs(specs, core.closed_loop_poles(plant, gain), margins=margins)
    gain_check = next(c for c in report.checks if c.name == "min_gain_margin_db")
    assert gain_check.achieved == pytest.approx(20 * np.log10(1 + margins.disk_margin), rel=1e-12)
    assert gain_check.achieved >= 20 * np.log10(2) - 1e-6 and gain_check.passed is True
    assert "disk margin" in gain_check.detail
    phase_check = next(c for c in report.checks if c.name == "min_phase_margin_deg")
    assert phase_check.achieved == pytest.approx(margins.disk_phase_margin_deg) and phase_check.passed is True
