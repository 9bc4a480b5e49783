"""Exports of K: JSON, CSV, C header (compiled and run), Python snippet, HTML report.

Outside references used here:
- Ogata, Modern Control Engineering, 5th ed., Example 10-1 (from memory; reference-cases.md case 1):
  K = [199, 55, 8], so u = −Kx is −199 at x = e1 and −262 at x = (1, 1, 1), exactly.
- The system C compiler (gcc 12) and C99 itself: ``%.17g`` prints 17 significant digits, enough to
  read a binary64 back exactly (IEEE 754-2008 §5.12.2; from memory), and GCC rounds decimal
  constants correctly, so the header's K must hold the very same doubles.
- numpy's K @ x as the reference product, with the standard error bound of a dot product,
  |fl(kᵀx) − kᵀx| ≤ n·u·|k|ᵀ|x| (Higham, Accuracy and Stability of Numerical Algorithms, 2nd ed.,
  §3.1, from memory), applied to both sides.
- Python's csv and json modules and exec as the readers of our CSV, JSON and Python exports.
- OWASP "CSV Injection" advice (from memory): cells starting with = + - @ get a leading apostrophe.
"""

import csv
import io
import json
import math
import re
import shutil
import struct
import subprocess
from html import unescape
from html.parser import HTMLParser

import numpy as np
import pytest

from gainboard import core
from gainboard.app.design_file import Design, DesignFileError
from gainboard.app.export import (
    CSV_COLUMNS,
    EXPORT_FORMATS,
    c_identifier,
    export_c_header,
    export_csv,
    export_design,
    export_json,
    export_python,
)
from pole_references import NAMED_REFERENCE_PLANT

COMPILER = shutil.which("cc") or shutil.which("gcc")
needs_compiler = pytest.mark.skipif(COMPILER is None, reason="no C compiler (cc or gcc) on PATH to compile the exported header")
C_FLAGS = ["-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic", "-O0"]
EPS = np.finfo(float).eps

# Reference-cases.md case 1 (Ogata, Modern Control Engineering, 5th ed., Example 10-1, from memory).
THIRD_ORDER = NAMED_REFERENCE_PLANT
OGATA = Design(plant=THIRD_ORDER, gain=[[199.0, 55.0, 8.0]])

HOSTILE_NAMES = (
    'x */ int broken = ; /*',        # would end the comment and inject code
    'quote " and \\ backslash',      # string and comment escapes
    'trigraph ??/ and ??=',          # ISO C trigraphs (active with -std=c99)
    'température ünïcödé 温度',       # non-ASCII
    'line\nbreak\rreturn\ttab',     # control characters
    '\u202eright-to-left override',  # bidi control ("Trojan Source")
    '*/',
    '',
)


def bits(value) -> bytes:
    return b"".join(struct.pack("<d", float(v)) for v in np.ravel(np.asarray(value, dtype=float)))


def c_literal(value: float) -> str:
    """A C double literal for the test program (repr is exact; C reads decimal correctly rounded)."""
    text = repr(float(value))
    return text if any(ch in text for ch in ".en") else text + ".0"


def dot_bound(K, x) -> np.ndarray:
    """Higham's bound on the rounding error of each row of K @ x, counted for both computations."""
    n = np.shape(K)[1]
    return 2 * n * EPS * (np.abs(K) @ np.abs(x)) + np.finfo(float).tiny


def compile_and_run(tmp_path, header: str, main_body: str, name: str = "gains.h") -> str:
    (tmp_path / name).write_text(header, encoding="utf-8")
    program = f'#include <stdio.h>\n#include "{name}"\n\nint main(void)\n{{\n{main_body}\n    return 0;\n}}\n'
    (tmp_path / "main.c").write_text(program, encoding="utf-8")
    built = subprocess.run(
        [COMPILER, *C_FLAGS, "main.c", "-o", "program", "-lm"], cwd=tmp_path, capture_output=True, text=True, timeout=60
    )
    assert built.returncode == 0, f"the exported header does not compile:\n{built.stderr}\n--- header ---\n{header}"
    ran = subprocess.run(["./program"], cwd=tmp_path, capture_output=True, text=True, timeout=30)
    assert ran.returncode == 0, ran.stderr
    return ran.stdout


