"""Speed of gainboard's numeric core against a naive baseline and the numerical floor.

Run it as a script (it is not a test; pytest skips this folder):

    python tests/benchmarks/run_benchmarks.py            # full run, a few minutes
    python tests/benchmarks/run_benchmarks.py --quick    # n = 2, 4, 10 and two bundled plants
    python tests/benchmarks/run_benchmarks.py --blas-threads 2   # compare BLAS threading

For random plants of n = 2, 4, 10, 20, 50 states (one open-loop stable and one
unstable, from ``numpy.random.default_rng(SEED)``, each closed by an LQR gain) and
for every bundled plant, it prints one line per measured item: the median time,
how many times faster it is than a naive baseline written here with numpy/scipy
alone, and how many times slower than the numerical floor, all measured in the
same run so the ratios compare across machines:

- naive locus: ``numpy.linalg.eigvals`` at every point of a 10 000-point grid of
  the gain entry;
- naive stable intervals: the same grid, a pole-by-pole stability verdict at
  every point (brute-force sweep);
- naive responses: ``scipy.signal.lsim`` (``dlsim`` for a sampled plant) for each
  of the three responses;
- naive saturated simulation: a per-step loop that classifies the inputs and
  calls ``scipy.linalg.expm`` for the transition of that step;
- floor: one ``numpy.linalg.eigvals`` plus one ``scipy.linalg.expm`` of the n×n
  closed-loop matrix (no design update can do less).

It also checks accuracy (locus against the dense grid, stable intervals against
the brute-force sweep, responses against lsim, the saturated simulation against
the per-step loop) and ends with a table of the targets of issue 7, met or missed.
Timings are medians; each design update changes the gain slightly between
repetitions, as a slider does, so no result keyed on K can be reused.
"""

from __future__ import annotations

import os
import sys


def _blas_threads_from_argv(argv: list[str]) -> str:
    """The --blas-threads value, read before numpy is imported (OpenBLAS reads it at load)."""
    for k, arg in enumerate(argv):
        if arg == "--blas-threads" and k + 1 < len(argv):
            return argv[k + 1]
        if arg.startswith("--blas-threads="):
            return arg.split("=", 1)[1]
    return "1"


if __name__ == "__main__":
    os.environ["OPENBLAS_NUM_THREADS"] = _blas_threads_from_argv(sys.argv[1:])
else:
    # Imported (by the harness test): keep whatever the importer chose.
    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import argparse  # noqa: E402
import math  # noqa: E402
import re  # noqa: E402
import statistics  # noqa: E402
import subprocess  # noqa: E402
import time  # noqa: E402
from dataclasses import dataclass, field, replace  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
import scipy.linalg  # noqa: E402
import scipy.optimize  # noqa: E402
import scipy.signal  # noqa: E402

from gainboard import core  # noqa: E402
from gainboard.sample_plants import bundled_plant_files  # noqa: E402

SEED = 20261207
SIZES = (2, 4, 10, 20, 50)
QUICK_SIZES = (2, 4, 10)
QUICK_PLANTS = ("cart_pendulum", "tilt_rig_sampled")
GRID_POINTS = 10_000
SATURATED_STEPS = 1000
#: Inputs of the random plants: one for small plants, a few for large ones.
INPUTS_FOR_SIZE = {2: 1, 4: 1, 10: 2, 20: 2, 50: 3}
#: Entries whose brute-force sweep is timed and checked when K has more entries than this.
ENTRY_SAMPLE = 6
BROWSER_PLANT = "cart_pendulum"  # a bundled 4-state plant
HERE = Path(__file__).resolve().parent


# ---------------------------------------------------------------------------
# Cases
# ---------------------------------------------------------------------------
@dataclass
class Case:
    """One plant and gain to benchmark; ``entry`` is the selected gain entry (the app's default)."""

    name: str
    plant: core.Plant
    gain: np.ndarray
    entry: tuple[int, int] = (0, 0)
    results: dict = field(default_factory=dict)

    @property
    def size(self) -> int:
        return self.plant.state_count

    @property
    def linear_plant(self) -> core.Plant:
        """The same plant without actuator limits: its responses are the three linear ones."""
        return replace(self.plant, input_limits=None)


