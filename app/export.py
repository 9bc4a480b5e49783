"""Export the gains of a design where they are used: JSON, CSV, a C header, a Python snippet, an HTML report.

Every export carries the state order, input order, units, sample time, the control
law, a note of what produced it and the safety caution. Numbers are written so they
read back to the same double: ``repr`` (shortest exact text) in JSON, CSV and Python,
``%.17g`` in C. Exports are deterministic: they name the design's modification time,
not the time of export, so an unchanged design exports to an unchanged file.

Use :func:`export_design` (the command line's ``gainboard export`` calls it)::

    text = export_design(design, "c")
"""

from __future__ import annotations

import csv
import io
import math
import re
import textwrap
import unicodedata

import numpy as np

from .design_file import Design, DesignFileError, generator_name, readable_json

__all__ = [
    "EXPORT_FORMATS",
    "EXPORT_FILE_SUFFIXES",
    "GAIN_EXPORT_FORMAT",
    "export_design",
    "export_json",
    "export_csv",
    "export_c_header",
    "export_python",
    "c_identifier",
    "checked_prefix",
    "CSV_COLUMNS",
]

#: Formats accepted by :func:`export_design`, in the order the command line lists them.
EXPORT_FORMATS = ("json", "csv", "c", "python", "html")
#: Usual file name suffix of each format.
EXPORT_FILE_SUFFIXES = {"json": ".json", "csv": ".csv", "c": ".h", "python": ".py", "html": ".html"}
#: Value of the "format" key of a JSON gain export.
GAIN_EXPORT_FORMAT = "gainboard-gains"

#: Longest identifier fragment made from a name. Every generated name has internal linkage (static) or is a
#: macro, for which C99 guarantees 63 significant characters; prefix + fragment + suffix stays within that.
_IDENTIFIER_LENGTH = 28


def export_design(design: Design, format: str, *, sample_time: float | None = None,  # noqa: A002 - the command line's own word
                  sampled_form: str = "prediction", prefix: str | None = None) -> str:
    """The gains of ``design`` as text in one of :data:`EXPORT_FORMATS`.

    A design with an estimator exports its observer-based compensator as JSON, C and
    Python (:mod:`gainboard.app.compensator_export`; ``sample_time`` and ``sampled_form``
    make a continuous design ready for a controller period); CSV and HTML describe K.

    Parameters
    ----------
    design : Design
        The design to export.
    format : {"json", "csv", "c", "python", "html"}
        ``"c"`` is a C99 header; ``"html"`` is the standalone design report.
    prefix : str, optional
        Identifier prefix of the C names (``PREFIX_STATE_COUNT``, ``prefix_K``, ...) and of the
        Python snippet's function (``prefix_feedback``); checked by :func:`checked_prefix`.
        Without it the C prefix is made from the plant name and the function is ``feedback``.

    Returns
    -------
    str
        The file contents (UTF-8 text).

    Raises
    ------
    DesignFileError
        For an unknown format or something that is not a :class:`Design`.

    Examples
    --------
    >>> import json
    >>> from gainboard import core
    >>> design = Design(plant=core.Plant(A=[[-1.0]], B=[[1.0]]), gain=[[0.5]])
    >>> json.loads(export_design(design, "json"))["K"]
    [[0.5]]
    """
    if not isinstance(design, Design):
        raise DesignFileError(f"export needs a Design, got {type(design).__name__}")
    if design.estimator is not None and format in ("json", "c", "python"):
        from .compensator_export import export_compensator

        return export_compensator(design, format, sample_time, sampled_form, prefix=checked_prefix(prefix))
    if sample_time is not None:
        raise DesignFileError("a sample time applies to exporting a compensator; this design has no estimator")
    writers = {"json": export_json, "csv": export_csv, "c": export_c_header, "python": export_python}
    if format == "html":
        from .report import design_report_html

        return design_report_html(design)
    if format not in writers:
        raise DesignFileError(f"unknown export format {format!r}; choose one of {', '.join(EXPORT_FORMATS)}")
    if format in ("c", "python"):
        return writers[format](design, prefix=checked_prefix(prefix))
    return writers[format](design)


