"""Export the observer-based compensator where firmware and scripts run it: C99, Python, JSON.

A design with an estimator (:class:`gainboard.app.design_file.EstimatorDesign`) is exported
as the update equations of its sampled estimator form and the control law
u = −K x̂ (+ N r − Ki ξ): a C99 header with a state struct and update functions, a
Python class, and JSON with every matrix. A continuous design is first made ready for a
controller period T (:func:`gainboard.core.sample_observer_design`, every step stated in
the file). UI-free: numpy and the core only. Numbers read back to the same double
(``%.17g`` in C, ``repr`` in Python and JSON).

The update equations, per form (y measured at sample k, r the reference, ξ the integrals):

prediction   u = −K x̂ + N r − Ki ξ;  x̂ ← A x̂ + B u + L (y − C x̂ − D u);  ξ ← ξ + T (r − y_t)
current      x̂ = x̄ + L (y − C x̄);  u = −K x̂ + N r − Ki ξ;  x̄ ← A x̂ + B u;  ξ ← ξ + T (r − y_t)
reduced      x̂ = H w + J y;  u = −K x̂ + N r − Ki ξ;  w ← F w + G_y y + G_u u;  ξ ← ξ + T (r − y_t)

With the prediction form u[k] does not need y[k], so the export splits the step into
``output`` (before sampling y) and ``advance`` (after); the other forms have one ``update``.
"""

from __future__ import annotations

import textwrap

import numpy as np

from gainboard import core

from .design_file import Design, DesignFileError, generator_name, readable_json
from .export import (
    _c_comment_block,
    _c_double,
    _c_matrix,
    _c_string_array,
    _caution,
    _printable,
    _py_float,
    _unique,
    _with_unit,
    c_identifier,
)

__all__ = ["COMPENSATOR_EXPORT_FORMATS", "COMPENSATOR_EXPORT_FORMAT", "CompensatorExport", "compensator_export",
           "export_compensator"]

#: Formats that export the compensator (the CSV and HTML exports keep describing K).
COMPENSATOR_EXPORT_FORMATS = ("json", "c", "python")
#: Value of the "format" key of a JSON compensator export.
COMPENSATOR_EXPORT_FORMAT = "gainboard-compensator"

# Per form: how the estimate is formed before the control law, and how the memory advances after it.
_EQUATIONS = {
    "prediction": ("", "xhat <- A xhat + B u + L (y - C xhat - D u)"),
    "current": ("xhat = xbar + L (y - C xbar)", "xbar <- A xhat + B u"),
    "reduced-order": ("xhat = H w + J y", "w <- F w + Gy y + Gu u"),
}


