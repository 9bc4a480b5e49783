"""The plant model, plant files, transfer-function plants and ZOH sampling."""

import subprocess
import sys
import textwrap

import numpy as np
import pytest
import scipy.signal

from gainboard.core import (
    DesignSpecs,
    GainError,
    Plant,
    PlantError,
    discretize_zero_order_hold,
    load_plant_file,
    load_specs_file,
    parse_plant_text,
    plant_from_transfer_function,
)

MINIMAL = "[model]\nA = [[0.0, 1.0], [-2.0, -3.0]]\nB = [[0.0], [1.0]]\n"


def test_core_import_pulls_in_no_user_interface_library():
    # The core must stay a pure numeric library (design card); check in a fresh interpreter.
    code = "import sys, gainboard.core; print(sorted(m for m in ('panel', 'bokeh', 'param') if m in sys.modules))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"


def test_minimal_plant_file_gets_documented_defaults():
    plant = parse_plant_text(MINIMAL)
    assert plant.state_count == 2 and plant.input_count == 1
    np.testing.assert_array_equal(plant.C, np.eye(2))  # C defaults to identity (README)
    np.testing.assert_array_equal(plant.D, np.zeros((2, 1)))
    assert plant.sample_time is None and not plant.is_sampled
    assert plant.state_names == ("x1", "x2") and plant.input_names == ("u1",)
    np.testing.assert_array_equal(plant.disturbance_matrix, plant.B)
    assert plant.tracked_outputs == (0,)


def test_one_by_one_model_is_accepted():
    plant = parse_plant_text("[model]\nA = [[-1.0]]\nB = [[2]]\nsample_time = 0.01\n")
    assert plant.A.shape == (1, 1) and plant.B[0, 0] == 2.0 and plant.sample_time == 0.01


def test_plant_matrices_are_read_only():
    plant = parse_plant_text(MINIMAL)
    with pytest.raises(ValueError):
        plant.A[0, 0] = 5.0


def test_full_plant_file_reads_every_section(tmp_path):
    path = tmp_path / "stage.toml"
    path.write_text(
        textwrap.dedent(
            """
            name = "Test stage"
            summary = "a one-line summary"
            description = "longer text"
            [model]
            A = [[0.0, 1.0], [0.0, -4.0]]
            B = [[0.0], [2.0]]
            C = [[1.0, 0.0], [0.0, 1.0]]
            [states]
            names = ["position", "velocity"]
            units = ["m", "m/s"]
            initial = [0.1, 0.0]
            [inputs]
            names = ["voltage"]
            units = ["V"]
            low = [-12.0]
            high = [12.0]
            [outputs]
            names = ["position", "velocity"]
            units = ["m", "m/s"]
            tracked = ["position"]
            [disturbance]
            matrix = [[0.0], [1.0]]
            names = ["load force"]
            units = ["N"]
            step = [0.5]
            [specs]
            max_settling_time = 0.5
            max_overshoot_percent = 5
            max_input_magnitude = [12.0]
            """
        )
    )
    plant = load_plant_file(path)
    assert plant.name == "Test stage" and plant.summary == "a one-line summary"
    assert plant.input_limits == ((-12.0, 12.0),)
    np.testing.assert_array_equal(plant.initial_state, [0.1, 0.0])
    assert plant.tracked_outputs == (0,)
    assert plant.disturbance_names == ("load force",) and plant.disturbance_step == (0.5,)
    assert plant.specs == DesignSpecs(max_settling_time=0.5, max_overshoot_percent=5, max_input_magnitude=(12.0,))


