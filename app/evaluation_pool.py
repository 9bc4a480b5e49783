"""Evaluations off the event loop: one bounded executor per server, one latest-only queue per session.

The server's event loop only moves messages; every evaluation of a design runs in a
bounded :mod:`concurrent.futures` executor shared by all sessions of the process
(:class:`EvaluationPool`). Each session has a :class:`PooledRunner`: at most one of
its requests runs at a time and at most one waits, so a newer request replaces the
waiting one (a drag that outruns the computation skips steps instead of queueing
them) and one session can never hold more than one worker. Results are delivered on
the session's own event loop, through Bokeh's ``add_next_tick_callback`` (the one
document method that is safe to call from another thread).

A request that has not been answered within its time budget is reported to the user
(``on_overdue``); its worker cannot be stopped (neither executor can stop a running
call), so the session keeps its one worker until the call ends, and the other
sessions keep theirs.

Workers: threads by default, processes on request — chosen by measurement
(``tests/benchmarks/executor_choice.py``, 2 shared cores, 5 ms loop ticker doing 2 ms of
Python work per tick like a message encoder). Both keep the loop answering: its
95th-percentile lateness was 10–25 ms with either, against 50–500 ms with the
evaluations on the loop. numpy and LAPACK release the GIL only inside the larger
array operations and an evaluation here is thousands of small calls, so thread
workers hold the GIL most of the time; yet the interpreter hands it back to the loop
within its switch interval, and the loop's own work was not slowed (1.8 ms against
1.9 ms idle). Processes pay for pickling the request and the result — about 0.3 MB for
a 12-state evaluation even without the state trajectories, pickled and unpickled by
the executor's management thread in the server process — so a single session's step
took 19–57 ms in a process against 6–29 ms in a thread (medians, 4-state and 12-state
plants), and four sessions were no faster. Process workers keep each plant by a token,
so the core's per-plant caches stay warm across requests.
"""

from __future__ import annotations

import concurrent.futures
import dataclasses
import itertools
import logging
import os
import threading
import weakref
from collections import OrderedDict
from typing import Callable

from .evaluation_runner import EvaluationRequest, Placed, evaluate_request

__all__ = ["EvaluationPool", "PooledRunner", "DEFAULT_WORKERS", "DEFAULT_BUDGET_SECONDS", "shared_pool"]

log = logging.getLogger(__name__)

#: Workers of the server's pool: the machine's cores, at most four (the loop needs some CPU of its own).
DEFAULT_WORKERS = max(1, min(4, os.cpu_count() or 1))
#: Seconds after which an unanswered request is reported to the user.
DEFAULT_BUDGET_SECONDS = 10.0
#: Plants a process worker keeps (each with its core caches).
_PLANTS_KEPT = 16

# -- in a process worker --------------------------------------------------------------------------

_WORKER_PLANTS: OrderedDict = OrderedDict()


def _without_state_trajectories(evaluation):
    """The evaluation without the responses' state trajectories, which no view draws.

    They are nine tenths of a pickled evaluation (12 states: 0.78 of 0.82 MB), and
    sending them back from the worker took longer than the evaluation itself.
    """
    responses = evaluation.responses
    if responses is None:
        return evaluation
    trimmed = {}
    for kind in ("initial", "step", "disturbance"):
        response = getattr(responses, kind)
        if response is not None:
            trimmed[kind] = dataclasses.replace(
                response, states=response.states[:0],
                saturated_states=None if response.saturated_states is None else response.saturated_states[:0])
    return dataclasses.replace(evaluation, responses=dataclasses.replace(responses, **trimmed))


def _evaluate_in_worker(token: int, plant, request: EvaluationRequest):
    """Run ``request`` with the worker's own copy of the plant named ``token`` (the same object each time)."""
    kept = _WORKER_PLANTS.get(token)
    if kept is None:
        kept = plant
        _WORKER_PLANTS[token] = kept
        while len(_WORKER_PLANTS) > _PLANTS_KEPT:
            _WORKER_PLANTS.popitem(last=False)
    else:
        _WORKER_PLANTS.move_to_end(token)
    request = dataclasses.replace(request, plant=kept)
    if request.refine is not None:
        request = dataclasses.replace(request, refine=dataclasses.replace(request.refine, plant=kept))
    return _on_design(evaluate_request(request), _without_state_trajectories)


def _on_design(result, change):
    """``result`` with ``change`` applied to its DesignEvaluation (inside a Placed or an observer design)."""
    if isinstance(result, Placed):
        return Placed(result.placement, _on_design(result.evaluation, change))
    if hasattr(result, "design") and hasattr(result, "compensator"):  # an ObserverDesignEvaluation
        return dataclasses.replace(result, design=change(result.design))
    return change(result)


def _worker_start() -> None:
    # One BLAS thread per worker: the workers already use every core, and BLAS threads on these
    # small matrices only contend (common practice, no source).
    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
    os.environ.setdefault("OMP_NUM_THREADS", "1")


# -- in the server process --------------------------------------------------------------------------


