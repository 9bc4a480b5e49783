"""Compensator exports: the C99 header compiled with the system compiler and the Python class, each run for
200 steps on the sampled plant against a numpy simulation of the same compensator (its state-space form from
gainboard.core, a different arrangement of the same equations); equal to 1e-12 relative.

References: scipy's expm for the ZOH plant (reference case 9 style check), the compensator equations of
Franklin, Powell & Workman, *Digital Control of Dynamic Systems*, ch. 8 (prediction and current estimators;
from memory), and Luenberger's reduced-order observer (1964).
"""

import json
import shutil
import subprocess

import numpy as np
import pytest
import scipy.linalg

from gainboard import core
from gainboard.app.compensator_export import export_compensator
from gainboard.app.design_file import Design, DesignFileError, EstimatorDesign
from gainboard.app.export import export_design

COMPILER = shutil.which("cc") or shutil.which("gcc")
needs_compiler = pytest.mark.skipif(COMPILER is None, reason="no C compiler (cc or gcc) on PATH")
C_FLAGS = ["-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic", "-O0"]
STEPS = 200


def c_literal(value: float) -> str:
    text = repr(float(value))
    return text if any(ch in text for ch in ".en") else text + ".0"


def c_array(name: str, matrix) -> str:
    rows = np.atleast_2d(np.asarray(matrix, dtype=float))
    body = ", ".join("{" + ", ".join(c_literal(v) for v in row) + "}" for row in rows)
    return f"static const double {name}[{rows.shape[0]}][{rows.shape[1]}] = {{{body}}};"


def numpy_run(record: dict, x0, reference):
    """The loop of the sampled plant and the compensator's state-space form (from the JSON export)."""
    A, B, C, D = (np.array(record[key]) for key in ("A", "B", "C", "D"))
    space = record["compensator_state_space"]
    Ac, By, Br, Cc, Dy, Dr = (np.array(space[key]) for key in ("A", "B_measured", "B_reference", "C", "D_measured",
                                                              "D_reference"))
    estimator = record["estimator"]
    H, J = np.array(estimator["H"]), np.array(estimator["J"])
    L = np.array(record["L"])
    k = H.shape[1]
    r = np.array(reference, dtype=float).reshape(-1)[: Br.shape[1]]
    x = np.array(x0, dtype=float)
    c = np.zeros(Ac.shape[0])
    if record["form"] == "reduced-order":
        c[:k] = -L @ (C @ x)  # w0 = M xhat0 − L y0 with xhat0 = 0
    inputs, estimates = [], []
    for _ in range(STEPS):
        if record["form"] == "prediction":
            u = Cc @ c + Dr @ r  # D_y = 0: u[k] before y[k]
            y = C @ x + D @ u
        else:
            y = C @ x  # D = 0 for these forms
            u = Cc @ c + Dy @ y + Dr @ r
        estimates.append(H @ c[:k] + J @ y)
        inputs.append(u)
        c = Ac @ c + By @ y + Br @ r
        x = A @ x + B @ u
    return np.array(inputs), np.array(estimates)


def c_run(tmp_path, header: str, record: dict, x0, reference):
    A, B, C, D = (np.array(record[key]) for key in ("A", "B", "C", "D"))
    n, m, p = A.shape[0], B.shape[1], C.shape[0]
    prefix = header.split("_compensator_state;")[0].rsplit("} ", 1)[1]
    has_reference = record["N"] is not None or record["Ki"] is not None
    t = len(record["reference_order"])
    ref_arg = "r, " if has_reference else ""
    lines = [c_array("plant_A", A), c_array("plant_B", B), c_array("plant_C", C), c_array("plant_D", D),
             "int main(void)", "{",
             f"    {prefix}_compensator_state state; double x[{n}] = {{{', '.join(c_literal(v) for v in x0)}}};",
             f"    double next[{n}], u[{m}], y[{p}], xhat[{n}]; const double zero[{n}] = {{0}}; int k, i, j;"]
    if has_reference:
        lines.append(f"    const double r[{t}] = {{{', '.join(c_literal(v) for v in reference[:t])}}};")
    if record["form"] == "reduced-order":
        lines.append(f"    for (i = 0; i < {p}; ++i) {{ y[i] = 0.0; for (j = 0; j < {n}; ++j) y[i] += plant_C[i][j] * x[j]; }}")
        lines.append(f"    {prefix}_compensator_reset(&state, zero, y);")
    else:
        lines.append(f"    {prefix}_compensator_reset(&state, zero);")
    lines.append(f"    for (k = 0; k < {STEPS}; ++k) {{")
    measure = (f"        for (i = 0; i < {p}; ++i) {{ y[i] = 0.0; for (j = 0; j < {n}; ++j) y[i] += plant_C[i][j] * x[j];"
               f" for (j = 0; j < {m}; ++j) y[i] += plant_D[i][j] * u[j]; }}")
    if record["form"] == "prediction":
        lines += [f"        {prefix}_compensator_output(&state, {ref_arg}u, xhat);", measure,
                  f"        {prefix}_compensator_advance(&state, y, {ref_arg if record['Ki'] is not None else ''}u);"]
    else:
        lines += [f"        for (i = 0; i < {m}; ++i) u[i] = 0.0;", measure,
                  f"        {prefix}_compensator_update(&state, y, {ref_arg}u, xhat);"]
    lines += [f'        for (i = 0; i < {m}; ++i) printf("%.17g ", u[i]);',
              f'        for (i = 0; i < {n}; ++i) printf("%.17g ", xhat[i]);', '        printf("\\n");',
              f"        for (i = 0; i < {n}; ++i) {{ next[i] = 0.0; for (j = 0; j < {n}; ++j) next[i] += plant_A[i][j] * x[j];"
              f" for (j = 0; j < {m}; ++j) next[i] += plant_B[i][j] * u[j]; }}",
              f"        for (i = 0; i < {n}; ++i) x[i] = next[i];", "    }", "    return 0;", "}"]
    (tmp_path / "compensator.h").write_text(header, encoding="utf-8")
    (tmp_path / "main.c").write_text('#include <stdio.h>\n#include "compensator.h"\n\n' + "\n".join(lines) + "\n")
    built = subprocess.run([COMPILER, *C_FLAGS, "main.c", "-o", "program", "-lm"], cwd=tmp_path, capture_output=True,
                           text=True, timeout=60)
    assert built.returncode == 0, f"the exported header does not compile:\n{built.stderr}"
    ran = subprocess.run(["./program"], cwd=tmp_path, capture_output=True, text=True, timeout=30)
    assert ran.returncode == 0, ran.stderr
    values = np.array([[float(v) for v in line.split()] for line in ran.stdout.strip().split("\n")])
    return values[:, :m], values[:, m:]


