"""Start-up time of the command line against importing numpy, measured in the same run.

    python3 tests/benchmarks/startup_benchmark.py [--runs 15]

Target (issue 12): median wall time of `gainboard --help` within 2× of `python -c "import numpy"`
(the command line needs numpy; everything else it loads is what this ratio charges for). Also prints
the ten slowest imports of `gainboard --help` from ``python -X importtime`` so a regression names
its culprit. Not collected by pytest: timings on a shared machine are reported, never asserted.
"""

from __future__ import annotations

import argparse
import shutil
import statistics
import subprocess
import sys
import time


def median_seconds(command: list[str], runs: int) -> float:
    times = []
    for _ in range(runs):
        start = time.perf_counter()
        subprocess.run(command, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=True, timeout=120)
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def slowest_imports(command: list[str], count: int = 10) -> list[tuple[int, str]]:
    completed = subprocess.run([sys.executable, "-X", "importtime", *command], capture_output=True, text=True,
                               timeout=120)
    rows = []
    for line in completed.stderr.splitlines():
        if line.startswith("import time:") and "|" in line and "cumulative" not in line:
            _, cumulative, name = (part.strip() for part in line.split("|"))
            rows.append((int(cumulative), name))
    return sorted(rows, reverse=True)[:count]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=15)
    runs = parser.parse_args().runs
    script = shutil.which("gainboard")
    help_command = [script, "--help"] if script else [sys.executable, "-m", "gainboard.app.cli", "--help"]
    baseline = median_seconds([sys.executable, "-c", "import numpy"], runs)
    bare = median_seconds([sys.executable, "-c", "pass"], runs)
    cases = {
        "gainboard --help": help_command,
        "gainboard --version": help_command[:-1] + ["--version"],
        "gainboard plants": help_command[:-1] + ["plants"],
        "import gainboard": [sys.executable, "-c", "import gainboard"],
    }
    print(f"{runs} runs each; python -c pass: {bare * 1e3:.0f} ms; python -c 'import numpy': {baseline * 1e3:.0f} ms")
    for label, command in cases.items():
        seconds = median_seconds(command, runs)
        target = "  (target ≤ 2×)" if label == "gainboard --help" else ""
        print(f"{label:<22} {seconds * 1e3:6.0f} ms  = {seconds / baseline:4.2f}× import numpy{target}")
    print("slowest imports of `gainboard --help` (cumulative µs):")
    for micros, name in slowest_imports(["-m", "gainboard.app.cli", "--help"]):
        print(f"  {micros:8d}  {name}")


if __name__ == "__main__":
    main()
