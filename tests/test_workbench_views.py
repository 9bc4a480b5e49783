"""The workbench's views without a browser: the time base (emulation check, z-plane choices) and the pole map.

Reference values: scipy.signal.cont2discrete (ZOH) for the sampled loop; shared/reference-cases.md case 1
(Ogata, Modern Control Engineering, 5th ed., Example 10-1, from memory) for the plant and K = [199, 55, 8].
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import scipy.signal

from gainboard import core
from gainboard.app.workbench import build_workbench
from pole_references import REFERENCE_GAIN

DATA = Path(__file__).resolve().parent / "data"


@pytest.fixture
def workbench():
    plant = core.load_plant_file(DATA / "third_order_reference.toml")
    bench = build_workbench(plant, plant_label="third_order_reference.toml").workbench
    bench.state.set_gain(REFERENCE_GAIN)
    return bench


def scipy_sampled_poles(plant, gain, T):
    """eig(Φ − ΓK), Φ and Γ from scipy.signal.cont2discrete (reference library)."""
    Ad, Bd, *_ = scipy.signal.cont2discrete((plant.A, plant.B, plant.C, plant.D), T, method="zoh")
    return np.linalg.eigvals(Ad - Bd @ np.asarray(gain, float))


def test_checking_a_sample_time_shows_the_sampled_loop_everywhere_and_keeps_the_design(workbench):
    state, sampling = workbench.state, workbench.plant_panel.sampling
    plant = state.plant
    sampling.sample_time.value = 0.05
    sampling.check_button.clicks += 1
    assert state.plant is plant and state.undo_depth == 1
    emulation = state.evaluation.emulation
    expected = scipy_sampled_poles(plant, REFERENCE_GAIN, 0.05)
    shown = np.asarray(emulation.sampled.closed_loop.poles, complex)
    assert np.max(np.abs(np.sort_complex(shown) - np.sort_complex(expected))) < 1e-12
    text = sampling.result.object
    assert "stable" in text and "Largest stable sample time" in text
    assert text.count('class="gb-sampled-pole"') == 3
    # the s-plane map shows ln(z)/T of the sampled loop
    assert len(workbench.pole_map.sampled_equivalent_source.data["x"]) == 3
    assert "as ln(z)/T" in workbench.pole_map.legend.object
    # the response plots draw the sampled loop (outputs and held inputs)
    assert len(workbench.responses.output_sampled.renderers) == 1
    assert "dot-dashed" in workbench.responses.legend.object


def test_continuing_on_the_z_plane_fits_the_map_to_the_unit_circle_and_undo_goes_back(workbench):
    state, sampling = workbench.state, workbench.plant_panel.sampling
    plant = state.plant
    pole_map = workbench.pole_map
    s_plane_view = (pole_map.figure.x_range.start, pole_map.figure.x_range.end)
    sampling.sample_time.value = 0.05
    sampling.check_button.clicks += 1
    sampling.keep_button.clicks += 1
    assert state.plant.is_sampled
    np.testing.assert_array_equal(state.gain, REFERENCE_GAIN)
    x0, x1 = pole_map.figure.x_range.start, pole_map.figure.x_range.end
    y0, y1 = pole_map.figure.y_range.start, pole_map.figure.y_range.end
    # the z-plane frame holds the unit circle and every pole, not the s-plane ranges
    assert x0 <= -1 and x1 >= 1 and y0 <= -1 and y1 >= 1 and (x0, x1) != s_plane_view
    assert x1 - x0 < 4
    assert "already sampled" not in state.message
    # the legend describes the sampled plant's locus (its own gain range)
    from gainboard.app.theme import format_number

    locus = state.evaluation.selected_locus
    assert (f"from {format_number(locus.gains[0])} (light) to {format_number(locus.gains[-1])} (dark)"
            in pole_map.legend.object)
    assert "z-plane" in sampling.result.object
    assert state.undo()
    assert state.plant is plant
    assert pole_map.figure.x_range.start == s_plane_view[0] and pole_map.figure.x_range.end == s_plane_view[1]


def parsed_box(design_bar) -> np.ndarray:
    from gainboard.app.pole_list import parse_pole_list

    return np.array(parse_pole_list(design_bar.targets.value_input))


def test_the_target_box_shows_the_current_poles_after_every_change_and_enter_assigns(workbench):
    from pole_references import matched_distance, numpy_closed_loop_poles

    state, bar = workbench.state, workbench.design_bar
    # Ogata Example 10-1 (from memory): the box shows −2 ± 4j, −10 for K = [199, 55, 8]
    assert matched_distance(parsed_box(bar), [-2 + 4j, -2 - 4j, -10]) < 1e-9
    bar.targets.value_input = "-3+3j, -3-3j, -8"
    bar.targets.param.trigger("enter_pressed")  # Enter assigns, as the button does
    assert matched_distance(numpy_closed_loop_poles(state.plant, state.gain), [-3 + 3j, -3 - 3j, -8]) < 1e-8
    assert matched_distance(parsed_box(bar), [-3 + 3j, -3 - 3j, -8]) < 1e-9
    # an LQR adoption, then a plant change: the box follows, never an old plant's poles
    assert state.compute_lqr() and state.adopt_lqr()
    # (the box shows 6 significant digits: within 1e-5 of the largest pole)
    poles = numpy_closed_loop_poles(state.plant, state.gain)
    assert matched_distance(parsed_box(bar), poles) < 1e-5 * np.max(np.abs(poles))
    assert state.load_plant_reference("tilt_rig_sampled")
    assert len(parsed_box(bar)) == state.plant.state_count
    poles = numpy_closed_loop_poles(state.plant, state.gain)
    assert matched_distance(parsed_box(bar), poles) < 1e-5 * np.max(np.abs(poles))
    assert bar.targets.placeholder == bar.targets.value_input
    # what Assign sends is the text on screen: an edit without Enter is what the button sends
    before = state.gain.copy()
    bar.targets.value_input = ""
    bar.assign_button.clicks += 1
    assert state.message_kind == "error" and "box is empty" in state.message
    np.testing.assert_array_equal(state.gain, before)


def test_adopting_the_lqr_design_gives_the_exact_bryson_lqr_not_one_of_rounded_weights():
    import scipy.linalg

    from gainboard.app.plant_catalogue import plant_from_reference

    plant, label, text = plant_from_reference("twin_tank_levels")  # Bryson weights 1111.11…, 0.0138704…
    bench = build_workbench(plant, plant_label=label, plant_text=text).workbench
    panel, state = bench.lqr_panel, bench.state
    panel.compute_button.clicks += 1
    panel.adopt_button.clicks += 1
    # Bryson's rule (Bryson & Ho, Applied Optimal Control, 1975, from memory): weights 1/(largest value)²,
    # as the core forms them; the reference K = R⁻¹BᵀP with P from scipy.linalg.solve_continuous_are.
    Q, R = core.bryson_weights(plant)
    P = scipy.linalg.solve_continuous_are(plant.A, plant.B, Q, R)
    expected = np.linalg.solve(R, plant.B.T @ P)
    np.testing.assert_allclose(state.gain, expected, rtol=1e-12, atol=0)
    # an edited box is read as typed
    panel.q_input.value = "1, 1"
    panel.compute_button.clicks += 1
    np.testing.assert_array_equal(np.diag(state.lqr_weights[0]), [1.0, 1.0])


def test_the_loop_view_marks_the_cores_margins_where_numpy_finds_them(workbench):
    from gainboard.app.views.loop_response import loop_summary_html

    state, view = workbench.state, workbench.loop_response
    margins = state.evaluation.margins
    # L(s) = K(sI − A)⁻¹B = (8s² + 55s + 199)/(s³ + 6s² + 5s + 1) for case 1 (companion form, derived);
    # the gain crossover solves |N(jω)|² = |D(jω)|², a polynomial in ω² (numpy's roots as the reference).
    N, D = np.poly1d([8.0, 55.0, 199.0]), np.poly1d([1.0, 6.0, 5.0, 1.0])
    def at(poly, w):
        return poly(1j * w)
    # |N|² − |D|² in ω: even polynomial; solve on a fine bracket with numpy
    w = np.linspace(0.01, 100, 200001)
    f = np.abs(at(N, w)) ** 2 - np.abs(at(D, w)) ** 2
    k = np.flatnonzero(np.sign(f[:-1]) != np.sign(f[1:]))
    crossovers = [np.interp(0, [f[i + 1], f[i]], [w[i + 1], w[i]]) for i in k]
    assert len(crossovers) == 1
    crossover = crossovers[0]
    expected_margin = 180.0 + np.degrees(np.angle(at(N, crossover) / at(D, crossover)))
    loop = margins.loop_at_a_time[0]
    assert loop.crossover_frequency == pytest.approx(crossover, rel=1e-6)
    assert loop.phase_margin_deg == pytest.approx(expected_margin, rel=1e-6)
    # the view marks that crossover on its curves: |L| = 0 dB there, and the polar mark on the unit circle
    marks = view.gain_marks.data
    assert list(marks["w"]) == [loop.crossover_frequency]
    assert abs(marks["db"][0]) < 1e-9 and abs(np.hypot(marks["x"][0], marks["y"][0]) - 1) < 1e-9
    assert 180.0 + marks["deg"][0] == pytest.approx(loop.phase_margin_deg, abs=1e-9)
    # the numbers shown are the core's
    text = loop_summary_html(state.evaluation, 0)
    from gainboard.app.theme import format_number
    assert f"{format_number(loop.phase_margin_deg, 4)}°" in text
    assert "1/‖S‖∞ at the input" in text and format_number(margins.disk_margin, 4) in text
    # the drawn curve is K(jωI − A)⁻¹B (numpy polynomials) at the grid points
    curve = view.curve.data
    values = at(N, np.asarray(curve["w"])) / at(D, np.asarray(curve["w"]))
    np.testing.assert_allclose(curve["db"], 20 * np.log10(np.abs(values)), atol=1e-9)


def test_a_sampled_loop_is_drawn_up_to_the_nyquist_frequency():
    plant = core.discretize_zero_order_hold(core.load_plant_file(DATA / "third_order_reference.toml"), 0.05)
    bench = build_workbench(plant).workbench
    bench.state.set_gain(REFERENCE_GAIN)
    omega = np.asarray(bench.loop_response.curve.data["w"])
    assert omega[-1] == pytest.approx(np.pi / 0.05, rel=1e-12)
    assert "Nyquist" in bench.loop_response.summary.object


def test_the_pole_map_follows_its_stated_rule_and_lock_keeps_the_users_view(workbench):
    state, pole_map = workbench.state, workbench.pole_map
    figure = pole_map.figure
    assert "view follows the poles" in pole_map.legend.object
    # a much faster design puts a pole far outside the view: followed, the view refits to show it
    # (poles from Ackermann's formula, checked with numpy's eigenvalues in the state tests)
    state.place_poles([-2 + 4j, -2 - 4j, -60])
    assert figure.x_range.start < -60
    workbench.entry_choice.lock_toggle.value = True
    assert "view locked" in pole_map.legend.object
    locked = (figure.x_range.start, figure.x_range.end, figure.y_range.start, figure.y_range.end)
    state.place_poles([-2 + 4j, -2 - 4j, -200])
    assert (figure.x_range.start, figure.x_range.end, figure.y_range.start, figure.y_range.end) == locked
    workbench.entry_choice.lock_toggle.value = False  # following again: fitted to the content at once
    assert figure.x_range.start < -200


def test_several_named_pins_are_compared_in_the_checks_table(workbench):
    from gainboard.app.state import MAX_PINS
    from gainboard.app.theme import format_number

    state, checks = workbench.state, workbench.checks
    state.pin("textbook")  # K = [199, 55, 8]: Ogata Example 10-1 (from memory)
    textbook = state.evaluation
    state.set_gain([[100.0, 40.0, 8.0]])
    state.pin()
    assert [name for name, _ in state.pins] == ["textbook", "pin 1"]
    state.set_gain([[150.0, 50.0, 8.0]])
    html = checks.pane.object
    assert "textbook" in html and "pin 1" in html and "gb-pin-comparison" in html
    # the pinned values shown are the pinned evaluations' own numbers
    assert format_number(textbook.margins.phase_margin_deg) in html
    assert format_number(textbook.spec_report.checks[0].achieved) in html
    # the ghost is the chosen pin; unpinning it shows the newest remaining one
    assert state.show_pin("textbook") and state.pinned is textbook
    assert workbench.design_bar.pin_choice.value == "textbook"
    state.unpin()
    assert [name for name, _ in state.pins] == ["pin 1"] and state.pinned is state.pins[-1][1]
    for _ in range(MAX_PINS + 1):  # a handful at most: the oldest goes
        state.pin()
    assert len(state.pins) == MAX_PINS and "dropped" in state.message
