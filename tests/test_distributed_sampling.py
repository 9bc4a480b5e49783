"""Monte Carlo on a real Dask cluster: a scheduler and two workers on loopback, as processes.

The cluster is started with Dask's own `dask scheduler` and `dask worker` commands, exactly
as the README tells a team to start one, and stopped by the fixture. Kept to one cluster and a
few quick runs so CI stays short.
"""

import shutil
import socket
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

distributed = pytest.importorskip("distributed")

from gainboard.app.cli import main  # noqa: E402
from gainboard.core import (  # noqa: E402
    AnalysisError,
    DesignSpecs,
    parse_plant_family_text,
    plan_monte_carlo,
    run_monte_carlo,
    run_monte_carlo_on_dask,
)

from test_robustness import CUBIC_FAMILY, CUBIC_GAIN  # noqa: E402


def _free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return probe.getsockname()[1]


def _dask_command() -> list[str]:
    found = shutil.which("dask", path=str(Path(sys.executable).parent)) or shutil.which("dask")
    return [found] if found else [sys.executable, "-m", "dask"]


@pytest.fixture(scope="module")
def loopback_cluster():
    """A scheduler and two single-threaded worker processes on 127.0.0.1; stopped afterwards."""
    port = _free_port()
    address = f"tcp://127.0.0.1:{port}"
    quiet = {"stdout": subprocess.DEVNULL, "stderr": subprocess.DEVNULL}
    processes = [subprocess.Popen([*_dask_command(), "scheduler", "--host", "127.0.0.1", "--port", str(port),
                                   "--no-dashboard"], **quiet)]
    try:
        for _ in range(2):
            processes.append(subprocess.Popen([*_dask_command(), "worker", address, "--nthreads", "1",
                                               "--nworkers", "1", "--no-dashboard", "--host", "127.0.0.1"], **quiet))
        with distributed.Client(address, timeout="30s") as client:
            client.wait_for_workers(2, timeout=60)
        yield address
    finally:
        for process in reversed(processes):
            process.terminate()
        for process in processes:
            try:
                process.wait(timeout=20)
            except subprocess.TimeoutExpired:
                process.kill()


def _assert_identical(first, second):
    assert first.stable == second.stable
    assert first.spec_pass == second.spec_pass
    assert first.worst == second.worst
    assert first.failed_samples == second.failed_samples and first.failed_examples == second.failed_examples
    assert first.on_boundary == second.on_boundary
    np.testing.assert_array_equal(first.poles, second.poles)


def test_cluster_and_in_process_runs_agree_bit_for_bit(loopback_cluster):
    family = parse_plant_family_text(CUBIC_FAMILY.replace('["g"]', '["sqrt(g) * g / sqrt(g)"]'))
    plan = plan_monte_carlo(family, CUBIC_GAIN, samples=12_000, seed=31, chunk_size=1000, keep_poles=3000,
                            specs=DesignSpecs(min_damping_ratio=0.2, min_gain_margin_db=3.0), include_margins=True)
    here = run_monte_carlo(plan)
    seen = []
    there = run_monte_carlo_on_dask(plan, loopback_cluster, progress=lambda done, total: seen.append(done))
    _assert_identical(here, there)
    assert here.failed_samples > 0  # sqrt of a negative g: the failure path crosses the wire too
    assert sorted(seen)[-1] == 12_000 and len(seen) == plan.chunk_count


def test_the_command_uses_an_existing_scheduler(loopback_cluster, tmp_path, capsys):
    plant = tmp_path / "cubic.toml"
    plant.write_text(CUBIC_FAMILY)
    argv = ["robustness", str(plant), "--gain", "[[1, 0, 0]]", "--samples", "20000", "--seed", "4", "--json"]
    assert main(argv + ["--scheduler", loopback_cluster]) in (0, 1)
    on_cluster = capsys.readouterr().out
    assert main(argv) in (0, 1)
    in_process = capsys.readouterr().out
    import json

    first, second = json.loads(on_cluster), json.loads(in_process)
    first.pop("executed_on"), second.pop("executed_on")
    assert first == second


def test_the_workbench_setting_samples_on_the_named_scheduler(loopback_cluster):
    from gainboard.app.robustness_state import RobustnessState
    from gainboard.app.state import DesignState, plant_from_reference
    from gainboard.core import assign_poles, margins_needed

    plant, label, text = plant_from_reference("cart_pendulum")
    design = DesignState(plant, plant_label=label, plant_text=text)
    design.set_gain(assign_poles(plant, [-3 + 2j, -3 - 2j, -4, -5]).gain)
    robust = RobustnessState(design)
    robust.param.update(samples=6000, seed=3, scheduler=loopback_cluster)
    assert robust.start_sampling()
    robust.wait(120)
    assert robust.message == "" and robust.result is not None
    plan = plan_monte_carlo(robust.family, design.gain, samples=6000, seed=3, specs=design.specs,
                            include_margins=margins_needed(design.specs), keep_poles=10_000)
    _assert_identical(robust.result, run_monte_carlo(plan))


def test_an_unreachable_scheduler_is_reported_with_what_to_do():
    family = parse_plant_family_text(CUBIC_FAMILY)
    plan = plan_monte_carlo(family, CUBIC_GAIN, samples=100, seed=1)
    started = time.perf_counter()
    with pytest.raises(AnalysisError, match=r"cannot reach the Dask scheduler .*dask scheduler"):
        run_monte_carlo_on_dask(plan, f"tcp://127.0.0.1:{_free_port()}", connect_timeout=2.0)
    assert time.perf_counter() - started < 60


def test_a_long_run_starts_a_local_cluster_of_worker_processes_and_gives_the_same_figures(monkeypatch):
    import gainboard.core._distributed as distributed_runs

    family = parse_plant_family_text(CUBIC_FAMILY)
    plan = plan_monte_carlo(family, CUBIC_GAIN, samples=8000, seed=12, chunk_size=1000)
    # every run counts as long here, so the local cluster (one worker process per core) starts and stops
    monkeypatch.setattr(distributed_runs, "IN_PROCESS_SECONDS", 0.0)
    result, where = distributed_runs.run_monte_carlo_where_fastest(plan)
    import os

    if (os.cpu_count() or 1) > 1:
        assert where.startswith("local cluster of")
    _assert_identical(result, run_monte_carlo(plan))