def random_plant(rng: np.random.Generator, n: int, m: int, stable: bool) -> core.Plant:
    """A random continuous plant with n states and m inputs (and m measured outputs).

    The state matrix has Gaussian entries scaled by 1/√n (its eigenvalues fill
    roughly the unit disc), shifted so that the rightmost open-loop pole sits at
    Re s = −0.2 (stable) or +0.5 (unstable).
    """
    A = rng.standard_normal((n, n)) / math.sqrt(n)
    rightmost = float(np.max(np.linalg.eigvals(A).real))
    A -= (rightmost + (0.2 if stable else -0.5)) * np.eye(n)
    B = rng.standard_normal((n, m))
    C = rng.standard_normal((m, n))
    return core.Plant(A=A, B=B, C=C, name=f"random n={n} {'stable' if stable else 'unstable'}")


def lqr_gain(plant: core.Plant) -> np.ndarray:
    """The workbench's starting gain: LQR with Bryson's weights (identity weights as a fallback)."""
    try:
        Q, R = core.bryson_weights(plant)
        return np.array(core.design_lqr(plant, Q, R).gain)
    except core.GainboardError:
        n, m = plant.state_count, plant.input_count
        return np.array(core.design_lqr(plant, np.eye(n), np.eye(m)).gain)


def build_cases(sizes, plant_names) -> list[Case]:
    rng = np.random.default_rng(SEED)
    cases = []
    for n in sizes:
        for stable in (True, False):
            plant = random_plant(rng, n, INPUTS_FOR_SIZE.get(n, max(1, n // 10)), stable)
            cases.append(Case(plant.name, plant, lqr_gain(plant)))
    files = bundled_plant_files()
    for name in plant_names:
        plant = core.load_plant_file(files[name])
        cases.append(Case(f"bundled {name}", plant, lqr_gain(plant)))
    return cases


# ---------------------------------------------------------------------------
# Timing
# ---------------------------------------------------------------------------
def median_time(function, *, least: int = 5, most: int = 200, budget: float = 1.0) -> float:
    """Median wall time (s) of ``function(k)`` over repetitions k = 0, 1, …, after one warm-up call.

    At least ``least`` and at most ``most`` repetitions, stopping once ``budget``
    seconds are spent (after ``least``).
    """
    function(-1)
    times = []
    started = time.perf_counter()
    while len(times) < least or (len(times) < most and time.perf_counter() - started < budget):
        begin = time.perf_counter()
        function(len(times))
        times.append(time.perf_counter() - begin)
    return statistics.median(times)


def nudged_gain(gain: np.ndarray, entry: tuple[int, int], k: int) -> np.ndarray:
    """The gain after the k-th small slider move of ``entry`` (back and forth within ±0.1 %)."""
    moved = np.array(gain, dtype=float)
    nudge = 1e-4 * ((k % 20) - 10)
    moved[entry] = moved[entry] * (1.0 + nudge) if moved[entry] != 0.0 else nudge
    return moved


# ---------------------------------------------------------------------------
# Naive baselines (numpy / scipy only)
# ---------------------------------------------------------------------------
def entry_grid(plant: core.Plant, gain: np.ndarray, entry, points: int = GRID_POINTS) -> np.ndarray:
    """The dense grid of one entry: the workbench's slider range, ``points`` values."""
    low, high = core.default_entry_range(plant, gain, *entry)
    return np.linspace(low, high, points)


def naive_locus(A, B, gain, entry, grid) -> np.ndarray:
    """Poles (len(grid), n) by one ``numpy.linalg.eigvals`` per grid point."""
    row, col = entry
    moved = np.array(gain, dtype=float)
    poles = np.empty((grid.size, A.shape[0]), dtype=complex)
    for k, value in enumerate(grid):
        moved[row, col] = value
        poles[k] = np.linalg.eigvals(A - B @ moved)
    return poles


def naive_stable_verdicts(A, B, gain, entry, grid, sampled: bool) -> np.ndarray:
    """Brute-force sweep: True where every pole is strictly stable (beyond rounding level)."""
    row, col = entry
    n = A.shape[0]
    moved = np.array(gain, dtype=float)
    verdicts = np.empty(grid.size, dtype=bool)
    for k, value in enumerate(grid):
        moved[row, col] = value
        loop = A - B @ moved
        poles = np.linalg.eigvals(loop)
        # a pole within 100·n·eps·‖loop‖ of the boundary is marginal, not stable (rounding level
        # of a backward-stable eigensolver; common practice, no source)
        margin = 100.0 * n * np.finfo(float).eps * np.linalg.norm(loop)
        distance = np.abs(poles) - 1.0 if sampled else poles.real
        verdicts[k] = bool(np.all(distance < -margin))
    return verdicts


def naive_prefilter(plant: core.Plant, gain: np.ndarray) -> np.ndarray:
    """N of u = −Kx + N r from the steady state of the loop (numpy only)."""
    A, B, C, D = plant.A, plant.B, plant.C, plant.D
    loop = A - B @ gain
    tracked = list(plant.tracked_outputs)
    system = np.eye(A.shape[0]) - loop if plant.is_sampled else -loop
    steady = (C - D @ gain)[tracked] @ np.linalg.solve(system, B) + D[tracked]
    return np.linalg.pinv(steady)


def naive_responses(plant: core.Plant, gain: np.ndarray, time_grid: np.ndarray, start: np.ndarray):
    """States (3 arrays, len(time_grid) × n) of the initial, step and disturbance responses by lsim/dlsim."""
    A, B, C, D = plant.A, plant.B, plant.C, plant.D
    loop = A - B @ gain
    output = C - D @ gain
    prefilter = naive_prefilter(plant, gain)
    reference = np.ones(len(plant.tracked_outputs))
    E = plant.disturbance_matrix
    p, m, q = C.shape[0], B.shape[1], E.shape[1]
    count = time_grid.size
    systems = [
        ((loop, B, output, D), np.zeros((count, m)), start),
        ((loop, B @ prefilter, output, D @ prefilter), np.tile(reference, (count, 1)), None),
        ((loop, E, output, np.zeros((p, q))), np.tile(np.asarray(plant.disturbance_step), (count, 1)), None),
    ]
    states = []
    for matrices, inputs, x0 in systems:
        if plant.is_sampled:
            _, _, x = scipy.signal.dlsim((*matrices, plant.sample_time), inputs, x0=x0)
        else:
            _, _, x = scipy.signal.lsim(matrices, inputs, time_grid, X0=x0)
        states.append(np.asarray(x).reshape(count, -1))
    return states


def naive_saturated(plant: core.Plant, gain, start, law_offset, forcing, time_step, count) -> np.ndarray:
    """States of u = clip(−Kx + u₀) by a per-step loop with one scipy.linalg.expm per step.

    Same rule as the workbench: an input whose law is outside its range at a grid
    point is held at the limit over the next step; the others follow the law.
    """
    A, B = plant.A, plant.B
    n = A.shape[0]
    low = np.array([pair[0] for pair in plant.input_limits])
    high = np.array([pair[1] for pair in plant.input_limits])
    states = np.empty((count, n))
    states[0] = start
    for k in range(count - 1):
        law = -gain @ states[k] + law_offset
        free = (law >= low) & (law <= high)
        held = np.clip(law, low, high)
        generator = np.zeros((n + 1, n + 1))
        generator[:n, :n] = A - B[:, free] @ gain[free]
        generator[:n, n] = B[:, free] @ law_offset[free] + B[:, ~free] @ held[~free] + forcing
        if plant.is_sampled:  # the generator already maps one sample to the next
            states[k + 1] = generator[:n, :n] @ states[k] + generator[:n, n]
        else:
            step = scipy.linalg.expm(generator * time_step)
            states[k + 1] = step[:n, :n] @ states[k] + step[:n, n]
    return states


def floor_time(loop: np.ndarray, time_step: float) -> float:
    """Median time of one eigvals plus one scipy.linalg.expm of the closed-loop matrix."""
    scaled = loop * time_step
    return median_time(lambda k: (np.linalg.eigvals(loop), scipy.linalg.expm(scaled)), least=20, most=2000,
                       budget=0.5)


# ---------------------------------------------------------------------------
# Accuracy checks (the harness test runs these on a small case)
# ---------------------------------------------------------------------------
def _matched_distance(first: np.ndarray, second: np.ndarray) -> float:
    """Largest distance between two pole sets matched one-to-one by optimal assignment."""
    cost = np.abs(first[:, None] - second[None, :])
    rows, cols = scipy.optimize.linear_sum_assignment(cost)
    return float(cost[rows, cols].max(initial=0.0))


def locus_error(locus, grid: np.ndarray, dense: np.ndarray) -> float:
    """Largest distance between the locus (linearly interpolated) and the dense grid, over the plot span."""
    interpolated = np.stack(
        [np.interp(grid, locus.gains, locus.poles[:, b].real) + 1j * np.interp(grid, locus.gains, locus.poles[:, b].imag)
         for b in range(locus.poles.shape[1])],
        axis=1,
    )
    span = math.hypot(np.ptp(dense.real), np.ptp(dense.imag)) or 1.0
    worst = max(_matched_distance(interpolated[k], dense[k]) for k in range(grid.size))
    return worst / span


def check_locus(plant: core.Plant, gain, entry, grid: np.ndarray | None = None) -> dict:
    """Locus against per-point numpy eigenvalues: error/span ≤ 1e-3 and ≥ 10× fewer evaluations."""
    grid = entry_grid(plant, gain, entry) if grid is None else grid
    dense = naive_locus(plant.A, plant.B, gain, entry, grid)
    locus = core.entry_locus(plant, gain, *entry, float(grid[0]), float(grid[-1]))
    error = locus_error(locus, grid, dense)
    return {
        "error": error,
        "evaluations": locus.evaluation_count,
        "grid": grid.size,
        "passed": error <= 1e-3 and 10 * locus.evaluation_count <= grid.size,
    }


def interval_disagreements(intervals, grid: np.ndarray, verdicts: np.ndarray) -> int:
    """Grid points where the exact intervals and the brute-force sweep disagree.

    Points within one grid step (or the crossing's own uncertainty) of a reported
    crossing are left out: there the sweep cannot resolve the end.
    """
    step = float(grid[1] - grid[0])
    ours = np.array([intervals.contains(float(v)) for v in grid])
    near = np.zeros(grid.size, dtype=bool)
    for crossing in intervals.crossings:
        reach = max(step, crossing.gain_uncertainty if math.isfinite(crossing.gain_uncertainty) else 0.0)
        near |= np.abs(grid - crossing.gain) <= 1.01 * reach
    return int(np.count_nonzero((ours != verdicts) & ~near))


def check_intervals(plant: core.Plant, gain, entries, grid_points: int = GRID_POINTS) -> dict:
    """Exact stable intervals of each entry against a brute-force sweep of its slider range."""
    exact = core.all_entry_stable_intervals(plant, gain)
    worst = 0
    seconds = []
    for entry in entries:
        grid = entry_grid(plant, gain, entry, grid_points)
        begin = time.perf_counter()
        verdicts = naive_stable_verdicts(plant.A, plant.B, gain, entry, grid, plant.is_sampled)
        seconds.append(time.perf_counter() - begin)
        worst = max(worst, interval_disagreements(exact[entry], grid, verdicts))
    return {"disagreements": worst, "entries": len(entries), "sweep_seconds": seconds, "passed": worst == 0}


def check_responses(plant: core.Plant, gain) -> dict:
    """Linear responses against lsim/dlsim on the same grid: largest error relative to the trajectory size."""
    responses = core.simulate_responses(plant, gain)
    ours = [r for r in (responses.initial, responses.step, responses.disturbance)]
    time_grid = responses.initial.time
    reference = naive_responses(plant, gain, time_grid, responses.initial_state)
    worst = 0.0
    for mine, theirs in zip(ours, reference):
        if mine is None:
            continue
        size = max(float(np.max(np.abs(theirs))), 1e-300)
        worst = max(worst, float(np.max(np.abs(mine.states - theirs[: mine.states.shape[0]]))) / size)
    return {"relative_error": worst, "passed": worst <= 1e-9}


def saturating_plant(plant: core.Plant, gain, fraction: float = 0.4) -> core.Plant:
    """The plant with symmetric limits at ``fraction`` of the linear initial response's peak input."""
    linear = core.simulate_responses(replace(plant, input_limits=None), gain)
    peaks = np.max(np.abs(linear.initial.inputs), axis=0)
    return replace(plant, input_limits=tuple((-fraction * p, fraction * p) for p in np.maximum(peaks, 1e-12)))


def saturated_setup(plant: core.Plant, gain, steps: int = SATURATED_STEPS):
    """Horizon and time step that give ``steps`` grid points at the automatic step size."""
    automatic = core.simulate_responses(replace(plant, input_limits=None), gain)
    step = plant.sample_time or automatic.time_step
    return (steps - 1) * step, None if plant.is_sampled else step


def check_saturated(plant: core.Plant, gain, steps: int = SATURATED_STEPS) -> dict:
    """Saturated initial response against the per-step expm loop: relative error ≤ 1e-9."""
    horizon, time_step = saturated_setup(plant, gain, steps)
    responses = core.simulate_responses(plant, gain, horizon=horizon, time_step=time_step)
    initial = responses.initial
    count = initial.time.size
    reference = naive_saturated(plant, np.asarray(gain, dtype=float), responses.initial_state,
                                np.zeros(plant.input_count), np.zeros(plant.state_count), responses.time_step, count)
    size = max(float(np.max(np.abs(reference))), 1e-300)
    error = float(np.max(np.abs(initial.saturated_states - reference))) / size
    clipped = bool(np.any(initial.saturated_inputs != initial.inputs))
    return {"relative_error": error, "clipped": clipped, "steps": count, "passed": error <= 1e-9}


# ---------------------------------------------------------------------------
# Measurements of one case
# ---------------------------------------------------------------------------
def _entry_sample(m: int, n: int, selected) -> list[tuple[int, int]]:
    entries = [(i, j) for i in range(m) for j in range(n)]
    if len(entries) <= ENTRY_SAMPLE:
        return entries
    picks = {tuple(selected)}
    for index in np.linspace(0, len(entries) - 1, ENTRY_SAMPLE - 1).round().astype(int):
        picks.add(entries[int(index)])
    return sorted(picks)


def measure_case(case: Case, *, budget: float = 1.0, naive_budget: float = 2.0, least: int = 5,
                 grid_points: int = GRID_POINTS) -> None:
    """Time every item of one case (ours, naive, floor) and run the accuracy checks; fills ``case.results``.

    ``budget`` and ``naive_budget`` bound the seconds spent repeating each of our
    items and each naive baseline (after ``least`` repetitions of ours).
    """
    plant, gain, entry = case.plant, case.gain, case.entry
    linear = case.linear_plant
    n, m = plant.state_count, plant.input_count
    results = case.results
    sampled = plant.is_sampled

    responses = core.simulate_responses(linear, gain)
    loop = plant.A - plant.B @ gain
    results["floor"] = floor_time(loop, 1.0 if sampled else responses.time_step)

    # -- ours ------------------------------------------------------------------------------
    full_options = core.EvaluationOptions(selected_entry=entry, specs=plant.specs)
    drag_options = core.EvaluationOptions(selected_entry=entry, specs=plant.specs, include_margins=False)
    interactive_options = core.EvaluationOptions(selected_entry=entry, specs=plant.specs, include_margins=False,
                                                 include_all_entry_intervals=False)
    results["full update"] = median_time(
        lambda k: core.evaluate_design(plant, nudged_gain(gain, entry, k), full_options), least=least, budget=budget)
    results["drag update"] = median_time(
        lambda k: core.evaluate_design(plant, nudged_gain(gain, entry, k), drag_options), least=least, budget=budget)
    results["interactive"] = median_time(
        lambda k: core.evaluate_design(linear, nudged_gain(gain, entry, k), interactive_options), least=least,
        budget=budget)

    def poles_and_responses(k):
        moved = nudged_gain(gain, entry, k)
        core.analyze_closed_loop(linear, moved)
        core.simulate_responses(linear, moved)

    results["poles + responses"] = median_time(poles_and_responses, least=least, budget=budget)
    results["responses"] = median_time(lambda k: core.simulate_responses(linear, nudged_gain(gain, entry, k)),
                                       least=least, budget=budget)
    results["all-entry intervals"] = median_time(
        lambda k: core.all_entry_stable_intervals(plant, nudged_gain(gain, entry, k)), least=min(least, 3),
        budget=budget)
    results["entry intervals"] = median_time(
        lambda k: core.entry_stable_intervals(plant, nudged_gain(gain, entry, k), *entry), least=least,
        budget=budget)
    low, high = core.default_entry_range(plant, gain, *entry)
    results["locus"] = median_time(
        lambda k: core.entry_locus(plant, nudged_gain(gain, entry, k), *entry, low, high), least=least,
        budget=budget)

    # -- naive -----------------------------------------------------------------------------
    grid = np.linspace(low, high, grid_points)
    results["naive locus"] = median_time(lambda k: naive_locus(plant.A, plant.B, gain, entry, grid),
                                         least=1, most=5, budget=naive_budget)
    entries = _entry_sample(m, n, entry)
    check = check_intervals(plant, gain, entries, grid_points)
    per_entry = statistics.median(check["sweep_seconds"])
    results["naive entry intervals"] = check["sweep_seconds"][entries.index(tuple(entry))]
    results["naive all-entry intervals"] = per_entry * m * n
    results["naive all-entry estimated"] = len(entries) < m * n
    time_grid = responses.initial.time
    results["naive responses"] = median_time(
        lambda k: naive_responses(linear, gain, time_grid, responses.initial_state), least=3, most=50,
        budget=naive_budget)
    results["naive poles"] = median_time(lambda k: np.linalg.eigvals(loop), least=20, most=1000, budget=0.2)
    results["naive interactive"] = (results["naive locus"] + results["naive entry intervals"]
                                    + results["naive responses"] + results["naive poles"])
    results["naive full"] = (results["naive locus"] + results["naive all-entry intervals"]
                             + results["naive responses"] + results["naive poles"])
    results["naive poles + responses"] = results["naive responses"] + results["naive poles"]

    # -- accuracy ----------------------------------------------------------------------------
    results["check intervals"] = check
    results["check locus"] = check_locus(plant, gain, entry, grid)
    results["check responses"] = check_responses(linear, gain)

    # -- saturated simulation (4-state plants) ----------------------------------------------
    if n == 4:
        limited = plant if plant.input_limits is not None else saturating_plant(plant, gain)
        horizon, time_step = saturated_setup(limited, gain)
        results["saturated (1000 steps)"] = median_time(
            lambda k: core.simulate_responses(limited, nudged_gain(gain, entry, k), horizon=horizon,
                                              time_step=time_step), least=least, budget=budget)
        start = limited.initial_state if limited.initial_state is not None else np.eye(n)[0]
        step = limited.sample_time or time_step
        results["naive saturated"] = median_time(
            lambda k: naive_saturated(limited, gain, start, np.zeros(m), np.zeros(n), step, SATURATED_STEPS),
            least=1, most=5, budget=naive_budget)
        results["check saturated"] = check_saturated(limited, gain)


# ---------------------------------------------------------------------------
# Printing
# ---------------------------------------------------------------------------
def format_time(seconds: float) -> str:
    if seconds >= 1.0:
        return f"{seconds:7.2f} s "
    if seconds >= 1e-3:
        return f"{seconds * 1e3:7.2f} ms"
    return f"{seconds * 1e6:7.1f} µs"


ITEMS = [
    # (item, naive key or None)
    ("full update", "naive full"),
    ("drag update", "naive full"),
    ("interactive", "naive interactive"),
    ("poles + responses", "naive poles + responses"),
    ("responses", "naive responses"),
    ("all-entry intervals", "naive all-entry intervals"),
    ("entry intervals", "naive entry intervals"),
    ("locus", "naive locus"),
    ("saturated (1000 steps)", "naive saturated"),
]


def print_case(case: Case) -> None:
    results = case.results
    n, m = case.plant.state_count, case.plant.input_count
    kind = "sampled" if case.plant.is_sampled else "continuous"
    limits = "with input limits" if case.plant.input_limits is not None else "no input limits"
    print(f"\n{case.name}  (n={n}, m={m}, {kind}, {limits}; floor = eigvals + expm = {format_time(results['floor']).strip()})")
    print(f"  {'item':<24}{'median':>11}{'naive':>12}{'× faster':>10}{'× floor':>10}")
    for item, naive_key in ITEMS:
        if item not in results:
            continue
        ours = results[item]
        naive = results.get(naive_key)
        faster = f"{naive / ours:9.1f}×" if naive else "        –"
        estimated = "*" if naive_key == "naive all-entry intervals" and results.get("naive all-entry estimated") else " "
        naive_text = (format_time(naive) + estimated) if naive else "           –"
        print(f"  {item:<24}{format_time(ours):>11}{naive_text:>12}{faster:>10}{ours / results['floor']:9.1f}×")
    locus = results["check locus"]
    intervals = results["check intervals"]
    responses = results["check responses"]
    print(f"  check locus: error {locus['error']:.2e} of span with {locus['evaluations']} eigenvalue evaluations "
          f"(grid {locus['grid']}): {'pass' if locus['passed'] else 'FAIL'}")
    print(f"  check intervals: {intervals['disagreements']} disagreeing grid points over {intervals['entries']} "
          f"entries vs brute-force sweep: {'pass' if intervals['passed'] else 'FAIL'}")
    print(f"  check responses: largest error {responses['relative_error']:.1e} relative to lsim: "
          f"{'pass' if responses['passed'] else 'FAIL'}")
    if "check saturated" in results:
        saturated = results["check saturated"]
        print(f"  check saturated: largest error {saturated['relative_error']:.1e} relative to the per-step loop "
              f"({'inputs clipped' if saturated['clipped'] else 'limits never reached'}): "
              f"{'pass' if saturated['passed'] else 'FAIL'}")
    if results.get("naive all-entry estimated"):
        print(f"  * brute force timed on {intervals['entries']} of {m * n} entries and scaled to all of them")
    sys.stdout.flush()


# ---------------------------------------------------------------------------
# Browser round trip
# ---------------------------------------------------------------------------
def _run_latency(arguments: list[str]) -> dict | None:
    """Run browser_latency.py with ``arguments``; parse its (median, 95th percentile) in ms per page and gesture."""
    completed = subprocess.run([sys.executable, str(HERE / "browser_latency.py"), *arguments],
                               capture_output=True, text=True, timeout=1200)
    print("  " + completed.stdout.strip().replace("\n", "\n  "))
    if completed.returncode != 0:
        print("  failed: " + completed.stderr.strip().splitlines()[-1] if completed.stderr.strip() else "  failed")
        return None
    found, page = {}, None
    for line in completed.stdout.splitlines():
        if not line.startswith(" ") and line.endswith(":"):
            page = line[:-1]
            continue
        match = re.search(r"^\s+([a-z ]+): \d+ steps, median (\d+(?:\.\d+)?) ms, 95th percentile (\d+(?:\.\d+)?) ms", line)
        if match and page is not None:
            found.setdefault(page, {})[match.group(1)] = (float(match.group(2)), float(match.group(3)))
    return found or None


def browser_round_trip(plant_name: str, moves: int) -> dict | None:
    """Slider-to-redraw latency of the workbench on a bundled plant and of the floor page (ms).

    The floor (floor_app.py: one slider redrawing one plot) is timed the same way in
    the same run; the result's "floor" entry holds its slider-drag numbers.
    """
    if not (HERE / "browser_latency.py").exists() or not Path("/usr/bin/chromium").exists():
        print("\nbrowser round trip: skipped (browser_latency.py or /usr/bin/chromium missing)")
        return None
    print(f"\nbrowser round trip ({moves} slider moves), floor page first:", flush=True)
    pages = _run_latency([plant_name, "--moves", str(moves)])
    if not pages or plant_name not in pages or "floor page" not in pages:
        return None
    found = {"drag": pages[plant_name].get("slider drag"), "key": pages[plant_name].get("arrow keys"),
             "floor": pages["floor page"].get("slider drag")}
    return found if found["drag"] and found["floor"] else None


# ---------------------------------------------------------------------------
# Targets of issue 7
# ---------------------------------------------------------------------------
def _worst(cases, key, size=None, largest=True, predicate=None):
    values = [(c.results[key], c.name) for c in cases
              if key in c.results and (size is None or c.size == size) and (predicate is None or predicate(c))]
    if not values:
        return None
    return max(values) if largest else min(values)


def target_rows(cases: list[Case], browser) -> list[tuple[str, str, bool | None]]:
    rows = []

    def add(text, value_text, met):
        rows.append((text, value_text, met))

    for size, limit in ((4, 2e-3), (20, 10e-3)):
        worst = _worst(cases, "interactive", size, predicate=lambda c: c.name.startswith("random"))
        if worst:
            add(f"interactive update, random n={size}, under {format_time(limit).strip()}",
                f"worst {format_time(worst[0]).strip()}", worst[0] < limit)
    ratios = [(c.results["naive interactive"] / c.results["interactive"], c.name) for c in cases]
    worst = min(ratios)
    add("interactive update ≥ 10× faster than naive", f"least {worst[0]:.0f}× ({worst[1]})", worst[0] >= 10)
    floors = [(c.results["poles + responses"] / c.results["floor"], c.name) for c in cases if c.size >= 20]
    if floors:
        worst = max(floors)
        add("poles + responses within 3× of the floor, n ≥ 20", f"worst {worst[0]:.1f}× ({worst[1]})", worst[0] <= 3)
    worst = _worst(cases, "all-entry intervals", 10, predicate=lambda c: c.name.startswith("random"))
    if worst:
        add("all-entry stable intervals, n=10, under 20 ms", f"worst {format_time(worst[0]).strip()}", worst[0] < 20e-3)
    large = [c for c in cases if c.size >= 50]
    if large:
        ok = all(c.results["check intervals"]["passed"] for c in large)
        add("all-entry stable intervals accurate at n=50 (brute force)",
            ", ".join(f"{c.results['check intervals']['disagreements']} bad points" for c in large), ok)
    ok = all(c.results["check locus"]["passed"] for c in cases)
    worst_error = max(c.results["check locus"]["error"] for c in cases)
    most = max(c.results["check locus"]["evaluations"] for c in cases)
    add("locus within 1e-3 of span, ≥ 10× fewer evaluations", f"worst {worst_error:.1e}, most {most} evaluations", ok)
    ok = all(c.results["check intervals"]["passed"] for c in cases)
    add("stable intervals agree with the brute-force sweep", "all cases" if ok else "disagreement", ok)
    ratios = [(c.results["naive entry intervals"] / c.results["entry intervals"], c.name) for c in cases]
    worst = min(ratios)
    add("stable intervals ≥ 100× faster than brute force", f"least {worst[0]:.0f}× ({worst[1]})", worst[0] >= 100)
    ratios = [(c.results["naive responses"] / c.results["responses"], c.name) for c in cases]
    worst = min(ratios)
    add("responses ≥ 5× faster than lsim", f"least {worst[0]:.1f}× ({worst[1]})", worst[0] >= 5)
    worst_error = max(c.results["check responses"]["relative_error"] for c in cases)
    add("responses equal lsim to 1e-9 relative", f"worst {worst_error:.1e}", worst_error <= 1e-9)
    worst = _worst(cases, "saturated (1000 steps)")
    if worst:
        add("saturated simulation, 1000 steps, n=4, under 5 ms", f"worst {format_time(worst[0]).strip()} ({worst[1]})",
            worst[0] < 5e-3)
    if browser is not None:
        drag = browser.get("drag")
        floor = browser.get("floor")
        add(f"browser slider → redrawn plots, p95 under 100 ms ({BROWSER_PLANT})",
            (f"p95 {drag[1]:.0f} ms" + (f" (floor page {floor[1]:.0f} ms)" if floor else "")) if drag else "no samples",
            bool(drag and drag[1] < 100))
    else:
        add("browser slider → redrawn plots, p95 under 100 ms", "not run", None)
    return rows


def print_targets(rows) -> None:
    print("\nTargets of issue 7 (medians; ratios from this run)")
    width = max(len(text) for text, _, _ in rows)
    for text, value, met in rows:
        verdict = "met" if met else ("not run" if met is None else "MISSED")
        print(f"  {text:<{width}}  {value:<34} {verdict}")


# ---------------------------------------------------------------------------
def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description="Speed benchmarks of the gainboard core (issue 7).")
    parser.add_argument("--quick", action="store_true", help="small sizes, two bundled plants, no browser")
    parser.add_argument("--no-browser", action="store_true", help="skip the browser round trip")
    parser.add_argument("--blas-threads", default="1", help="OPENBLAS_NUM_THREADS for this run (default 1)")
    parser.add_argument("--moves", type=int, default=40, help="slider moves in the browser round trip")
    args = parser.parse_args(argv)

    sizes = QUICK_SIZES if args.quick else SIZES
    plants = QUICK_PLANTS if args.quick else tuple(bundled_plant_files())
    print(f"gainboard core benchmarks: numpy {np.__version__}, scipy {scipy.__version__}, "
          f"OPENBLAS_NUM_THREADS={os.environ.get('OPENBLAS_NUM_THREADS')}, {os.cpu_count()} CPUs, "
          f"seed {SEED}, grid {GRID_POINTS} points")
    print("naive = numpy/scipy baseline measured in this run; × floor = median / (one eigvals + one expm, n×n)")
    started = time.perf_counter()
    cases = build_cases(sizes, plants)
    for case in cases:
        measure_case(case, budget=0.4 if args.quick else 1.0, naive_budget=0.5 if args.quick else 2.0)
        print_case(case)
    browser = None
    if not (args.quick or args.no_browser):
        browser = browser_round_trip(BROWSER_PLANT, args.moves)
    print_targets(target_rows(cases, browser))
    print(f"\ntotal {time.perf_counter() - started:.0f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
