"""Evaluations off the event loop: the bounded pool and the latest-only runner of each session.

Ordering is asserted, never wall time. The evaluations delivered are checked against
numpy's eigenvalues of A − BK (reference case 1 of shared/reference-cases.md: Ogata,
*Modern Control Engineering*, 5th ed., Example 10-1, from memory).
"""

from __future__ import annotations

import concurrent.futures
import queue
import threading
from pathlib import Path

import numpy as np
import pytest

from gainboard import core
from gainboard.app.evaluation_pool import EvaluationPool, PooledRunner
from gainboard.app.evaluation_runner import EvaluationRequest
from gainboard.app.refresh_policy import Detail
from gainboard.app.state import DesignState
from pole_references import REFERENCE_GAIN, REFERENCE_POLES, matched_distance
from pole_references import numpy_closed_loop_poles as eig_closed_loop

DATA = Path(__file__).resolve().parent / "data"


@pytest.fixture(scope="module")
def reference_plant():
    return core.load_plant_file(DATA / "third_order_reference.toml")


def request(plant, gain, sequence):
    return EvaluationRequest(sequence=sequence, plant=plant, gain=np.array(gain, dtype=float),
                             options=core.EvaluationOptions(include_margins=False), detail=Detail.STEP, inputs={})


class HeldPool:
    """A pool whose calls finish only when the test says so."""

    def __init__(self):
        self.started: list = []

    def submit(self, request):
        future = concurrent.futures.Future()
        self.started.append((request, future))
        return future


class Loop:
    """The session's event loop: scheduled functions run when the test pumps it."""

    def __init__(self):
        self.queue: queue.Queue = queue.Queue()

    def schedule(self, function):
        self.queue.put(function)

    def pump(self, timeout: float = 30.0) -> None:
        self.queue.get(timeout=timeout)()


def test_one_request_runs_and_the_newest_waiting_one_replaces_the_others(reference_plant):
    pool, loop, delivered = HeldPool(), Loop(), []
    runner = PooledRunner(pool, loop.schedule)
    deliver = lambda request, evaluation, error: delivered.append(request.sequence)  # noqa: E731
    for sequence in (1, 2, 3, 4):
        runner.submit(request(reference_plant, REFERENCE_GAIN, sequence), deliver)
    assert [r.sequence for r, _ in pool.started] == [1]  # one at a time per session
    assert runner.skipped == 2  # 2 and 3 were replaced while waiting, never computed
    pool.started[0][1].set_result("first")
    loop.pump()
    assert delivered == [1] and [r.sequence for r, _ in pool.started] == [1, 4]
    pool.started[1][1].set_result("newest")
    loop.pump()
    assert delivered == [1, 4] and not runner.busy


def test_results_are_delivered_on_the_sessions_loop_not_in_the_worker(reference_plant):
    pool, loop, threads = EvaluationPool(1, kind="thread"), Loop(), []
    try:
        runner = PooledRunner(pool, loop.schedule)
        results = []

        def deliver(request, evaluation, error):
            threads.append(threading.current_thread())
            results.append((evaluation, error))

        runner.submit(request(reference_plant, REFERENCE_GAIN, 1), deliver)
        assert results == []  # nothing happens in the caller
        loop.pump()
    finally:
        pool.close()
    evaluation, error = results[0]
    assert error is None and threads == [threading.current_thread()]
    # Ogata Example 10-1 (from memory) and numpy's eig of A − BK.
    assert matched_distance(evaluation.closed_loop.poles, REFERENCE_POLES) < 1e-9
    assert matched_distance(evaluation.closed_loop.poles, eig_closed_loop(reference_plant, REFERENCE_GAIN)) < 1e-9


def test_a_process_worker_gives_back_the_sessions_own_plant_and_the_same_poles(reference_plant):
    pool = EvaluationPool(1, kind="process")
    try:
        evaluation = pool.submit(request(reference_plant, REFERENCE_GAIN, 1)).result(timeout=120)
    finally:
        pool.close()
    assert evaluation.plant is reference_plant  # views know a plant by identity
    assert matched_distance(evaluation.closed_loop.poles, eig_closed_loop(reference_plant, REFERENCE_GAIN)) < 1e-9
    assert evaluation.responses.initial.states.size == 0  # not sent back: no view draws them
    assert evaluation.responses.initial.outputs.shape[0] == evaluation.responses.initial.time.size


def test_a_request_past_its_budget_is_reported_and_a_failure_is_delivered(reference_plant):
    pool, loop, overdue, delivered, timers = HeldPool(), Loop(), [], [], []
    runner = PooledRunner(pool, loop.schedule, on_overdue=overdue.append, budget=10.0,
                          call_later=lambda seconds, function: timers.append((seconds, function)))
    first = request(reference_plant, REFERENCE_GAIN, 1)
    runner.submit(first, lambda r, e, error: delivered.append(error))
    [(seconds, check)] = timers
    assert seconds == 10.0
    check()
    assert overdue == [first]
    pool.started[0][1].set_exception(core.AnalysisError("no"))
    loop.pump()
    assert isinstance(delivered[0], core.AnalysisError)
    check()  # finished now: a late budget check says nothing
    assert overdue == [first]


