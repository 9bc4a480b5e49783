"""One call that computes everything a view of a design needs: ``evaluate_design``.

The workbench, the command line and the HTML report all show numbers from this
single result, so they can never disagree with each other.
"""

from __future__ import annotations

import threading
import weakref
from dataclasses import dataclass, field, replace

import numpy as np

from ._closed_loop import (
    ClosedLoopReport,
    _check_sample_time,
    _eigensystem,
    _report_from_eigensystem,
    analyze_open_loop,
    closed_loop_matrix,
    match_poles,
    sort_poles,
)
from ._errors import GainboardError, GainError
from ._margins import loop_margins
from ._number_range import check_analysable
from ._plant import Plant
from ._responses import ResponseSet, simulate_responses
from ._single_entry import _all_entry_intervals, _checked_entry_views, _sensitivity_from_eigensystem
from ._spec_checks import check_specs, pole_region
from ._specs import DesignSpecs
from ._structure import StructureReport, _fixed_flags, analyze_structure, controllability_staircase
from ._view_ranges import ViewRanges, view_ranges, with_entry_margins

__all__ = ["EvaluationOptions", "DesignEvaluation", "evaluate_design", "with_all_entry_intervals"]


@dataclass(frozen=True)
class EvaluationOptions:
    """What to compute besides the always-present poles and responses.

    Parameters
    ----------
    selected_entry : (int, int) or None
        Zero-based (row = input, column = state) of the gain entry whose locus and
        pole sensitivities are wanted; ``None`` skips them.
    entry_range : (float, float) or None
        Sweep range of the selected entry's locus. When ``None`` it is automatic and
        coarse: ±W around a multiple of W/2 near the current value, where W is
        max(3·|value|, the entry's natural scale) rounded up to a power of two, widened
        to the ends of the stable interval nearby and padded by 10 %. It stays the same while the
        value moves inside its middle half, so a slider drag reuses the locus.
    initial_state : array_like, shape (n,), optional
        Start of the regulation response; the plant's own initial state when ``None``.
    horizon : float, optional
        Simulation length in seconds; chosen from the slowest closed-loop pole when ``None``.
    specs : DesignSpecs, optional
        Specs to check; the plant file's suggested specs when ``None``.
    include_margins : bool
        Compute loop margins at the plant input.
    include_all_entry_intervals : bool
        Compute the exact stable interval of every entry of K (for the sliders).
    previous_view : ViewRanges, optional
        The view ranges shown so far for this plant: kept where they still fit (see
        :func:`view_ranges`); None after a change of plant.
    gesture : bool
        True while a gain or a pole is being dragged: view ranges are kept or only grow.
    reference_poles : tuple of complex
        More poles the pole-map frame must show (a pinned design, an LQR comparison).
    emulation_sample_time : float, optional
        For a continuous plant: also evaluate K run by a sampled controller with a ZOH at
        this period (:func:`evaluate_emulation`, margins when ``include_margins``).
    """

    selected_entry: tuple[int, int] | None = (0, 0)
    entry_range: tuple[float, float] | None = None
    initial_state: np.ndarray | None = None
    horizon: float | None = None
    specs: DesignSpecs | None = None
    include_margins: bool = True
    include_all_entry_intervals: bool = True
    previous_view: ViewRanges | None = None
    gesture: bool = False
    reference_poles: tuple = ()
    emulation_sample_time: float | None = None


@dataclass(frozen=True, eq=False)
class DesignEvaluation:
    """Everything known about one design (plant, K); see :func:`evaluate_design`.

    Attributes
    ----------
    plant, gain
        The design evaluated (gain is the checked m×n K).
    structure : StructureReport
        Controllability, observability and which open-loop poles can move.
    open_loop, closed_loop : ClosedLoopReport
        Poles with damping ratio, natural frequency, time constant; stability verdict.
    entry_intervals : dict
        ``(row, col) -> StableIntervals`` for every entry (empty when not requested).
    selected_entry : (int, int) or None
        The entry whose locus and sensitivities follow.
    selected_intervals, selected_locus, sensitivity
        Exact stable intervals, the branch-tracked locus and dλ/dk of the selected entry.
        The intervals and locus are analysed from A − B·K with the selected entry set to
        zero and kept while only that entry changes (a slider drag); they can differ
        from :func:`entry_stable_intervals` by rounding errors only, and
        ``entry_intervals[selected_entry]`` is this same object.
    responses : ResponseSet
        Initial-condition, reference-step and disturbance responses with effort and metrics.
    margins : LoopMargins or None
        Loop margins at the plant input.
    specs : DesignSpecs or None
        The specs checked.
    spec_report : SpecReport or None
        Pass/fail per spec.
    pole_region : PoleRegion or None
        Where the specs want the closed-loop poles.
    closed_loop_movable : tuple of bool
        For each pole of ``closed_loop.poles`` (same order), whether some gain can move it.
    messages : tuple of str
        Warnings for the user (conditioning, divergence, steps that cannot be computed).
    view_ranges : ViewRanges or None
        Slider ranges, the pole-map frame with the spec region, response axes (see :func:`view_ranges`).
    emulation : EmulationCheck or None
        K run through a ZOH at ``options.emulation_sample_time`` (None when not asked for).
    loop_frequency : LoopFrequencyResponse or None
        Each input's loop and the input sensitivity over frequency, with where the margins are
        read (computed with the margins; None without them).
    """

    plant: Plant
    gain: np.ndarray
    structure: StructureReport
    open_loop: ClosedLoopReport
    closed_loop: ClosedLoopReport
    entry_intervals: dict
    selected_entry: tuple[int, int] | None
    selected_intervals: object | None
    selected_locus: object | None
    sensitivity: object | None
    responses: ResponseSet
    margins: object | None
    specs: DesignSpecs | None
    spec_report: object | None
    pole_region: object | None
    closed_loop_movable: tuple[bool, ...] = field(default=())
    messages: tuple[str, ...] = field(default=())
    view_ranges: ViewRanges | None = None
    emulation: object | None = None
    loop_frequency: object | None = None


