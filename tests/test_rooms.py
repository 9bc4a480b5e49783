"""Live rooms without a browser: sharing a design between sessions, last writer wins, isolation.

Sessions here are workbenches built in this process without a server, so a room's
``schedule`` runs each update at once (or, for the concurrency tests, from a queue
that the test empties). The browser test with two real pages is
tests/browser/test_sharing.py; the failing-session test over real connections is
tests/test_session_isolation.py.

Reference values:
- case 1 of shared/reference-cases.md: A = [[0,1,0],[0,0,1],[−1,−5,−6]], B = e3, K = [199, 55, 8]
  → closed-loop poles −2 ± 4j, −10 (Ogata, *Modern Control Engineering*, 5th ed., Example 10-1, from memory);
- numpy's eigenvalues of A − BK as the independent check of the poles a session shows.
"""

from __future__ import annotations

import logging
from pathlib import Path

import numpy as np
import pytest

from gainboard import core
from gainboard.app.rooms import (
    MAX_MEMBERS,
    Room,
    RoomError,
    RoomMember,
    RoomRegistry,
    SharedDesign,
    SharedEvaluations,
    check_room_name,
    describe_change,
)
from pole_references import REFERENCE_GAIN, REFERENCE_POLES, matched_distance
from pole_references import numpy_closed_loop_poles as eig_closed_loop

DATA = Path(__file__).resolve().parent / "data"


@pytest.fixture(scope="module")
def reference_plant():
    return core.load_plant_file(DATA / "third_order_reference.toml")


@pytest.fixture
def rooms(monkeypatch):
    """A fresh set of rooms for each test (the process-wide registry stays untouched)."""
    from gainboard.app import room_link

    registry = RoomRegistry()
    monkeypatch.setattr(room_link, "ROOMS", registry)
    return registry


def session(plant, name: str):
    """A workbench session without a server (updates from the room run at once), without autosave."""
    from gainboard.app.state import DesignState
    from gainboard.app.workbench import Workbench

    return Workbench(DesignState(plant, plant_label="third_order_reference.toml"), nickname=name)


# -- sessions sharing a room ---------------------------------------------------------------


def test_a_gain_set_in_one_session_shows_in_the_other_with_the_textbook_poles(rooms, reference_plant):
    ana, ben = session(reference_plant, "Ana"), session(reference_plant, "Ben")
    assert ana.join_room("lab") and ben.join_room("lab")
    assert ana.state.set_gain(REFERENCE_GAIN)
    np.testing.assert_array_equal(ben.state.gain, REFERENCE_GAIN)
    shown = ben.state.evaluation.closed_loop.poles
    assert matched_distance(shown, REFERENCE_POLES) < 1e-9  # Ogata Example 10-1 (from memory)
    assert matched_distance(shown, eig_closed_loop(reference_plant, REFERENCE_GAIN)) < 1e-9  # numpy eig
    # Both sessions show the same design, so it was evaluated once for the room.
    assert ben.state.evaluation is ana.state.evaluation
    # Ben's page says who changed what last; Ana's page says it was her.
    assert "Ana changed K (3 entries)" in ben.header.object
    assert "you changed K (3 entries)" in ana.header.object
    assert "2 here" in ben.header.object


def test_one_entry_changed_is_named_with_its_new_value(rooms, reference_plant):
    ana, ben = session(reference_plant, "Ana"), session(reference_plant, "Ben")
    ana.join_room("lab"), ben.join_room("lab")
    ana.state.set_gain(REFERENCE_GAIN)
    assert ben.state.set_entry(0, 1, 60.0)
    assert "Ben set k₁₂ = 60" in ana.header.object
    np.testing.assert_array_equal(ana.state.gain, [[199.0, 60.0, 8.0]])
    # The change arrived as one step Ana can undo.
    assert ana.state.undo()
    np.testing.assert_array_equal(ana.state.gain, REFERENCE_GAIN)
    # ...and undoing is itself a change the room shares.
    np.testing.assert_array_equal(ben.state.gain, REFERENCE_GAIN)


def test_joining_a_room_that_exists_brings_its_design(rooms, reference_plant):
    ana = session(reference_plant, "Ana")
    ana.join_room("lab")
    ana.state.set_gain(REFERENCE_GAIN)
    ana.state.set_notes("tried the textbook poles")
    late = session(reference_plant, "Cy")
    assert not np.array_equal(late.state.gain, REFERENCE_GAIN)
    assert late.join_room("lab")
    np.testing.assert_array_equal(late.state.gain, REFERENCE_GAIN)
    assert late.state.notes == "tried the textbook poles"
    assert "Joined room lab" in late.state.message