class CompensatorExport:
    """The numbers an export writes: the sampled design and its estimator realisation."""

    def __init__(self, design: Design, sampled: core.SampledObserverDesign):
        self.design = design
        self.sampled = sampled
        self.plant = sampled.plant
        self.realization = core.estimator_realization(sampled.plant, sampled.estimator_gain, sampled.form)
        self.tracked = list(sampled.plant.tracked_outputs[: 0 if sampled.integral_gain is None
                                                         else sampled.integral_gain.shape[1]])

    @property
    def has_reference(self) -> bool:
        return self.sampled.prefilter is not None or self.sampled.integral_gain is not None

    def law(self) -> str:
        terms = ["-K xhat"] + (["+ N r"] if self.sampled.prefilter is not None else []) + (
            ["- Ki xi"] if self.sampled.integral_gain is not None else [])
        return "u = " + " ".join(terms)

    def equations(self) -> list[str]:
        """The update equations of one period, in order."""
        before, after = _EQUATIONS[self.sampled.form]
        steps = ([before] if before else []) + [self.law(), "apply u", after]
        if self.sampled.integral_gain is not None:
            steps.append("xi <- xi + T (r - y_t)")
        return steps

    def description_lines(self) -> list[str]:
        plant, sampled = self.plant, self.sampled
        lines = [
            f"{self.design.plant.name}: observer-based compensator exported by {generator_name()}",
            f"from the design last modified {self.design.modified}.",
            "",
            *textwrap.wrap("CAUTION: " + _caution(), 88),
            "",
            *textwrap.wrap(f"Control law: {self.law()} with the {sampled.form} estimator, run once per sample "
                           f"period T = {plant.sample_time!r} s and held (zero-order hold).", 88),
            *textwrap.wrap("Each period: " + "; ".join(self.equations()) + ".", 88),
            *textwrap.wrap("The estimator is fed the input actually applied: if the controller saturates u, "
                           "pass the saturated value on (saturation and anti-windup are the controller's job).", 88),
            "",
            "How this was made:",
            *("  " + step for step in sampled.steps),
            "Estimator poles (z): " + ", ".join(f"{complex(p):.6g}" for p in sampled.estimator_poles),
            "Closed-loop poles (z): " + ", ".join(f"{complex(p):.6g}" for p in sampled.closed_loop_poles),
            "",
            "State x (the columns of K and the rows of L for the full-order forms):",
        ]
        lines += [f"  x[{j}]  {_with_unit(name, unit)}" for j, (name, unit) in
                  enumerate(zip(plant.state_names, plant.state_units))]
        lines.append("Measured outputs y (the columns of L):")
        lines += [f"  y[{i}]  {_with_unit(name, unit)}" for i, (name, unit) in
                  enumerate(zip(plant.output_names, plant.output_units))]
        lines.append("Inputs u (the rows of K):")
        lines += [f"  u[{i}]  {_with_unit(name, unit)}" for i, (name, unit) in
                  enumerate(zip(plant.input_names, plant.input_units))]
        if self.has_reference:
            lines.append("References r (tracked outputs):")
            lines += [f"  r[{k}]  {plant.output_names[i]}" for k, i in enumerate(plant.tracked_outputs)]
        return lines


def compensator_export(design: Design, sample_time: float | None = None, sampled_form: str = "prediction") -> CompensatorExport:
    """The sampled compensator of ``design`` (which must have an estimator), ready to write."""
    if design.estimator is None:
        raise DesignFileError("this design has no estimator; add an estimator gain L to export a compensator")
    settings = design.estimator
    try:
        sampled = core.sample_observer_design(
            design.plant, design.gain, settings.gain, sample_time, form=settings.form, sampled_form=sampled_form,
            prefilter=design.prefilter, integral_gain=design.integral_gain,
            kalman=settings.method == "steady-state Kalman filter",
            process_noise=settings.process_noise, measurement_noise=settings.measurement_noise)
    except core.GainboardError as error:
        raise DesignFileError(f"cannot export the compensator: {error}") from None
    return CompensatorExport(design, sampled)


def export_compensator(design: Design, format: str, sample_time: float | None = None,  # noqa: A002
                       sampled_form: str = "prediction", prefix: str | None = None) -> str:
    """The compensator of ``design`` as JSON, a C99 header or a Python class.

    Parameters
    ----------
    design : Design
        A design with an estimator.
    format : {"json", "c", "python"}
    sample_time : float, optional
        Controller period in seconds, required for a continuous design.
    sampled_form : {"prediction", "current"}
        Sampled estimator form for a continuous full-order design.
    prefix : str, optional
        Prefix of the C names (checked by the caller); made from the plant name when omitted.

    Raises
    ------
    DesignFileError
        Without an estimator, for an unknown format, a missing sample time or an unstable sampled loop.
    """
    writers = {"json": _json, "c": _c_header, "python": _python}
    if format not in writers:
        raise DesignFileError(f"the compensator is exported as {', '.join(COMPENSATOR_EXPORT_FORMATS)}, not {format!r}")
    export = compensator_export(design, sample_time, sampled_form)
    return _c_header(export, prefix) if format == "c" else writers[format](export)