def python_run(source: str, record: dict, x0, reference):
    namespace = {}
    exec(source, namespace)
    A, B, C, D = (np.array(record[key]) for key in ("A", "B", "C", "D"))
    has_reference = record["N"] is not None or record["Ki"] is not None
    r = list(reference[: len(record["reference_order"])]) if has_reference else None
    x = np.array(x0, dtype=float)
    first = list(C @ x) if record["form"] == "reduced-order" else None
    compensator = namespace["Compensator"](first_output=first)
    inputs, estimates = [], []
    for _ in range(STEPS):
        if record["form"] == "prediction":
            u = np.array(compensator.output(r))
            y = C @ x + D @ u
            compensator.advance(list(y), list(u), r)
        else:
            y = C @ x
            u = np.array(compensator.update(list(y), r))
        inputs.append(u)
        estimates.append(compensator.last_estimate)
        x = A @ x + B @ u
    return np.array(inputs), np.array(estimates)


def assert_relative(got, expected, tolerance=1e-12):
    scale = np.max(np.abs(expected), axis=0)
    assert np.all(np.abs(got - expected) <= tolerance * np.maximum(scale, np.finfo(float).tiny)), (
        np.max(np.abs(got - expected) / np.maximum(scale, np.finfo(float).tiny)))


def _cases():
    rng = np.random.default_rng(20261202)
    # prediction, with feedthrough D and a prefilter N (invented three-state plant)
    plant = core.Plant(A=rng.normal(size=(3, 3)) * 0.4 + np.eye(3) * 0.6, B=rng.normal(size=(3, 1)),
                       C=rng.normal(size=(2, 3)), D=[[0.3], [0.0]], sample_time=0.02, name="prediction stage",
                       tracked_outputs=(0,))
    K = core.assign_poles(plant, [0.5, 0.6, 0.7]).gain
    L = core.assign_estimator_poles(plant, [0.2, 0.3, 0.1], form="prediction").gain
    N = core.reference_prefilter(plant, K)
    yield "prediction", Design(plant=plant, gain=K, prefilter=N,
                               estimator=EstimatorDesign(form="prediction", gain=L)), None, [1.0, -0.5, 0.2]
    # current, with integral action
    plant = core.Plant(A=rng.normal(size=(3, 3)) * 0.4 + np.eye(3) * 0.6, B=rng.normal(size=(3, 1)),
                       C=rng.normal(size=(1, 3)), sample_time=0.05, name="current stage")
    extended = core.augment_with_integral_action(plant)
    gain = core.assign_poles(extended, [0.5, 0.6, 0.7, 0.8]).gain
    L = core.assign_estimator_poles(plant, [0.2, 0.3, 0.1], form="current").gain
    yield "current", Design(plant=plant, gain=gain[:, :3], integral_gain=gain[:, 3:],
                            estimator=EstimatorDesign(form="current", gain=L)), None, [0.5, 0.0, -1.0]
    # continuous reduced-order design, discretised for a 5 ms controller
    plant = core.Plant(A=[[0.0, 1.0, 0.0, 0.0], [0.0, -3.0, -1.1, 0.0], [0.0, 0.0, 0.0, 1.0], [0.0, 7.2, 26.4, -0.06]],
                       B=[[0.0], [0.71], [0.0], [-1.73]], C=[[1.0, 0.0, 0.0, 0.0], [0.0, 0.0, 57.3, 0.0]],
                       name="reduced stage")
    K = core.assign_poles(plant, [-3 + 2j, -3 - 2j, -4.0, -5.0]).gain
    L = core.assign_estimator_poles(plant, [-12.0, -15.0], form="reduced-order").gain
    yield "reduced-order", Design(plant=plant, gain=K, estimator=EstimatorDesign(form="reduced-order", gain=L)), \
        0.005, [0.1, 0.0, 0.05, 0.0]
    # continuous Kalman design, discretised as a current estimator for a 10 ms controller
    plant = plant.with_changes(name="kalman stage", noise=core.noise_intensities([0.0, 0.1, 0.0, 1.0], [1e-6, 0.01]))
    result = core.design_kalman_estimator(plant)
    yield "current", Design(plant=plant, gain=K, estimator=EstimatorDesign.from_result(result)), 0.01, \
        [0.1, 0.0, 0.05, 0.0]