class EvaluationPool:
    """The bounded executor every session of a server shares.

    Parameters
    ----------
    workers : int
        Largest number of evaluations running at once.
    kind : {"thread", "process"}
        Thread workers (the default, see the module notes) or process workers.
    """

    def __init__(self, workers: int = DEFAULT_WORKERS, kind: str = "thread"):
        if kind not in ("process", "thread"):
            raise ValueError(f"kind must be 'process' or 'thread', got {kind!r}")
        self.kind = kind
        self.workers = workers
        if kind == "process":
            import multiprocessing

            # "spawn": a worker starts from a clean interpreter, never from a copy of the server's
            # threads and sockets (forking a process with threads is unsafe).
            self._executor = concurrent.futures.ProcessPoolExecutor(
                max_workers=workers, mp_context=multiprocessing.get_context("spawn"), initializer=_worker_start)
        else:
            self._executor = concurrent.futures.ThreadPoolExecutor(max_workers=workers,
                                                                   thread_name_prefix="evaluation")
        self._tokens: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()
        self._counter = itertools.count(1)
        self._lock = threading.Lock()

    def _token(self, plant) -> int:
        with self._lock:
            token = self._tokens.get(plant)
            if token is None:
                token = self._tokens[plant] = next(self._counter)
            return token

    def submit(self, request: EvaluationRequest) -> concurrent.futures.Future:
        """Start ``request``; the future's result is the evaluation (with the request's own plant object)."""
        if self.kind == "thread":
            return self._executor.submit(evaluate_request, request)
        # The worker needs neither the state's inputs nor (for a full evaluation) anything else of the
        # session: send only what the computation reads.
        payload = dataclasses.replace(request, inputs={})
        future = self._executor.submit(_evaluate_in_worker, self._token(request.plant), request.plant, payload)
        result: concurrent.futures.Future = concurrent.futures.Future()

        def with_own_plant(done: concurrent.futures.Future) -> None:
            # The views know a plant by identity: give the result the session's plant object back.
            try:
                evaluation = done.result()
            except BaseException as error:  # handed on to the session
                result.set_exception(error)
                return
            result.set_result(_on_design(evaluation, lambda design: dataclasses.replace(design, plant=request.plant)))

        future.add_done_callback(with_own_plant)
        return result

    def warm_up(self) -> None:
        """Start the workers now (a process takes about a second to import numpy and the core)."""
        if self.kind == "process":
            futures = [self._executor.submit(_worker_start) for _ in range(self.workers)]
            concurrent.futures.wait(futures, timeout=60)

    def close(self) -> None:
        self._executor.shutdown(wait=False, cancel_futures=True)


_SHARED: EvaluationPool | None = None
_SHARED_LOCK = threading.Lock()


def shared_pool(**options) -> EvaluationPool:
    """The process's pool, made on first use (``options`` as for :class:`EvaluationPool`, first call only)."""
    global _SHARED
    with _SHARED_LOCK:
        if _SHARED is None:
            _SHARED = EvaluationPool(**options)
        return _SHARED


class PooledRunner:
    """One session's runner on a shared pool: one request running, the newest one waiting.

    Parameters
    ----------
    pool : EvaluationPool
    schedule : callable
        ``schedule(function)`` runs ``function`` on the session's own event loop, from any
        thread (a Bokeh document's ``add_next_tick_callback`` wrapped to set the session).
    on_overdue : callable, optional
        Called on the session's loop with the request when it has run past ``budget`` seconds.
    budget : float
        The time budget per request (seconds).
    call_later : callable, optional
        ``call_later(seconds, function)`` on the session's loop, for the budget (none: no budget).
    """

    def __init__(self, pool: EvaluationPool, schedule: Callable, *, on_overdue: Callable | None = None,
                 budget: float = DEFAULT_BUDGET_SECONDS, call_later: Callable | None = None):
        self._pool = pool
        self._schedule = schedule
        self._on_overdue = on_overdue
        self._budget = budget
        self._call_later = call_later
        self._running: EvaluationRequest | None = None
        self._waiting = None  # (request, deliver)
        self._closed = False
        #: Requests replaced while waiting (never computed): how much a drag outran the computation.
        self.skipped = 0

    @property
    def busy(self) -> bool:
        return self._running is not None

    def submit(self, request: EvaluationRequest, deliver) -> None:
        if self._closed:
            return
        if self._running is not None:
            if self._waiting is not None:
                self.skipped += 1
            self._waiting = (request, deliver)
            return
        self._start(request, deliver)

    def _start(self, request: EvaluationRequest, deliver) -> None:
        self._running = request
        try:
            future = self._pool.submit(request)
        except RuntimeError as error:  # the pool was shut down (the server is stopping)
            self._running = None
            deliver(request, None, error)
            return
        future.add_done_callback(lambda done: self._schedule(lambda: self._finished(request, deliver, done)))
        if self._call_later is not None and self._on_overdue is not None:
            self._call_later(self._budget, lambda: self._check_budget(request))

    def _check_budget(self, request: EvaluationRequest) -> None:
        if self._running is request and not self._closed:
            self._on_overdue(request)

    def _finished(self, request: EvaluationRequest, deliver, done: concurrent.futures.Future) -> None:
        self._running = None
        if not self._closed:
            error = done.exception()
            deliver(request, None if error is not None else done.result(), error)
        waiting, self._waiting = self._waiting, None
        if waiting is not None and not self._closed:
            self._start(*waiting)

    def close(self) -> None:
        """The session is gone: deliver nothing more (a running call finishes in its worker)."""
        self._closed = True
        self._waiting = None
