"""Large plants and the 12-state, 3-input stage: evaluation time against the numerical floor.

Run as a script (pytest does not collect this folder; nothing here asserts a time):

    python tests/benchmarks/scale_benchmark.py                 # n = 50, 100, 200 and the stage
    python tests/benchmarks/scale_benchmark.py --sizes 50 100  # fewer sizes

1. Issue 11 item 7: `gainboard evaluate` (``evaluate_design`` with the command's options: poles,
   structure, responses, margins, no per-entry intervals) on cart chains of n states (our own
   scenario, LQR gain with Q = I, R = I from scipy's Riccati solver), against the floor: one
   ``numpy.linalg.eigvals`` and one ``scipy.linalg.expm`` of the closed loop plus the responses'
   propagation (three responses, one n×n matrix–vector product per time step of the evaluation's
   own time grid). Target: within 10× of the floor up to n = 200. Peak memory of the process is
   printed at the end.
2. Issue 15: server time per evaluation of ``sample_plants/flexure_stage_xy`` (n = 12, m = 3) with
   its LQR gain (Bryson's weights): complete (every entry's exact stable intervals and the margins)
   target < 80 ms, quick (a drag step: neither) target < 15 ms. Each repetition nudges one entry, as
   a slider does, so nothing keyed on K is reused.
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import sys
import time
from pathlib import Path

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import numpy as np  # noqa: E402
import scipy.linalg  # noqa: E402

from gainboard import core  # noqa: E402
from gainboard.sample_plants import bundled_plant_files  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
from margins_benchmark import random_design  # noqa: E402

SEED = 20261203


def median_time(function, repeats: int) -> float:
    times = []
    for k in range(repeats):
        start = time.perf_counter()
        function(k)
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def nudged(gain: np.ndarray, k: int) -> np.ndarray:
    changed = np.array(gain, dtype=float)
    changed[0, 0] *= 1.0 + 1e-4 * (k + 1)
    return changed


def command_options() -> core.EvaluationOptions:
    return core.EvaluationOptions(selected_entry=None, include_all_entry_intervals=False)


def floor_time(plant: core.Plant, gain: np.ndarray, steps: int, time_step: float, repeats: int) -> float:
    closed = np.array(plant.A) - np.array(plant.B) @ gain
    state = np.ones(closed.shape[0])

    def floor(k):
        np.linalg.eigvals(closed)
        transition = scipy.linalg.expm(closed * time_step)
        for _ in range(3):  # initial, step and disturbance responses
            x = state
            for _ in range(steps):
                x = transition @ x

    return median_time(floor, repeats)


def large_plant_rows(sizes, repeats: int):
    rng = np.random.default_rng(SEED)
    for n in sizes:
        plant, gain = random_design(rng, n, 2)
        evaluation = core.evaluate_design(plant, gain, command_options())
        times = evaluation.responses.initial.time
        steps = len(times) - 1
        time_step = float(times[1] - times[0])
        ours = median_time(lambda k: core.evaluate_design(plant, nudged(gain, k), command_options()), repeats)
        floor = floor_time(plant, gain, steps, time_step, max(repeats, 3))
        yield n, ours, floor, steps


def stage_rows(repeats: int):
    plant = core.load_plant_file(bundled_plant_files()["flexure_stage_xy"])
    Q, R = core.bryson_weights(plant)
    gain = np.array(core.design_lqr(plant, Q, R).gain)
    complete = core.EvaluationOptions()
    quick = core.EvaluationOptions(include_all_entry_intervals=False, include_margins=False, gesture=True)
    core.evaluate_design(plant, gain, complete)  # plant-only results cached, as in a served session
    yield "complete", median_time(lambda k: core.evaluate_design(plant, nudged(gain, k), complete), repeats), 0.080
    yield "quick", median_time(lambda k: core.evaluate_design(plant, nudged(gain, k), quick), repeats), 0.015


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="*", default=[50, 100, 200])
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--stage-repeats", type=int, default=20)
    arguments = parser.parse_args(argv)
    print("gainboard evaluate (command options) against eigvals + expm + propagation of the same size")
    print(f"{'n':>5} {'evaluate':>10} {'floor':>10} {'ratio':>7} {'steps':>6}  target ≤ 10×")
    for n, ours, floor, steps in large_plant_rows(arguments.sizes, arguments.repeats):
        ratio = ours / floor
        print(f"{n:>5} {ours:>9.3f}s {floor:>9.3f}s {ratio:>6.1f}× {steps:>6}  {'met' if ratio <= 10 else 'MISSED'}")
    print("flexure_stage_xy (n = 12, m = 3), server time per evaluation")
    for name, seconds, target in stage_rows(arguments.stage_repeats):
        print(f"  {name:<9} {seconds * 1e3:>8.1f} ms  target < {target * 1e3:.0f} ms  "
              f"{'met' if seconds < target else 'MISSED'}")
    print(f"peak memory of this process: {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024:.0f} MiB")
    return 0


if __name__ == "__main__":
    sys.exit(main())
