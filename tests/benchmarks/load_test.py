"""Load test: many concurrent workbench sessions changing gains, on the loopback address only.

Not a test (pytest skips this folder): run it as a script and read the numbers.

    python tests/benchmarks/load_test.py                      # 20 sessions, 10 changes each
    python tests/benchmarks/load_test.py --room-size 5        # 4 live rooms of 5 people
    python tests/benchmarks/load_test.py --json results.json  # also write the numbers

It starts its own `gainboard serve` on a free port of 127.0.0.1 (it never connects
anywhere else), opens the sessions over their live connections with Bokeh's Python
client (tests/browser/session_client.py: the same messages a page sends, without
drawing), and lets every session type new values into its gain entries at random
moments (``numpy.random.default_rng(--seed)``). Latency of one change = from
sending the new value to receiving the page's new design number (the server has
evaluated the design and sent every view's update by then).

Bounded: at most --sessions (≤ 40) sessions, --changes (≤ 50) changes each, and
--time-limit (≤ 300) seconds in all; it stops by itself and ends the server it
started. Errors counted: sessions that could not open, changes without an answer
within --change-timeout, error messages shown in a page, and exceptions in the
server log. In live rooms it also measures how long the others in the room take to
show a change (fan-out). The exit code is 1 when there were errors.

Each session types values near reference case 1's gain K = [199, 55, 8] (Ogata, *Modern
Control Engineering*, 5th ed., Example 10-1, from memory); within ±20 % of those entries
the loop stays stable (Routh–Hurwitz, reference case 5 of shared/reference-cases.md).
"""

from __future__ import annotations

import argparse
import json
import sys
import threading
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "browser"))

from session_client import SessionClient, register_workbench_models  # noqa: E402
from workbench_server import RunningServer  # noqa: E402

DEFAULT_PLANT = str(Path(__file__).resolve().parents[1] / "data" / "third_order_reference.toml")
REFERENCE_GAIN = np.array([199.0, 55.0, 8.0])  # reference case 1 (Ogata Example 10-1, from memory)
MAX_SESSIONS, MAX_CHANGES, MAX_SECONDS = 40, 50, 300.0


def percentile(values: list[float], fraction: float) -> float:
    """Nearest-rank percentile (common practice, no source)."""
    ordered = sorted(values)
    rank = max(1, min(len(ordered), round(fraction * len(ordered) + 0.5)))
    return ordered[rank - 1]


def summary(values: list[float]) -> dict:
    if not values:
        return {"count": 0}
    ms = [1000.0 * v for v in values]
    return {
        "count": len(ms),
        "p50_ms": percentile(ms, 0.50),
        "p90_ms": percentile(ms, 0.90),
        "p95_ms": percentile(ms, 0.95),
        "p99_ms": percentile(ms, 0.99),
        "max_ms": max(ms),
        "mean_ms": sum(ms) / len(ms),
    }


class Worker(threading.Thread):
    """One session: open, make the changes, record latencies and errors."""

    def __init__(self, index: int, url: str, arguments: dict, changes: int, deadline: float, seed: int,
                 change_timeout: float, start_gate: threading.Barrier):
        super().__init__(name=f"load-session-{index}", daemon=True)
        self.index, self.url, self.arguments = index, url, arguments
        self.changes, self.deadline, self.change_timeout = changes, deadline, change_timeout
        self.rng = np.random.default_rng([seed, index])
        self.start_gate = start_gate
        self.client: SessionClient | None = None
        self.latencies: list[float] = []
        self.open_seconds: float | None = None
        self.errors: list[str] = []
        self.sent: list[tuple[float, int, int, float]] = []  # (time sent, row, col, value)

    def run(self) -> None:
        started = time.perf_counter()
        try:
            self.client = SessionClient(self.url, self.arguments, timeout=self.change_timeout)
            self.open_seconds = time.perf_counter() - started
        except Exception as error:
            self.errors.append(f"session {self.index} could not open: {type(error).__name__}: {error}")
            self._pass_gate()
            return
        self._pass_gate()
        for _ in range(self.changes):
            if time.monotonic() + self.change_timeout > self.deadline:
                break
            time.sleep(float(self.rng.uniform(0.1, 0.6)))  # people pause between changes
            col = int(self.rng.integers(0, 3))
            value = float(np.round(REFERENCE_GAIN[col] * self.rng.uniform(0.8, 1.2), 6))
            try:
                sent = time.time()
                self.latencies.append(self.client.set_entry(0, col, value))
                self.sent.append((sent, 0, col, value))
            except Exception as error:
                self.errors.append(f"session {self.index}: {type(error).__name__}: {error}")
            message = self.client.message()
            if "Could not" in message or "went wrong" in message:
                self.errors.append(f"session {self.index} showed an error: {message[:200]}")

    def _pass_gate(self) -> None:
        try:
            self.start_gate.wait(timeout=max(1.0, self.deadline - time.monotonic()))
        except threading.BrokenBarrierError:
            pass