def test_a_new_plant_travels_to_everyone_in_the_room(rooms, reference_plant):
    ana, ben = session(reference_plant, "Ana"), session(reference_plant, "Ben")
    ana.join_room("lab"), ben.join_room("lab")
    assert ana.state.load_plant_reference("maglev_ball")
    assert ben.state.plant is ana.state.plant  # the very same plant object, so evaluations are shared
    np.testing.assert_array_equal(ben.state.gain, ana.state.gain)
    assert "Ana opened maglev_ball" in ben.header.object
    poles = ben.state.evaluation.closed_loop.poles
    assert matched_distance(poles, eig_closed_loop(ben.state.plant, ben.state.gain)) < 1e-8  # numpy eig


def test_leaving_a_room_keeps_the_design_and_stops_the_updates(rooms, reference_plant):
    ana, ben = session(reference_plant, "Ana"), session(reference_plant, "Ben")
    ana.join_room("lab"), ben.join_room("lab")
    ana.state.set_gain(REFERENCE_GAIN)
    ben.leave_room()
    ana.state.set_entry(0, 0, 300.0)
    np.testing.assert_array_equal(ben.state.gain, REFERENCE_GAIN)
    assert "room" not in ben.header.object and "1 here" in ana.header.object


def test_live_drag_steps_are_not_sent_only_the_release_is(rooms, reference_plant):
    ana, ben = session(reference_plant, "Ana"), session(reference_plant, "Ben")
    ana.join_room("lab"), ben.join_room("lab")
    ana.state.set_gain(REFERENCE_GAIN)
    ana.state.set_entry(0, 0, 250.0, live=True)
    np.testing.assert_array_equal(ben.state.gain, REFERENCE_GAIN)
    ana.state.end_gesture()
    np.testing.assert_array_equal(ben.state.gain, [[250.0, 55.0, 8.0]])


def test_a_session_whose_room_update_fails_shows_it_and_the_others_carry_on(rooms, reference_plant, monkeypatch,
                                                                            caplog):
    ana, ben, cy = (session(reference_plant, name) for name in ("Ana", "Ben", "Cy"))
    for member in (ana, ben, cy):
        member.join_room("lab")

    def broken(shared, note=""):
        raise RuntimeError("simulated failure in Ben's session")

    monkeypatch.setattr(ben.state, "adopt_shared", broken)
    with caplog.at_level(logging.ERROR):
        assert ana.state.set_gain(REFERENCE_GAIN)
    np.testing.assert_array_equal(cy.state.gain, REFERENCE_GAIN)
    assert matched_distance(cy.state.evaluation.closed_loop.poles, REFERENCE_POLES) < 1e-9  # Ogata Ex. 10-1
    assert ana.state.message_kind != "error"
    assert ben.state.message_kind == "error" and "simulated failure" in ben.state.message
    assert "simulated failure" in caplog.text


# -- the room itself ---------------------------------------------------------------------------


class QueuedSession:
    """A member whose updates wait in a queue until the test runs them (another session's event loop)."""

    def __init__(self, name: str):
        self.queue = []
        self.changes = []
        self.member = RoomMember(name, self.queue.append, self.changes.append)

    def run(self):
        pending, self.queue[:] = list(self.queue), []
        for function in pending:
            function()


def shared(plant, gain, label="plant"):
    return SharedDesign(plant=plant, plant_label=label, plant_text="", continuous_origin=None, gain=gain, specs=None)


def test_concurrent_edits_end_with_the_last_writer_everywhere(reference_plant):
    room = Room("lab")
    ana, ben = QueuedSession("Ana"), QueuedSession("Ben")
    seed = shared(reference_plant, REFERENCE_GAIN)
    room.join(ana.member, seed), room.join(ben.member, seed)
    first = shared(reference_plant, [[100.0, 55.0, 8.0]])
    second = shared(reference_plant, [[199.0, 70.0, 8.0]])
    room.publish(ana.member, first)
    room.publish(ben.member, second)  # before Ana's change reached Ben: last writer wins
    ana.run(), ben.run()
    assert room.latest.design is second and room.latest.author == "Ben" and room.latest.version == 3
    assert ana.changes[-1].design is second and ben.changes[-1].design is second
    # Ben never sees Ana's overwritten version as news.
    assert all(change.design is not first for change in ben.changes)