def test_a_state_on_a_pool_shows_only_the_newest_result_and_follows_the_gain(reference_plant):
    pool, loop = HeldPool(), Loop()
    state = DesignState(reference_plant, gain=REFERENCE_GAIN)
    state.runner = PooledRunner(pool, loop.schedule)
    shown = state.revision
    for value in (200.0, 201.0, 202.0):
        state.set_entry(0, 0, value, live=True)
    assert state.revision == shown and state.evaluating  # nothing delivered yet: the old design stays shown
    for _ in range(2):  # the first request, then the newest (201 was replaced while waiting)
        queued, future = pool.started[-1]
        future.set_result(core.evaluate_design(queued.plant, queued.gain, queued.options))
        loop.pump()
    assert state.revision == shown + 2 and not state.evaluating
    assert state.evaluation.gain[0, 0] == 202.0
    # numpy eig of A − BK is the outside reference for the design shown
    assert matched_distance(state.evaluation.closed_loop.poles, eig_closed_loop(reference_plant, state.gain)) < 1e-9


def test_a_failed_evaluation_on_a_pool_is_shown_and_the_inputs_go_back(reference_plant):
    pool, loop = HeldPool(), Loop()
    state = DesignState(reference_plant, gain=REFERENCE_GAIN)
    state.runner = PooledRunner(pool, loop.schedule)
    state.set_entry(0, 1, 70.0)
    pool.started[0][1].set_exception(core.AnalysisError("the loop matrix has no eigenvalues"))
    loop.pump()
    assert state.message_kind == "error" and "no eigenvalues" in state.message
    np.testing.assert_array_equal(state.gain, REFERENCE_GAIN)  # back to the design shown


def finish_all(pool, loop, from_index: int = 0) -> None:
    """Compute every call the held pool started (in order) and deliver each on the loop."""
    from gainboard.app.evaluation_runner import evaluate_request

    index = from_index
    while index < len(pool.started):
        queued, future = pool.started[index]
        try:
            future.set_result(evaluate_request(queued))
        except core.GainboardError as error:
            future.set_exception(error)
        loop.pump()
        index += 1


def test_a_pole_drag_on_a_pool_assigns_off_the_loop_and_is_one_undo_step(reference_plant):
    pool, loop = HeldPool(), Loop()
    state = DesignState(reference_plant, gain=REFERENCE_GAIN)
    state.runner = PooledRunner(pool, loop.schedule)
    index = int(np.argmax(np.imag(state.evaluation.closed_loop.poles)))  # −2 + 4j (Ogata Example 10-1)
    assert state.begin_drag(index)
    assert state.drag_pole(-2.5 + 3.5j, live=True) and state.drag_pole(-3 + 3j, live=True)
    np.testing.assert_array_equal(state.gain, REFERENCE_GAIN)  # nothing computed on the caller's side
    assert state.drag_pole(-3 + 3j, live=False)
    finish_all(pool, loop)
    # numpy eig of A − BK: the drop point, its conjugate, and −10 kept
    assert matched_distance(eig_closed_loop(reference_plant, state.gain), [-3 + 3j, -3 - 3j, -10]) < 1e-8
    assert matched_distance(state.evaluation.closed_loop.poles, eig_closed_loop(reference_plant, state.gain)) < 1e-9
    assert state.undo_depth == 1 and state.placement_summary
    assert state.undo()
    finish_all(pool, loop, len(pool.started) - 1)
    np.testing.assert_array_equal(state.gain, REFERENCE_GAIN)


def test_a_refused_drop_on_a_pool_shows_why_and_keeps_the_design(reference_plant):
    pool, loop = HeldPool(), Loop()
    state = DesignState(reference_plant, gain=REFERENCE_GAIN)
    state.runner = PooledRunner(pool, loop.schedule)
    # Two target poles for a plant with three states: the core must refuse (one pole per state).
    assert state.place_poles([-2.0, -3.0])
    finish_all(pool, loop)
    assert state.message_kind == "error" and "Could not place the poles there" in state.message
    np.testing.assert_array_equal(state.gain, REFERENCE_GAIN)
    assert matched_distance(state.evaluation.closed_loop.poles, REFERENCE_POLES) < 1e-9  # Ogata Example 10-1


def test_the_details_of_a_design_a_newer_step_replaced_are_not_shown(reference_plant):
    # A pause's catch-up that a newer drag step overtakes would show the older design (and pull a
    # slider's handle back under the mouse): it is dropped, the newer step is shown.
    now = [0.0]
    from gainboard.app.refresh_policy import RefreshPolicy

    pool, loop = HeldPool(), Loop()
    state = DesignState(reference_plant, gain=REFERENCE_GAIN,
                        refresh=RefreshPolicy(pause_after=0.15, texts_at_least_every=1.0, clock=lambda: now[0]))
    state.runner = PooledRunner(pool, loop.schedule)
    state.refresh.release()
    now[0] = 0.05
    state.set_entry(0, 0, 210.0, live=True)
    finish_all(pool, loop)
    assert state.detail is Detail.STEP
    now[0] = 0.3
    assert state.catch_up()  # the pause: the details of K with k11 = 210 are asked for ...
    state.set_entry(0, 0, 220.0, live=True)  # ... and the drag goes on before they arrive
    finish_all(pool, loop, len(pool.started) - 1)
    assert state.evaluation.gain[0, 0] == 220.0 and state.detail is Detail.STEP
    assert matched_distance(state.evaluation.closed_loop.poles, eig_closed_loop(reference_plant, state.gain)) < 1e-9


def test_a_slider_handle_is_not_moved_while_its_gesture_goes_on(reference_plant):
    from gainboard.app.workbench import build_workbench

    workbench = build_workbench(reference_plant).workbench
    state, controls = workbench.state, workbench.sliders._controls[(0, 0)]
    state.set_gain(REFERENCE_GAIN)
    controls.slider.value = 205.0  # the browser's handle, ahead of the design shown
    state.set_entry(0, 0, 204.0, live=True)
    assert controls.slider.value == 205.0 and controls.number.value == 204.0
    state.end_gesture()
    assert controls.slider.value == 204.0  # on release the handle shows the design