def c_comments(source: str) -> list[str]:
    """The bodies of the block comments of C source, scanned as C99 5.1.1.2 / 6.4.9 describe (no splices here)."""
    comments, i, state, start = [], 0, "code", 0
    while i < len(source):
        pair = source[i:i + 2]
        if state == "code":
            if pair == "/*":
                state, start, i = "comment", i + 2, i + 2
                continue
            if source[i] in "\"'":
                state = source[i]
        elif state == "comment":
            if pair == "*/":
                comments.append(source[start:i])
                state, i = "code", i + 2
                continue
        elif source[i] == "\\":
            i += 1  # skip the escaped character inside a string or character literal
        elif source[i] == state:
            state = "code"
        i += 1
    assert state == "code", f"the header ends inside a {state!r}"
    return comments


def print_matrix(name: str, rows: int, cols: int) -> str:
    return (f"    {{ int i, j; for (i = 0; i < {rows}; ++i) for (j = 0; j < {cols}; ++j) "
            f'printf("%.17g\\n", {name}[i][j]); }}')


# -- C header ----------------------------------------------------------------------------------


@needs_compiler
def test_c_header_compiles_and_computes_the_textbook_feedback(tmp_path):
    header = export_c_header(OGATA)
    body = "\n".join([
        print_matrix("third_order_test_plant_K", 1, 3),
        "    { const double x1[3] = {1.0, 0.0, 0.0}; const double x2[3] = {1.0, 1.0, 1.0}; double u[1];",
        '      third_order_test_plant_feedback(x1, u); printf("%.17g\\n", u[0]);',
        '      third_order_test_plant_feedback(x2, u); printf("%.17g\\n", u[0]); }',
        '    printf("%d %d\\n", THIRD_ORDER_TEST_PLANT_STATE_COUNT, THIRD_ORDER_TEST_PLANT_INPUT_COUNT);',
        '    printf("%d %d %d\\n", THIRD_ORDER_TEST_PLANT_X_POSITION, THIRD_ORDER_TEST_PLANT_X_VELOCITY,'
        " THIRD_ORDER_TEST_PLANT_X_ACCELERATION);",
    ])
    lines = compile_and_run(tmp_path, header, body).split("\n")
    assert [float(v) for v in lines[:3]] == [199.0, 55.0, 8.0]  # Ogata Example 10-1 (from memory)
    assert float(lines[3]) == -199.0 and float(lines[4]) == -262.0  # −K e1 and −K (1,1,1), exact integers
    assert lines[5] == "3 1" and lines[6] == "0 1 2"
    # State order and units travel in the comments (the issue asks for them there).
    assert "x[0]  position [m]" in header and "x[2]  acceleration [m/s²]" in header and "u[0]  drive force [N]" in header
    assert "GAINBOARD_THIRD_ORDER_TEST_PLANT_GAINS_H" in header


@needs_compiler
def test_c_header_holds_every_bit_of_K_N_Ki_and_matches_numpy(tmp_path, rng):
    m, n, t = 3, 5, 2
    # Gains over twenty decades, plus a subnormal, a negative zero and the largest double's neighbourhood.
    K = rng.standard_normal((m, n)) * 10.0 ** rng.uniform(-10, 10, size=(m, n))
    K[0, 0], K[1, 1], K[2, 2] = 5e-324, -0.0, -1.2345678901234567e300
    N = rng.standard_normal((m, t))
    Ki = rng.standard_normal((m, t)) * 1e-3
    plant = core.Plant(
        A=rng.standard_normal((n, n)), B=rng.standard_normal((n, m)), C=rng.standard_normal((t, n)),
        sample_time=0.002, name="invented five-state stage", input_limits=((-10.0, 10.0), (-math.inf, 5.0), (0.0, 1.0)),
    )
    design = Design(plant=plant, gain=K, prefilter=N, integral_gain=Ki)
    states = rng.standard_normal((4, n)) * 10.0 ** rng.uniform(-3, 3, size=(4, n))
    references = rng.standard_normal((4, t))
    integrals = rng.standard_normal((4, t))
    prefix = "invented_five_state_stage"
    body = [print_matrix(f"{prefix}_K", m, n), print_matrix(f"{prefix}_N", m, t), print_matrix(f"{prefix}_KI", m, t)]
    for x, r, xi in zip(states, references, integrals):
        body.append(
            "    { const double x[%d] = {%s}; const double r[%d] = {%s}; const double xi[%d] = {%s}; double u[%d]; int i;"
            % (n, ", ".join(map(c_literal, x)), t, ", ".join(map(c_literal, r)), t, ", ".join(map(c_literal, xi)), m)
        )
        body.append(f'      {prefix}_feedback(x, r, xi, u); for (i = 0; i < {m}; ++i) printf("%.17g\\n", u[i]); }}')
    body.append(f'    printf("%.17g\\n", {prefix.upper()}_SAMPLE_TIME_S);')
    body.append(f'    printf("%.17g %.17g\\n", {prefix}_input_low[1], {prefix}_input_high[2]);')
    values = compile_and_run(tmp_path, export_c_header(design), "\n".join(body)).split("\n")
    printed = [float(v) for v in values[: m * n + 2 * m * t]]
    assert bits(printed) == bits(np.concatenate([K.ravel(), N.ravel(), Ki.ravel()]))  # bit for bit, −0.0 included
    cursor = m * n + 2 * m * t
    for x, r, xi in zip(states, references, integrals):
        computed = np.array([float(v) for v in values[cursor: cursor + m]])
        cursor += m
        expected = -K @ x + N @ r - Ki @ xi  # numpy as the reference
        bound = dot_bound(K, x) + dot_bound(N, r) + dot_bound(Ki, xi)
        assert np.all(np.abs(computed - expected) <= bound), (computed, expected, bound)
        assert np.all(np.abs(computed - expected) <= 1e-15 * np.maximum(np.abs(expected), 1.0) + bound)
    assert float(values[cursor]) == 0.002
    assert values[cursor + 1] == "-inf 1"  # an unbounded limit is HUGE_VAL (C99 7.12), printed as inf