def checked_prefix(prefix: str | None) -> str | None:
    """``prefix`` if it is a valid C and Python identifier prefix, else a :class:`DesignFileError` saying why.

    Valid: an ASCII letter, then letters, digits or underscores, at most 28 characters (with the
    suffixes added it stays within the 63 significant characters C99 guarantees), not a Python keyword.

    Examples
    --------
    >>> checked_prefix("pitch_loop")
    'pitch_loop'
    """
    import keyword

    if prefix is None:
        return None
    if not isinstance(prefix, str) or not re.fullmatch(r"[A-Za-z][A-Za-z0-9_]*", prefix) or keyword.iskeyword(prefix):
        raise DesignFileError(f"the prefix {prefix!r} is not a valid identifier: use an ASCII letter followed by "
                              "letters, digits or underscores, such as pitch_loop")
    if len(prefix) > _IDENTIFIER_LENGTH:
        raise DesignFileError(f"the prefix {prefix!r} has {len(prefix)} characters; at most {_IDENTIFIER_LENGTH} "
                              "keep every generated C name within the 63 significant characters of C99")
    return prefix


# -- shared description of a design ----------------------------------------------------------


def _caution() -> str:
    from .theme import SAFETY_CAUTION

    return SAFETY_CAUTION


def _reference_names(design: Design) -> list[str]:
    return [design.plant.output_names[i] for i in design.plant.tracked_outputs]


def _reference_units(design: Design) -> list[str]:
    return [design.plant.output_units[i] for i in design.plant.tracked_outputs]


def _law(design: Design) -> str:
    terms = ["-K x"]
    if design.prefilter is not None:
        terms.append("+ N r")
    if design.integral_gain is not None:
        terms.append("- Ki xi")
    return "u = " + " ".join(terms)


def _law_terms(design: Design) -> str:
    """What each gain of this design multiplies, in words."""
    terms = ["K (one row per input, one column per state) multiplies the state x"]
    if design.prefilter is not None:
        terms.append("the prefilter N (one row per input, one column per tracked output) the reference r")
    if design.integral_gain is not None:
        terms.append(
            "the integral gain Ki (one row per input, one column per tracked output) xi, the integral "
            "of the tracking error r - y (reference minus tracked output"
            + ("; xi[k+1] = xi[k] + T (r[k] - y[k]))" if design.plant.is_sampled else ")")
        )
    return "; ".join(terms)


def _time_base(design: Design) -> str:
    plant = design.plant
    if plant.is_sampled:
        return (
            f"sampled design, sample time T = {plant.sample_time!r} s: compute u once per period from x "
            "sampled at the same instant, and hold it (zero-order hold)"
        )
    return (
        "continuous-time design: it assumes a controller much faster than the closed-loop poles; "
        "check it sampled at your controller's period before use"
    )


def _with_unit(name: str, unit: str) -> str:
    return f"{name} [{unit}]" if unit else name


def _format_limit(value: float) -> str:
    return repr(float(value))  # repr gives inf / -inf for an unbounded end


def _description_lines(design: Design, clean=str) -> list[str]:
    """Plain-text lines shared by the comment blocks of the CSV, C and Python exports.

    ``clean`` is applied to every piece of user text (names, units, the plant name).
    """
    plant = design.plant
    label = lambda name, unit: _with_unit(clean(name), clean(unit))  # noqa: E731
    lines = [
        f"{clean(plant.name)}: state-feedback gains exported by {generator_name()}",
        f"from the design last modified {clean(design.modified)}.",
        "",
        *textwrap.wrap("CAUTION: " + _caution(), 88),
        "",
        *textwrap.wrap(f"Control law: {_law(design)}, where {_law_terms(design)}.", 88),
        *textwrap.wrap("Time base: " + _time_base(design) + ".", 88),
        "",
        "State vector x (the columns of K, in this order):",
    ]
    lines += [f"  x[{j}]  {label(name, unit)}" for j, (name, unit) in enumerate(zip(plant.state_names, plant.state_units))]
    lines.append("Input vector u (the rows of K, in this order):")
    for i, (name, unit) in enumerate(zip(plant.input_names, plant.input_units)):
        limits = ""
        if plant.input_limits is not None:
            low, high = plant.input_limits[i]
            limits = f"  limits {_format_limit(low)} .. {_format_limit(high)}"
        lines.append(f"  u[{i}]  {label(name, unit)}{limits}")
    if design.prefilter is not None or design.integral_gain is not None:
        lines.append("Reference r and integral state xi (tracked outputs, in this order):")
        lines += [
            f"  r[{k}]  {label(name, unit)}"
            for k, (name, unit) in enumerate(zip(_reference_names(design), _reference_units(design)))
        ]
    lines.append("Saturation and integrator anti-windup are not included: the controller must provide them.")
    return lines