@pytest.mark.parametrize(
    "text, message",
    [
        ("[model]\nA = [[1.0, 2.0], [3.0]]\nB = [[1.0], [1.0]]\n", r"A has rows of different lengths"),
        ("[model]\nA = [[1.0, 2.0], [3.0, 4.0]]\nB = [[1.0], [1.0], [1.0]]\n", r"B has 3 rows but A is 2×2; B must be 2×m"),
        ("[model]\nA = [[1.0, 2.0]]\nB = [[1.0]]\n", r"A is 1×2 but must be square"),
        ("[model]\nA = [[1.0]]\nB = [[1.0]]\nC = [[1.0, 2.0]]\n", r"C has 2 columns but A is 1×1; C must be p×1"),
        ("[model]\nA = [[1.0]]\nB = [[1.0]]\nD = [[1.0, 2.0]]\n", r"D is 1×2 but must be 1×1"),
        ("[model]\nA = [['a']]\nB = [[1.0]]\n", r"A contains 'a', which is not a real number"),
        ("[model]\nA = [[nan]]\nB = [[1.0]]\n", r"A has a non-finite entry .* row 1, column 1"),
        ("[model]\nA = [[inf]]\nB = [[1.0]]\n", r"A has a non-finite entry"),
        ("[model]\nA = []\nB = [[1.0]]\n", r"A is empty"),
        ("[model]\nA = [[]]\nB = [[1.0]]\n", r"A is empty"),
        ("[model]\nA = \"text\"\nB = [[1.0]]\n", r"A must be a matrix of numbers .* a string was given"),
        ("[model]\nA = [[1.0]]\nB = [1.0]\n", r"B must be a list of rows .* a flat list of 1 numbers"),
        ("[model]\nA = [[true]]\nB = [[1.0]]\n", r"A contains True, which is not a real number"),
        ("[model]\nA = [[1.0]]\n", r"\[model\] must give B"),
        ("name = 'x'\n", r"required \[model\] table is missing"),
        ("[model]\nA = [[1.0]]\nB = [[1.0]]\nsample_time = -0.1\n", r"sample_time must be a positive finite"),
        ("[model]\nA = [[1.0]]\nB = [[1.0]]\nsample_time = 'fast'\n", r"sample_time must be a number"),
        ("[model]\nA = [[1.0]]\nB = [[1.0]]\nE = [[1.0]]\n", r"\[model\] has unknown key\(s\) \['E'\]"),
        ("colour = 'red'\n" + MINIMAL, r"unknown top-level key\(s\) \['colour'\]"),
        (MINIMAL + "[inputs]\nlow = [-1.0]\n", r"low and high must be given together"),
        (MINIMAL + "[inputs]\nlow = [1.0]\nhigh = [2.0]\n", r"must contain 0"),
        (MINIMAL + "[inputs]\nlow = [-1.0, -2.0]\nhigh = [1.0, 2.0]\n", r"one \(low, high\) pair per input: 1 expected, 2 given"),
        (MINIMAL + "[states]\nnames = ['only one']\n", r"state names must be a list of 2 strings"),
        (MINIMAL + "[states]\ninitial = [1.0]\n", r"initial state must be 2 finite numbers"),
        (MINIMAL + "[states]\nnames = ['x', 'x']\n", r"state names must all differ, but \['x'\] appear"),
        (MINIMAL + "[outputs]\ntracked = ['speed']\n", r"tracked names \['speed'\] are not output names"),
        (MINIMAL + "[specs]\nmax_overshoot_percent = -5\n", r"max_overshoot_percent must not be negative"),
        (MINIMAL + "[specs]\nmin_damping_ratio = 1.5\n", r"min_damping_ratio must lie between 0 and 1"),
        (MINIMAL + "[specs]\nfastest = 1\n", r"\[specs\] has unknown key\(s\) \['fastest'\]"),
        ("[model\nA = 1", r"not valid TOML"),
    ],
)
def test_malformed_plant_file_is_refused_with_a_message_naming_the_problem(text, message):
    with pytest.raises(PlantError, match=message):
        parse_plant_text(text)


def test_missing_file_names_the_path(tmp_path):
    with pytest.raises(PlantError, match=r"cannot read plant file .*nowhere\.toml"):
        load_plant_file(tmp_path / "nowhere.toml")


def test_file_errors_are_prefixed_with_the_file_name(tmp_path):
    path = tmp_path / "broken_plant.toml"
    path.write_text("[model]\nA = [[1.0, 2.0]]\nB = [[1.0]]\n")
    with pytest.raises(PlantError, match=r"^broken_plant\.toml: A is 1×2"):
        load_plant_file(path)


def test_specs_file_accepts_top_level_or_section(tmp_path):
    flat = tmp_path / "flat.toml"
    flat.write_text("max_settling_time = 1.5\n")
    section = tmp_path / "section.toml"
    section.write_text("[specs]\nmin_phase_margin_deg = 45\n")
    assert load_specs_file(flat).max_settling_time == 1.5
    assert load_specs_file(section).min_phase_margin_deg == 45.0


@pytest.mark.parametrize(
    "gain, message",
    [
        ([[1.0, 2.0, 3.0]], r"K is 1×3 but must be 1×2"),
        ([[1.0, float("nan")]], r"non-finite entry"),
        ("abc", r"K must be a 1×2 matrix of numbers"),
    ],
)
def test_gain_of_wrong_shape_or_value_is_refused(gain, message):
    with pytest.raises(GainError, match=message):
        parse_plant_text(MINIMAL).check_gain(gain)


