"""Benchmark: where should a served workbench run its evaluations — on the event loop, in threads or in processes?

Not a test (nothing is asserted): run it as a script and read the numbers.

    python tests/benchmarks/executor_choice.py [--sessions 1 4] [--steps 30] [--workers 2]

An asyncio event loop stands in for the server's: each simulated session drags one
slider of a bundled plant, asking for the next STEP-level evaluation as soon as the
previous one was delivered (as a page waits for its redraw), through the same
PooledRunner the workbench uses. A ticker on the loop, due every 5 ms, measures how
late the loop answers while the evaluations run: the delay every other message of
every session would see. Printed per plant, number of sessions and mode: median and
95th percentile of the step latency (request → result on the loop), steps per
second, and the loop's median / 95th percentile / largest lateness. "inline" is
today's baseline (the evaluation runs on the loop itself).
"""

from __future__ import annotations

import argparse
import asyncio
import statistics
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from gainboard import core  # noqa: E402
from gainboard.app.evaluation_pool import EvaluationPool, PooledRunner  # noqa: E402
from gainboard.app.evaluation_runner import EvaluationRequest, InlineRunner  # noqa: E402
from gainboard.app.refresh_policy import Detail, detail_options  # noqa: E402
from gainboard.sample_plants import load_bundled_plant  # noqa: E402

TICK = 0.005


def percentile(values, fraction):
    """Nearest-rank percentile (common practice, no source)."""
    ordered = sorted(values)
    rank = max(1, min(len(ordered), round(fraction * len(ordered) + 0.5)))
    return ordered[rank - 1]


def loop_work(count: int = 40000) -> int:
    """About 2 ms of pure-Python work on an idle machine: it needs the GIL all along."""
    total = 0
    for i in range(count):
        total += i * i % 7
    return total


def starting_gain(plant):
    Q, R = core.bryson_weights(plant)
    return core.design_lqr(plant, Q, R).gain


def step_request(plant, gain, sequence, previous):
    wanted = detail_options(Detail.STEP)
    options = core.EvaluationOptions(selected_entry=(0, 0), include_margins=wanted.include_margins,
                                     include_all_entry_intervals=wanted.include_all_entry_intervals,
                                     gesture=True, previous_view=previous)
    return EvaluationRequest(sequence=sequence, plant=plant, gain=gain, options=options, detail=Detail.STEP, inputs={})


async def run_case(plant, mode, sessions, steps, pool):
    loop = asyncio.get_running_loop()
    lateness = []
    stop = asyncio.Event()

    work = []

    async def ticker():
        while not stop.is_set():
            due = time.perf_counter() + TICK
            await asyncio.sleep(TICK)
            lateness.append(max(0.0, time.perf_counter() - due))
            began = time.perf_counter()
            loop_work()  # what the loop itself does per message (Bokeh encodes it in Python)
            work.append(time.perf_counter() - began)

    latencies = []
    # the sessions' starting designs, before anything is timed
    start_gain = starting_gain(plant)
    start_view = core.evaluate_design(plant, start_gain).view_ranges

    async def session(index):
        gain, previous = start_gain, start_view
        runner = InlineRunner() if mode == "inline" else PooledRunner(pool, loop.call_soon_threadsafe)
        for step in range(steps):
            gain = gain.copy()
            gain[0, 0] *= 1.0 + 0.002 * (1 if (step // 10) % 2 == 0 else -1)
            done = loop.create_future()
            started = time.perf_counter()
            runner.submit(step_request(plant, gain, step + 1, previous),
                          lambda request, evaluation, error: done.set_result((evaluation, error)))
            evaluation, error = await done
            if error is not None:
                raise error
            latencies.append(time.perf_counter() - started)
            previous = evaluation.view_ranges
            await asyncio.sleep(0)  # the page's redraw and next message

    tick = asyncio.create_task(ticker())
    began = time.perf_counter()
    await asyncio.gather(*(session(i) for i in range(sessions)))
    elapsed = time.perf_counter() - began
    stop.set()
    await tick
    ms = [1000 * v for v in latencies]
    work_ms = [1000 * v for v in work] or [0.0]
    late = [1000 * v for v in lateness] or [0.0]
    return {
        "p50": statistics.median(ms), "p95": percentile(ms, 0.95), "rate": len(ms) / elapsed,
        "late50": statistics.median(late), "late95": percentile(late, 0.95), "late_max": max(late),
        "work50": statistics.median(work_ms),
    }


def timed_work() -> float:
    began = time.perf_counter()
    loop_work()
    return 1000 * (time.perf_counter() - began)


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--plants", nargs="+", default=["cart_pendulum", "flexure_stage_xy"])
    parser.add_argument("--sessions", nargs="+", type=int, default=[1, 4])
    parser.add_argument("--steps", type=int, default=30)
    parser.add_argument("--workers", type=int, default=2)
    args = parser.parse_args(argv)
    pools = {"thread": EvaluationPool(args.workers, kind="thread"),
             "process": EvaluationPool(args.workers, kind="process")}
    pools["process"].warm_up()
    idle = statistics.median(timed_work() for _ in range(200))
    print(f"{args.workers} workers; step latency (ms), steps/s, event-loop lateness (ms) of a 5 ms ticker")
    for stem in args.plants:
        plant = load_bundled_plant(stem)
        for sessions in args.sessions:
            for mode in ("inline", "thread", "process"):
                result = asyncio.run(run_case(plant, mode, sessions, args.steps, pools.get(mode)))
                print(f"{stem:18s} sessions={sessions} {mode:8s} step p50 {result['p50']:6.1f} p95 {result['p95']:6.1f}"
                      f"  {result['rate']:6.1f}/s   loop late p50 {result['late50']:5.1f} p95 {result['late95']:6.1f}"
                      f" max {result['late_max']:6.1f}   loop work {result['work50']:5.2f} ms (idle {idle:4.2f})", flush=True)
    for pool in pools.values():
        pool.close()
    return 0


if __name__ == "__main__":
    np.seterr(all="ignore")
    sys.exit(main())
