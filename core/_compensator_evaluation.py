"""One call that computes everything a view of an observer-based design needs.

:func:`evaluate_compensator` takes (plant, K, L, options) and returns the
estimator's error poles, which poles it can move, the compensator as a system,
the closed loop of plant and compensator with the separation check, the
responses with true and estimated states, the compensator's margins at the
plant input beside full-state feedback's (with a plain warning when they are much
smaller), and the exact stable range of every entry of L (the one-entry
machinery applied to the dual plant). :func:`evaluate_observer_design` adds the
full-state-feedback evaluation of the same K (:func:`gainboard.core.evaluate_design`),
so a view of the whole design reads one result.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from ._closed_loop import ClosedLoopReport, analyze_state_matrix
from ._compensator import (
    Compensator,
    CompensatorClosedLoop,
    MarginComparison,
    compare_margins,
    compensator_closed_loop,
    compensator_margins,
    observer_based_compensator,
)
from ._compensator_responses import CompensatorResponses, simulate_compensator_responses
from ._design_evaluation import DesignEvaluation, EvaluationOptions, evaluate_design
from ._errors import EstimatorError, GainboardError
from ._estimator import check_estimator_form, check_estimator_gain, estimator_dual_plant, estimator_error_matrix
from ._integral_action import augment_with_integral_action
from ._margins import LoopMargins, loop_margins
from ._observability import ObservabilityReport, analyze_observability
from ._plant import Plant
from ._reduced_estimator import reduced_order_coordinates
from ._view_ranges import _slider_ranges
from ._single_entry import (
    EntryLocus,
    StableIntervals,
    all_entry_stable_intervals,
    default_entry_range,
    entry_locus,
    entry_stable_intervals,
)

__all__ = [
    "EstimatorOptions",
    "CompensatorEvaluation",
    "evaluate_compensator",
    "estimator_entry_intervals",
    "estimator_entry_locus",
    "ObserverDesignEvaluation",
    "evaluate_observer_design",
]


@dataclass(frozen=True)
class EstimatorOptions:
    """What to compute for the estimator side of a design.

    Parameters
    ----------
    form : str, optional
        Estimator form (default: "full-order" continuous, "prediction" sampled).
    initial_estimate : array_like, shape (n,), optional
        The estimate at the start of the initial-condition response; zero when ``None``.
    initial_state : array_like, shape (n,), optional
        The plant's start; the plant's own initial state when ``None``.
    horizon : float, optional
        Seconds to simulate (default from the slowest pole of the whole loop).
    prefilter, integral_gain : array_like, optional
        N and Ki of the design (inputs × tracked outputs), when it has them.
    selected_entry : (int, int) or None
        Zero-based (row = state, column = output) of the entry of L whose locus is wanted.
    entry_range : (float, float) or None
        Sweep range of that locus; automatic when ``None``.
    include_margins : bool
        Compute the margins of the compensator loop and of full-state feedback.
    include_all_entry_intervals : bool
        Compute the exact stable interval of every entry of L (for the sliders).
    settling_band : float
        Settling band of the response metrics.
    previous_slider_ranges : dict, optional
        The slider ranges of L shown before (same plant and form), kept while they fit.
    gesture : bool
        True during a drag: slider ranges are kept.
    """

    form: str | None = None
    initial_estimate: np.ndarray | None = None
    initial_state: np.ndarray | None = None
    horizon: float | None = None
    prefilter: np.ndarray | None = None
    integral_gain: np.ndarray | None = None
    selected_entry: tuple[int, int] | None = None
    entry_range: tuple[float, float] | None = None
    include_margins: bool = True
    include_all_entry_intervals: bool = True
    settling_band: float = 0.02
    previous_slider_ranges: dict | None = None
    gesture: bool = False


@dataclass(frozen=True, eq=False)
class CompensatorEvaluation:
    """Everything known about the estimator side of one design (plant, K, L).

    Attributes
    ----------
    plant, state_gain, estimator_gain, form
        The design evaluated (gains checked).
    observability : ObservabilityReport
        Which open-loop poles the estimator can move, and why not.
    estimator_poles : ClosedLoopReport
        Poles of the estimation error, with damping and stability.
    compensator : Compensator
        The compensator as a linear system of its own.
    closed_loop : CompensatorClosedLoop
        Plant and compensator together: poles, stability and the separation check.
    responses : CompensatorResponses
        True state, estimate and error from a wrong initial estimate; reference and disturbance steps.
    margins : LoopMargins or None
        The compensator loop's margins at the plant input.
    state_feedback_margins : LoopMargins or None
        Full-state feedback's margins with the same K (and Ki).
    margin_comparison : MarginComparison
        Whether the compensator's margins are much smaller, in words.
    entry_intervals : dict
        ``(row, col) -> StableIntervals`` for every entry of L (empty when not requested);
        the intervals of the estimator's error poles with that entry varied.
    selected_entry : (int, int) or None
    selected_intervals : StableIntervals or None
    selected_locus : EntryLocus or None
        Error poles as the selected entry of L sweeps its range.
    slider_ranges : dict
        ``(row, col) -> SliderRange`` of every entry of L (the rules of the K sliders,
        applied on the dual plant).
    estimator_pole_movable : tuple of bool
        For each pole of ``estimator_poles.poles``, whether some L can move it (False for
        an unobservable pole).
    gain_row_names, gain_row_units : tuple of str
        What the rows of L correct: the states, or for the reduced-order form the
        estimated combinations (the unmeasured states when the outputs measure states directly).
    messages : tuple of str
        Warnings for the user.
    """

    plant: Plant
    state_gain: np.ndarray
    estimator_gain: np.ndarray
    form: str
    observability: ObservabilityReport
    estimator_poles: ClosedLoopReport
    compensator: Compensator
    closed_loop: CompensatorClosedLoop
    responses: CompensatorResponses
    margins: LoopMargins | None
    state_feedback_margins: LoopMargins | None
    margin_comparison: MarginComparison
    entry_intervals: dict
    selected_entry: tuple[int, int] | None
    selected_intervals: StableIntervals | None
    selected_locus: EntryLocus | None
    slider_ranges: dict = field(default_factory=dict)
    estimator_pole_movable: tuple[bool, ...] = field(default=())
    gain_row_names: tuple[str, ...] = field(default=())
    gain_row_units: tuple[str, ...] = field(default=())
    messages: tuple[str, ...] = field(default=())


def _as_estimator_entry(result, row: int, col: int):
    """A one-entry result of the dual plant, relabelled as entry (row, col) of L."""
    return replace(result, entry=(row, col))


def estimator_entry_intervals(plant: Plant, estimator_gain, form: str | None = None) -> dict:
    """Exact stable interval of every entry of L (others fixed): the error poles stay stable inside.

    Computed on the dual plant (:func:`gainboard.core.estimator_dual_plant`), where
    entry (i, j) of L is entry (j, i) of the state-feedback gain Lᵀ.

    Returns
    -------
    dict
        ``{(row, col): StableIntervals}``, row = state (or estimated combination), col = output.

    Examples
    --------
    >>> plant = Plant(A=[[0.0, 20.6], [1.0, 0.0]], B=[[1.0], [0.0]], C=[[0.0, 1.0]])
    >>> every = estimator_entry_intervals(plant, [[120.6], [20.0]])
    >>> [(round(lo, 9), hi) for lo, hi in every[(0, 0)].intervals]   # s² + 20 s + l1 − 20.6: l1 > 20.6
    [(20.6, inf)]
    """
    form = check_estimator_form(plant, form)
    L = check_estimator_gain(plant, estimator_gain, form)
    dual = estimator_dual_plant(plant, form)
    every = all_entry_stable_intervals(dual, L.T)
    return {(col, row): _as_estimator_entry(result, col, row) for (row, col), result in every.items()}


def estimator_entry_locus(plant: Plant, estimator_gain, row: int, col: int, form: str | None = None,
                          entry_range=None) -> tuple[StableIntervals, EntryLocus]:
    """Stable intervals and the locus of the error poles as L[row, col] sweeps a range.

    Returns
    -------
    (StableIntervals, EntryLocus)
        Labelled as entry (row, col) of L; the range is automatic when ``entry_range`` is None.
    """
    form = check_estimator_form(plant, form)
    L = check_estimator_gain(plant, estimator_gain, form)
    rows, cols = L.shape
    if not (0 <= row < rows and 0 <= col < cols):
        raise EstimatorError(f"estimator gain entry ({row + 1}, {col + 1}) is outside L, which is {rows}×{cols}")
    dual = estimator_dual_plant(plant, form)
    intervals = entry_stable_intervals(dual, L.T, col, row)
    low, high = entry_range if entry_range is not None else default_entry_range(dual, L.T, col, row)
    locus = entry_locus(dual, L.T, col, row, low, high)
    return _as_estimator_entry(intervals, row, col), _as_estimator_entry(locus, row, col)


def _state_feedback_margins(plant: Plant, K: np.ndarray, compensator: Compensator) -> LoopMargins:
    if compensator.integral_gain is None:
        return loop_margins(plant, K)
    extended = augment_with_integral_action(plant, compensator.tracked_outputs[: compensator.integrator_count])
    return loop_margins(extended, np.hstack([K, compensator.integral_gain]))


def evaluate_compensator(plant: Plant, state_gain, estimator_gain, options: EstimatorOptions | None = None, *,
                         state_feedback_margins: LoopMargins | None = None) -> CompensatorEvaluation:
    """Compute everything a view of the estimator and the compensator needs, in one call.

    Parameters
    ----------
    plant : Plant
    state_gain : array_like, shape (m, n)
        K of u = −K x̂.
    estimator_gain : array_like, shape (n, p) or (n − p, p)
        L of the chosen form.
    options : EstimatorOptions, optional
    state_feedback_margins : LoopMargins, optional
        Full-state feedback's margins when already known (from :func:`evaluate_design`).

    Returns
    -------
    CompensatorEvaluation

    Raises
    ------
    GainError, EstimatorError
        For gains of the wrong shape or a form that does not suit the plant.

    Examples
    --------
    >>> plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]])
    >>> result = evaluate_compensator(plant, [[2.0, 3.0]], [[7.0], [12.0]])
    >>> np.round(result.estimator_poles.poles, 9).tolist(), result.closed_loop.report.stable
    ([(-4+0j), (-3+0j)], True)
    >>> round(result.margins.gain_margin_increase, 6), result.margin_comparison.much_smaller
    (6.04, True)
    """
    options = options or EstimatorOptions()
    K = plant.check_gain(state_gain)
    form = check_estimator_form(plant, options.form)
    L = check_estimator_gain(plant, estimator_gain, form)
    messages: list[str] = []

    observability = analyze_observability(plant)
    error_report = analyze_state_matrix(estimator_error_matrix(plant, L, form), plant.sample_time)
    if not error_report.stable:
        messages.append("The estimation error does not die out: an estimator pole is on or outside the stability "
                        "boundary, so the estimate never converges to the true state.")
    compensator = observer_based_compensator(plant, K, L, form=form, prefilter=options.prefilter,
                                             integral_gain=options.integral_gain)
    closed_loop = compensator_closed_loop(plant, compensator)
    if not closed_loop.separation_holds:
        messages.append(
            f"Warning: the poles of plant and compensator differ from those of full-state feedback and the estimator "
            f"by up to {closed_loop.separation_error:.3g} (more than rounding explains, "
            f"{closed_loop.separation_tolerance:.3g}); the loop is very sensitive — treat its numbers with care."
        )
    responses = simulate_compensator_responses(
        plant, compensator, initial_state=options.initial_state, initial_estimate=options.initial_estimate,
        horizon=options.horizon, settling_band=options.settling_band)

    margins = full_state = None
    if options.include_margins:
        try:
            margins = compensator_margins(plant, compensator)
        except GainboardError as error:  # margins are advisory; the rest stands
            messages.append(f"Compensator margins not computed: {error}")
        try:
            full_state = state_feedback_margins or _state_feedback_margins(plant, K, compensator)
        except GainboardError as error:
            messages.append(f"Full-state feedback margins not computed: {error}")
    comparison = compare_margins(full_state, margins)
    if comparison.warning:
        messages.append(comparison.warning)

    intervals = estimator_entry_intervals(plant, L, form) if options.include_all_entry_intervals else {}
    selected = options.selected_entry
    selected_intervals = selected_locus = None
    if selected is not None:
        row, col = (int(v) for v in selected)
        selected_intervals, selected_locus = estimator_entry_locus(plant, L, row, col, form, options.entry_range)
        selected = (row, col)
        if intervals:
            intervals[selected] = selected_intervals
    dual = estimator_dual_plant(plant, form)
    previous = options.previous_slider_ranges
    previous_dual = None if not previous else _TransposedRanges({(j, i): r for (i, j), r in previous.items()})
    dual_ranges = _slider_ranges(dual, L.T, None if selected is None else (selected[1], selected[0]), previous_dual,
                                 options.gesture)
    movable = _movable(error_report.poles, observability.unobservable_poles)
    if form == "reduced-order":
        coordinates = reduced_order_coordinates(plant)
        row_names, row_units = coordinates.names, coordinates.units
    else:
        row_names, row_units = plant.state_names, plant.state_units
    return CompensatorEvaluation(
        plant=plant, state_gain=K, estimator_gain=L, form=form,
        observability=observability, estimator_poles=error_report, compensator=compensator,
        closed_loop=closed_loop, responses=responses, margins=margins, state_feedback_margins=full_state,
        margin_comparison=comparison, entry_intervals=intervals, selected_entry=selected,
        selected_intervals=selected_intervals, selected_locus=selected_locus,
        slider_ranges={(j, i): r for (i, j), r in dual_ranges.items()}, estimator_pole_movable=movable,
        gain_row_names=tuple(row_names), gain_row_units=tuple(row_units),
        messages=tuple(messages),
    )


@dataclass(frozen=True)
class _TransposedRanges:
    """The previous slider ranges in the dual plant's indexing (what the K-slider rules read)."""

    sliders: dict


