"""Design files version 2: the estimator gain L and its settings, plant noise, and reading version 1.

Exactness is checked bit for bit with struct (as in test_design_file.py): Python's repr of a
float reads back to the same double (David Gay's correctly rounded conversions; from memory).
"""

import json
import struct

import numpy as np
import pytest

from gainboard import core
from gainboard.app.design_file import Design, DesignFileError, EstimatorDesign, design_from_json, design_to_json
from gainboard.app.plant_text import plant_to_toml
from gainboard.app.snapshot import design_from_snapshot, snapshot_code

PLANT = core.Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]],
                   noise=core.noise_intensities([0.0, 0.25], [1e-4]))


def bits(value) -> bytes:
    return b"".join(struct.pack("<d", float(v)) for v in np.ravel(np.asarray(value, dtype=float)))


def kalman_design() -> Design:
    result = core.design_kalman_estimator(PLANT)
    settings = EstimatorDesign.from_result(result, initial_estimate=[0.1, -0.0])
    return Design(plant=PLANT, gain=[[1.0, 1.4]], estimator=settings)


def test_estimator_and_plant_noise_survive_a_design_file_bit_for_bit():
    design = kalman_design()
    again = design_from_json(design_to_json(design))
    assert bits(again.estimator.gain) == bits(design.estimator.gain)
    assert bits(again.estimator.process_noise) == bits(PLANT.noise.process)
    assert bits(again.estimator.initial_estimate) == bits([0.1, -0.0])  # −0.0 kept
    assert again.estimator.form == "full-order" and again.estimator.method == "steady-state Kalman filter"
    assert bits(again.plant.noise.measurement) == bits([[1e-4]])
    assert again.format_version == 2


def test_pole_assignment_settings_keep_the_requested_poles():
    result = core.assign_estimator_poles(PLANT, [-3 + 4j, -3 - 4j])
    design = Design(plant=PLANT, gain=[[1.0, 1.4]],
                    estimator=EstimatorDesign.from_result(result, poles=[-3 + 4j, -3 - 4j]))
    again = design_from_json(design_to_json(design))
    assert again.estimator.poles == (-3 + 4j, -3 - 4j)
    np.testing.assert_array_equal(again.estimator.gain, [[6.0], [25.0]])  # hand-derived: s² + 6s + 25


def test_version_one_files_are_still_read_and_written_again_as_version_two():
    version_one = {"format": "gainboard-design", "version": 1,
                   "plant": {"model": {"A": [[-1.0]], "B": [[1.0]]}}, "gain": {"K": [[2.0]]}}
    design = design_from_json(json.dumps(version_one))
    assert design.estimator is None and design.format_version == 1
    assert json.loads(design_to_json(design))["version"] == 2
    with pytest.raises(DesignFileError, match="\"estimator\" is new in design format version 2"):
        design_from_json(json.dumps({**version_one, "estimator": None}))


@pytest.mark.parametrize("estimator, message", [
    ({"form": "full-order", "L": [[1.0, 2.0]]}, "L is 1×2 but must be 2×1"),
    ({"form": "sideways", "L": [[1.0], [2.0]]}, "estimator form 'sideways' is not known"),
    ({"form": "current", "L": [[1.0], [2.0]]}, "not for a continuous plant"),
    ({"L": [[1.0], [2.0]]}, "must give \"form\""),
    ({"form": "full-order", "L": [[1.0], ["x"]]}, "contains 'x', which is not a number"),
    ({"form": "full-order", "L": [[1.0], [2.0]], "gain": 3}, "unknown key"),
    ({"form": "full-order", "L": [[1.0], [2.0]], "method": "magic"}, "estimator method 'magic' is not known"),
    ({"form": "full-order", "L": [[1.0], [2.0]], "process_noise": [[1.0, 0.0], [0.0, -1.0]],
      "measurement_noise": [[1.0]]}, "positive semidefinite"),
    ({"form": "full-order", "L": [[1.0], [2.0]], "initial_estimate": [1.0]}, "initial estimate must be 2"),
])
def test_malformed_estimator_entries_are_refused_naming_the_fault(estimator, message):
    document = json.loads(design_to_json(Design(plant=PLANT, gain=[[1.0, 1.4]])))
    document["estimator"] = estimator
    with pytest.raises(DesignFileError, match=message):
        design_from_json(json.dumps(document), "bad.json")


def test_snapshot_links_carry_the_estimator():
    design = kalman_design()
    again = design_from_snapshot(snapshot_code(design))
    assert bits(again.estimator.gain) == bits(design.estimator.gain)


def test_plant_files_written_from_the_workbench_keep_the_noise_table():
    text = plant_to_toml(PLANT)
    assert "[noise]" in text
    assert bits(core.parse_plant_text(text).noise.process) == bits(PLANT.noise.process)


def test_changing_k_keeps_the_estimator():
    design = kalman_design()
    assert bits(design.with_gain([[2.0, 2.0]]).estimator.gain) == bits(design.estimator.gain)
