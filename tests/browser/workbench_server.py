"""Starting `gainboard serve` for browser tests and the latency benchmark.

Kept apart from conftest.py so that tests/benchmarks/browser_latency.py can use it
as a plain module.
"""

from __future__ import annotations

import os
import queue
import re
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

__all__ = ["CHROMIUM", "CHROMIUM_ARGS", "VIEWPORT", "RunningServer"]

CHROMIUM = Path("/usr/bin/chromium")
CHROMIUM_ARGS = [
    "--no-sandbox",
    "--disable-gpu",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]
#: A 1366×768 laptop screen, the smallest the workbench is laid out for.
VIEWPORT = {"width": 1366, "height": 768}
SERVER_START_TIMEOUT = 90.0
REPOSITORY = Path(__file__).resolve().parents[2]

_URL_LINE = re.compile(r"gainboard serving at (http://127\.0\.0\.1:\d+/)")


class RunningServer:
    """A `gainboard serve` subprocess and the URL it printed."""

    def __init__(self, plant: str):
        self.log_file = tempfile.NamedTemporaryFile("w+", prefix="gainboard-serve-", suffix=".log", delete=False)
        environment = dict(os.environ, PYTHONUNBUFFERED="1")
        # Small matrices: one BLAS thread each, so the test server does not crowd the shared cores.
        environment.setdefault("OPENBLAS_NUM_THREADS", "1")
        environment.setdefault("OMP_NUM_THREADS", "1")
        self.process = subprocess.Popen(
            [sys.executable, "-m", "gainboard.app.cli", "serve", plant, "--no-show", "--port", "0"],
            stdout=subprocess.PIPE, stderr=self.log_file, text=True, env=environment, cwd=REPOSITORY,
        )
        lines: queue.Queue[str | None] = queue.Queue()

        def read_stdout():
            for line in self.process.stdout:
                lines.put(line)
            lines.put(None)

        threading.Thread(target=read_stdout, daemon=True).start()
        deadline = time.monotonic() + SERVER_START_TIMEOUT
        self.url = None
        printed = []
        while time.monotonic() < deadline:
            try:
                line = lines.get(timeout=0.5)
            except queue.Empty:
                continue
            if line is None:
                break
            printed.append(line)
            match = _URL_LINE.search(line)
            if match:
                self.url = match.group(1)
                break
        if self.url is None:
            error_output = self.log()
            self.stop()
            raise RuntimeError(
                "`gainboard serve` did not print its URL; stdout:\n" + "".join(printed) + "\nstderr:\n" + error_output
            )

    def log(self) -> str:
        self.log_file.flush()
        return Path(self.log_file.name).read_text(errors="replace")

    def stop(self) -> None:
        """End the server (this process started it) and remove its log file."""
        if self.process.poll() is None:
            self.process.terminate()
            try:
                self.process.wait(timeout=10)
            except subprocess.TimeoutExpired:
                self.process.kill()
                self.process.wait()
        self.log_file.close()
        Path(self.log_file.name).unlink(missing_ok=True)