def test_a_failing_member_is_logged_and_the_rest_still_get_the_change(reference_plant, caplog):
    room = Room("lab")
    ana, ben, cy = QueuedSession("Ana"), QueuedSession("Ben"), QueuedSession("Cy")
    seed = shared(reference_plant, REFERENCE_GAIN)
    for member in (ana, ben, cy):
        room.join(member.member, seed)

    def broken(change):
        raise RuntimeError("Ben's page failed")

    ben.member.on_change = broken
    design = shared(reference_plant, [[10.0, 20.0, 30.0]])
    with caplog.at_level(logging.ERROR):
        change = room.publish(ana.member, design)
        ana.run(), ben.run(), cy.run()
    assert change.version == 2 and cy.changes[-1].design is design
    assert "Ben's page failed" in caplog.text
    assert ben.member.key in room.members  # a failing page stays in the room; only a gone one is dropped


def test_a_member_whose_session_is_gone_is_dropped(reference_plant):
    room = Room("lab")
    ana = QueuedSession("Ana")
    seed = shared(reference_plant, REFERENCE_GAIN)
    room.join(ana.member, seed)

    def gone(function):
        raise RuntimeError("the document was destroyed")

    ghost = RoomMember("Gone", gone, lambda change: None)
    room.join(ghost, seed)
    room.publish(ana.member, shared(reference_plant, [[1.0, 2.0, 3.0]]))
    assert list(room.members) == [ana.member.key]


def test_a_full_room_refuses_one_more(reference_plant):
    room = Room("lab")
    seed = shared(reference_plant, REFERENCE_GAIN)
    for index in range(MAX_MEMBERS):
        room.join(RoomMember(f"p{index}", lambda function: None, lambda change: None), seed)
    with pytest.raises(RoomError, match=f"already has {MAX_MEMBERS} people"):
        room.join(RoomMember("one more", lambda function: None, lambda change: None), seed)


def test_the_registry_forgets_the_longest_empty_room_when_full(reference_plant):
    registry = RoomRegistry(max_rooms=2)
    seed = shared(reference_plant, REFERENCE_GAIN)
    registry.room("a")
    second = registry.room("b")
    member = RoomMember("Ana", lambda function: None, lambda change: None)
    second.join(member, seed)
    registry.room("c")  # "a" is empty, "b" is in use
    assert registry.names() == ["b", "c"]
    member_c = RoomMember("Ben", lambda function: None, lambda change: None)
    registry.room("c").join(member_c, seed)
    with pytest.raises(RoomError, match="already has 2 rooms in use"):
        registry.room("d")


@pytest.mark.parametrize("name", ["", "-lead", "a b", "x" * 41, "lab/1", "ü"])
def test_bad_room_names_are_refused_saying_what_a_name_may_hold(name):
    with pytest.raises(RoomError, match="a room name is 1 to 40 letters, digits"):
        check_room_name(name)


def test_describing_changes(reference_plant):
    before = shared(reference_plant, REFERENCE_GAIN, "third_order_reference.toml")
    assert describe_change(None, before) == "started the room with third_order_reference.toml"
    assert describe_change(before, shared(reference_plant, [[199.0, 55.0, -0.5]])) == "set k₁₃ = −0.5"
    assert describe_change(before, shared(reference_plant, [[1.0, 2.0, 8.0]])) == "changed K (2 entries)"
    other = core.load_plant_file(DATA / "third_order_reference.toml")
    assert describe_change(before, shared(other, REFERENCE_GAIN, "copy.toml")) == "opened copy.toml"
    noted = SharedDesign(reference_plant, "p", "", None, REFERENCE_GAIN, None, notes="why")
    assert describe_change(before, noted) == "edited the notes"


def test_shared_evaluations_are_only_reused_for_the_same_plant_and_specs_objects(reference_plant):
    cache = SharedEvaluations(size=2)
    cache.put("key", reference_plant, None, "evaluation")
    assert cache.get("key", reference_plant, None) == "evaluation"
    twin = core.load_plant_file(DATA / "third_order_reference.toml")
    assert cache.get("key", twin, None) is None  # an equal plant that is another object is not trusted
    cache.put("k2", reference_plant, None, 2), cache.put("k3", reference_plant, None, 3)
    assert cache.get("key", reference_plant, None) is None  # the oldest made room
