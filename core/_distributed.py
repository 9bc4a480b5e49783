"""Running a Monte Carlo plan's chunks on Dask's distributed scheduler.

Dask is imported only inside these functions, so ``import gainboard.core`` stays light and
works without the ``[dask]`` extra. Each chunk is a task ``evaluate_chunk(plan, index)``; the
plan is sent to the workers once (scattered) and every task returns a small summary, so the
scheduler never holds the samples. Because a chunk's random numbers come from its own child
of ``SeedSequence(seed)`` and the summaries are combined in chunk order, the result is
bit-for-bit the one :func:`run_monte_carlo` computes in this process.
"""

from __future__ import annotations

import os
import time

from ._errors import AnalysisError
from ._monte_carlo import (
    MonteCarloPlan,
    MonteCarloResult,
    SamplingCancelled,
    combine_chunks,
    evaluate_chunk,
)

__all__ = ["LOCAL_CLUSTER", "run_monte_carlo_on_dask", "run_monte_carlo_where_fastest"]

#: Pass as ``scheduler`` to start a local cluster of worker processes for the run and stop it after.
LOCAL_CLUSTER = "local"
#: A run whose in-process estimate is below this many seconds stays in process (a local cluster
#: takes a few seconds to start its workers).
IN_PROCESS_SECONDS = 8.0


#: No dashboard; the scheduler's own small HTTP server (health checks) on a free loopback port, not on
#: Dask's default 8787, which another cluster on the machine may hold (it then warns and moves anyway).
_QUIET_SCHEDULER = {"dashboard": False, "dashboard_address": "127.0.0.1:0"}


def _dask_missing() -> AnalysisError:
    return AnalysisError("Dask is not installed: install gainboard with the [dask] extra "
                         "(pip install 'gainboard[dask]') to sample on a cluster")


def run_monte_carlo_on_dask(plan: MonteCarloPlan, scheduler: str = LOCAL_CLUSTER, workers: int | None = None,
                            progress=None, cancelled=None, first_chunks=(),
                            connect_timeout: float = 10.0) -> MonteCarloResult:
    """Run the plan's chunks on a Dask cluster.

    Parameters
    ----------
    plan : MonteCarloPlan
    scheduler : str
        ``"local"`` starts a :class:`distributed.LocalCluster` of worker processes on the
        loopback interface (one single-threaded worker per core, or ``workers``) and stops
        it afterwards; any other value is the address of a running scheduler
        (``tcp://host:8786``) whose workers have gainboard installed.
    workers : int, optional
        Number of local worker processes (``"local"`` only).
    progress, cancelled : callable, optional
        As for :func:`run_monte_carlo`; a cancelled run cancels its remaining tasks.
    first_chunks : sequence of ChunkSummary
        Chunks already computed (e.g. while timing the run); they are not sent again.
    connect_timeout : float
        Seconds to wait for an existing scheduler to answer.

    Returns
    -------
    MonteCarloResult
        Bit-for-bit equal to :func:`run_monte_carlo` of the same plan.
    """
    try:
        import distributed
    except ImportError:
        raise _dask_missing() from None

    cluster = None
    try:
        if scheduler == LOCAL_CLUSTER:
            count = workers or os.cpu_count() or 1
            # processes, one thread each: the chunks are numpy-bound and hold the GIL between LAPACK calls
            cluster = distributed.LocalCluster(n_workers=count, threads_per_worker=1, processes=True,
                                               host="127.0.0.1", dashboard_address=None, silence_logs=40,
                                               scheduler_kwargs=_QUIET_SCHEDULER)
            client = distributed.Client(cluster)
        else:
            try:
                client = distributed.Client(scheduler, timeout=f"{connect_timeout}s")
            except (OSError, TimeoutError) as error:
                raise AnalysisError(f"cannot reach the Dask scheduler at {scheduler!r} ({error}); start one with "
                                    "`dask scheduler` and workers with `dask worker ADDRESS` (see the README)") from None
        try:
            return _run_on_client(client, plan, progress, cancelled, list(first_chunks))
        finally:
            client.close()
    finally:
        if cluster is not None:
            cluster.close()


def _run_on_client(client, plan, progress, cancelled, done: list) -> MonteCarloResult:
    import distributed

    remaining = sorted(set(range(plan.chunk_count)) - {s.index for s in done})
    [shared_plan] = client.scatter([plan], broadcast=True)
    futures = client.map(evaluate_chunk, [shared_plan] * len(remaining), remaining, pure=False)
    finished = sum(plan.chunk_bounds(s.index)[1] - plan.chunk_bounds(s.index)[0] for s in done)
    try:
        for future in distributed.as_completed(futures):
            if cancelled is not None and cancelled():
                client.cancel(futures)
                raise SamplingCancelled(f"the sampling was cancelled after {len(done)} of {plan.chunk_count} chunks")
            summary = future.result()
            done.append(summary)
            finished += summary.count
            if progress is not None:
                progress(finished, plan.samples)
    finally:
        client.cancel([f for f in futures if not f.done()])
    return combine_chunks(plan, done)


def run_monte_carlo_where_fastest(plan: MonteCarloPlan, scheduler: str | None = None, progress=None,
                                  cancelled=None) -> tuple[MonteCarloResult, str]:
    """Run in process when that is quick, else on a local cluster, or on ``scheduler`` when given.

    The first chunk always runs here and times the rest: if the estimate for the remaining
    chunks is below :data:`IN_PROCESS_SECONDS` (or the machine has one core), the run
    stays in this process. The result is the same wherever it runs.

    Returns
    -------
    (MonteCarloResult, str)
        The result and where it ran: ``"in process"``, ``"local cluster of N workers"`` or the address.
    """
    if scheduler is not None:
        return run_monte_carlo_on_dask(plan, scheduler, progress=progress, cancelled=cancelled), scheduler
    started = time.perf_counter()
    first = evaluate_chunk(plan, 0)
    elapsed = time.perf_counter() - started
    if progress is not None:
        progress(first.count, plan.samples)
    cores = os.cpu_count() or 1
    estimate = elapsed * (plan.chunk_count - 1)
    if estimate < IN_PROCESS_SECONDS or cores == 1:
        summaries = [first]
        for index in range(1, plan.chunk_count):
            if cancelled is not None and cancelled():
                raise SamplingCancelled(f"the sampling was cancelled after {index} of {plan.chunk_count} chunks")
            summaries.append(evaluate_chunk(plan, index))
            if progress is not None:
                progress(plan.chunk_bounds(index)[1], plan.samples)
        return combine_chunks(plan, summaries), "in process"
    result = run_monte_carlo_on_dask(plan, LOCAL_CLUSTER, progress=progress, cancelled=cancelled, first_chunks=[first])
    return result, f"local cluster of {cores} workers"