# -- JSON ----------------------------------------------------------------------------------------


def _rows(matrix) -> list | None:
    return None if matrix is None else [[float(v) for v in row] for row in np.atleast_2d(np.asarray(matrix, dtype=float))]


def _json(export: CompensatorExport) -> str:
    plant, sampled, realization = export.plant, export.sampled, export.realization
    compensator = core.observer_based_compensator(plant, sampled.state_gain, sampled.estimator_gain, form=sampled.form,
                                                  prefilter=sampled.prefilter, integral_gain=sampled.integral_gain)
    record = {
        "format": COMPENSATOR_EXPORT_FORMAT,
        "version": 1,
        "caution": _caution(),
        "generator": generator_name(),
        "design_modified": export.design.modified,
        "plant": export.design.plant.name,
        "form": sampled.form,
        "sample_time": plant.sample_time,
        "control_law": export.law(),
        "update_equations": export.equations(),
        "how_made": list(sampled.steps),
        "state_order": list(plant.state_names),
        "output_order": list(plant.output_names),
        "input_order": list(plant.input_names),
        "reference_order": [plant.output_names[i] for i in plant.tracked_outputs] if export.has_reference else [],
        "A": _rows(plant.A), "B": _rows(plant.B), "C": _rows(plant.C), "D": _rows(plant.D),
        "K": _rows(sampled.state_gain), "L": _rows(sampled.estimator_gain),
        "N": _rows(sampled.prefilter), "Ki": _rows(sampled.integral_gain),
        "estimator": {"F": _rows(realization.F), "Gy": _rows(realization.G_y), "Gu": _rows(realization.G_u),
                      "H": _rows(realization.H), "J": _rows(realization.J)},
        "compensator_state_space": {
            "state_order": list(compensator.state_names),
            "A": _rows(compensator.A), "B_measured": _rows(compensator.B_measured),
            "B_reference": _rows(compensator.B_reference), "C": _rows(compensator.C),
            "D_measured": _rows(compensator.D_measured), "D_reference": _rows(compensator.D_reference),
        },
        "estimator_poles": [[float(p.real), float(p.imag)] for p in sampled.estimator_poles],
        "closed_loop_poles": [[float(p.real), float(p.imag)] for p in sampled.closed_loop_poles],
    }
    return readable_json(record) + "\n"


# -- C99 -----------------------------------------------------------------------------------------


class _CNames:
    def __init__(self, plant: core.Plant, prefix: str | None = None):
        prefix = prefix or c_identifier(plant.name, "plant")
        self.lower, self.upper = prefix.lower(), prefix.upper()
        self.n, self.m, self.p = (f"{self.upper}_{what}_COUNT" for what in ("STATE", "INPUT", "OUTPUT"))
        self.k, self.t = f"{self.upper}_ESTIMATOR_STATE_COUNT", f"{self.upper}_REFERENCE_COUNT"
        self.q = f"{self.upper}_INTEGRATOR_COUNT"


def _loop(target: str, rows: str, terms: list[tuple], indent: str = "    ") -> list[str]:
    """C loops target[i] = Σ sign · M[i][j] · v[j] over the terms (sign, matrix or None, vector, width)."""
    lines = [f"{indent}for (i = 0; i < {rows}; ++i) {{", f"{indent}    double sum = 0.0;"]
    for sign, matrix, vector, width in terms:
        if matrix is None:
            lines.append(f"{indent}    sum {sign}= {vector}[i];")
            continue
        lines += [f"{indent}    for (j = 0; j < {width}; ++j) {{", f"{indent}        sum {sign}= {matrix}[i][j] * {vector}[j];",
                  f"{indent}    }}"]
    lines += [f"{indent}    {target}[i] = sum;", f"{indent}}}"]
    return lines