@needs_compiler
def test_hostile_names_cannot_break_the_header(tmp_path):
    names = HOSTILE_NAMES
    n = len(names)
    plant = core.Plant(
        A=-np.eye(n), B=np.ones((n, 2)), name='evil */ plant "name" ??/', state_names=names,
        state_units=tuple(reversed(names)), input_names=("a b", "a-b"), input_units=("*/", "/*"),
    )
    design = Design(plant=plant, gain=np.arange(2 * n, dtype=float).reshape(2, n))
    header = export_c_header(design)
    # Print every name back as hex bytes: the strings must hold exactly the UTF-8 of each name.
    body = "\n".join(
        f'    {{ const char *p; for (p = evil_plant_name_state_names[{j}]; *p; ++p) printf("%02x", (unsigned char)*p); '
        'printf("\\n"); }' for j in range(n)
    ) + '\n    printf("%d %d\\n", EVIL_PLANT_NAME_U_A_B, EVIL_PLANT_NAME_U_A_B_2);'
    output = compile_and_run(tmp_path, header, body).split("\n")
    assert output[:n] == [name.encode("utf-8").hex() for name in names]
    assert output[n] == "0 1"  # "a b" and "a-b" sanitise alike; the second gets its own macro
    # With comments removed by the preprocessor, no fragment of any hostile name may remain as code.
    preprocessed = subprocess.run(
        [COMPILER, "-std=c99", "-E", "-P", "-x", "c", "gains.h"], cwd=tmp_path, capture_output=True, text=True, check=True
    ).stdout
    code_outside_strings = re.sub(r'"(?:\\.|[^"\\])*"', '""', preprocessed)  # C string literals (C99 6.4.5)
    assert "broken" not in code_outside_strings and "override" not in code_outside_strings
    for line in header.splitlines():
        assert line.isprintable() or line == "", repr(line)  # no control or bidi characters anywhere
    assert "\\\n" not in header  # no backslash-newline line splice (C99 5.1.1.2 phase 2)
    comments = c_comments(header)
    assert all("/*" not in comment for comment in comments)  # no nested comment start (gcc -Wcomment)
    assert any("CAUTION" in comment for comment in comments) and any("broken" in comment for comment in comments)


def test_c_identifiers_are_safe_for_any_text():
    # C99 6.4.2.1 (from memory): identifiers are letters, digits and underscores, not starting with a digit;
    # names starting with an underscore and a capital letter or two underscores are reserved (7.1.3).
    for text in [*HOSTILE_NAMES, "__reserved", "_Bool", "9lives", "a" * 100]:
        ident = c_identifier(text, "fallback")
        assert ident and len(ident) <= 28
        assert ident[0].isalpha() and all(ch.isascii() and (ch.isalnum() or ch == "_") for ch in ident), ident
        assert "__" not in ident


# -- CSV, JSON and Python ----------------------------------------------------------------------


def csv_records(text: str) -> list[dict]:
    # A plain CSV reader with its default options: no comment lines to skip (issue 12).
    return list(csv.DictReader(io.StringIO(text)))


