"""Speed of Monte Carlo sampling against baselines measured in the same run (issue 17).

Run it as a script (pytest skips this folder):

    python tests/benchmarks/robustness_benchmark.py            # everything, ~2–4 minutes
    python tests/benchmarks/robustness_benchmark.py --quick    # no Dask scaling run
    python tests/benchmarks/robustness_benchmark.py --dask-seconds 20   # longer scaling run

The plant is the bundled cart_pendulum family (4 states, one input; payload, friction and
pivot friction uncertain) under a pole-assignment K. Printed, each as a ratio:

1. poles + stability of 100 000 samples (``run_monte_carlo``, in process) against one batched
   ``numpy.linalg.eigvals`` over a prebuilt stack of the same 100 000 closed-loop matrices
   (target: within 3×) and against a Python loop over ``evaluate_design`` without margins
   and intervals (timed on a subset, per sample; target: ≥ 20× faster);
2. margins per sample (``run_monte_carlo`` with margins, minus the run without, per sample)
   against ``loop_margins`` per model in a loop (subset, per sample; target: ≥ 10× faster);
3. two local Dask workers against one on a run of at least ``--dask-seconds`` on one worker
   (target ≥ 1.6×; distorted while other jobs share the cores — the load is printed);
4. memory: the peak of Python allocations (tracemalloc) for 10 000 and for 200 000 samples,
   which stays the same when chunks bound it.
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import argparse  # noqa: E402
import time  # noqa: E402
import tracemalloc  # noqa: E402

import numpy as np  # noqa: E402

from gainboard import core  # noqa: E402
from gainboard.sample_plants import bundled_plant_files  # noqa: E402

POLES = [-3 + 2j, -3 - 2j, -4, -5]


def best_of(function, repeats: int = 3) -> float:
    times = []
    for _ in range(repeats):
        started = time.perf_counter()
        function()
        times.append(time.perf_counter() - started)
    return min(times)


def setup():
    family = core.load_plant_family_file(bundled_plant_files()["cart_pendulum"])
    gain = core.assign_poles(family.nominal, POLES).gain
    return family, gain


def load_text() -> str:
    return f"load average {os.getloadavg()[0]:.2f} {os.getloadavg()[1]:.2f} {os.getloadavg()[2]:.2f} on {os.cpu_count()} cores"


def poles_and_stability(family, gain, samples: int = 100_000) -> float:
    plan = core.plan_monte_carlo(family, gain, samples=samples, seed=1)
    ours = best_of(lambda: core.run_monte_carlo(plan))
    # floor: one batched eigvals over the same stack, built beforehand (not timed)
    from gainboard.core._monte_carlo import _chunk_parameters

    values = {name: np.concatenate([_chunk_parameters(plan, i)[name] for i in range(plan.chunk_count)])
              for name in family.parameter_names}
    stacks = family.matrix_stacks(values)
    closed = stacks.A - stacks.B @ gain
    floor = best_of(lambda: np.linalg.eigvals(closed))
    subset = 300
    options = core.EvaluationOptions(selected_entry=None, include_margins=False, include_all_entry_intervals=False)
    plants = [family.plant_at({name: values[name][i] for name in family.parameter_names}) for i in range(subset)]
    loop = best_of(lambda: [core.evaluate_design(p, gain, options) for p in plants], repeats=1) / subset * samples
    print(f"1. poles + stability, {samples} samples: {ours:.3f} s; one batched eigvals {floor:.3f} s "
          f"→ {ours / floor:.2f}× the floor (target ≤ 3); evaluate_design loop {loop:.1f} s "
          f"(from {subset} models) → {loop / ours:.0f}× faster (target ≥ 20)")
    return ours


def margins_per_sample(family, gain, samples: int = 20_000) -> None:
    with_margins = core.plan_monte_carlo(family, gain, samples=samples, seed=2, include_margins=True)
    without = core.plan_monte_carlo(family, gain, samples=samples, seed=2)
    ours = (best_of(lambda: core.run_monte_carlo(with_margins), 2) - best_of(lambda: core.run_monte_carlo(without), 2))
    ours /= samples
    subset = 100
    from gainboard.core._monte_carlo import _chunk_parameters

    values = _chunk_parameters(without, 0)
    plants = [family.plant_at({name: values[name][i] for name in family.parameter_names}) for i in range(subset)]
    loop = best_of(lambda: [core.loop_margins(p, gain) for p in plants], repeats=1) / subset
    print(f"2. margins per sample: {ours * 1e6:.0f} µs; loop_margins per model {loop * 1e6:.0f} µs "
          f"→ {loop / ours:.0f}× faster (target ≥ 10)")


def dask_scaling(family, gain, seconds: float) -> None:
    # size the run so that one worker needs about `seconds` (margins make each sample cost more)
    probe = core.plan_monte_carlo(family, gain, samples=20_000, seed=3, include_margins=True)
    per_sample = best_of(lambda: core.run_monte_carlo(probe), 1) / 20_000
    samples = int(seconds / per_sample)
    plan = core.plan_monte_carlo(family, gain, samples=samples, seed=3, include_margins=True, chunk_size=5000)
    times = {}
    for workers in (1, 2):
        started = time.perf_counter()
        import distributed

        with distributed.LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, host="127.0.0.1",
                                      dashboard_address=None, silence_logs=40,
                                      scheduler_kwargs={"dashboard": False, "dashboard_address": "127.0.0.1:0"}) as cluster, \
                distributed.Client(cluster) as client:
            client.wait_for_workers(workers)
            ready = time.perf_counter()
            result = core.run_monte_carlo_on_dask(plan, cluster.scheduler_address)
            times[workers] = time.perf_counter() - ready
        print(f"   {workers} worker(s): {times[workers]:.1f} s for {samples} samples "
              f"(cluster start {ready - started:.1f} s, not counted); stable fraction {result.stable.fraction:.4f}")
    print(f"3. two local Dask workers vs one: {times[1] / times[2]:.2f}× (target ≥ 1.6); {load_text()}")


def memory(family, gain) -> None:
    peaks = {}
    for samples in (10_000, 200_000):
        plan = core.plan_monte_carlo(family, gain, samples=samples, seed=4)
        tracemalloc.start()
        core.run_monte_carlo(plan)
        peaks[samples] = tracemalloc.get_traced_memory()[1]
        tracemalloc.stop()
    print("4. peak Python allocations: " + ", ".join(f"{n} samples {p / 1e6:.1f} MB" for n, p in peaks.items())
          + " (bounded by one chunk when they match)")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="skip the Dask scaling run")
    parser.add_argument("--dask-seconds", type=float, default=12.0, help="length of the scaling run on one worker")
    args = parser.parse_args()
    family, gain = setup()
    print(f"cart_pendulum family, K = {np.round(gain, 3).tolist()}; {load_text()}")
    poles_and_stability(family, gain)
    margins_per_sample(family, gain)
    memory(family, gain)
    if not args.quick:
        dask_scaling(family, gain, args.dask_seconds)


if __name__ == "__main__":
    main()
