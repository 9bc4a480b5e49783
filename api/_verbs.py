"""The main verbs of the Python API, under the core's names, returning summarised results.

Indices are 0-based (numpy's convention): ``row`` is the input, ``col`` the state of K[row, col].
"""

from __future__ import annotations

from ._results import Assignment, EntryIntervals, Evaluation

__all__ = ["assign_poles", "evaluate_design", "entry_stable_intervals", "export_gain"]


def assign_poles(plant, poles, **options) -> Assignment:
    """K that places the closed-loop poles (eig(A − BK)) at ``poles``.

    Parameters
    ----------
    plant : gainboard.core.Plant
        Continuous plant (poles are s values, rad/s) or sampled plant (z values).
    poles : array_like of complex, shape (n,)
        One target per state; complex poles in conjugate pairs.
    **options
        ``method`` and ``complete_conjugates`` of :func:`gainboard.core.assign_poles`.

    Returns
    -------
    Assignment
        ``.gain`` (K, inputs × states, 0-based), ``.achieved``, ``.worst_error``, ``.method``;
        ``.to_dict()`` is what ``gainboard assign --json`` prints.

    Examples
    --------
    >>> import gainboard
    >>> plant = gainboard.plant_from_arrays([[0.0, 1.0], [0.0, 0.0]], [0.0, 1.0])
    >>> gainboard.assign_poles(plant, [-1.0, -2.0]).gain.round(12).tolist()
    [[2.0, 3.0]]
    """
    from gainboard import core

    return Assignment(plant, core.assign_poles(plant, poles, **options))


def evaluate_design(plant, gain, options=None) -> Evaluation:
    """Poles, responses, margins and spec checks of the design (plant, K).

    Parameters
    ----------
    plant : gainboard.core.Plant
        The plant.
    gain : array_like, shape (m, n)
        K of u = −Kx (rows: inputs, columns: states; 0-based).
    options : gainboard.core.EvaluationOptions, optional
        What to compute besides poles and responses (specs, initial state, horizon, ...).

    Returns
    -------
    Evaluation
        Every attribute of :class:`gainboard.core.DesignEvaluation` (``.closed_loop``,
        ``.responses``, ``.margins``, ``.spec_report``, ...); ``.to_dict()`` is what
        ``gainboard evaluate --json`` prints.
    """
    from gainboard import core

    return Evaluation(core.evaluate_design(plant, gain, options))


def entry_stable_intervals(plant, gain, row: int, col: int) -> EntryIntervals:
    """Exact open intervals of K[row, col] (others fixed) for which the loop is stable.

    Parameters
    ----------
    plant : gainboard.core.Plant
        The plant (continuous or sampled).
    gain : array_like, shape (m, n)
        K of u = −Kx.
    row, col : int
        0-based input (row) and state (column) of the entry.

    Returns
    -------
    EntryIntervals
        ``.stable_intervals`` with ends within the core's ``gain_tolerance`` of 0 snapped to
        exactly 0; ``.to_dict()`` is the record of ``gainboard sweep --json`` without the locus.

    Examples
    --------
    >>> import gainboard
    >>> plant = gainboard.plant_from_arrays([[0.0, 1.0], [0.0, 0.0]], [0.0, 1.0])
    >>> gainboard.entry_stable_intervals(plant, [[2.0, 1.0]], 0, 0).stable_intervals
    ((0.0, inf),)
    """
    from gainboard import core

    return EntryIntervals(plant, gain, core.entry_stable_intervals(plant, gain, row, col))


def export_gain(plant, gain, format: str, **options) -> str:  # noqa: A002 - the command line's own word
    """K of ``plant`` as text in one of the export formats (json, csv, c, python, html).

    A shortcut for ``export_design(Design(plant=plant, gain=gain), format, **options)``;
    build a :class:`Design` yourself for a prefilter, integral gains or an estimator.

    Parameters
    ----------
    plant : gainboard.core.Plant
        The plant K is for (its state and input order go into the file).
    gain : array_like, shape (m, n)
        K of u = −Kx.
    format : {"json", "csv", "c", "python", "html"}
        As ``gainboard export --format`` (``html`` needs the ``[app]`` extra).
    **options
        More options of :func:`gainboard.export_design` (e.g. ``prefix``).

    Returns
    -------
    str
        The file contents.
    """
    from gainboard.app.design_file import Design
    from gainboard.app.export import export_design

    return export_design(Design(plant=plant, gain=gain), format, **options)
