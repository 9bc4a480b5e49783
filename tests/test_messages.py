"""Messages the workbench shows: no false limit alarms, entries counted from 1, no round-off printed.

References are written beside each check.
"""

from __future__ import annotations

import numpy as np

from gainboard import core


def test_a_step_whose_peak_effort_equals_the_limit_is_not_reported_as_exceeding_it():
    # x' = a x + u, y = x, u = −kx + N r: the prefilter N = −1/(C(A − BK)⁻¹B) = k − a (shared/reference-cases.md
    # case 3's formula, derived for the scalar plant), and with x(0) = 0 the largest |u| of a unit step is
    # u(0) = N (|u| then decays to |a|·N/(k − a)·... < N; derived). These k, a make the simulated peak come
    # out one unit in the last place above k − a.
    k, a = 0.48140703517587935, -0.3
    limit = k - a
    plant = core.Plant(A=[[a]], B=[[1.0]], C=[[1.0]], input_limits=[(-10.0, limit)])
    step = core.simulate_responses(plant, [[k]]).step
    assert abs(float(np.max(step.inputs)) - limit) <= 4 * np.finfo(float).eps * limit  # at the limit (round-off)
    (violation,) = step.limit_violations
    assert not violation.exceeded and violation.worst_excess == 0.0
    # a real excess, a millionth of the limit, is still reported
    plant = core.Plant(A=[[a]], B=[[1.0]], C=[[1.0]], input_limits=[(-10.0, limit * (1 - 1e-6))])
    (violation,) = core.simulate_responses(plant, [[k]]).step.limit_violations
    assert violation.exceeded and abs(violation.worst_excess_percent - 1e-4) < 1e-6


def test_a_never_stable_entry_is_named_from_1_and_round_off_prints_as_0():
    from gainboard.app.views.gain_sliders import _interval_text

    # Double integrator with u = −k1 x1 − k2 x2: s² + k2 s + k1, stable iff k1 > 0 and k2 > 0 (Routh–Hurwitz for a
    # quadratic, Ogata sec. 5-6). With k2 = −1 no k1 is stable; one pole is unstable for k1 < 0 (real roots of
    # opposite signs), two for k1 > 0 (derived), so the fewest are on the side k1 < 0.
    plant = core.Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]])
    intervals = core.entry_stable_intervals(plant, [[1.0, -1.0]], 0, 0)
    assert intervals.intervals == ()
    text = _interval_text("k₁₁", intervals, scale=10.0)
    assert "K[0, 0]" not in text and "k₁₁" in text
    assert "at least 1 pole(s)" in text and "fewest for k₁₁ &lt; 0;" in text.replace(")", ";")
    assert "e-1" not in text and "e−1" not in text  # no round-off printed


def test_an_unstable_pole_shows_its_growth_time_labelled_as_such():
    from gainboard.app.workbench import build_workbench

    # x' = 0.8 x + u with K = 0: x(t) = e^{0.8 t} x(0) grows by a factor e every 1/0.8 = 1.25 s (derived).
    plant = core.Plant(A=[[0.8]], B=[[1.0]], C=[[1.0]])
    bench = build_workbench(plant).workbench
    bench.state.set_gain([[0.0]])
    table = bench.pole_table.pane.object
    assert "grows ×e in 1.25" in table and "growth time" in table
    assert "∞" not in table.split("gb-poles-closed")[1].split("</table>")[0]
    # the sampled case reads ln(z)/T: z = e^{0.8·0.1} gives the same 1.25 s (derived)
    sampled = core.discretize_zero_order_hold(plant, 0.1)
    bench = build_workbench(sampled).workbench
    bench.state.set_gain([[0.0]])
    assert "grows ×e in 1.25" in bench.pole_table.pane.object