def _c_header(export: CompensatorExport, prefix: str | None = None) -> str:
    plant, sampled, realization = export.plant, export.sampled, export.realization
    names = _CNames(export.design.plant, prefix)
    lo = names.lower
    k = realization.F.shape[0]
    q = 0 if sampled.integral_gain is None else sampled.integral_gain.shape[1]
    t = len(plant.tracked_outputs)
    guard = f"GAINBOARD_{names.upper}_COMPENSATOR_H"
    input_labels = [_with_unit(n, u) for n, u in zip(plant.input_names, plant.input_units)]
    state_labels = [_with_unit(n, u) for n, u in zip(plant.state_names, plant.state_units)]
    output_labels = [_with_unit(n, u) for n, u in zip(plant.output_names, plant.output_units)]
    estimator_labels = list(realization.state_names)
    parts = [_c_comment_block(export.description_lines()), "", f"#ifndef {guard}", f"#define {guard}", "",
             "#include <stddef.h> /* NULL */", "",
             f"#define {names.n} {plant.state_count}", f"#define {names.m} {plant.input_count}",
             f"#define {names.p} {plant.output_count}", f"#define {names.k} {k}"]
    if export.has_reference:
        parts.append(f"#define {names.t} {t}")
    if q:
        parts.append(f"#define {names.q} {q}")
    parts.append(f"#define {names.upper}_SAMPLE_TIME_S {_c_double(plant.sample_time)} /* seconds */")
    state_ids = _unique([c_identifier(n, f"x{j + 1}").upper() for j, n in enumerate(plant.state_names)])
    output_ids = _unique([c_identifier(n, f"y{j + 1}").upper() for j, n in enumerate(plant.output_names)])
    parts += ["", "/* Position of each state in x and xhat, and of each output in y. */"]
    parts += [f"#define {names.upper}_X_{ident} {j}" for j, ident in enumerate(state_ids)]
    parts += [f"#define {names.upper}_Y_{ident} {j}" for j, ident in enumerate(output_ids)]

    def matrix(label, value, rows, cols, row_labels):
        parts.extend(["", f"/* {label} */", _c_matrix(f"{lo}_{label.split()[0]}", rows, cols, value, row_labels)])

    matrix("K (state-feedback gain: one row per input, one column per state)", sampled.state_gain, names.m, names.n,
           input_labels)
    if sampled.form == "reduced-order":
        matrix("F (estimator state matrix)", realization.F, names.k, names.k, estimator_labels)
        matrix("GY (how y drives the estimator state)", realization.G_y, names.k, names.p, estimator_labels)
        matrix("GU (how u drives the estimator state)", realization.G_u, names.k, names.m, estimator_labels)
        matrix("H (estimate from the estimator state)", realization.H, names.n, names.k, state_labels)
        matrix("J (estimate from the measured outputs)", realization.J, names.n, names.p, state_labels)
        matrix("M (estimator start: w0 = M xhat0 - L y0)", realization.start_from_estimate, names.k, names.n,
               estimator_labels)
        matrix("L (reduced-order estimator gain)", sampled.estimator_gain, names.k, names.p, estimator_labels)
    else:
        matrix("A (sampled plant state matrix)", plant.A, names.n, names.n, state_labels)
        matrix("B (sampled plant input matrix)", plant.B, names.n, names.m, state_labels)
        matrix("C (output matrix)", plant.C, names.p, names.n, output_labels)
        if sampled.form == "prediction":
            matrix("D (feedthrough)", plant.D, names.p, names.m, output_labels)
        matrix("L (estimator gain: one row per state, one column per output)", sampled.estimator_gain, names.n,
               names.p, state_labels)
    if sampled.prefilter is not None:
        matrix("N (reference prefilter: one row per input, one column per reference)", sampled.prefilter, names.m,
               names.t, input_labels)
    if q:
        matrix("KI (integral gain: one row per input, one column per integrator)", sampled.integral_gain, names.m,
               names.q, input_labels)
        parts += ["", "/* Which output each integrator integrates. */",
                  f"static const int {lo}_integrated_output[{names.q}] = {{ "
                  + ", ".join(str(i) for i in export.tracked) + " };"]
    parts += ["", "/* Names as UTF-8 strings, in vector order. */",
              _c_string_array(f"{lo}_state_names", names.n, plant.state_names),
              _c_string_array(f"{lo}_output_names", names.p, plant.output_names),
              _c_string_array(f"{lo}_input_names", names.m, plant.input_names), ""]

    struct = f"{lo}_compensator_state"
    parts += [
        "/* The compensator's memory: keep one per controller instance. */",
        "typedef struct {",
        f"    double estimate[{names.k}]; /* {_state_meaning(sampled.form)} */",
    ]
    if q:
        parts.append(f"    double integral[{names.q}]; /* xi: integrals of the tracking errors */")
    parts += [f"}} {struct};", ""]
    parts += _c_functions(export, names, struct, q)
    parts += ["", f"#endif /* {guard} */", ""]
    return "\n".join(parts)


