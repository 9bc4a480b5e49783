"""The refresh policy without a browser: gesture, pause and release sequences give the expected levels of detail.

The rules under test are the project's own (app/refresh_policy.py: a gesture step is quick,
the tables catch up on a pause or at least every second, a release is complete); the
times are driven by a fake clock, so nothing here waits. The design state is checked to
evaluate at the level the policy gives, against numpy's eigenvalues of A − BK and the
Routh–Hurwitz interval of reference case 5 (shared/reference-cases.md).
"""

from __future__ import annotations

from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from gainboard import core
from gainboard.app.refresh_policy import PLOT_VIEWS, Detail, RefreshPolicy, detail_options
from gainboard.app.state import DesignState
from pole_references import REFERENCE_GAIN, matched_distance
from pole_references import numpy_closed_loop_poles as eig_closed_loop

DATA = Path(__file__).resolve().parent / "data"


class FakeClock:
    def __init__(self):
        self.now = 100.0

    def __call__(self) -> float:
        return self.now

    def advance(self, seconds: float) -> None:
        self.now += seconds


@pytest.fixture
def clock():
    return FakeClock()


@pytest.fixture
def policy(clock):
    return RefreshPolicy(pause_after=0.15, texts_at_least_every=1.0, clock=clock)


def test_a_fast_drag_is_quick_after_its_first_step_and_complete_on_release(policy, clock):
    details = []
    for _ in range(10):
        details.append(policy.step())
        clock.advance(0.03)
    # The first step finds the tables never brought up to date, the others ride on it.
    assert details == [Detail.PAUSE] + [Detail.STEP] * 9
    assert policy.behind
    assert policy.release() is Detail.COMPLETE
    assert not policy.behind and policy.pause_check_in() is None


def test_a_pause_brings_the_tables_up_once(policy, clock):
    policy.release()
    clock.advance(2.0)
    assert policy.step() is Detail.PAUSE  # a second since the tables were last brought up
    clock.advance(0.03)
    assert policy.step() is Detail.STEP
    assert policy.pause_check_in() == pytest.approx(0.15)
    clock.advance(0.1)
    assert not policy.paused()  # 0.1 s: still moving
    assert policy.pause_check_in() == pytest.approx(0.05)
    clock.advance(0.06)
    assert policy.paused()
    assert not policy.paused()  # once per pause
    assert not policy.behind


def test_a_long_drag_brings_the_tables_up_at_least_every_second(policy, clock):
    policy.release()
    details = []
    for _ in range(100):  # 3 s of steps 30 ms apart: never a pause
        clock.advance(0.03)
        details.append(policy.step())
    caught_up = [0.03 * (i + 1) for i, detail in enumerate(details) if detail is Detail.PAUSE]
    # at 1.02 s and 2.04 s: the first step at least a second after the last catch-up (at 0 s)
    assert caught_up == pytest.approx([1.02, 2.04])


def test_every_change_outside_a_gesture_is_complete(policy):
    assert all(policy.release() is Detail.COMPLETE for _ in range(3))


@settings(max_examples=40, deadline=None)
@given(st.lists(st.tuples(st.sampled_from(["step", "release", "timer"]), st.floats(0.0, 2.0)), max_size=40))
def test_the_levels_only_ever_follow_the_rules(events):
    clock = FakeClock()
    policy = RefreshPolicy(pause_after=0.15, texts_at_least_every=1.0, clock=clock)
    last_step = texts_at = -float("inf")
    behind = False
    for kind, wait in events:
        clock.advance(wait)
        now = clock.now
        if kind == "step":
            detail = policy.step()
            expected = Detail.PAUSE if now - texts_at >= 1.0 else Detail.STEP
            assert detail is expected
            last_step = now
            behind = detail is Detail.STEP
            if detail is Detail.PAUSE:
                texts_at = now
        elif kind == "release":
            assert policy.release() is Detail.COMPLETE
            texts_at, behind = now, False
        else:
            fired = policy.paused()
            assert fired == (behind and now - last_step >= 0.15)
            if fired:
                texts_at, behind = now, False
        assert policy.behind == behind


def test_each_level_computes_a_superset_of_the_one_below_and_steps_redraw_the_plots_only():
    step, pause, complete = (detail_options(detail) for detail in Detail)
    assert not step.include_all_entry_intervals and not step.include_margins and step.plots_only
    assert pause.include_all_entry_intervals and not pause.include_margins and not pause.plots_only
    assert complete.include_all_entry_intervals and complete.include_margins and not complete.gesture
    assert PLOT_VIEWS == {"pole_map", "response_plots", "estimator_responses", "slider_values"}


# -- the design state evaluates at the level the policy gives ----------------------------------------


@pytest.fixture
def reference_plant():
    return core.load_plant_file(DATA / "third_order_reference.toml")


def test_the_state_follows_the_policy_through_a_drag_a_pause_and_the_release(reference_plant, clock, policy):
    state = DesignState(reference_plant, gain=REFERENCE_GAIN, refresh=policy)
    seen = []
    state.param.watch(lambda event: seen.append(state.detail), "evaluation")
    policy.release()  # the page has just shown the complete design
    for value in (200.0, 201.0, 202.0):
        clock.advance(0.03)
        assert state.set_entry(0, 0, value, live=True)
    assert seen == [Detail.STEP] * 3
    assert state.evaluation.margins is None and state.evaluation.entry_intervals == {}
    # numpy eig of A − BK is the outside reference for the quick step's poles
    assert matched_distance(state.evaluation.closed_loop.poles, eig_closed_loop(reference_plant, state.gain)) < 1e-9
    clock.advance(0.2)
    assert state.catch_up()
    assert seen[-1] is Detail.PAUSE and set(state.evaluation.entry_intervals) == {(0, 0), (0, 1), (0, 2)}
    # Reference case 5 (Routh–Hurwitz on s³ + 6s² + (5 + k12)s + (1 + k11)): −1 < k11 < 839 with k12, k13 fixed.
    low, high = state.evaluation.entry_intervals[(0, 0)].intervals[0]
    assert low == pytest.approx(-1.0, abs=1e-7) and high == pytest.approx(839.0, rel=1e-9)
    state.end_gesture()
    assert seen[-1] is Detail.COMPLETE and state.evaluation.margins is not None
    assert state.undo_depth == 1  # the whole gesture is one undo step


def test_a_state_without_a_page_never_leaves_the_intervals_out(reference_plant):
    state = DesignState(reference_plant, gain=REFERENCE_GAIN)
    state.set_entry(0, 0, 210.0, live=True)
    assert state.detail is Detail.PAUSE and len(state.evaluation.entry_intervals) == 3