# Results that depend on the plant alone (structure, open-loop poles), kept while the
# plant object lives: a slider move changes K, never the plant, so they are computed
# once per plant instead of on every update. A Plant is frozen with read-only arrays,
# so a live entry can never go stale.
_PLANT_RESULTS: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()
_PLANT_RESULTS_LOCK = threading.Lock()


def _plant_analysis(plant: Plant) -> tuple[StructureReport, ClosedLoopReport]:
    with _PLANT_RESULTS_LOCK:
        cached = _PLANT_RESULTS.get(plant)
    if cached is None:
        cached = (analyze_structure(plant), analyze_open_loop(plant))
        with _PLANT_RESULTS_LOCK:
            _PLANT_RESULTS[plant] = cached
    return cached


def _closed_loop_movable(plant: Plant, K: np.ndarray, structure: StructureReport,
                         closed_loop: ClosedLoopReport) -> tuple[bool, ...]:
    """Which closed-loop poles some gain can move, in ``closed_loop.poles`` order.

    Feedback never changes which modes are uncontrollable (the PBH rank of [λI − A + BK, B]
    equals that of [λI − A, B]), so the structure analysis of (A − BK, B) marks exactly the
    poles no gain moves; optimal pairing lines its poles up with the closed-loop report's.
    """
    poles = np.asarray(closed_loop.poles, dtype=complex)
    if structure.controllable:
        return (True,) * len(poles)
    # the controllability half of analyze_structure(Plant(A=A − BK, B=B)): its open-loop poles and
    # pole_movable flags, without the observability, margins and conditioning that are not needed here
    loop_matrix = closed_loop_matrix(plant, K)
    loop_poles = sort_poles(np.linalg.eigvals(loop_matrix))
    fixed, _ = _fixed_flags(controllability_staircase(loop_matrix, plant.B), loop_poles)
    ordered, matched, _ = match_poles(poles, loop_poles)
    movable_at = {complex(p): not bool(f) for p, f in zip(loop_poles, fixed)}
    by_pole = {complex(p): movable_at[complex(q)] for p, q in zip(ordered, matched)}
    return tuple(by_pole[complex(p)] for p in poles)


def _check_entry(plant: Plant, entry) -> tuple[int, int]:
    row, col = (int(v) for v in entry)
    m, n = plant.input_count, plant.state_count
    if not (0 <= row < m and 0 <= col < n):
        raise GainError(f"gain entry ({row + 1}, {col + 1}) is outside K, which is {m}×{n}")
    return row, col


