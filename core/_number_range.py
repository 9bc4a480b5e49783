"""Numbers too large or too small for the analysis in double precision, refused in one line.

Every analysis forms products and sums of squares of the plant's and the gain's entries
(A − BK, norms, A·A in the matrix exponential, Gram and Krylov matrices). An entry above
1e150 makes such products overflow (1e150² · n passes the largest double, 1.8e308, once
n ≳ 1e8, and already a few products of three such entries do); an entry below the smallest
normal double (2.2e-308) is subnormal: it carries fewer than 53 significant bits and makes
LAPACK's scaled iterations lose convergence ("SVD did not converge"). Neither can be repaired
by a similarity (balancing) without moving the extreme number into K or into the poles, so
the plant is refused with a message saying which entry and what to do: change the units
(time, states or inputs) so that the entries stay between about 1e-150 and 1e150, or set a
negligible entry to 0.
"""

from __future__ import annotations

import numpy as np

__all__: list[str] = []  # used where analyses start (see check_analysable)

#: Largest magnitude accepted in a plant or a gain.
LARGEST_ENTRY = 1e150
_SMALLEST_NORMAL = float(np.finfo(float).tiny)


def _entry_name(name: str, index) -> str:
    row, col = (int(i) + 1 for i in index) if len(index) == 2 else (int(index[0]) + 1, 1)
    return f"{name} (row {row}, column {col})"


def extreme_entry_problem(matrix: np.ndarray, name: str) -> str | None:
    """One line saying why ``matrix`` cannot be analysed, or None when its numbers are fine."""
    magnitudes = np.abs(np.asarray(matrix, dtype=float))
    if magnitudes.size == 0:
        return None
    largest = np.unravel_index(int(np.argmax(magnitudes)), magnitudes.shape)
    if magnitudes[largest] > LARGEST_ENTRY:
        return (f"{_entry_name(name, largest)} = {matrix[largest]:.3g} is too large for double-precision analysis "
                f"(products of such numbers overflow): change the units (time, states or inputs) so that "
                f"every entry stays below {LARGEST_ENTRY:.0e}")
    subnormal = (magnitudes > 0.0) & (magnitudes < _SMALLEST_NORMAL)
    if subnormal.any():
        where = np.unravel_index(int(np.argmax(subnormal)), magnitudes.shape)
        return (f"{_entry_name(name, where)} = {matrix[where]:.3g} is below the smallest normal double "
                f"({_SMALLEST_NORMAL:.3g}) and cannot be computed with: set it to 0 if it is negligible, "
                "or change the units so that it is not")
    return None


def check_analysable(plant, gain=None, error: type[Exception] | None = None) -> None:
    """Raise ``error`` (default AnalysisError) with one line when a number is out of range.

    Called where an analysis starts (evaluation, pole assignment, single-entry intervals), not
    when a plant or a gain is built: files and exports keep every finite double.
    """
    from ._errors import AnalysisError

    matrices = [("A", plant.A), ("B", plant.B), ("C", plant.C), ("D", plant.D)]
    if gain is not None:
        matrices.append(("K", gain))
    for name, matrix in matrices:
        problem = extreme_entry_problem(matrix, name)
        if problem:
            raise (error or AnalysisError)(problem)
