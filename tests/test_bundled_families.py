"""Bundled plants with parameter uncertainty: nominal models unchanged, operating points from their physics."""

import json
from pathlib import Path

import numpy as np
import pytest
import sympy

from gainboard.core import load_plant_family_file, load_plant_file
from gainboard.sample_plants import bundled_plant_files

# The nominal matrices of every bundled plant as they were before plant families existed
# (written from the plant files of the main branch; json keeps every float exactly).
NOMINAL = json.loads((Path(__file__).parent / "data" / "bundled_nominal_matrices.json").read_text())
EPS = np.finfo(float).eps


@pytest.mark.parametrize("stem", sorted(NOMINAL))
def test_every_bundled_plant_keeps_its_nominal_matrices(stem):
    plant = load_plant_file(bundled_plant_files()[stem])
    family = load_plant_family_file(bundled_plant_files()[stem])
    for key in ("A", "B", "C", "D", "disturbance_matrix"):
        before = np.array(NOMINAL[stem][key])
        # formulas of the parameters reproduce the stored numbers to rounding (a few units in the last place)
        np.testing.assert_allclose(getattr(plant, key), before, rtol=4 * EPS, atol=0, err_msg=key)
        np.testing.assert_array_equal(getattr(family.nominal, key), getattr(plant, key))
    assert plant.sample_time == NOMINAL[stem]["sample_time"]


def test_at_least_three_bundled_plants_are_families_with_operating_points():
    families = [load_plant_family_file(path) for path in bundled_plant_files().values()]
    uncertain = [f for f in families if f.varying_parameters and f.operating_points]
    assert len(uncertain) >= 3
    for family in uncertain:
        assert "Uncertainty" in family.nominal.description  # documented where the user reads about the plant
        for parameter in family.parameters:
            assert parameter.unit and parameter.description


def test_cart_operating_points_are_the_linearised_lagrange_equations():
    # reference: sympy solves the linearised equations of motion stated in the plant's description,
    # (M + m)p'' + m·l·θ'' = F − b·p' and m·l·p'' + (I + m·l²)θ'' = m·g·l·θ − c·θ', I = mL²/12, l = L/2
    M, m, L, b, c, g, F = sympy.symbols("M m L b c g F", positive=True)
    p1, th, th1 = sympy.symbols("p1 theta theta1")
    pdd, thdd = sympy.symbols("pdd thdd")
    l, inertia = L / 2, m * L**2 / 12
    solution = sympy.solve([(M + m) * pdd + m * l * thdd - (F - b * p1),
                            m * l * pdd + (inertia + m * l**2) * thdd - (m * g * l * th - c * th1)], [pdd, thdd])
    family = load_plant_family_file(bundled_plant_files()["cart_pendulum"])
    for model in family.models():
        v = model.values
        values = {M: v["cart_mass"], m: v["rod_mass"], L: v["rod_length"], b: v["cart_friction"],
                  c: v["pivot_friction"], g: 9.81}
        for row, accel in ((1, solution[pdd]), (3, solution[thdd])):
            expected = [float(sympy.diff(accel, s).subs(values)) for s in (p1, th, th1)]
            np.testing.assert_allclose(model.plant.A[row, 1:], expected, rtol=1e-12, err_msg=model.name)
            assert model.plant.B[row, 0] == pytest.approx(float(sympy.diff(accel, F).subs(values)), rel=1e-12)


def test_quarter_car_spring_slope_follows_the_static_load():
    # reference: numpy's polynomial roots of ks·δ + k3·δ³ = ms·g (the description's static balance)
    family = load_plant_family_file(bundled_plant_files()["quarter_car_active"])
    for model in family.models():
        mass = model.values["body_mass"]
        roots = np.roots([2.5e5, 0.0, 14000.0, -mass * 9.81])
        deflection = roots[np.abs(roots.imag) < 1e-12].real.max()
        slope = 14000.0 + 3 * 2.5e5 * deflection**2
        assert -model.plant.A[1, 0] * mass == pytest.approx(slope, rel=1e-10), model.name
        assert model.plant.A[3, 0] * 38.0 == pytest.approx(slope, rel=1e-10)


def test_tank_conductances_are_the_slopes_of_torricellis_law_at_each_operating_point():
    # reference: sympy differentiates q = a·√(2 g h) at the operating head (the description's law)
    a, h = sympy.symbols("a h", positive=True)
    slope = sympy.diff(a * sympy.sqrt(2 * 9.81 * h), h)
    family = load_plant_family_file(bundled_plant_files()["twin_tank_levels"])
    for model in family.models():
        v = model.values
        r1 = float(slope.subs({a: v["outlet_1"], h: v["level_1"]}))
        r2 = float(slope.subs({a: v["outlet_2"], h: v["level_2"]}))
        r12 = float(slope.subs({a: 5.0e-5, h: v["level_1"] - v["level_2"]}))
        expected = np.array([[-(r12 + r1) / 0.020, r12 / 0.020], [r12 / 0.015, -(r12 + r2) / 0.015]])
        np.testing.assert_allclose(model.plant.A, expected, rtol=1e-12, err_msg=model.name)
