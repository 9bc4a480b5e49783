"""Plant families: safe expressions, [parameters], [[operating_points]] and their refusals."""

import math

import numpy as np
import pytest
import sympy
from hypothesis import given, settings
from hypothesis import strategies as st

from gainboard.core import (
    MAX_EXPRESSION_LENGTH,
    PlantError,
    load_plant_file,
    parse_expression,
    parse_plant_family_text,
    parse_plant_text,
)

SPRING_MASS = """
name = "spring and mass"
[parameters.mass]
nominal = 2.0
low = 1.0
high = 4.0
unit = "kg"
description = "payload"
[parameters.spring]
nominal = 8.0
std = 0.5
unit = "N/m"
[model]
A = [[0.0, 1.0], ["-spring / mass", -0.5]]
B = [[0.0], ["1 / mass"]]
[[operating_points]]
name = "empty"
values = { mass = 1.0 }
[[operating_points]]
name = "full"
values = { mass = 4.0, spring = 9.0 }
"""


def test_importing_the_core_loads_no_distributed_engine_or_progress_bar():
    import subprocess
    import sys

    # Dask is imported only where a distributed run is set up, tqdm only by the command line
    code = ("import sys, gainboard.core; "
            "print(sorted(m for m in ('dask', 'distributed', 'tqdm', 'panel') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"


# -- the safe evaluator ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    "text, reason",
    [
        ("mass.__class__", "attribute access"),
        ("mass.real", "attribute access"),
        ("mass[0]", "subscripts"),
        ("(lambda: 1)()", "call of something other"),
        ("lambda x: x", "lambda"),
        ("__import__('os')", "call of something other"),
        ("__builtins__", "names starting with __"),
        ("open('x')", "call of something other"),
        ("sqrt(mass, 2)", "exactly one argument"),
        ("sqrt(x=mass)", "exactly one argument"),
        ("mass if mass else 1", "if/else"),
        ("mass < 1", "comparisons"),
        ("mass and 1", "and/or"),
        ("'abc'", "only numbers"),
        ("mass % 2", "operator %"),
        ("mass // 2", "operator //"),
        ("mass @ mass", "operator @"),
        ("~mass", "operator Invert"),
        ("not mass", "operator Not"),
        ("[mass]", "lists"),
        ("(mass, 1)", "tuples"),
        ("{1: 2}", "dictionaries"),
        ("[x for x in ()]", "comprehensions"),
        ("(y := 2)", "assignments"),
        ("f'{mass}'", "f-strings"),
        ("sqrt", "without calling it"),
        ("1j * mass", "only numbers"),
        ("True + mass", "only numbers"),
    ],
)
def test_the_evaluator_refuses_each_construct_outside_the_admitted_list(text, reason):
    with pytest.raises(PlantError, match=rf"A row 1, column 1: .* uses .*{reason}"):
        parse_expression(text, {"mass"}, "A row 1, column 1")


def test_the_evaluator_refuses_unknown_names_and_lists_the_parameters():
    with pytest.raises(PlantError, match=r"B row 2.*unknown name 'masss'.*parameters are: mass, spring"):
        parse_expression("1 / masss", {"mass", "spring"}, "B row 2, column 1")


