"""Serving benchmark: 20 sessions changing gains for a minute, an oversize link among them, memory, page bytes.

Not a test (pytest skips this folder): run it as a script and read the numbers.

    python tests/benchmarks/serving_load.py                 # the issue-14 figures (about 3 minutes)
    python tests/benchmarks/serving_load.py --duration 20   # shorter

It starts its own `gainboard serve cart_pendulum` on a free port of 127.0.0.1 (it never
connects anywhere else) and drives sessions with Bokeh's Python client
(tests/browser/session_client.py: the messages a page sends, without drawing). Phases, all
against the same server:

1. single: one session alone changes a gain about once a second (the baseline of this run);
2. many: --sessions sessions (default 20) open one after another while the earlier ones
   already work (time to open each), then all change a gain about once a second for
   --duration seconds (change latency = from sending the value to the page's new design number);
3. oversize: while they go on, one more client opens a 200-state snapshot link (refused above
   the 60-state limit) every 2 s for 10 s; the others' latencies in that window against phase 2;
4. memory: server resident memory before the sessions, with them open and idle, and up to 60 s
   after they closed (Bokeh discards a closed session after its unused-session check);
5. page open: bytes and time of the page and every script and style sheet it names, with and
   without gzip (``Accept-Encoding``), from the same server.

Targets (issue 14): p95 < 300 ms, p50 < 150 ms, open < 5 s, oversize rise of p95 < 100 ms. The
machine has 2 cores shared with other work: read the single-session figures beside the others.
Values typed are the session's starting K times a factor in [0.95, 1.05] (invented; stability of
the loop does not matter for latency).
"""

from __future__ import annotations

import argparse
import http.client
import re
import sys
import threading
import time
from pathlib import Path
from urllib.parse import urlsplit

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "browser"))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from load_test import summary  # noqa: E402
from session_client import SessionClient, register_workbench_models  # noqa: E402
from workbench_server import RunningServer  # noqa: E402


def resident_megabytes(pid: int) -> float:
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith("VmRSS:"):
            return int(line.split()[1]) / 1024.0
    return float("nan")


def oversize_link(server_url: str) -> str:
    from gainboard import core
    from gainboard.app.design_file import Design
    from gainboard.app.snapshot import snapshot_code

    n = 200
    B = np.zeros((n, 1))
    B[-1, 0] = 1.0
    return snapshot_code(Design(plant=core.Plant(A=np.eye(n, k=1), B=B), gain=np.zeros((1, n))))


class Changer(threading.Thread):
    """One session changing one gain entry about once a second until told to stop."""

    def __init__(self, index: int, url: str, seed: int, stop: threading.Event):
        super().__init__(name=f"serving-load-{index}", daemon=True)
        self.index, self.url, self.stop_event = index, url, stop
        self.rng = np.random.default_rng([seed, index])
        self.client: SessionClient | None = None
        self.open_seconds: float | None = None
        self.changes: list[tuple[float, float]] = []  # (time sent, latency)
        self.errors: list[str] = []
        self.opened = threading.Event()

    def run(self) -> None:
        started = time.perf_counter()
        try:
            self.client = SessionClient(self.url, {"name": f"load-{self.index}"}, timeout=30.0)
            self.open_seconds = time.perf_counter() - started
        except Exception as error:
            self.errors.append(f"session {self.index} could not open: {type(error).__name__}: {error}")
            return
        finally:
            self.opened.set()
        start_gain = self.client.gain()
        while not self.stop_event.is_set():
            time.sleep(float(self.rng.uniform(0.7, 1.3)))  # about once a second
            if self.stop_event.is_set():
                break
            col = int(self.rng.integers(0, start_gain.shape[1]))
            value = float(np.round(start_gain[0, col] * self.rng.uniform(0.95, 1.05), 6))
            sent = time.monotonic()
            try:
                self.changes.append((sent, self.client.set_entry(0, col, value)))
            except Exception as error:
                self.errors.append(f"session {self.index}: {type(error).__name__}: {error}")
            message = self.client.message()
            if "went wrong" in message:
                self.errors.append(f"session {self.index} showed an error: {message[:160]}")


def latencies_between(changers, start: float, end: float) -> list[float]:
    return [latency for c in changers for sent, latency in c.changes if start <= sent < end]


def line(label: str, values: list[float]) -> str:
    numbers = summary(values)
    if not numbers.get("count"):
        return f"  {label:34s} (none)"
    return (f"  {label:34s} n={numbers['count']:4d}  p50 {numbers['p50_ms']:6.0f} ms  p95 {numbers['p95_ms']:6.0f} ms"
            f"  max {numbers['max_ms']:6.0f} ms")