def test_csv_reads_back_to_the_same_numbers(rng):
    K = rng.standard_normal((2, 3)) * 1e-7
    K[0, 1] = -0.0
    plant = core.Plant(A=THIRD_ORDER.A, B=rng.standard_normal((3, 2)), C=np.eye(3)[:2],
                       state_names=THIRD_ORDER.state_names, state_units=THIRD_ORDER.state_units,
                       input_names=("left, motor", 'right "motor"'), input_units=("V", "V"),
                       output_names=("position", "velocity"), output_units=("m", "m/s"), tracked_outputs=(0, 1))
    design = Design(plant=plant, gain=K, prefilter=np.eye(2))
    records = csv_records(export_csv(design))
    assert tuple(records[0]) == CSV_COLUMNS
    gains = [r for r in records if r["matrix"] == "K"]
    assert len(gains) == 6 and len([r for r in records if r["matrix"] == "N"]) == 4
    for record in gains:
        i, j = int(record["row"]) - 1, int(record["column"]) - 1
        assert bits(float(record["value"])) == bits(K[i, j])  # the csv module reads back the exact double
        assert record["row_name"] == plant.input_names[i] and record["column_name"] == plant.state_names[j]
        assert record["column_unit"] == plant.state_units[j]
    assert {r["column_name"] for r in records if r["matrix"] == "N"} == {"position", "velocity"}


def test_csv_neutralises_spreadsheet_formulas_in_names():
    plant = THIRD_ORDER.with_changes(state_names=("=HYPERLINK(\"http://x\")", "+1", "@SUM(A1)"), name="a, =1+1; b")
    text = export_csv(Design(plant=plant, gain=[[1.0, 2.0, 3.0]]))
    names = [r["column_name"] for r in csv_records(text)]
    assert names == ["'=HYPERLINK(\"http://x\")", "'+1", "'@SUM(A1)"]  # OWASP CSV-injection advice (from memory)
    for row in csv.reader(io.StringIO(text)):
        assert all(not cell.strip().startswith(("=", "+", "-", "@")) for cell in row), row


def test_json_export_reads_back_and_is_a_valid_gain_file_for_the_command_line(tmp_path):
    plant = THIRD_ORDER.with_changes(input_limits=((-math.inf, 12.0),), sample_time=0.01)
    design = Design(plant=plant, gain=[[199.0, 55.0, 8.0]], prefilter=[[200.0]])
    record = json.loads(export_json(design))  # strict JSON: no NaN or Infinity tokens
    assert record["K"] == [[199.0, 55.0, 8.0]] and record["N"] == [[200.0]] and record["Ki"] is None
    assert record["state_order"] == ["position", "velocity", "acceleration"]
    assert record["state_units"] == ["m", "m/s", "m/s²"] and record["input_order"] == ["drive force"]
    assert record["sample_time"] == 0.01 and record["sampled"] is True
    assert record["input_limits"] == [[None, 12.0]]  # an unbounded end is null, as in the command line's JSON
    path = tmp_path / "gains.json"
    path.write_text(export_json(design))
    from gainboard.app.cli import parse_gain

    assert parse_gain(str(path), plant).tolist() == [[199.0, 55.0, 8.0]]  # the README's {"K": ...} gain file


def test_python_snippet_runs_and_reproduces_K_exactly(rng):
    K = rng.standard_normal((2, 3)) * 10.0 ** rng.uniform(-300, 300, size=(2, 3))
    K[1, 2] = 5e-324
    names = ('one\n"""two', "three'''\\", "nul\x00byte", "\u2028sep", "# hash", "\ud800 lone")
    plant = core.Plant(
        A=THIRD_ORDER.A, B=rng.standard_normal((3, 2)), C=THIRD_ORDER.C, state_names=names[:3], state_units=names[3:],
        input_names=("in 1", "in\r2"), input_limits=((-1.0, math.inf), (-2.0, 2.0)), name='"""plant\n',
    )
    design = Design(plant=plant, gain=K, integral_gain=[[0.5], [-0.25]])
    namespace = {}
    exec(compile(export_python(design), "<snippet>", "exec"), namespace)  # a fresh namespace: no imports needed
    assert bits(namespace["K"]) == bits(K) and namespace["STATE_NAMES"] == list(names[:3])
    assert namespace["STATE_UNITS"] == list(names[3:]) and namespace["PLANT_NAME"] == '"""plant\n'
    assert namespace["INPUT_LIMITS"] == [(-1.0, math.inf), (-2.0, 2.0)] and namespace["SAMPLE_TIME"] is None
    assert namespace["N"] is None and namespace["KI"] == [[0.5], [-0.25]]
    x, xi = [1.0, -2.0, 0.5], [0.1]
    expected = -K @ np.array(x) - np.array([[0.5], [-0.25]]) @ np.array(xi)  # numpy as the reference
    assert np.all(np.abs(np.array(namespace["feedback"](x, xi=xi)) - expected) <= dot_bound(K, x) + 1e-17)
    with pytest.raises(ValueError, match="give the integral state xi"):
        namespace["feedback"](x)


