"""Opening a page never fails: a snapshot link that cannot be shown becomes a message on a working workbench.

The numbers: 1e308 is near the largest double (IEEE 754 binary64, about 1.8e308), so A − BK and its
powers overflow to inf and LAPACK refuses them (numpy.linalg raises LinAlgError on non-finite input,
numpy documentation). The 200-state chain of integrators is invented test data.
"""

from __future__ import annotations

import numpy as np

from gainboard import core
from gainboard.app.design_file import Design
from gainboard.app.snapshot import snapshot_code
from gainboard.app.state_loading import MAX_SHARED_STATES

SERVER_PLANT = core.Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]])


def chain_of_integrators(n: int) -> core.Plant:
    B = np.zeros((n, 1))
    B[-1, 0] = 1.0
    return core.Plant(A=np.eye(n, k=1), B=B)


def open_with(code: str, tmp_path, monkeypatch):
    from gainboard.app.workbench import open_session

    monkeypatch.setenv("GAINBOARD_DATA_DIR", str(tmp_path))
    return open_session(SERVER_PLANT, plant_label="server plant", arguments={"design": [code.encode()]}).workbench


def test_a_snapshot_whose_numbers_break_the_numerics_opens_the_servers_plant_with_a_message(tmp_path, monkeypatch):
    code = snapshot_code(Design(plant=core.Plant(A=[[1e308]], B=[[1.0]]), gain=[[0.0]]))
    workbench = open_with(code, tmp_path, monkeypatch)
    assert workbench.state.plant is SERVER_PLANT
    assert workbench.state.message_kind == "error"
    assert "Could not open the snapshot link" in workbench.state.message and "Traceback" not in workbench.state.message
    workbench.state.set_entry(0, 0, 2.0)  # the workbench works
    assert workbench.state.gain[0, 0] == 2.0


def test_an_oversize_snapshot_is_refused_before_anything_is_evaluated(tmp_path, monkeypatch):
    from gainboard.app import state as state_module

    evaluated = []
    original = state_module.DesignState.from_design
    monkeypatch.setattr(state_module.DesignState, "from_design",
                        classmethod(lambda cls, design, label="": evaluated.append(design) or original.__func__(cls, design, label)))
    code = snapshot_code(Design(plant=chain_of_integrators(200), gain=np.zeros((1, 200))))
    assert len(code) < 5000  # a short link (the attack: 4.6 KB)
    workbench = open_with(code, tmp_path, monkeypatch)
    assert evaluated == []
    assert f"has 200 states; the workbench opens plants of at most {MAX_SHARED_STATES} states" in workbench.state.message
    assert workbench.state.plant is SERVER_PLANT
    # At the limit a link still opens.
    code = snapshot_code(Design(plant=chain_of_integrators(MAX_SHARED_STATES), gain=np.zeros((1, MAX_SHARED_STATES))))
    assert open_with(code, tmp_path, monkeypatch).state.plant.state_count == MAX_SHARED_STATES


def test_an_uploaded_design_with_too_long_notes_or_too_many_states_is_refused(tmp_path, monkeypatch):
    from gainboard.app.design_file import design_to_json
    from gainboard.app.state import DesignState
    from gainboard.app.state_loading import MAX_NOTES_CHARACTERS

    state = DesignState(SERVER_PLANT)
    long_notes = design_to_json(Design(plant=SERVER_PLANT, gain=[[1.0, 1.0]], notes="n" * (MAX_NOTES_CHARACTERS + 1)))
    assert not state.load_design_bytes(long_notes.encode(), "long.json")
    assert "at most 100000 are kept" in state.message
    big = design_to_json(Design(plant=chain_of_integrators(61), gain=np.zeros((1, 61))))
    assert not state.load_design_bytes(big.encode(), "big.json")
    assert "has 61 states" in state.message and state.plant is SERVER_PLANT