def _movable(poles: np.ndarray, hidden: np.ndarray) -> tuple[bool, ...]:
    """False for the error poles that are hidden (unobservable) poles: no L moves them."""
    flags = [True] * len(poles)
    remaining = list(range(len(poles)))
    for pole in np.asarray(hidden, dtype=complex):
        if not remaining:
            break
        nearest = min(remaining, key=lambda i: abs(poles[i] - pole))
        if abs(poles[nearest] - pole) <= 1e-6 * max(1.0, abs(pole)):
            flags[nearest] = False
            remaining.remove(nearest)
    return tuple(flags)


@dataclass(frozen=True, eq=False)
class ObserverDesignEvaluation:
    """Both sides of an observer-based design: full-state feedback of K and the compensator with L.

    Attributes
    ----------
    design : DesignEvaluation
        :func:`gainboard.core.evaluate_design` of (plant, K): what full-state feedback would do.
    compensator : CompensatorEvaluation
        What the loop through the estimator really does.
    """

    design: DesignEvaluation
    compensator: CompensatorEvaluation


def evaluate_observer_design(plant: Plant, state_gain, estimator_gain, options: EvaluationOptions | None = None,
                             estimator_options: EstimatorOptions | None = None) -> ObserverDesignEvaluation:
    """:func:`gainboard.core.evaluate_design` and :func:`evaluate_compensator` of one design, sharing work.

    Examples
    --------
    >>> plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]])
    >>> both = evaluate_observer_design(plant, [[2.0, 3.0]], [[7.0], [12.0]])
    >>> both.design.margins.gain_margin_increase, round(both.compensator.margins.gain_margin_increase, 6)
    (inf, 6.04)
    """
    estimator_options = estimator_options or EstimatorOptions()
    options = options or EvaluationOptions()
    # the pole map shows the estimator poles too, so its frame must hold them
    error_poles = np.linalg.eigvals(estimator_error_matrix(plant, estimator_gain, estimator_options.form))
    options = replace(options, reference_poles=tuple(options.reference_poles) + tuple(error_poles))
    design = evaluate_design(plant, state_gain, options)
    reuse = design.margins if estimator_options.integral_gain is None else None
    compensator = evaluate_compensator(plant, design.gain, estimator_gain, estimator_options,
                                       state_feedback_margins=reuse)
    return ObserverDesignEvaluation(design=design, compensator=compensator)