def test_single_input_gain_may_be_a_flat_list():
    np.testing.assert_array_equal(parse_plant_text(MINIMAL).check_gain([3.0, 4.0]), [[3.0, 4.0]])


def test_transfer_function_plant_matches_scipy():
    # Reference: scipy.signal.ss2tf recovers the coefficients we started from.
    numerator, denominator = [2.0, 3.0], [1.0, 4.0, 5.0, 6.0]
    plant = plant_from_transfer_function(numerator, denominator, name="lag")
    num, den = scipy.signal.ss2tf(plant.A, plant.B, plant.C, plant.D)
    np.testing.assert_allclose(den, denominator)
    np.testing.assert_allclose(num[0][-2:], numerator, atol=1e-12)
    assert plant.name == "lag"


@pytest.mark.parametrize(
    "numerator, denominator, message",
    [
        ([1.0, 0.0, 0.0], [1.0, 1.0], r"improper"),
        ([1.0], [2.0], r"degree 1 or more"),
        ([0.0], [1.0, 1.0], r"numerator is zero"),
        ([float("inf")], [1.0, 1.0], r"finite coefficients"),
    ],
)
def test_bad_transfer_function_is_refused(numerator, denominator, message):
    with pytest.raises(PlantError, match=message):
        plant_from_transfer_function(numerator, denominator)


@pytest.mark.parametrize("T", [0.01, 0.1, 1.0])
def test_zoh_of_double_integrator_is_exact(T):
    # Franklin, Powell & Workman, Digital Control of Dynamic Systems, ch. 4 (from memory):
    # Φ = [[1, T], [0, 1]], Γ = [T²/2, T]ᵀ.
    sampled = discretize_zero_order_hold(Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]]), T)
    np.testing.assert_allclose(sampled.A, [[1.0, T], [0.0, 1.0]], rtol=1e-14, atol=1e-15)
    np.testing.assert_allclose(sampled.B, [[T * T / 2], [T]], rtol=1e-14)
    assert sampled.sample_time == T


def test_zoh_of_first_order_lag_is_exact():
    # Handbook formula for x' = -a x + u: Φ = e^{-aT}, Γ = (1 - e^{-aT})/a (reference-cases.md case 10).
    sampled = discretize_zero_order_hold(Plant(A=[[-2.0]], B=[[1.0]]), 0.1)
    assert sampled.A[0, 0] == pytest.approx(0.8187307530779818, rel=1e-14)
    assert sampled.B[0, 0] == pytest.approx((1 - np.exp(-0.2)) / 2, rel=1e-13)


def test_zoh_matches_scipy_test_case():
    # scipy's own test_cont2discrete.py::test_zoh: A = I, B = [0.5, 0.5]ᵀ, T = 0.5.
    sampled = discretize_zero_order_hold(Plant(A=np.eye(2), B=[[0.5], [0.5]]), 0.5)
    np.testing.assert_allclose(sampled.A, 1.648721270700128 * np.eye(2), rtol=1e-14)
    np.testing.assert_allclose(sampled.B, [[0.324360635350064], [0.324360635350064]], rtol=1e-14)


def test_zoh_samples_an_explicit_disturbance_matrix_like_scipy(rng):
    # Reference: scipy.signal.cont2discrete with method "zoh" on [B E].
    A = rng.normal(size=(3, 3))
    B = rng.normal(size=(3, 1))
    E = rng.normal(size=(3, 2))
    plant = Plant(A=A, B=B, disturbance_matrix=E)
    sampled = discretize_zero_order_hold(plant, 0.05)
    Ad, BEd, *_ = scipy.signal.cont2discrete((A, np.hstack([B, E]), np.eye(3), np.zeros((3, 3))), 0.05, "zoh")
    np.testing.assert_allclose(sampled.A, Ad, rtol=1e-12)
    np.testing.assert_allclose(sampled.B, BEd[:, :1], rtol=1e-12, atol=1e-14)
    np.testing.assert_allclose(sampled.disturbance_matrix, BEd[:, 1:], rtol=1e-12, atol=1e-14)


def test_sampling_refuses_a_sampled_plant_or_bad_period():
    continuous = Plant(A=[[-1.0]], B=[[1.0]])
    with pytest.raises(PlantError, match="already sampled"):
        discretize_zero_order_hold(discretize_zero_order_hold(continuous, 0.1), 0.1)
    with pytest.raises(PlantError, match="positive number of seconds"):
        discretize_zero_order_hold(continuous, 0.0)