def test_python_snippet_of_a_sampled_design_names_the_sample_time():
    design = Design(plant=THIRD_ORDER.with_changes(sample_time=0.001), gain=[[1.0, 2.0, 3.0]], prefilter=[[7.0]])
    namespace = {}
    exec(export_python(design), namespace)
    assert namespace["SAMPLE_TIME"] == 0.001 and namespace["N"] == [[7.0]]
    assert namespace["feedback"]([1.0, 0.0, 0.0], r=[1.0]) == [6.0]  # −1·1 + 7·1, exact


# -- what every export carries -----------------------------------------------------------------


@pytest.mark.parametrize("fmt", ["json", "csv", "c", "python"])
def test_every_export_carries_the_caution_order_and_is_deterministic(fmt):
    text = export_design(OGATA, fmt)
    flat = " ".join(text.split()).replace("# ", "").replace(" * ", " ")
    for phrase in ("linear model", "emergency stops", "functional-safety standards", "licensed engineering practice"):
        assert phrase in flat, (fmt, phrase)
    for name in ("position", "velocity", "acceleration", "drive force"):
        assert name in text
    assert export_design(OGATA, fmt) == text  # same design, same file: exports can live in version control


def test_unknown_formats_and_non_designs_are_refused():
    assert EXPORT_FORMATS == ("json", "csv", "c", "python", "html")
    with pytest.raises(DesignFileError, match=r"unknown export format 'pdf'; choose one of json, csv, c, python, html"):
        export_design(OGATA, "pdf")
    with pytest.raises(DesignFileError, match=r"export needs a Design, got Plant"):
        export_design(THIRD_ORDER, "json")


# -- the standalone HTML report ----------------------------------------------------------------


class _ResourceReferences(HTMLParser):
    """Every URL the page would fetch by itself: script src, link href, img/iframe/source src, CSS url()/@import."""

    def __init__(self):
        super().__init__()
        self.fetched: list[str] = []

    def handle_starttag(self, tag, attrs):
        attributes = dict(attrs)
        if tag in ("script", "img", "iframe", "source", "embed", "audio", "video") and attributes.get("src"):
            self.fetched.append(attributes["src"])
        if tag == "link" and attributes.get("href"):
            self.fetched.append(attributes["href"])


def visible_text(html: str) -> str:
    """The report's text as a reader sees it: scripts and styles dropped, tags removed, entities decoded."""
    html = re.sub(r"<(script|style)\b.*?</\1>", " ", html, flags=re.S)
    return " ".join(unescape(re.sub(r"<[^>]+>", " ", html)).split())


def pole_rows(html: str) -> list[list[str]]:
    """The cells of the closed-loop pole table, row by row, as text."""
    section = html.split("<h2>Closed-loop poles</h2>", 1)[1].split("</table>", 1)[0]
    body = section.split("<tbody>", 1)[1]
    return [[visible_text(cell) for cell in re.findall(r"<td[^>]*>(.*?)</td>", row, flags=re.S)]
            for row in re.findall(r"<tr>(.*?)</tr>", body, flags=re.S)]


@pytest.fixture(scope="module")
def ogata_report() -> str:
    # Build it with Panel imported, as in the workbench: Panel adds server-relative extension files to
    # Bokeh's resources, which a standalone report must not reference.
    import panel  # noqa: F401

    return export_design(OGATA, "html")


def test_report_fetches_nothing_from_a_network(ogata_report):
    # HTML standard (from memory): only src/href of these elements and CSS url()/@import make the browser fetch.
    parser = _ResourceReferences()
    parser.feed(ogata_report)
    assert parser.fetched == []  # everything, BokehJS included, is inline
    styles = re.findall(r"<style[^>]*>(.*?)</style>", ogata_report, flags=re.S)
    assert styles and not any(re.search(r"@import|url\(\s*['\"]?(https?:)?//", css) for css in styles)
    assert "Bokeh" in ogata_report and "<canvas" not in ogata_report  # plots are built by the inline BokehJS


