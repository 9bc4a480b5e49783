"""One session's failing callbacks never affect the other sessions, over real connections.

A real `gainboard serve` on 127.0.0.1 is started through a test harness
(tests/browser/faulty_server.py) in which the session named "faulty" breaks on purpose:
its response plots raise on every refresh and taking over a room change raises. Three
sessions are driven over their live connections (Bokeh's Python client): the faulty one
and Ana share a live room, Solo edits a design of its own.

Reference values: case 1 of shared/reference-cases.md (Ogata, *Modern Control Engineering*,
5th ed., Example 10-1, from memory): K = [199, 55, 8] gives the poles −2 ± 4j and −10;
numpy's eigenvalues of A − BK check every other design shown.
"""

from __future__ import annotations

import sys
from pathlib import Path

import pytest

from gainboard import core
from pole_references import REFERENCE_POLES, matched_distance
from pole_references import numpy_closed_loop_poles as numpy_poles

BROWSER = Path(__file__).resolve().parent / "browser"
sys.path.insert(0, str(BROWSER))
from session_client import SessionClient  # noqa: E402
from workbench_server import RunningServer  # noqa: E402

PLANT = Path(__file__).resolve().parent / "data" / "third_order_reference.toml"


@pytest.fixture(scope="module")
def faulty_server():
    running = RunningServer(str(PLANT), launcher=[sys.executable, str(BROWSER / "faulty_server.py")])
    yield running
    running.stop()


def test_a_failing_session_does_not_affect_the_others(faulty_server):
    plant = core.load_plant_file(PLANT)
    faulty = SessionClient(faulty_server.url, {"room": "isolation", "name": "faulty"})
    ana = SessionClient(faulty_server.url, {"room": "isolation", "name": "Ana"})
    solo = SessionClient(faulty_server.url, {"name": "Solo"})
    try:
        # The faulty session's own edit: its response plots fail, the rest of its page updates...
        faulty.set_entry(0, 0, 199.0)
        faulty.wait_for(lambda: "deliberate failure in the response plots" in faulty.message(), "the failure shown")
        faulty.wait_for(lambda: faulty.gain()[0, 0] == 199.0, "the faulty session's K readout")
        # ...and its change still reaches the room.
        ana.wait_for(lambda: ana.gain()[0, 0] == 199.0, "Ana to receive the faulty session's change")
        # Ana's edits: the faulty session fails to take them over, Ana and the room carry on.
        ana.set_entry(0, 1, 55.0)
        ana.set_entry(0, 2, 8.0)
        # The page's parts arrive as separate messages: wait for the K readout too.
        ana.wait_for(lambda: ana.gain().tolist() == [[199.0, 55.0, 8.0]], "Ana's K readout")
        ana.wait_for(lambda: matched_distance(ana.closed_loop_poles(), REFERENCE_POLES) < 1e-9,
                     "the textbook poles on Ana's page")  # Ogata Example 10-1 (from memory)
        faulty.wait_for(lambda: "deliberate failure while the faulty session takes over" in faulty.message(),
                        "the room failure shown in the faulty session")
        assert "error" not in ana.message().lower() and "wrong" not in ana.message().lower()
        # A session of its own is untouched by all of it.
        for value in (150.0, 180.0):
            solo.set_entry(0, 0, value)
        solo.wait_for(lambda: solo.gain()[0, 0] == 180.0, "Solo's K readout")
        gain = solo.gain()
        solo.wait_for(lambda: matched_distance(solo.closed_loop_poles(), numpy_poles(plant, gain)) < 1e-8,
                      "Solo's poles to match numpy's eigenvalues")
        assert "Something went wrong" not in solo.message()
        # The faulty session itself keeps working: a later change of its own still goes through.
        faulty.set_entry(0, 0, 210.0)
        ana.wait_for(lambda: ana.gain()[0, 0] == 210.0, "Ana to receive the faulty session's later change")
    finally:
        for client in (faulty, ana, solo):
            client.close()
    # Every exception the server logged is one of the two deliberate failures.
    blocks = faulty_server.log().split("Traceback")[1:]
    assert blocks, "the deliberate failures were not logged"
    assert all("deliberate failure" in block for block in blocks), faulty_server.log()[-3000:]
