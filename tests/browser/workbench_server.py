"""Starting `gainboard serve` for browser tests, the access tests and the load test.

Kept apart from conftest.py so that tests/benchmarks/*.py and tests/test_*.py can use
it as a plain module. Servers only ever listen on the loopback address 127.0.0.1.
"""

from __future__ import annotations

import os
import queue
import re
import shutil
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
_SIGN_IN_LINE = re.compile(r"gainboard sign-in link: (http://\S+)")


class RunningServer:
    """A `gainboard serve` subprocess on a free loopback port and the URL it printed.

    Parameters
    ----------
    plant : str
        Plant file or bundled plant name.
    options : sequence of str
        More `gainboard serve` options (e.g. ``["--require-login", "--token"]``).
    environment : mapping, optional
        More environment variables. ``GAINBOARD_DATA_DIR`` is a fresh temporary folder
        (removed by :meth:`stop`) unless given, so autosaves never touch the real home folder.
    launcher : sequence of str, optional
        The command to run instead of ``python -m gainboard.app.cli`` (a test harness
        that accepts the same arguments).
    """

    def __init__(self, plant: str, options=(), environment=None, launcher=None):
        self.log_file = tempfile.NamedTemporaryFile("w+", prefix="gainboard-serve-", suffix=".log", delete=False)
        given = dict(environment or {})
        environment = dict(os.environ, PYTHONUNBUFFERED="1", **given)
        self._own_data_folder = None
        if "GAINBOARD_DATA_DIR" not in given:
            self._own_data_folder = tempfile.mkdtemp(prefix="gainboard-data-")
            environment["GAINBOARD_DATA_DIR"] = self._own_data_folder
        self.data_folder = Path(environment["GAINBOARD_DATA_DIR"])
        # Small matrices: one BLAS thread each, so the test server does not crowd the shared cores.
        environment.setdefault("OPENBLAS_NUM_THREADS", "1")
        environment.setdefault("OMP_NUM_THREADS", "1")
        command = list(launcher) if launcher else [sys.executable, "-m", "gainboard.app.cli"]
        self.process = subprocess.Popen(
            [*command, "serve", plant, "--no-show", "--address", "127.0.0.1", "--port", "0", *options],
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
        self.sign_in_url = None
        self.printed: list[str] = []
        wants_sign_in_link = "--token" in options
        while time.monotonic() < deadline:
            try:
                line = lines.get(timeout=0.5)
            except queue.Empty:
                continue
            if line is None:
                break
            self.printed.append(line)
            if match := _URL_LINE.search(line):
                self.url = match.group(1)
            if match := _SIGN_IN_LINE.search(line):
                self.sign_in_url = match.group(1)
            if self.url and (self.sign_in_url or not wants_sign_in_link):
                break
        if self.url is None:
            error_output = self.log()
            self.stop()
            raise RuntimeError(
                "`gainboard serve` did not print its URL; stdout:\n" + "".join(self.printed) + "\nstderr:\n" + error_output
            )

    def log(self) -> str:
        self.log_file.flush()
        return Path(self.log_file.name).read_text(errors="replace")

    def stop(self) -> None:
        """End the server (this process started it) and remove its log file and data folder."""
        if self.process.poll() is None:
            self.process.terminate()
            try:
                self.process.wait(timeout=10)
            except subprocess.TimeoutExpired:
                self.process.kill()
                self.process.wait()
        self.log_file.close()
        Path(self.log_file.name).unlink(missing_ok=True)
        if self._own_data_folder is not None:
            shutil.rmtree(self._own_data_folder, ignore_errors=True)