def _state_meaning(form: str) -> str:
    return {"prediction": "xhat[k]: estimate of x from y up to k-1",
            "current": "xbar[k]: prediction of x before y[k] arrives",
            "reduced-order": "w: reduced-order estimator state (zhat = w + L y)"}[form]


def _control_law_lines(export, names, lo, q, indent="    ") -> list[str]:
    terms = [("-", f"{lo}_K", "xhat", names.n)]
    if export.sampled.prefilter is not None:
        terms.append(("+", f"{lo}_N", "r", names.t))
    if q:
        terms.append(("-", f"{lo}_KI", "state->integral", names.q))
    return _loop("u", names.m, terms, indent)


def _integral_lines(names, lo, q) -> list[str]:
    if not q:
        return []
    return [f"    for (i = 0; i < {names.q}; ++i) {{",
            f"        state->integral[i] += {names.upper}_SAMPLE_TIME_S * (r[i] - y[{lo}_integrated_output[i]]);",
            "    }"]


def _c_functions(export: CompensatorExport, names: _CNames, struct: str, q: int) -> list[str]:
    lo, form = names.lower, export.sampled.form
    reference = [f"const double r[{names.t}]"] if export.has_reference else []
    lines = ["/* Start the estimator from the estimate xhat0 (zeros: knowing nothing)"
             + (" and the first measurement y0" if form == "reduced-order" else "") + "; integrals start at 0. */",
             f"static inline void {lo}_compensator_reset({struct} *state, const double xhat0[{names.n}]"
             + (f", const double y0[{names.p}]" if form == "reduced-order" else "") + ")",
             "{", "    int i, j;"]
    if form == "reduced-order":
        lines += _loop("state->estimate", names.k, [("+", f"{lo}_M", "xhat0", names.n),
                                                          ("-", f"{lo}_L", "y0", names.p)])
    else:
        lines += [f"    for (i = 0; i < {names.k}; ++i) {{", "        state->estimate[i] = xhat0[i];", "    }",
                  "    (void)j;"]
    if q:
        lines += [f"    for (i = 0; i < {names.q}; ++i) {{", "        state->integral[i] = 0.0;", "    }"]
    lines += ["}", ""]
    xhat_out = f"double xhat_out[{names.n}]"
    if form == "prediction":
        lines += [
            "/* Step 1, before y[k] is needed: u[k] from the current estimate. xhat_out may be NULL. */",
            f"static inline void {lo}_compensator_output(const {struct} *state, "
            + ", ".join(reference + [f"double u[{names.m}]", xhat_out]) + ")",
            "{", "    int i, j;", "    const double *xhat = state->estimate;",
            *_control_law_lines(export, names, lo, q),
            f"    if (xhat_out != NULL) {{ for (i = 0; i < {names.n}; ++i) xhat_out[i] = xhat[i]; }}", "}", "",
            "/* Step 2, after applying u[k] and sampling y[k]: advance the estimate"
            + (" and the integrals (r is needed for them)." if q else ".") + " */",
            f"static inline void {lo}_compensator_advance({struct} *state, const double y[{names.p}], "
            + ", ".join((reference if q else []) + [f"const double u[{names.m}]"]) + ")",
            "{", "    int i, j;", f"    double innovation[{names.p}], next[{names.n}];",
            "    const double *xhat = state->estimate;",
            *_loop("innovation", names.p, [("+", None, "y", None), ("-", f"{lo}_C", "xhat", names.n),
                                                 ("-", f"{lo}_D", "u", names.m)]),
            *_loop("next", names.n, [("+", f"{lo}_A", "xhat", names.n), ("+", f"{lo}_B", "u", names.m),
                                           ("+", f"{lo}_L", "innovation", names.p)]),
            *_integral_lines(names, lo, q),
            f"    for (i = 0; i < {names.n}; ++i) {{", "        state->estimate[i] = next[i];", "    }", "}",
        ]
        return lines
    signature = (f"static inline void {lo}_compensator_update({struct} *state, const double y[{names.p}], "
                 + ", ".join(reference + [f"double u[{names.m}]", xhat_out]) + ")")
    lines += ["/* One period: y[k] in, u[k] out (apply it at once), memory advanced. xhat_out may be NULL. */",
              signature, "{", "    int i, j;", f"    double xhat[{names.n}], next[{names.k}];"]
    if form == "current":
        lines += [
            f"    double innovation[{names.p}];",
            *_loop("innovation", names.p, [("+", None, "y", None), ("-", f"{lo}_C", "state->estimate", names.n)]),
            *_loop("xhat", names.n, [("+", None, "state->estimate", None),
                                           ("+", f"{lo}_L", "innovation", names.p)]),
            *_control_law_lines(export, names, lo, q),
            *_loop("next", names.n, [("+", f"{lo}_A", "xhat", names.n), ("+", f"{lo}_B", "u", names.m)]),
        ]
    else:
        lines += [
            *_loop("xhat", names.n, [("+", f"{lo}_H", "state->estimate", names.k), ("+", f"{lo}_J", "y", names.p)]),
            *_control_law_lines(export, names, lo, q),
            *_loop("next", names.k, [("+", f"{lo}_F", "state->estimate", names.k),
                                           ("+", f"{lo}_GY", "y", names.p), ("+", f"{lo}_GU", "u", names.m)]),
        ]
    lines += [*_integral_lines(names, lo, q),
              f"    for (i = 0; i < {names.k}; ++i) {{", "        state->estimate[i] = next[i];", "    }",
              f"    if (xhat_out != NULL) {{ for (i = 0; i < {names.n}; ++i) xhat_out[i] = xhat[i]; }}", "}"]
    return lines