CASES = list(_cases())


@needs_compiler
@pytest.mark.parametrize("form, design, sample_time, x0", CASES, ids=[c[1].plant.name for c in CASES])
def test_c_header_runs_200_steps_equal_to_numpy_within_1e_12(tmp_path, form, design, sample_time, x0):
    sampled_form = "current" if form == "current" else "prediction"
    record = json.loads(export_compensator(design, "json", sample_time, sampled_form))
    assert record["form"] == form
    header = export_compensator(design, "c", sample_time, sampled_form)
    reference = [1.0, 1.0]
    expected_u, expected_xhat = numpy_run(record, x0, reference)
    got_u, got_xhat = c_run(tmp_path, header, record, x0, reference)
    assert_relative(got_u, expected_u)
    assert_relative(got_xhat, expected_xhat)
    assert np.max(np.abs(expected_u)) > 0  # the comparison is not of zeros


@pytest.mark.parametrize("form, design, sample_time, x0", CASES, ids=[c[1].plant.name for c in CASES])
def test_python_class_runs_200_steps_equal_to_numpy_within_1e_12(form, design, sample_time, x0):
    sampled_form = "current" if form == "current" else "prediction"
    record = json.loads(export_compensator(design, "json", sample_time, sampled_form))
    source = export_compensator(design, "python", sample_time, sampled_form)
    reference = [1.0, 1.0]
    expected_u, expected_xhat = numpy_run(record, x0, reference)
    got_u, got_xhat = python_run(source, record, x0, reference)
    assert_relative(got_u, expected_u)
    assert_relative(got_xhat, expected_xhat)


def test_numpy_simulation_of_the_export_tracks_the_true_state():
    # The estimate converges to the plant state (the point of an estimator), here on the reduced-order case.
    form, design, sample_time, x0 = CASES[2]
    record = json.loads(export_compensator(design, "json", sample_time))
    A, B = np.array(record["A"]), np.array(record["B"])
    inputs, estimates = numpy_run(record, x0, [1.0])
    x = np.array(x0)
    for k in range(STEPS - 1):
        x = A @ x + B @ inputs[k]
    assert np.max(np.abs(estimates[-1] - x)) < 1e-3 * np.max(np.abs(x0))


def test_continuous_design_is_sampled_with_scipy_expm_and_the_file_says_how():
    form, design, sample_time, x0 = CASES[2]
    record = json.loads(export_compensator(design, "json", sample_time))
    # ZOH: exp([[A, B], [0, 0]] T) = [[Φ, Γ], [0, I]] (Van Loan; scipy's expm as the reference)
    n = design.plant.state_count
    block = np.zeros((n + 1, n + 1))
    block[:n, :n], block[:n, n:] = design.plant.A, design.plant.B
    exponential = scipy.linalg.expm(block * sample_time)
    np.testing.assert_allclose(record["A"], exponential[:n, :n], rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(record["B"], exponential[:n, n:], rtol=1e-12, atol=1e-15)
    # the estimator poles are the continuous ones mapped by z = e^{sT} (exact map of the error modes)
    np.testing.assert_allclose(sorted(p[0] for p in record["estimator_poles"]),
                               np.exp(np.array([-15.0, -12.0]) * sample_time), rtol=1e-9)
    assert any("z = e^(sT)" in step for step in record["how_made"])
    header = export_compensator(design, "c", sample_time)
    assert "emergency stops" in header and "zero-order hold" in header


def test_compensator_exports_are_refused_without_what_they_need():
    form, design, sample_time, x0 = CASES[2]
    with pytest.raises(DesignFileError, match="needs a sample time"):
        export_design(design, "c")
    with pytest.raises(DesignFileError, match="no estimator"):
        export_compensator(Design(plant=design.plant, gain=design.gain), "c", 0.01)
    with pytest.raises(DesignFileError, match="has no estimator"):
        export_design(Design(plant=design.plant, gain=design.gain), "c", sample_time=0.01)
    with pytest.raises(DesignFileError, match="unstable"):
        export_design(design, "c", sample_time=0.5)
    csv_text = export_design(design, "csv")  # CSV keeps describing K
    assert csv_text.count("\nK,") == 4