def page_cost(url: str, gzip: bool) -> tuple[int, float, int]:
    """(bytes transferred, seconds, resources) for the page and each script and style sheet it names."""
    netloc = urlsplit(url).netloc
    headers = {"Accept-Encoding": "gzip"} if gzip else {}
    started = time.perf_counter()
    connection = http.client.HTTPConnection(netloc, timeout=60)
    connection.request("GET", "/", headers=headers)
    response = connection.getresponse()
    body = response.read()
    total = len(body)
    page = body if response.headers.get("Content-Encoding") != "gzip" else __import__("gzip").decompress(body)
    resources = sorted(set(re.findall(rb'(?:src|href)="(?:\./|/)?(static/[^"]+)"', page)))
    for resource in resources:
        connection.request("GET", "/" + resource.decode(), headers=headers)
        total += len(connection.getresponse().read())
    connection.close()
    return total, time.perf_counter() - started, len(resources) + 1


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--sessions", type=int, default=20)
    parser.add_argument("--duration", type=float, default=60.0, help="seconds of steady changes (at most 120)")
    parser.add_argument("--seed", type=int, default=20261202)
    args = parser.parse_args(argv)
    sessions = max(1, min(args.sessions, 40))
    duration = max(10.0, min(args.duration, 120.0))

    sys.stdout.reconfigure(line_buffering=True)  # progress lines survive an interrupted run
    # Bokeh's Python client handles each queued message in a nested call (client/connection.py _next ->
    # states.run -> _handle_messages -> _next); on a heavily loaded machine a client that falls behind
    # exceeds Python's default depth of 1000 (seen here at load average 12). Only the clients are affected.
    sys.setrecursionlimit(20_000)
    register_workbench_models()
    server = RunningServer("cart_pendulum")
    errors: list[str] = []
    try:
        pid = server.process.pid
        time.sleep(2.0)
        memory_start = resident_megabytes(pid)

        # 1. one session alone
        stop = threading.Event()
        alone = Changer(999, server.url, args.seed, stop)
        alone.start()
        alone.opened.wait(60)
        time.sleep(min(20.0, duration / 3))
        stop.set()
        alone.join(30)
        if alone.client:
            alone.client.close()
        errors += alone.errors
        single = [latency for _, latency in alone.changes]
        print(line("single session: change latency", single))

        # 2. many sessions, opened one after another while the earlier ones work
        stop = threading.Event()
        changers = [Changer(index, server.url, args.seed, stop) for index in range(sessions)]
        for changer in changers:
            changer.start()
            changer.opened.wait(60)
        print(line(f"{sessions} sessions: time to open", [c.open_seconds for c in changers if c.open_seconds]))
        steady_start = time.monotonic()
        time.sleep(duration)
        steady_end = time.monotonic()

        # 3. an oversize link among them
        code = oversize_link(server.url)
        oversize_open = []
        refused_messages = []
        while time.monotonic() < steady_end + 10.0:
            started = time.perf_counter()
            try:
                intruder = SessionClient(server.url, {"design": code}, timeout=60.0)
                oversize_open.append(time.perf_counter() - started)
                refused_messages.append(intruder.message())
                intruder.close()
            except Exception as error:
                errors.append(f"the oversize link: {type(error).__name__}: {error}")
            time.sleep(max(0.0, 2.0 - (time.perf_counter() - started)))
        oversize_end = time.monotonic()
        memory_busy = resident_megabytes(pid)
        stop.set()
        for changer in changers:
            changer.join(30)
            errors += changer.errors

        # 4. memory with the sessions idle, then after they closed
        time.sleep(3.0)
        memory_idle = resident_megabytes(pid)
        for changer in changers:
            if changer.client:
                changer.client.close()
        after_close = []
        for _ in range(12):
            time.sleep(5.0)
            after_close.append(resident_megabytes(pid))

        # 5. page open, with and without gzip
        plain = page_cost(server.url, gzip=False)
        packed = page_cost(server.url, gzip=True)
        log = server.log()
    finally:
        server.stop()

    steady = latencies_between(changers, steady_start, steady_end)
    during = latencies_between(changers, steady_end, oversize_end)
    opens = [c.open_seconds for c in changers if c.open_seconds is not None]
    tracebacks = log.count("Traceback")
    if tracebacks:
        errors.append(f"the server logged {tracebacks} exception(s)")
    print(f"gainboard serving benchmark: cart_pendulum, {sessions} sessions, {duration:.0f} s steady, 127.0.0.1")
    print(line("single session: change latency", single))
    print(line(f"{sessions} sessions: change latency", steady))
    print(line(f"{sessions} sessions: time to open", opens))
    print(line("during 200-state links: latency", during))
    print(line("200-state link: time to answer", oversize_open))
    if steady and during:
        rise = summary(during)["p95_ms"] - summary(steady)["p95_ms"]
        print(f"  p95 rise while the oversize links open: {rise:+.0f} ms")
    refused = sum("200 states" in message for message in refused_messages)
    print(f"  oversize links refused with the size message: {refused} of {len(refused_messages)}")
    per_session = (memory_idle - memory_start) / sessions
    print(f"  server memory: {memory_start:.0f} MB at start, {memory_busy:.0f} MB busy, {memory_idle:.0f} MB with "
          f"{sessions} idle sessions ({per_session:.1f} MB per session), after closing: "
          + ", ".join(f"{value:.0f}" for value in after_close[::3]) + f" MB (every 15 s), last {after_close[-1]:.0f} MB")
    print(f"  page open, plain: {plain[0] / 1e6:.2f} MB in {plain[1]:.2f} s ({plain[2]} resources); "
          f"gzip: {packed[0] / 1e6:.2f} MB in {packed[1]:.2f} s ({packed[0] / plain[0]:.2f} of the bytes)")
    print(f"  errors: {len(errors)}")
    for error in errors[:20]:
        print(f"    - {error}")
    return 1 if errors else 0


if __name__ == "__main__":
    sys.exit(main())