# -- Python --------------------------------------------------------------------------------------


def _py_rows(name: str, matrix) -> str:
    if matrix is None:
        return f"{name} = None"
    rows = np.atleast_2d(np.asarray(matrix, dtype=float))
    return f"{name} = [\n" + "".join("    [" + ", ".join(_py_float(v) for v in row) + "],\n" for row in rows) + "]"


def _python(export: CompensatorExport) -> str:
    plant, sampled, realization = export.plant, export.sampled, export.realization
    header = "\n".join(("# " + _printable(line, escape_backslash=False)).rstrip() for line in export.description_lines())
    matrices = [("K", sampled.state_gain), ("L", sampled.estimator_gain), ("N", sampled.prefilter),
                ("KI", sampled.integral_gain)]
    if sampled.form == "reduced-order":
        matrices += [("F", realization.F), ("GY", realization.G_y), ("GU", realization.G_u), ("H", realization.H),
                     ("J", realization.J), ("M", realization.start_from_estimate)]
    else:
        matrices += [("A", plant.A), ("B", plant.B), ("C", plant.C), ("D", plant.D)]
    blocks = "\n\n".join(_py_rows(name, value) for name, value in matrices)
    return f'''{header}
# Plain Python lists, no numpy needed.

FORM = {sampled.form!r}
SAMPLE_TIME = {_py_float(plant.sample_time)}  # seconds
STATE_NAMES = {list(plant.state_names)!r}
OUTPUT_NAMES = {list(plant.output_names)!r}
INPUT_NAMES = {list(plant.input_names)!r}
INTEGRATED_OUTPUTS = {export.tracked!r}  # which output each integrator integrates

{blocks}


def _times(matrix, vector):
    return [sum(a * b for a, b in zip(row, vector)) for row in matrix]


def _sum(*vectors):
    return [sum(values) for values in zip(*vectors)]


def _minus(vector):
    return [-value for value in vector]


class Compensator:
    """{export.law()} with the {sampled.form} estimator, once per sample period; no saturation, no anti-windup."""

    def __init__(self, initial_estimate=None, first_output=None):
        self.reset(initial_estimate, first_output)

    def reset(self, initial_estimate=None, first_output=None):
        """Start from an estimate of x (zeros when None); the reduced-order form also reads y0."""
        xhat0 = [0.0] * len(STATE_NAMES) if initial_estimate is None else [float(v) for v in initial_estimate]
        if FORM == "reduced-order":
            y0 = [0.0] * len(OUTPUT_NAMES) if first_output is None else list(first_output)
            self.estimate = _sum(_times(M, xhat0), _minus(_times(L, y0)))
        else:
            self.estimate = xhat0
        self.integral = [0.0] * len(INTEGRATED_OUTPUTS)
        self.last_estimate = None

    def _law(self, xhat, r):
        u = _minus(_times(K, xhat))
        if N is not None:
            if r is None:
                raise ValueError("this design has a prefilter N: give the reference r")
            u = _sum(u, _times(N, r))
        if KI is not None:
            u = _sum(u, _minus(_times(KI, self.integral)))
        return u

    def _integrate(self, y, r):
        if KI is not None:
            if r is None:
                raise ValueError("this design has integral action: give the reference r")
            self.integral = [xi + SAMPLE_TIME * (r[i] - y[INTEGRATED_OUTPUTS[i]]) for i, xi in enumerate(self.integral)]

    def output(self, r=None):
        """Prediction form, step 1 (before y[k] is needed): u[k] from the current estimate."""
        if FORM != "prediction":
            raise ValueError("only the prediction form splits the step; call update(y, r)")
        self.last_estimate = list(self.estimate)
        return self._law(self.estimate, r)

    def advance(self, y, u, r=None):
        """Prediction form, step 2 (after applying u[k] and sampling y[k]): advance the estimate."""
        innovation = _sum(y, _minus(_times(C, self.estimate)), _minus(_times(D, u)))
        self.estimate = _sum(_times(A, self.estimate), _times(B, u), _times(L, innovation))
        self._integrate(y, r)

    def update(self, y, r=None):
        """One period for the current and reduced-order forms: y[k] in, u[k] out (apply it at once)."""
        if FORM == "prediction":
            raise ValueError("the prediction form runs output(r) before and advance(y, u, r) after sampling y")
        if FORM == "current":
            innovation = _sum(y, _minus(_times(C, self.estimate)))
            xhat = _sum(self.estimate, _times(L, innovation))
            u = self._law(xhat, r)
            self.estimate = _sum(_times(A, xhat), _times(B, u))
        else:
            xhat = _sum(_times(H, self.estimate), _times(J, y))
            u = self._law(xhat, r)
            self.estimate = _sum(_times(F, self.estimate), _times(GY, y), _times(GU, u))
        self._integrate(y, r)
        self.last_estimate = xhat
        return u
'''
