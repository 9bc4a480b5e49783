"""The speed benchmark's harness, run on one small case so it cannot rot.

tests/benchmarks/run_benchmarks.py is a script (pytest skips that folder and never
asserts a timing). Here its accuracy checks run against their references: numpy
eigenvalues on a dense grid (locus), a brute-force eigenvalue sweep (stable
intervals), scipy.signal.lsim (responses) and a per-step scipy.linalg.expm loop
(saturated simulation). Each check is also shown to fail on a corrupted result,
and one case goes through the whole measure → print → targets path with tiny
budgets (its timings are printed, never checked).
"""

from __future__ import annotations

import importlib.util
import math
import sys
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from gainboard import core

SCRIPT = Path(__file__).resolve().parent / "benchmarks" / "run_benchmarks.py"


@pytest.fixture(scope="module")
def bench():
    spec = importlib.util.spec_from_file_location("gainboard_run_benchmarks", SCRIPT)
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module  # its dataclasses look their module up while being built
    spec.loader.exec_module(module)
    return module


@pytest.fixture
def small_case(bench, rng):
    plant = bench.random_plant(rng, 4, 1, stable=False)
    return bench.Case(plant.name, plant, bench.lqr_gain(plant))


def test_random_plants_have_the_requested_open_loop_stability(bench, rng):
    for stable in (True, False):
        plant = bench.random_plant(rng, 6, 2, stable)
        rightmost = np.max(np.linalg.eigvals(plant.A).real)
        # numpy eigenvalues are the reference: the shift puts the rightmost pole at −0.2 or +0.5
        assert rightmost == pytest.approx(-0.2 if stable else 0.5, abs=1e-9)


def test_locus_check_passes_against_the_dense_eigenvalue_grid(bench, small_case):
    result = bench.check_locus(small_case.plant, small_case.gain, small_case.entry)
    # reference: numpy.linalg.eigvals at 10 000 points, matched by optimal assignment (scipy)
    assert result["passed"], result
    assert result["error"] <= 1e-3 and 10 * result["evaluations"] <= result["grid"]


def test_locus_check_fails_for_a_shifted_locus(bench, small_case):
    plant, gain, entry = small_case.plant, small_case.gain, small_case.entry
    grid = bench.entry_grid(plant, gain, entry, 2000)
    dense = bench.naive_locus(plant.A, plant.B, gain, entry, grid)
    locus = core.entry_locus(plant, gain, *entry, float(grid[0]), float(grid[-1]))
    assert bench.locus_error(locus, grid, dense) <= 1e-3  # reference: numpy eigenvalues on the grid
    span = math.hypot(np.ptp(dense.real), np.ptp(dense.imag))
    shifted = replace(locus, poles=locus.poles + 0.01 * span)
    assert bench.locus_error(shifted, grid, dense) > 1e-3


def test_interval_check_agrees_with_the_brute_force_sweep(bench, small_case):
    plant, gain = small_case.plant, small_case.gain
    entries = [(0, j) for j in range(plant.state_count)]
    result = bench.check_intervals(plant, gain, entries, grid_points=2000)
    # reference: a pole-by-pole stability verdict from numpy.linalg.eigvals at 2000 points per entry
    assert result["passed"] and result["disagreements"] == 0, result


def test_interval_check_counts_a_moved_interval_end(bench, small_case):
    plant, gain, entry = small_case.plant, small_case.gain, small_case.entry
    grid = bench.entry_grid(plant, gain, entry, 2000)
    verdicts = bench.naive_stable_verdicts(plant.A, plant.B, gain, entry, grid, plant.is_sampled)
    exact = core.entry_stable_intervals(plant, gain, *entry)
    assert bench.interval_disagreements(exact, grid, verdicts) == 0  # reference: the brute-force sweep
    assert verdicts.any() and not verdicts.all()  # the range holds a stable and an unstable part
    step = float(grid[1] - grid[0])
    low, high = exact.intervals[0]
    moved_end = (low + 20 * step, high) if math.isfinite(low) else (low, high - 20 * step)
    moved = replace(exact, intervals=(moved_end,) + exact.intervals[1:], crossings=())
    assert bench.interval_disagreements(moved, grid, verdicts) >= 10


def test_response_check_equals_lsim(bench, small_case):
    result = bench.check_responses(small_case.linear_plant, small_case.gain)
    # reference: scipy.signal.lsim on the same grid, to 1e-9 of the trajectory size (issue 7)
    assert result["passed"] and result["relative_error"] <= 1e-9, result


def test_sampled_response_check_equals_dlsim(bench, rng):
    plant = core.discretize_zero_order_hold(bench.random_plant(rng, 3, 1, stable=False), 0.05)
    result = bench.check_responses(plant, bench.lqr_gain(plant))
    # reference: scipy.signal.dlsim, to 1e-9 of the trajectory size
    assert result["passed"], result


def test_saturated_check_equals_the_per_step_expm_loop(bench, small_case):
    limited = bench.saturating_plant(small_case.plant, small_case.gain)
    result = bench.check_saturated(limited, small_case.gain)
    # reference: a per-step loop with one scipy.linalg.expm per step, same clipping rule
    assert result["clipped"] and result["steps"] == 1000
    assert result["passed"] and result["relative_error"] <= 1e-9, result


def test_one_case_goes_through_measure_print_and_targets(bench, small_case, capsys):
    bench.measure_case(small_case, budget=0.0, naive_budget=0.0, least=1, grid_points=2000)
    results = small_case.results
    for item, naive in bench.ITEMS:
        assert results[item] > 0.0 and results[naive] > 0.0  # every item was timed (values never asserted)
    bench.print_case(small_case)
    printed = capsys.readouterr().out
    assert "interactive" in printed and "check locus" in printed and "check saturated" in printed
    rows = bench.target_rows([small_case], None)
    verdicts = {text: met for text, _, met in rows}
    # the accuracy targets hold for this case; the timing targets are reported, not asserted
    assert verdicts["locus within 1e-3 of span, ≥ 10× fewer evaluations"]
    assert verdicts["stable intervals agree with the brute-force sweep"]
    assert verdicts["responses equal lsim to 1e-9 relative"]
    assert verdicts["browser slider → redrawn plots, p95 under 100 ms"] is None