def fan_out_latencies(workers: list[Worker], room_size: int) -> list[float]:
    """In live rooms: for each change, how long until the other members showed it (from their room version).

    Measured after the run from each member's record is too indirect, so rooms are
    measured here directly: one member changes k₁₁ and the others are watched.
    """
    delays = []
    rooms = [workers[i:i + room_size] for i in range(0, len(workers), room_size)]
    for members in rooms:
        members = [w for w in members if w.client is not None]
        if len(members) < 2:
            continue
        author, others = members[0], members[1:]
        for step in range(3):
            versions = [other.client.room_version() for other in others]
            value = float(REFERENCE_GAIN[0] + 1 + step)
            started = time.perf_counter()
            try:
                author.client.set_entry(0, 0, value)
            except Exception as error:
                author.errors.append(f"room author: {type(error).__name__}: {error}")
                continue
            for other, version in zip(others, versions):
                if other.client.pump(lambda o=other, v=version: o.client.room_version() > v, 30.0):
                    delays.append(time.perf_counter() - started)
                else:
                    author.errors.append(f"a room member did not show the change k11 = {value} within 30 s")
    return delays


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("plant", nargs="?", default=DEFAULT_PLANT, help="plant file or bundled plant (3 states "
                        "expected: the values typed are near reference case 1's K)")
    parser.add_argument("--sessions", type=int, default=20, help=f"concurrent sessions (at most {MAX_SESSIONS})")
    parser.add_argument("--changes", type=int, default=10, help=f"changes per session (at most {MAX_CHANGES})")
    parser.add_argument("--room-size", type=int, default=1,
                        help="sessions per live room (1: every session edits its own design)")
    parser.add_argument("--time-limit", type=float, default=150.0, help=f"seconds in all (at most {MAX_SECONDS:g})")
    parser.add_argument("--change-timeout", type=float, default=30.0, help="seconds to wait for one answer")
    parser.add_argument("--seed", type=int, default=20261201, help="seed of the random pauses and values")
    parser.add_argument("--json", help="also write the results to this file")
    args = parser.parse_args(argv)
    sessions = max(1, min(args.sessions, MAX_SESSIONS))
    changes = max(1, min(args.changes, MAX_CHANGES))
    time_limit = max(10.0, min(args.time_limit, MAX_SECONDS))
    room_size = max(1, min(args.room_size, sessions))

    register_workbench_models()
    server = RunningServer(args.plant)  # always 127.0.0.1, a free port, a temporary data folder
    began = time.monotonic()
    deadline = began + time_limit
    try:
        gate = threading.Barrier(sessions)
        workers = []
        for index in range(sessions):
            arguments = {"name": f"load-{index}"}
            if room_size > 1:
                arguments["room"] = f"load-room-{index // room_size}"
            workers.append(Worker(index, server.url, arguments, changes, deadline, args.seed,
                                  args.change_timeout, gate))
        for worker in workers:
            worker.start()
        for worker in workers:
            worker.join(timeout=max(0.0, deadline - time.monotonic()) + 5.0)
        stuck = [w.index for w in workers if w.is_alive()]
        fan_out = fan_out_latencies(workers, room_size) if room_size > 1 and time.monotonic() < deadline else []
        elapsed = time.monotonic() - began
        for worker in workers:
            if worker.client is not None and not worker.is_alive():
                worker.client.close()
        log = server.log()
    finally:
        server.stop()

    latencies = [v for w in workers for v in w.latencies]
    errors = [e for w in workers for e in w.errors]
    if stuck:
        errors.append(f"sessions still running at the time limit: {stuck}")
    tracebacks = log.count("Traceback")
    if tracebacks:
        errors.append(f"the server logged {tracebacks} exception(s)")
    results = {
        "sessions": sessions,
        "changes_per_session": changes,
        "room_size": room_size,
        "elapsed_s": elapsed,
        "changes_answered": len(latencies),
        "changes_per_second": len(latencies) / elapsed if elapsed > 0 else 0.0,
        "open": summary([w.open_seconds for w in workers if w.open_seconds is not None]),
        "change_to_new_design": summary(latencies),
        "room_fan_out": summary(fan_out),
        "errors": errors,
    }
    print(f"gainboard load test: {sessions} sessions × {changes} changes, "
          f"{'own designs' if room_size == 1 else f'live rooms of {room_size}'}, {elapsed:.1f} s on 127.0.0.1")
    for key in ("open", "change_to_new_design", "room_fan_out"):
        numbers = results[key]
        if numbers.get("count"):
            print(f"  {key:22s} n={numbers['count']:4d}  p50 {numbers['p50_ms']:7.0f} ms  p90 {numbers['p90_ms']:7.0f} ms"
                  f"  p95 {numbers['p95_ms']:7.0f} ms  p99 {numbers['p99_ms']:7.0f} ms  max {numbers['max_ms']:7.0f} ms")
    print(f"  throughput             {results['changes_per_second']:.1f} answered changes per second")
    print(f"  errors                 {len(errors)}")
    for error in errors[:20]:
        print(f"    - {error}")
    if args.json:
        Path(args.json).write_text(json.dumps(results, indent=2) + "\n", encoding="utf-8")
    return 1 if errors else 0


if __name__ == "__main__":
    sys.exit(main())