def evaluate_design(plant: Plant, gain, options: EvaluationOptions | None = None) -> DesignEvaluation:
    """Compute everything a view of the design (plant, K) needs, in one call.

    Parameters
    ----------
    plant : Plant
        The plant.
    gain : array_like, shape (m, n)
        State-feedback gain K in u = −Kx.
    options : EvaluationOptions, optional
        What to compute besides poles and responses.

    Returns
    -------
    DesignEvaluation

    Raises
    ------
    GainError
        If K has the wrong shape or the selected entry lies outside K.

    Examples
    --------
    >>> plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]])
    >>> result = evaluate_design(plant, [[4.0, 4.0]])
    >>> result.closed_loop.stable, np.round(result.closed_loop.poles, 6).tolist()
    (True, [(-2+0j), (-2+0j)])
    """
    options = options or EvaluationOptions()
    K = plant.check_gain(gain)
    check_analysable(plant, K)
    specs = options.specs if options.specs is not None else plant.specs
    messages: list[str] = []

    structure, open_loop = _plant_analysis(plant)
    # one eigendecomposition of A − BK for the pole report and the sensitivities: the same
    # numbers as analyze_closed_loop and pole_sensitivity give, for one solve instead of two
    eigensystem = _eigensystem(plant.A - plant.B @ K)  # K is checked: closed_loop_matrix without the check
    closed_loop = _report_from_eigensystem(eigensystem, _check_sample_time(plant.sample_time))

    selected = None if options.selected_entry is None else _check_entry(plant, options.selected_entry)
    selected_intervals = selected_locus = sensitivity = None
    if selected is not None:
        row, col = selected
        selected_intervals, selected_locus = _checked_entry_views(plant, K, row, col, options.entry_range)
        sensitivity = _sensitivity_from_eigensystem(plant, eigensystem, row, col)
    # the selected entry's intervals are shared, so the sliders and the locus never disagree
    known = {} if selected is None else {selected: selected_intervals}
    intervals = _all_entry_intervals(plant, K, known) if options.include_all_entry_intervals else {}

    band = specs.settling_band if specs is not None else 0.02
    responses = simulate_responses(
        plant, K, initial_state=options.initial_state, horizon=options.horizon, settling_band=band
    )
    if responses.diverging:
        reason = responses.diverging_reason  # it names the instability itself ("the closed loop is unstable: …")
        messages.append(reason[:1].upper() + reason[1:])
    if responses.step is None and responses.step_unavailable_reason:
        messages.append(f"No reference step: {responses.step_unavailable_reason}")

    margins = None
    if options.include_margins:
        try:
            margins = loop_margins(plant, K)
        except GainboardError as error:  # margins are advisory; the rest of the evaluation still stands
            messages.append(f"Loop margins not computed: {error}")

    loop_frequency = None
    if options.include_margins:
        from ._loop_frequency import loop_frequency_response

        try:
            loop_frequency = loop_frequency_response(plant, K, margins)
        except GainboardError as error:  # a view of the margins; the rest of the evaluation still stands
            messages.append(f"Loop frequency response not computed: {error}")

    emulation = None
    if options.emulation_sample_time is not None and not plant.is_sampled:
        from ._emulation import evaluate_emulation  # it evaluates the sampled loop with evaluate_design

        # over the same time as the continuous responses, so that the two can be drawn together
        emulation = evaluate_emulation(plant, K, options.emulation_sample_time,
                                       include_margins=options.include_margins, specs=specs,
                                       horizon=responses.horizon, initial_state=options.initial_state)

    spec_report = region = None
    if specs is not None:
        spec_report = check_specs(specs, closed_loop.poles, responses, margins, plant.sample_time,
                                  closed_loop.boundary_tolerance)
        region = pole_region(specs, plant.sample_time)

    return DesignEvaluation(
        plant=plant,
        gain=K,
        structure=structure,
        open_loop=open_loop,
        closed_loop=closed_loop,
        entry_intervals=intervals,
        selected_entry=selected,
        selected_intervals=selected_intervals,
        selected_locus=selected_locus,
        sensitivity=sensitivity,
        responses=responses,
        margins=margins,
        specs=specs,
        spec_report=spec_report,
        pole_region=region,
        closed_loop_movable=_closed_loop_movable(plant, K, structure, closed_loop),
        messages=tuple(messages),
        view_ranges=view_ranges(
            plant, K, open_loop_poles=open_loop.poles, closed_loop_poles=closed_loop.poles, selected_entry=selected,
            sensitivity=sensitivity, pole_region=region, responses=responses, reference_poles=options.reference_poles,
            previous=options.previous_view, gesture=options.gesture, entry_intervals=intervals,
        ),
        emulation=emulation,
        loop_frequency=loop_frequency,
    )


def with_all_entry_intervals(evaluation: DesignEvaluation) -> DesignEvaluation:
    """The same evaluation with the exact stable interval of every entry of K filled in.

    For an evaluation made with ``include_all_entry_intervals=False`` (a quick one
    while a gain is dragged), only the intervals are computed and everything else is
    kept as it is; the selected entry's intervals are shared, as in
    :func:`evaluate_design`.

    Parameters
    ----------
    evaluation : DesignEvaluation

    Returns
    -------
    DesignEvaluation
        ``evaluation`` itself when every entry's intervals are present already.

    Examples
    --------
    >>> plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]])
    >>> quick = evaluate_design(plant, [[4.0, 4.0]], EvaluationOptions(include_all_entry_intervals=False))
    >>> sorted(with_all_entry_intervals(quick).entry_intervals)
    [(0, 0), (0, 1)]
    """
    m, n = evaluation.gain.shape
    if len(evaluation.entry_intervals) == m * n:
        return evaluation
    selected = evaluation.selected_entry
    known = {} if selected is None else {selected: evaluation.selected_intervals}
    intervals = _all_entry_intervals(evaluation.plant, evaluation.gain, known)
    return replace(evaluation, entry_intervals=intervals, view_ranges=with_entry_margins(evaluation.view_ranges, intervals))