def test_report_shows_exact_K_textbook_poles_and_the_caution(ogata_report):
    text = visible_text(ogata_report)
    for value in ("199.0", "55.0", "8.0"):
        assert f">{value}<" in ogata_report  # K to every digit (Ogata Example 10-1, from memory)
    # Closed-loop poles −2 ± 4j and −10 (Ogata Example 10-1, from memory); ζ = 2/√20, ωn = √20 for −2 ± 4j,
    # time constants 1/2 s and 1/10 s (ζ = −Re s/|s|, ωn = |s|: Ogata sec. 5-3, from memory).
    rows = {row[0]: row[1:4] for row in pole_rows(ogata_report)}  # pole: damping ratio, ωn, time constant
    assert rows == {
        "−2 + 4j": [format(2 / math.sqrt(20), ".4g"), format(math.sqrt(20), ".6g"), "0.5"],
        "−2 − 4j": [format(2 / math.sqrt(20), ".4g"), format(math.sqrt(20), ".6g"), "0.5"],
        "−10": ["1", "10", "0.1"],
    }
    for phrase in ("linear model", "emergency stops", "functional-safety standards", "licensed engineering practice"):
        assert phrase in text
    for section in ("Plant", "Gains", "Closed-loop poles", "Specs", "Margins", "Responses"):
        assert f"<h2>{section}</h2>" in ogata_report


def test_report_escapes_user_text_and_checks_specs():
    plant = THIRD_ORDER.with_changes(
        name="<script>alert('name')</script>", state_names=("<b>x</b>", "v & w", "a\"c"),
        specs=core.DesignSpecs(min_damping_ratio=0.5, max_input_magnitude=(1e6,)),
    )
    html = export_design(Design(plant=plant, gain=OGATA.gain, notes="</pre><img src=x onerror=alert(1)>"), "html")
    assert "<script>alert('name')</script>" not in html and "&lt;script&gt;alert(&#x27;name&#x27;)" in html
    assert "<img src=x" not in html and "&lt;b&gt;x&lt;/b&gt;" in html
    # ζ = 0.447 of −2 ± 4j is below 0.5, so the damping spec fails (Ogata sec. 5-3, from memory).
    row = re.search(r"smallest damping ratio.*?</tr>", html, flags=re.S).group(0)
    assert 'class="fail">fail' in row
    assert "some specs not met" in html


def test_report_of_a_design_with_integral_action_uses_the_extended_loop():
    # Invented first-order lag x' = −x + u with y = x, integral gain chosen by hand: with u = −k x − ki ξ and
    # ξ' = r − y the loop is s² + (1 + k) s − ki: k = 2, ki = −4 gives s² + 3s + 4 (ζ = 3/4, ωn = 2; Ogata sec. 5-3).
    lag = core.Plant(A=[[-1.0]], B=[[1.0]], name="invented lag", state_names=("speed",), state_units=("m/s",))
    html = export_design(Design(plant=lag, gain=[[2.0]], integral_gain=[[-4.0]]), "html")
    assert "with integral action" in html and "Reference step with integral action" in html
    assert "Final tracking error" in html
    # Poles −3/2 ± j√7/2: ζ = 0.75, ωn = 2 rad/s, time constant 1/1.5 s.
    rows = {row[0]: row[1:4] for row in pole_rows(html)}
    assert rows == {
        f"−1.5 + {math.sqrt(7) / 2:.6g}j": ["0.75", "2", format(1 / 1.5, ".6g")],
        f"−1.5 − {math.sqrt(7) / 2:.6g}j": ["0.75", "2", format(1 / 1.5, ".6g")],
    }


def test_report_of_an_unstable_design_says_so_and_still_renders():
    # Reference-cases.md case 5 (Routh–Hurwitz): with k2 = 55, k3 = 8 the loop is stable only for k1 in (−1, 839).
    html = export_design(Design(plant=THIRD_ORDER, gain=[[-2.0, 55.0, 8.0]]), "html")
    text = visible_text(html)
    assert "closed loop unstable" in text and "closed loop stable" not in text
    assert "margins are not meaningful" in text
    assert html.count('class="fail">unstable') == 1  # exactly one pole in the right half-plane (a0 < 0, from Routh)