def _printable(text: str, escape_backslash: bool) -> str:
    """Text safe inside a one-line comment: control, format and separator characters become <U+XXXX>."""
    out = []
    for ch in str(text):
        if (ch.isprintable() and not (escape_backslash and ch == "\\")) or ch == " ":
            out.append(ch)
        else:
            out.append(f"<U+{ord(ch):04X}>")
    return "".join(out)


# -- JSON --------------------------------------------------------------------------------------


def _rows(matrix) -> list | None:
    return None if matrix is None else [[float(v) for v in row] for row in np.asarray(matrix)]


def _json_limit(value: float):
    return float(value) if math.isfinite(value) else None


def export_json(design: Design) -> str:
    """Gains as JSON; ``{"K": ...}`` is also accepted by ``gainboard evaluate --gain FILE``.

    Keys: format, version, caution, generator, design_modified, plant, control_law,
    sampled, sample_time (s or null), state_order, state_units, input_order, input_units,
    input_limits ([low, high] per input, null for an unbounded end; null if none),
    reference_order, reference_units (tracked outputs), K, N, Ki (null when absent).
    """
    plant = design.plant
    limits = None
    if plant.input_limits is not None:
        limits = [[_json_limit(low), _json_limit(high)] for low, high in plant.input_limits]
    record = {
        "format": GAIN_EXPORT_FORMAT,
        "version": 1,
        "caution": _caution(),
        "generator": generator_name(),
        "design_modified": design.modified,
        "plant": plant.name,
        "control_law": f"{_law(design)}, where {_law_terms(design)}",
        "sampled": plant.is_sampled,
        "sample_time": plant.sample_time,
        "state_order": list(plant.state_names),
        "state_units": list(plant.state_units),
        "input_order": list(plant.input_names),
        "input_units": list(plant.input_units),
        "input_limits": limits,
        "reference_order": _reference_names(design),
        "reference_units": _reference_units(design),
        "K": _rows(design.gain),
        "N": _rows(design.prefilter),
        "Ki": _rows(design.integral_gain),
    }
    return readable_json(record) + "\n"


# -- CSV ---------------------------------------------------------------------------------------

#: Column names of the CSV export (one row per matrix entry).
CSV_COLUMNS = ("matrix", "row", "column", "row_name", "row_unit", "column_name", "column_unit", "value", "notes")


def _csv_text_cell(text: str) -> str:
    """A name or unit for a CSV cell; text a spreadsheet would run as a formula gets a leading apostrophe."""
    text = str(text).encode("utf-8", errors="replace").decode("utf-8")
    return "'" + text if text[:1] in ("=", "+", "-", "@", "\t", "\r") else text


def export_csv(design: Design) -> str:
    """Gains as plain CSV: a header row, then one row per matrix entry (no comment lines).

    Columns are :data:`CSV_COLUMNS`; ``matrix`` is ``K``, ``N`` or ``Ki``; ``row`` and
    ``column`` count from 1 (row = input; column = state for K, tracked output for N and Ki);
    ``value`` reads back to the exact double. Any CSV reader (spreadsheets, ``csv.DictReader``,
    ``pandas.read_csv``) reads it with its default options: the description and the safety
    caution, which used to be ``#`` comment lines, are the ``notes`` cell of the first row (a
    quoted multi-line cell; the other rows leave it empty). A name or unit starting with ``=``,
    ``+``, ``-`` or ``@`` is written with a leading ``'`` so a spreadsheet shows it instead of
    running it as a formula.
    """
    plant = design.plant
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    notes = "\n".join(_printable(line, escape_backslash=False).rstrip() for line in _description_lines(design))
    writer.writerow(CSV_COLUMNS)
    references = list(zip(_reference_names(design), _reference_units(design)))
    states = list(zip(plant.state_names, plant.state_units))
    matrices = (("K", design.gain, states), ("N", design.prefilter, references), ("Ki", design.integral_gain, references))
    for label, matrix, columns in matrices:
        if matrix is None:
            continue
        for i, (input_name, input_unit) in enumerate(zip(plant.input_names, plant.input_units)):
            for j, (column_name, column_unit) in enumerate(columns):
                writer.writerow([
                    label, i + 1, j + 1,
                    _csv_text_cell(input_name), _csv_text_cell(input_unit),
                    _csv_text_cell(column_name), _csv_text_cell(column_unit),
                    repr(float(matrix[i, j])),
                    _csv_text_cell(notes),
                ])
                notes = ""
    return out.getvalue()


