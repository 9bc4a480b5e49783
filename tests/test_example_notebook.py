"""The example notebook runs headlessly (nbclient, a real Jupyter kernel) and computes what it says.

References: for the plant ẋ = [[0, 1], [0, −a]]x + [0, b]u with K = [k1, k2], the closed-loop
characteristic polynomial is s² + (a + b·k2)s + b·k1 (direct expansion of det(sI − A + BK), handbook
formula); poles −8 ± 6j give s² + 16s + 100, so k1 = 100/b and k2 = (16 − a)/b. With k1 fixed, the
loop is stable iff a + b·k2 > 0 (Routh–Hurwitz, second order), i.e. k2 > −a/b.
"""

from __future__ import annotations

import ast
from pathlib import Path

import nbformat
import pytest
from nbclient import NotebookClient

NOTEBOOK = Path(__file__).resolve().parent.parent / "examples" / "script_to_firmware.ipynb"


def test_the_notebook_is_kept_with_its_outputs_stripped():
    notebook = nbformat.read(NOTEBOOK, as_version=4)
    nbformat.validate(notebook)
    for cell in notebook.cells:
        if cell.cell_type == "code":
            assert cell.outputs == [] and cell.execution_count is None


@pytest.fixture(scope="module")
def executed():
    notebook = nbformat.read(NOTEBOOK, as_version=4)
    NotebookClient(notebook, timeout=300, kernel_name="python3", resources={"metadata": {"path": str(NOTEBOOK.parent)}}).execute()
    return [cell for cell in notebook.cells if cell.cell_type == "code"]


def _result(cell):
    (output,) = [o for o in cell.outputs if o.output_type == "execute_result"]
    return output.data


def test_the_notebook_assigns_the_gain_the_handbook_formula_gives(executed):
    a, b = 0.05 / 0.02, 1 / 0.02
    assert ast.literal_eval(_result(executed[0])["text/plain"]) == (2, 1)
    assignment = _result(executed[1])
    assert "<table>" in assignment["text/html"]  # shown as a compact table in a notebook
    text = assignment["text/plain"]
    assert f"{100 / b:.6g}" in text and f"{(16 - a) / b:.6g}" in text
    assert "stable" in _result(executed[2])["text/plain"]


def test_the_notebook_reports_the_routh_hurwitz_interval_and_a_prefixed_header(executed):
    a, b = 0.05 / 0.02, 1 / 0.02
    ((low, high),) = ast.literal_eval(_result(executed[3])["text/plain"].replace("inf", "1e999"))
    assert low == pytest.approx(-a / b, rel=1e-9) and high == float("inf")
    assert _result(executed[4])["text/plain"] == "True"
