"""Start-up stays light and importing gainboard changes nothing in the user's process.

`gainboard --help`, `--version` and `plants` must not load scipy.signal or the browser stack
(Panel, Bokeh, param); the base install's commands must run without the browser stack at all; and
`import gainboard` must leave the environment and the BLAS thread count as it found them (the
server limits BLAS in its own process only). Each check runs in a fresh interpreter and reads
``sys.modules`` there.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys

import pytest

from gainboard import core
from gainboard.app import cli_estimator

BROWSER_STACK = ("panel", "bokeh", "param")

#: Runs the command line in-process, then reports which watched modules got loaded.
_RUN_CLI = """
import json, sys
from gainboard.app.cli import main
try:
    code = main(sys.argv[1:])
except SystemExit as stop:
    code = stop.code
watched = ("scipy.signal", "panel", "bokeh", "param", "tqdm", "dask")
sys.stderr.write("\\nLOADED " + json.dumps([m for m in watched if m in sys.modules]) + " EXIT " + str(code) + "\\n")
"""


def modules_loaded_by(*argv: str, cwd=None) -> tuple[list[str], int, str]:
    completed = subprocess.run([sys.executable, "-c", _RUN_CLI, *argv], capture_output=True, text=True,
                               timeout=120, cwd=cwd)
    marker = completed.stderr.rsplit("\nLOADED ", 1)[1]
    loaded, code = marker.split(" EXIT ")
    return json.loads(loaded), int(code.strip() or 0), completed.stdout


@pytest.mark.parametrize("argv", [["--help"], ["--version"], ["plants"], ["plants", "--json"]])
def test_help_version_and_plants_load_neither_scipy_signal_nor_the_browser_stack(argv):
    loaded, code, _ = modules_loaded_by(*argv)
    assert code == 0
    assert "scipy.signal" not in loaded and not set(BROWSER_STACK) & set(loaded), loaded


def test_the_base_commands_run_without_the_browser_stack(tmp_path):
    # assign --save, evaluate, sweep and export (json, csv, c, python) are the base install's command line.
    design = tmp_path / "design.json"
    gain = "[[-1.0, -2.0, -60.0, -8.0]]"
    runs = [
        ["assign", "cart_pendulum", "--poles", "-2+1j,-2-1j,-3,-4", "--save", str(design)],
        ["evaluate", "cart_pendulum", "--gain", gain, "--json"],
        ["sweep", "cart_pendulum", "--gain", gain, "--entry", "1,1", "--json"],
        *(["export", str(design), "--format", fmt] for fmt in ("json", "csv", "c", "python")),
    ]
    for argv in runs:
        loaded, code, _ = modules_loaded_by(*argv)
        assert code in (0, 1), argv
        assert not set(BROWSER_STACK) & set(loaded), (argv, loaded)


_IMPORT_EVERYTHING = """
import json, os, sys
from threadpoolctl import threadpool_info  # itself sets KMP_DUPLICATE_LIB_OK: snapshot after it
import numpy, scipy.linalg  # load the BLAS libraries so their thread counts can be compared
before = dict(os.environ)
threads_before = [pool["num_threads"] for pool in threadpool_info()]
import gainboard, gainboard.core, gainboard.app, gainboard.app.cli, gainboard.app.export
for name in gainboard.__all__:
    getattr(gainboard, name)
gainboard.core.evaluate_design  # loads every core module
threads_after = [pool["num_threads"] for pool in threadpool_info()]
print(json.dumps({"environment_changed": dict(os.environ) != before,
                  "threads_before": threads_before, "threads_after": threads_after}))
"""


def test_importing_gainboard_changes_neither_the_environment_nor_blas_threads():
    environment = {k: v for k, v in os.environ.items()
                   if k not in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")}
    completed = subprocess.run([sys.executable, "-c", _IMPORT_EVERYTHING], capture_output=True, text=True,
                               timeout=120, env=environment)
    assert completed.returncode == 0, completed.stderr
    report = json.loads(completed.stdout)
    assert not report["environment_changed"]
    assert report["threads_before"] == report["threads_after"]


_SERVER_LIMIT = """
import json
import numpy
from threadpoolctl import threadpool_info
from gainboard.app.cli import limit_blas_to_one_thread
limit_blas_to_one_thread()
print(json.dumps([pool["num_threads"] for pool in threadpool_info() if pool["user_api"] == "blas"]))
"""


@pytest.mark.parametrize("user_choice", [None, "2"])
def test_the_server_limits_blas_to_one_thread_unless_the_user_chose(user_choice):
    environment = {k: v for k, v in os.environ.items()
                   if k not in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")}
    if user_choice:
        environment["OPENBLAS_NUM_THREADS"] = user_choice
    completed = subprocess.run([sys.executable, "-c", _SERVER_LIMIT], capture_output=True, text=True,
                               timeout=120, env=environment)
    assert completed.returncode == 0, completed.stderr
    threads = json.loads(completed.stdout)
    assert threads, "no BLAS library found by threadpoolctl"
    expected = 1 if user_choice is None else min(int(user_choice), os.cpu_count() or 1)
    assert all(count == expected for count in threads), threads


def test_the_parser_spells_the_estimator_forms_as_the_core_does():
    assert cli_estimator.ESTIMATOR_FORM_CHOICES == core.ESTIMATOR_FORMS


def test_version_is_the_installed_package_metadata():
    from importlib.metadata import version

    import gainboard

    completed = subprocess.run([sys.executable, "-m", "gainboard.app.cli", "--version"], capture_output=True,
                               text=True, timeout=60)
    assert completed.stdout.strip() == f"gainboard {version('gainboard')}" == f"gainboard {gainboard.__version__}"