# -- C header ----------------------------------------------------------------------------------


def c_identifier(text: str, fallback: str, length: int = _IDENTIFIER_LENGTH) -> str:
    """A safe C identifier fragment from free text: ASCII letters, digits and single underscores.

    Accents are dropped (``é`` → ``e``), every other character becomes ``_``; the result
    never starts with a digit or an underscore (names beginning ``_`` are reserved in C)
    and is at most ``length`` characters; ``fallback`` is used when nothing is left.

    Examples
    --------
    >>> c_identifier("Motor voltage (V)", "u1")
    'Motor_voltage_V'
    >>> c_identifier("2nd */ stage", "x2")
    'n_2nd_stage'
    >>> c_identifier("温度", "x3")
    'x3'
    """
    ascii_text = unicodedata.normalize("NFKD", str(text)).encode("ascii", "ignore").decode("ascii")
    name = re.sub(r"[^A-Za-z0-9]+", "_", ascii_text).strip("_")
    if not name:
        name = fallback
    if name[0].isdigit():
        name = "n_" + name
    if len(name) > length:  # cut at a word boundary where one is near, so names stay readable
        cut = name[: length + 1]
        name = cut[: cut.rindex("_")] if "_" in cut[length // 2:] else name[:length]
    return name.rstrip("_")


def _unique(names: list[str]) -> list[str]:
    seen: dict[str, int] = {}
    result = []
    for name in names:
        candidate, counter = name, 1
        while candidate.upper() in seen:
            counter += 1
            candidate = f"{name}_{counter}"
        seen[candidate.upper()] = 1
        result.append(candidate)
    return result


def _c_comment_line(text: str) -> str:
    line = _printable(text, escape_backslash=True)
    # Neither a comment end nor a nested comment start may appear; "??" could form a trigraph.
    while "*/" in line or "/*" in line or "??" in line:
        line = line.replace("*/", "* /").replace("/*", "/ *").replace("??", "? ?")
    return line


def _c_comment_block(lines: list[str], indent: str = "") -> str:
    body = [f"{indent} *{(' ' + _c_comment_line(line)) if line else ''}".rstrip() for line in lines]
    return "\n".join([f"{indent}/*", *body, f"{indent} */"])


def _c_string(text: str) -> str:
    """A C string literal holding the UTF-8 bytes of ``text``; only plain printable ASCII is left unescaped."""
    out = ['"']
    for byte in str(text).encode("utf-8", errors="surrogatepass"):
        ch = chr(byte)
        if ch in '"\\':
            out.append("\\" + ch)
        elif ch == "?":  # "\?" keeps trigraphs from forming
            out.append("\\?")
        elif 0x20 <= byte < 0x7F:
            out.append(ch)
        else:
            out.append(f"\\{byte:03o}")  # octal escapes stop after three digits, unlike \x
    out.append('"')
    return "".join(out)


def _c_double(value: float) -> str:
    text = "%.17g" % float(value)
    if not math.isfinite(value):
        raise DesignFileError(f"cannot write the non-finite number {value!r} into a C header")
    if not any(ch in text for ch in ".eE"):
        text += ".0"  # a floating literal, not an integer one
    return text


def _c_limit(value: float) -> str:
    if math.isfinite(value):
        return _c_double(value)
    return "HUGE_VAL" if value > 0 else "(-HUGE_VAL)"


def _c_matrix(name: str, rows_macro: str, cols_macro: str, matrix: np.ndarray, row_labels: list[str]) -> str:
    lines = [f"static const double {name}[{rows_macro}][{cols_macro}] = {{"]
    for label, row in zip(row_labels, matrix):
        lines.append(f"    /* {_c_comment_line(label)} */")
        lines.append("    { " + ", ".join(_c_double(v) for v in row) + " },")
    lines.append("};")
    return "\n".join(lines)


def _c_string_array(name: str, count_macro: str, values) -> str:
    return f"static const char *const {name}[{count_macro}] = {{ " + ", ".join(_c_string(v) for v in values) + " };"


def export_c_header(design: Design, prefix: str | None = None) -> str:
    """Gains as a self-contained C99 header (``static const double`` arrays and one inline function).

    The header defines, with a prefix ``P`` (``prefix``, else made from the plant name):
    ``P_STATE_COUNT``, ``P_INPUT_COUNT`` (and ``P_REFERENCE_COUNT``, ``P_SAMPLE_TIME_S``
    when they apply), index macros ``P_X_<state>`` and ``P_U_<input>``, the arrays
    ``p_K`` (and ``p_N``, ``p_KI``, ``p_input_low``, ``p_input_high``), the names and units as
    strings, and ``p_feedback(x, [r,] [xi,] u)`` computing the control law. Every name is
    sanitised (:func:`c_identifier`) and comments cannot be closed by hostile text.
    """
    plant = design.plant
    prefix = checked_prefix(prefix) or c_identifier(plant.name, "plant")
    lower, upper = prefix.lower(), prefix.upper()
    n_macro, m_macro, t_macro = f"{upper}_STATE_COUNT", f"{upper}_INPUT_COUNT", f"{upper}_REFERENCE_COUNT"
    has_reference = design.prefilter is not None or design.integral_gain is not None
    state_ids = _unique([c_identifier(name, f"x{j + 1}").upper() for j, name in enumerate(plant.state_names)])
    input_ids = _unique([c_identifier(name, f"u{i + 1}").upper() for i, name in enumerate(plant.input_names)])
    input_labels = [_with_unit(name, unit) for name, unit in zip(plant.input_names, plant.input_units)]
    guard = f"GAINBOARD_{upper}_GAINS_H"
    needs_math = plant.input_limits is not None and not all(math.isfinite(v) for pair in plant.input_limits for v in pair)

    parts = [_c_comment_block(_description_lines(design)), "", f"#ifndef {guard}", f"#define {guard}", ""]
    if needs_math:
        parts += ["#include <math.h> /* HUGE_VAL for an unbounded actuator limit */", ""]
    parts += [f"#define {n_macro} {plant.state_count}", f"#define {m_macro} {plant.input_count}"]
    if has_reference:
        parts.append(f"#define {t_macro} {len(plant.tracked_outputs)}")
    if plant.is_sampled:
        parts.append(f"#define {upper}_SAMPLE_TIME_S {_c_double(plant.sample_time)} /* seconds */")
    parts += ["", "/* Position of each state in x. */"]
    parts += [f"#define {upper}_X_{ident} {j}" for j, ident in enumerate(state_ids)]
    parts += ["/* Position of each input in u. */"]
    parts += [f"#define {upper}_U_{ident} {i}" for i, ident in enumerate(input_ids)]
    parts += ["", "/* State-feedback gain K: one row per input, one column per state. */"]
    parts.append(_c_matrix(f"{lower}_K", m_macro, n_macro, design.gain, input_labels))
    if design.prefilter is not None:
        parts += ["", "/* Reference prefilter N: one row per input, one column per tracked output. */"]
        parts.append(_c_matrix(f"{lower}_N", m_macro, t_macro, design.prefilter, input_labels))
    if design.integral_gain is not None:
        parts += ["", "/* Integral gain Ki: one row per input, one column per tracked output. */"]
        parts.append(_c_matrix(f"{lower}_KI", m_macro, t_macro, design.integral_gain, input_labels))
    if plant.input_limits is not None:
        parts += [
            "",
            "/* Actuator limits per input, in the input's units; saturate u to them in the controller. */",
            f"static const double {lower}_input_low[{m_macro}] = {{ "
            + ", ".join(_c_limit(low) for low, _ in plant.input_limits) + " };",
            f"static const double {lower}_input_high[{m_macro}] = {{ "
            + ", ".join(_c_limit(high) for _, high in plant.input_limits) + " };",
        ]
    parts += [
        "",
        "/* Names and units as UTF-8 strings, in vector order (for logs and displays). */",
        _c_string_array(f"{lower}_state_names", n_macro, plant.state_names),
        _c_string_array(f"{lower}_state_units", n_macro, plant.state_units),
        _c_string_array(f"{lower}_input_names", m_macro, plant.input_names),
        _c_string_array(f"{lower}_input_units", m_macro, plant.input_units),
        "",
    ]

    arguments = [f"const double x[{n_macro}]"]
    if design.prefilter is not None:
        arguments.append(f"const double r[{t_macro}]")
    if design.integral_gain is not None:
        arguments.append(f"const double xi[{t_macro}]")
    arguments.append(f"double u[{m_macro}]")
    body = [
        f"/* {_law(design)}. No saturation and no anti-windup here: add them around this call. */",
        f"static inline void {lower}_feedback({', '.join(arguments)})",
        "{",
        "    int i, j;",
        f"    for (i = 0; i < {m_macro}; ++i) {{",
        "        double sum = 0.0;",
        f"        for (j = 0; j < {n_macro}; ++j) {{",
        f"            sum -= {lower}_K[i][j] * x[j];",
        "        }",
    ]
    if design.prefilter is not None:
        body += [f"        for (j = 0; j < {t_macro}; ++j) {{", f"            sum += {lower}_N[i][j] * r[j];", "        }"]
    if design.integral_gain is not None:
        body += [f"        for (j = 0; j < {t_macro}; ++j) {{", f"            sum -= {lower}_KI[i][j] * xi[j];", "        }"]
    body += ["        u[i] = sum;", "    }", "}"]
    parts += body
    parts += ["", f"#endif /* {guard} */", ""]
    return "\n".join(parts)


# -- Python snippet ----------------------------------------------------------------------------


def _py_float(value: float) -> str:
    value = float(value)
    if math.isfinite(value):
        return repr(value)
    return 'float("inf")' if value > 0 else '-float("inf")'


def _py_matrix(name: str, matrix, row_labels: list[str]) -> str:
    if matrix is None:
        return f"{name} = None"
    lines = [f"{name} = ["]
    for label, row in zip(row_labels, matrix):
        lines.append("    [" + ", ".join(_py_float(v) for v in row) + f"],  # {_printable(label, escape_backslash=False)}")
    lines.append("]")
    return "\n".join(lines)


def export_python(design: Design, prefix: str | None = None) -> str:
    """Gains as a Python snippet of plain lists (no numpy needed) with a ``feedback`` function.

    Module-level names: PLANT_NAME, SAMPLE_TIME (s, or None), STATE_NAMES, STATE_UNITS,
    INPUT_NAMES, INPUT_UNITS, INPUT_LIMITS (list of (low, high) or None), REFERENCE_NAMES,
    REFERENCE_UNITS, K, N, KI (None when absent) and ``feedback(x, r=None, xi=None)``
    (``PREFIX_feedback`` with a ``prefix``). Every float reads back to the exact double.
    """
    plant = design.plant
    function = f"{checked_prefix(prefix)}_feedback" if prefix else "feedback"
    input_labels = [_with_unit(name, unit) for name, unit in zip(plant.input_names, plant.input_units)]
    limits = "None"
    if plant.input_limits is not None:
        limits = "[" + ", ".join(f"({_py_float(low)}, {_py_float(high)})" for low, high in plant.input_limits) + "]"
    header = "\n".join(("# " + _printable(line, escape_backslash=False)).rstrip() for line in _description_lines(design))
    return f'''{header}
# Plain Python lists; K[i][j] is the gain from state j to input i.

PLANT_NAME = {plant.name!r}
SAMPLE_TIME = {_py_float(plant.sample_time) if plant.is_sampled else "None"}  # seconds; None for a continuous-time design
STATE_NAMES = {list(plant.state_names)!r}
STATE_UNITS = {list(plant.state_units)!r}
INPUT_NAMES = {list(plant.input_names)!r}
INPUT_UNITS = {list(plant.input_units)!r}
INPUT_LIMITS = {limits}  # (low, high) per input, in the input's units
REFERENCE_NAMES = {_reference_names(design)!r}  # tracked outputs: the order of r and xi
REFERENCE_UNITS = {_reference_units(design)!r}

{_py_matrix("K", design.gain, input_labels)}

{_py_matrix("N", design.prefilter, input_labels)}

{_py_matrix("KI", design.integral_gain, input_labels)}


def {function}(x, r=None, xi=None):
    """{_law(design)} as a list, one entry per input; no saturation, no anti-windup."""
    if len(x) != len(STATE_NAMES):
        raise ValueError(f"x must have {{len(STATE_NAMES)}} entries in the order {{STATE_NAMES}}")
    u = []
    for i, gains in enumerate(K):
        total = -sum(k * value for k, value in zip(gains, x))
        if N is not None:
            if r is None:
                raise ValueError("this design has a prefilter N: give the reference r")
            total += sum(n * value for n, value in zip(N[i], r))
        if KI is not None:
            if xi is None:
                raise ValueError("this design has integral action: give the integral state xi")
            total -= sum(k * value for k, value in zip(KI[i], xi))
        u.append(total)
    return u
'''
