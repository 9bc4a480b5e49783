"""The Python API (`import gainboard`): the verbs at top level, results with summaries and the CLI's records."""

from __future__ import annotations

import json

import numpy as np
import pytest
import scipy.signal

import gainboard
from gainboard.app.cli import main

# Reference-cases.md case 1: A = companion of s³ + 6s² + 5s + 1, B = e3; poles -2±4j, -10 → K = [199, 55, 8].
# Ogata, Modern Control Engineering, 5th ed., Example 10-1 (from memory).
A3 = [[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [-1.0, -5.0, -6.0]]
B3 = [0.0, 0.0, 1.0]
POLES3 = [-2 + 4j, -2 - 4j, -10]
THIRD_ORDER_TOML = """
name = "third-order test plant"
[model]
A = [[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [-1.0, -5.0, -6.0]]
B = [[0.0], [0.0], [1.0]]
"""


def third_order():
    return gainboard.plant_from_arrays(A3, B3, name="third-order test plant")


def test_plant_from_arrays_reads_a_one_dimensional_b_as_one_input():
    plant = third_order()
    assert plant.B.shape == (3, 1) and plant.input_count == 1
    np.testing.assert_array_equal(plant.B, gainboard.Plant(A=A3, B=[[0.0], [0.0], [1.0]]).B)
    one_output = gainboard.plant_from_arrays(A3, B3, C=[1.0, 0.0, 0.0], D=0.0)
    assert one_output.C.shape == (1, 3) and one_output.D.shape == (1, 1)


def test_plant_from_arrays_refuses_shapes_that_do_not_fit():
    with pytest.raises(gainboard.PlantError):
        gainboard.plant_from_arrays(A3, [0.0, 1.0])


def test_assign_poles_gives_the_textbook_gain_and_scipy_agrees():
    result = gainboard.assign_poles(third_order(), POLES3)
    np.testing.assert_allclose(result.gain, [[199.0, 55.0, 8.0]], rtol=1e-10)  # Ogata Example 10-1 (from memory)
    reference = scipy.signal.place_poles(np.array(A3), np.array(B3).reshape(3, 1), POLES3).gain_matrix
    np.testing.assert_allclose(result.gain, reference, rtol=1e-8)  # scipy as the reference library


def test_result_records_are_exactly_what_the_command_line_prints(tmp_path, capsys):
    path = tmp_path / "third.toml"
    path.write_text(THIRD_ORDER_TOML)
    plant = gainboard.load_plant_file(path)
    assert main(["assign", str(path), "--poles", "-2+4j,-2-4j,-10", "--json"]) == 0
    assert json.loads(capsys.readouterr().out) == json.loads(json.dumps(gainboard.assign_poles(plant, POLES3).to_dict()))
    gain = "[[199, 55, 8]]"
    assert main(["evaluate", str(path), "--gain", gain, "--json"]) == 0
    printed = json.loads(capsys.readouterr().out)
    options = gainboard.EvaluationOptions(selected_entry=None, include_all_entry_intervals=False)
    assert printed == json.loads(json.dumps(gainboard.evaluate_design(plant, [[199, 55, 8]], options).to_dict()))
    assert main(["sweep", str(path), "--gain", gain, "--entry", "1,2", "--json"]) == 0
    printed = json.loads(capsys.readouterr().out)
    record = gainboard.entry_stable_intervals(plant, [[199, 55, 8]], 0, 1).to_dict()
    assert {k: v for k, v in printed.items() if k != "locus"} == json.loads(json.dumps(record))


def test_results_summarise_on_one_screen_and_as_an_html_table():
    plant = gainboard.load_bundled_plant("flexure_stage_xy")
    poles = -np.arange(1.0, plant.state_count + 1)
    assignment = gainboard.assign_poles(plant, poles)
    evaluation = gainboard.evaluate_design(plant, assignment.gain)
    intervals = gainboard.entry_stable_intervals(plant, assignment.gain, 0, 0)
    for result in (assignment, evaluation, intervals):
        text = repr(result)
        assert len(text.splitlines()) <= 30 and plant.name in text
        assert "A=" not in text and "array(" not in text  # a summary, not the dataclass dump
        assert result._repr_html_().startswith("<table>")
    assert "stable" in repr(evaluation)
    np.testing.assert_array_equal(assignment.gain, assignment.result.gain)  # attributes fall through


def test_interval_ends_within_round_off_of_zero_are_exactly_zero():
    # Double integrator with K = [k1, 1]: s² + s + k1 is stable iff k1 > 0 (Routh–Hurwitz, second order:
    # all coefficients positive). The core's end is ~1e-16 from round-off; the API reports exactly 0.
    plant = gainboard.plant_from_arrays([[0.0, 1.0], [0.0, 0.0]], [0.0, 1.0])
    intervals = gainboard.entry_stable_intervals(plant, [[2.0, 1.0]], 0, 0)
    assert intervals.stable_intervals == ((0.0, np.inf),)
    assert intervals.to_dict()["stable_intervals"] == [[0.0, None]]
    assert intervals.contains(1e-3) and not intervals.contains(-1e-3)
    # A genuine small end is kept: with A[1,0] = 1e-6 the polynomial is s² + s + (k1 − 1e-6), stable iff k1 > 1e-6.
    shifted = gainboard.plant_from_arrays([[0.0, 1.0], [1e-6, 0.0]], [0.0, 1.0])
    (low, _), = gainboard.entry_stable_intervals(shifted, [[2.0, 1.0]], 0, 0).stable_intervals
    assert low == pytest.approx(1e-6, rel=1e-6)


@pytest.mark.parametrize("fmt, marker", [("c", "static const double"), ("python", "def feedback"),
                                         ("csv", "input"), ("json", '"K"')])
def test_export_gain_writes_every_format_from_the_api(fmt, marker):
    text = gainboard.export_gain(third_order(), [[199.0, 55.0, 8.0]], fmt)
    assert marker in text and "199" in text


def test_the_verbs_with_indices_say_they_are_zero_based():
    for verb in (gainboard.entry_stable_intervals, gainboard.evaluate_design, gainboard.EntryIntervals):
        assert "0-based" in verb.__doc__, verb
    assert "0-based" in gainboard.__doc__


def test_every_public_name_resolves_and_unknown_names_fail():
    for name in gainboard.__all__:
        assert getattr(gainboard, name) is not None
    with pytest.raises(AttributeError):
        gainboard.no_such_verb  # noqa: B018


def test_the_notebook_workbench_exposes_gain_design_and_poles():
    bench = gainboard.workbench("cart_pendulum")
    gain = [[-1.0, -2.0, -60.0, -8.0]]
    bench.gain = gain
    np.testing.assert_array_equal(bench.gain, gain)
    np.testing.assert_allclose(np.sort_complex(bench.poles),
                               np.sort_complex(np.linalg.eigvals(bench.state.plant.A - bench.state.plant.B @ gain)),
                               rtol=1e-9)  # numpy's eigvals as the reference
    assert bench.design().gain.tolist() == gain
    assert bench.__panel__() is not None


@pytest.mark.parametrize("module_name", ["gainboard._arrays", "gainboard._verbs", "gainboard._results"])
def test_docstring_examples_of_the_api_run(module_name):
    import doctest
    import importlib

    result = doctest.testmod(importlib.import_module(module_name), optionflags=doctest.NORMALIZE_WHITESPACE)
    assert result.failed == 0