def test_the_evaluator_refuses_text_longer_than_the_limit():
    text = "+".join(["mass"] * (MAX_EXPRESSION_LENGTH // 4))
    assert len(text) > MAX_EXPRESSION_LENGTH
    with pytest.raises(PlantError, match=rf"characters long; at most {MAX_EXPRESSION_LENGTH}"):
        parse_expression(text, {"mass"}, "A")


def test_the_evaluator_refuses_syntax_errors_and_empty_text():
    with pytest.raises(PlantError, match="not an arithmetic expression"):
        parse_expression("mass +", {"mass"}, "A")
    with pytest.raises(PlantError, match="empty"):
        parse_expression("  ", {"mass"}, "A")
    with pytest.raises(PlantError, match="not an arithmetic expression"):
        parse_expression("x = 1", {"x"}, "A")


# Grammar of admitted expressions, for property tests; sympy is the outside reference evaluator.
_names = st.sampled_from(["mass", "spring", "pi"])
_numbers = st.floats(0.1, 10.0).map(lambda v: repr(round(v, 3)))
_leaves = st.one_of(_names, _numbers)


def _combine(children):
    binary = st.tuples(children, st.sampled_from(["+", "-", "*", "/"]), children).map(lambda t: f"({t[0]} {t[1]} {t[2]})")
    unary = children.map(lambda c: f"-({c})")
    call = st.tuples(st.sampled_from(["exp", "sin", "cos"]), children).map(lambda t: f"{t[0]}({t[1]} / 10)")
    return st.one_of(binary, unary, call)


_expressions = st.recursive(_leaves, _combine, max_leaves=8)


@settings(deadline=None, max_examples=60)
@given(_expressions)
def test_admitted_expressions_evaluate_as_sympy_evaluates_them(text):
    values = {"mass": 1.7, "spring": 3.25}
    ours = float(parse_expression(text, values, "A").evaluate(values))
    # reference: sympy parses the same (generated, trusted) text and evaluates it exactly
    reference = float(sympy.sympify(text, locals={"pi": sympy.pi}).subs(values).evalf(30))
    assert ours == pytest.approx(reference, rel=1e-9, abs=1e-12)


_forbidden_inserts = st.sampled_from([
    "{0}.__class__", "{0}[0]", "{0}.real", "abs({0})", "(lambda: {0})()", "__x__ + {0}", "{0} if 1 else 2",
    "{0} < 2", "{0} % 3", "({0}, 1)", "'{0}'", "getattr({0}, 'x')", "{0} or 1", "sqrt(x={0})", "max({0}, 1)",
    "[{0}][0]", "{0} // 2", "not {0}", "eval('{0}')",
])


@settings(deadline=None, max_examples=80)
@given(_expressions, _forbidden_inserts, st.booleans())
def test_any_expression_with_a_forbidden_construct_inside_is_refused(valid, template, wrap):
    text = template.format(valid)
    if wrap:
        text = f"1 + ({text}) * mass"
    if len(text) > MAX_EXPRESSION_LENGTH:
        text = template.format("mass")
    with pytest.raises(PlantError, match="uses|unknown name"):
        parse_expression(text, {"mass", "spring"}, "A")


def test_evaluation_on_arrays_gives_nonfinite_values_instead_of_raising():
    expression = parse_expression("1 / mass + log(mass)", {"mass"}, "A")
    values = expression.evaluate({"mass": np.array([1.0, 0.0, -1.0])})
    assert values[0] == 1.0 and not np.isfinite(values[1]) and not np.isfinite(values[2])


# -- plant files with parameters and operating points -------------------------------------------


def test_the_nominal_model_substitutes_every_nominal_value():
    family = parse_plant_family_text(SPRING_MASS)
    np.testing.assert_array_equal(family.nominal.A, [[0.0, 1.0], [-4.0, -0.5]])
    np.testing.assert_array_equal(family.nominal.B, [[0.0], [0.5]])
    # every single-model reader returns the same nominal model
    np.testing.assert_array_equal(parse_plant_text(SPRING_MASS).A, family.nominal.A)
    assert [model.name for model in family.models()] == ["nominal", "empty", "full"]


def test_operating_points_take_their_values_and_nominal_for_the_rest():
    family = parse_plant_family_text(SPRING_MASS)
    empty, full = family.model("empty"), family.model("full")
    assert empty.values == {"mass": 1.0, "spring": 8.0}
    np.testing.assert_array_equal(empty.plant.A[1], [-8.0, -0.5])
    np.testing.assert_array_equal(full.plant.A[1], [-9.0 / 4.0, -0.5])
    np.testing.assert_array_equal(full.plant.B[:, 0], [0.0, 0.25])
    # the default disturbance enters like the input, so it follows B at every point
    np.testing.assert_array_equal(full.plant.disturbance_matrix, full.plant.B)


def test_matrix_stacks_match_the_plant_of_each_sample():
    family = parse_plant_family_text(SPRING_MASS)
    masses, springs = np.array([1.0, 2.5, 3.9]), np.array([7.0, 8.0, 9.5])
    stacks = family.matrix_stacks({"mass": masses, "spring": springs})
    for i in range(3):
        plant = family.plant_at({"mass": masses[i], "spring": springs[i]})
        np.testing.assert_array_equal(stacks.A[i], plant.A)
        np.testing.assert_array_equal(stacks.B[i], plant.B)
    assert stacks.evaluable.all()


def test_a_sample_that_cannot_be_evaluated_is_flagged_with_its_entry():
    family = parse_plant_family_text(SPRING_MASS.replace("low = 1.0", "low = 0.0"))
    stacks = family.matrix_stacks({"mass": np.array([0.0, 2.0])})
    assert stacks.evaluable.tolist() == [False, True]
    assert stacks.first_bad_entry[0] == "[model] A row 2, column 1"


def _with(text, old, new):
    assert old in text
    return text.replace(old, new, 1)


@pytest.mark.parametrize(
    "change, message",
    [
        (("low = 1.0", "low = 5.0"), r"\[parameters.mass\]: low = 5 is above high = 4"),
        (("nominal = 2.0", "nominal = 5.0"), r"\[parameters.mass\]: nominal = 5 lies outside its range"),
        (("std = 0.5", "std = -0.5"), r"\[parameters.spring\]: std = -0.5 is negative"),
        (("nominal = 2.0\n", ""), r"\[parameters.mass\] must give nominal"),
        (("unit = \"kg\"", "units = \"kg\""), r"\[parameters.mass\] has unknown key\(s\) \['units'\]"),
        (("high = 4.0\n", ""), r"\[parameters.mass\]: a uniform range needs both low and high"),
        (("\"1 / mass\"", "\"1 / (mass - 2)\""), r"B row 2, column 1: '1 / \(mass - 2\)' is not a finite number at the nominal"),
        (("\"1 / mass\"", "\"1 / (mass - 4)\""), r"B row 2, column 1.*operating point 'full'"),
        (("\"1 / mass\"", "\"1 / weight\""), r"B row 2, column 1.*unknown name 'weight'"),
        (("\"1 / mass\"", "\"mass.__class__\""), r"B row 2, column 1.*attribute access"),
        (("values = { mass = 1.0 }", "values = { load = 1.0 }"), r"operating point 'empty' sets unknown parameter"),
        (("name = \"empty\"", "name = \"full\""), r"operating point 'full' appears twice"),
        (("name = \"empty\"", "name = \"nominal\""), r"the name 'nominal' is kept for the nominal model"),
        (("[parameters.mass]", "[parameters.__mass]"), r"a parameter name must be a plain identifier"),
        (("[parameters.mass]", "[parameters.pi]"), r"'pi' is a built-in name"),
    ],
)
def test_bad_family_input_is_refused_with_the_entry_or_parameter_named(change, message):
    with pytest.raises(PlantError, match=message):
        parse_plant_family_text(_with(SPRING_MASS, *change))


def test_every_single_model_reader_refuses_the_same_bad_family():
    with pytest.raises(PlantError, match=r"my.toml: \[parameters.mass\]: low = 5"):
        parse_plant_text(_with(SPRING_MASS, "low = 1.0", "low = 5.0"), "my.toml")


def test_a_plain_plant_file_is_a_family_of_one(tmp_path):
    path = tmp_path / "plain.toml"
    path.write_text("[model]\nA = [[-1.0]]\nB = [[1.0]]\n")
    from gainboard.core import load_plant_family_file

    family = load_plant_family_file(path)
    assert family.parameters == () and [m.name for m in family.models()] == ["nominal"]
    np.testing.assert_array_equal(family.nominal.A, load_plant_file(path).A)


def test_truncated_normal_samples_stay_inside_their_range_and_match_the_scipy_distribution():
    import scipy.stats

    family = parse_plant_family_text(SPRING_MASS.replace("std = 0.5", "std = 0.5\nlow = 7.5\nhigh = 9.0"))
    spring = family.parameter("spring")
    u = (np.arange(20_000) + 0.5) / 20_000
    values = spring.from_unit_interval(u)
    assert values.min() >= 7.5 and values.max() <= 9.0
    # reference: scipy.stats.truncnorm's quantiles of the same truncated normal
    reference = scipy.stats.truncnorm((7.5 - 8.0) / 0.5, (9.0 - 8.0) / 0.5, loc=8.0, scale=0.5).ppf(u)
    np.testing.assert_allclose(values, reference, rtol=0, atol=1e-9)
    assert math.isclose(family.parameter("mass").from_unit_interval(np.array([0.25]))[0], 1.75)
