"""Smoke test of an installed (non-editable) wheel, run by .ci/run with the smoke venv's Python.

    SMOKE_VENV/bin/python .ci/wheel_smoke.py SMOKE_VENV WHEEL

First the base install (no browser stack): `gainboard --version`, `plants`, `assign --save` and
`export --format c`; then the [app] extra and `gainboard serve --no-show` on a free loopback port,
which must answer HTTP 200 with every script of the page served by itself (none from elsewhere);
the server is stopped by its PID. Runs in a temporary folder so the source tree cannot be imported.
"""

from __future__ import annotations

import html.parser
import os
import re
import socket
import subprocess
import sys
import tempfile
import time
import urllib.request
from pathlib import Path

STEP_TIMEOUT = 300
SERVER_START_TIMEOUT = 120


def run(*argv: str, cwd: Path) -> str:
    print("+ " + " ".join(argv), flush=True)
    completed = subprocess.run(argv, cwd=cwd, capture_output=True, text=True, timeout=STEP_TIMEOUT)
    if completed.returncode != 0:
        sys.exit(f"wheel smoke test: {' '.join(argv)} exited {completed.returncode}:\n{completed.stderr[-3000:]}")
    return completed.stdout


def free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return probe.getsockname()[1]


class _Scripts(html.parser.HTMLParser):
    def __init__(self):
        super().__init__()
        self.sources: list[str] = []

    def handle_starttag(self, tag, attrs):
        if tag == "script" and (source := dict(attrs).get("src")):
            self.sources.append(source)


def fetch(url: str) -> tuple[int, str]:
    with urllib.request.urlopen(url, timeout=30) as response:  # noqa: S310 - our own loopback server
        return response.status, response.read().decode("utf-8", errors="replace")


def check_server(venv: Path, workdir: Path) -> None:
    port = free_port()
    command = [str(venv / "bin" / "gainboard"), "serve", "cart_pendulum", "--no-show", "--port", str(port)]
    print("+ " + " ".join(command), flush=True)
    log = (workdir / "serve.log").open("w")
    environment = dict(os.environ, GAINBOARD_DATA_DIR=str(workdir / "data"))
    server = subprocess.Popen(command, cwd=workdir, stdout=log, stderr=subprocess.STDOUT, env=environment)
    try:
        base = f"http://127.0.0.1:{port}"
        deadline = time.monotonic() + SERVER_START_TIMEOUT
        page = None
        while time.monotonic() < deadline and server.poll() is None:
            try:
                status, page = fetch(base + "/")
                break
            except OSError:
                time.sleep(0.5)
        if page is None:
            log.flush()
            sys.exit("wheel smoke test: the server never answered:\n" + (workdir / "serve.log").read_text()[-3000:])
        assert status == 200, status
        scripts = _Scripts()
        scripts.feed(page)
        assert scripts.sources, "the page has no scripts"
        foreign = [s for s in scripts.sources if re.match(r"^(https?:)?//", s) and not s.startswith(base)]
        assert not foreign, f"scripts served from elsewhere: {foreign}"
        for source in scripts.sources:
            status, _ = fetch(source if source.startswith("http") else base + "/" + source.lstrip("./"))
            assert status == 200, (source, status)
        print(f"serve: HTTP 200, {len(scripts.sources)} scripts served locally", flush=True)
    finally:
        server.terminate()  # by its PID: the Popen handle of the process this script started
        try:
            server.wait(timeout=20)
        except subprocess.TimeoutExpired:
            server.kill()
            server.wait()
        log.close()


def main() -> None:
    venv, wheel = Path(sys.argv[1]), Path(sys.argv[2])
    gainboard = str(venv / "bin" / "gainboard")
    with tempfile.TemporaryDirectory(prefix="gainboard-smoke-") as folder:
        workdir = Path(folder)
        version = run(gainboard, "--version", cwd=workdir)
        assert version.startswith("gainboard "), version
        assert "cart_pendulum" in run(gainboard, "plants", cwd=workdir)
        design = workdir / "design.json"
        run(gainboard, "assign", "cart_pendulum", "--poles", "-2+1j,-2-1j,-3,-4", "--save", str(design), cwd=workdir)
        header = run(gainboard, "export", str(design), "--format", "c", cwd=workdir)
        assert "static const double" in header, header[:500]
        found = run(str(venv / "bin" / "python"), "-c",
                    "import importlib.util as u; print([m for m in ('panel', 'bokeh') if u.find_spec(m)])", cwd=workdir)
        assert found.strip() == "[]", f"the base install pulled in the browser stack: {found}"
        run(str(venv / "bin" / "python"), "-m", "pip", "install", "-q", f"{wheel}[app]", cwd=workdir)
        check_server(venv, workdir)
    print("wheel smoke test: passed", flush=True)


if __name__ == "__main__":
    main()
