"""One K judged on every model of a plant family: its operating points, exactly.

* :func:`evaluate_operating_points` — the full single-model evaluation (poles, stability,
  margins, spec checks, peak effort) of the nominal model and of each operating point;
* :func:`common_entry_intervals` — per gain entry, the values (others fixed) for which *every*
  one of those models is stable: the intersection of the exact per-model intervals;
* :func:`parameter_boundaries` — per uncertain parameter, with the others at nominal, where
  along its range the loop stops being stable, each end bracketed by two verified verdicts.

All of it describes linear models: a design must still be validated on the real system with
safe limits and emergency stops, under local codes, functional-safety standards and licensed
practice.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np

from ._batched_loops import stability_verdicts
from ._design_evaluation import DesignEvaluation, EvaluationOptions, evaluate_design
from ._plant_family import FamilyModel, PlantFamily
from ._single_entry import StableIntervals, all_entry_stable_intervals

__all__ = [
    "OperatingPointResult",
    "OperatingPointsReport",
    "evaluate_operating_points",
    "CommonEntryInterval",
    "common_entry_intervals",
    "intersect_intervals",
    "ParameterBoundary",
    "parameter_boundaries",
    "ResponseEnvelope",
    "response_envelope",
    "SpecOverPoints",
    "spec_checks_over_points",
]


@dataclass(frozen=True, eq=False)
class OperatingPointResult:
    """The evaluation of K on one model of the family.

    Attributes
    ----------
    name : str
        ``"nominal"`` or the operating point's name.
    values : dict
        Every parameter's value at this point.
    evaluation : DesignEvaluation
        Everything :func:`evaluate_design` computes for this model.
    """

    name: str
    values: dict
    evaluation: DesignEvaluation

    @property
    def stable(self) -> bool:
        return self.evaluation.closed_loop.stable

    @property
    def poles(self) -> np.ndarray:
        return self.evaluation.closed_loop.poles

    @property
    def peak_effort(self) -> tuple[float, ...]:
        """Per input, the largest |u| the linear loop demands in any of the three responses."""
        responses = self.evaluation.responses
        m = self.evaluation.plant.input_count
        peaks = [0.0] * m
        for response in (responses.initial, responses.step, responses.disturbance):
            if response is None:
                continue
            for metrics in response.input_metrics:
                peaks[metrics.input_index] = max(peaks[metrics.input_index], float(metrics.peak_magnitude))
        return tuple(peaks)


@dataclass(frozen=True, eq=False)
class OperatingPointsReport:
    """K judged on the nominal model and every operating point.

    Attributes
    ----------
    points : tuple of OperatingPointResult
        Nominal first, then the operating points in file order.
    all_stable : bool
    all_specs_passed : bool or None
        None when no specs were checked.
    worst_point : str
        The point with the smallest stability margin.
    """

    points: tuple[OperatingPointResult, ...]
    all_stable: bool
    all_specs_passed: bool | None
    worst_point: str


def evaluate_operating_points(family: PlantFamily, gain, specs=None, include_margins: bool = True,
                              horizon: float | None = None) -> OperatingPointsReport:
    """Evaluate one K on the nominal model and every operating point of a family.

    Parameters
    ----------
    family : PlantFamily
    gain : array_like, shape (m, n)
    specs : DesignSpecs, optional
        Checked at every point; the plant file's suggested specs when None.
    include_margins : bool
        Loop margins at the plant input per point.
    horizon : float, optional
        Simulation length in seconds (automatic per point when None).

    Returns
    -------
    OperatingPointsReport

    Examples
    --------
    >>> from gainboard.core import parse_plant_family_text
    >>> family = parse_plant_family_text('''
    ... [parameters.gain]
    ... nominal = 1.0
    ... [model]
    ... A = [[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [0.0, -2.0, -3.0]]
    ... B = [[0.0], [0.0], ["gain"]]
    ... [[operating_points]]
    ... name = "strong"
    ... values = { gain = 7.0 }
    ... ''')
    >>> report = evaluate_operating_points(family, [[1.0, 0.0, 0.0]], include_margins=False)
    >>> [(point.name, point.stable) for point in report.points], report.all_stable
    ([('nominal', True), ('strong', False)], False)
    """
    options = EvaluationOptions(selected_entry=None, include_all_entry_intervals=False, specs=specs,
                                include_margins=include_margins, horizon=horizon)
    points = []
    for model in family.models():
        evaluation = evaluate_design(model.plant, gain, options)
        points.append(OperatingPointResult(model.name, dict(model.values), evaluation))
    reports = [p.evaluation.spec_report for p in points]
    all_specs = None if any(r is None for r in reports) else all(r.all_passed for r in reports)
    worst = min(points, key=lambda p: p.evaluation.closed_loop.stability_margin)
    return OperatingPointsReport(tuple(points), all(p.stable for p in points), all_specs, worst.name)


@dataclass(frozen=True)
class SpecOverPoints:
    """One spec check judged at every operating point: its worst case and how many points pass.

    Attributes
    ----------
    name, subject, description : str
        As in :class:`SpecCheck` (``subject`` names the input of a per-input spec).
    required : float
    worst_point : str
        The point with the worst value: a failing one first, then one that could not be
        evaluated, then the one closest to the limit (largest value for ``stable`` and the
        ``max_…`` specs, smallest for the ``min_…`` specs).
    worst_achieved : float
    passed_points, points : int
        How many points pass, out of how many.
    """

    name: str
    subject: str
    description: str
    required: float
    worst_point: str
    worst_achieved: float
    passed_points: int
    points: int


def spec_checks_over_points(report: OperatingPointsReport) -> tuple[SpecOverPoints, ...]:
    """Every spec check of the nominal model, judged over all operating points.

    Returns
    -------
    tuple of SpecOverPoints
        In the order of the nominal model's checks; empty when no specs were checked.
    """
    by_key: dict = {}
    for point in report.points:
        spec_report = point.evaluation.spec_report
        for check in (spec_report.checks if spec_report is not None else ()):
            by_key.setdefault((check.name, check.subject), []).append((point.name, check))
    result = []
    for (name, subject), found in by_key.items():
        larger_is_worse = not name.startswith("min_")

        def badness(item):
            check = item[1]
            rank = 0 if check.passed is False else 1 if check.passed is None else 2
            value = check.achieved if math.isfinite(check.achieved) else math.inf
            return rank, -value if larger_is_worse else value

        worst_name, worst = min(found, key=badness)
        result.append(SpecOverPoints(name, subject, worst.description, worst.required, worst_name,
                                     worst.achieved, sum(c.passed is True for _, c in found), len(found)))
    return tuple(result)


@dataclass(frozen=True)
class ResponseEnvelope:
    """One output's response over every operating point, and the band it sweeps.

    Attributes
    ----------
    kind : str
        ``"step"``, ``"initial"`` or ``"disturbance"``.
    output_name : str
    time : ndarray, shape (N,)
        The longest of the points' time grids (s): each point's horizon follows its own slowest pole.
    lower, upper : ndarray, shape (N,)
        Smallest and largest value over the points at each time (each point's response
        interpolated linearly onto ``time``; nan where a response ended early by diverging).
    traces : dict
        Point name → (time, values) as simulated.
    """

    kind: str
    output_name: str
    time: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    traces: dict


def response_envelope(report: OperatingPointsReport, kind: str = "step", output: int | None = None) -> ResponseEnvelope | None:
    """The band one output's response sweeps over the operating points.

    Parameters
    ----------
    report : OperatingPointsReport
    kind : {"step", "initial", "disturbance"}
    output : int, optional
        Zero-based output; the first tracked output for a step, else the first output.

    Returns
    -------
    ResponseEnvelope or None
        None when the nominal model has no such response (no prefilter for a step).
    """
    nominal = report.points[0].evaluation
    plant = nominal.plant
    if output is None:
        output = plant.tracked_outputs[0] if kind == "step" else 0
    if getattr(nominal.responses, kind) is None:
        return None
    traces = {}
    for point in report.points:
        response = getattr(point.evaluation.responses, kind)
        if response is not None:
            traces[point.name] = (np.asarray(response.time, dtype=float),
                                  np.asarray(response.outputs, dtype=float)[:, output])
    time = max((t for t, _ in traces.values()), key=lambda t: t[-1])
    stacked = [np.where(time <= t[-1], np.interp(time, t, y), np.nan) for t, y in traces.values()]
    values = np.vstack(stacked)
    with warnings.catch_warnings():  # a time at which every response has ended early stays nan
        warnings.simplefilter("ignore", RuntimeWarning)
        lower, upper = np.nanmin(values, axis=0), np.nanmax(values, axis=0)
    return ResponseEnvelope(kind, plant.output_names[output], time, lower, upper, traces)


# -- gain entries stable on every model -----------------------------------------------------------


def intersect_intervals(first, second) -> tuple[tuple[float, float], ...]:
    """Intersection of two sorted unions of open intervals.

    Examples
    --------
    >>> intersect_intervals([(-1.0, 2.0), (3.0, math.inf)], [(0.0, 4.0)])
    ((0.0, 2.0), (3.0, 4.0))
    """
    result = []
    for low_a, high_a in first:
        for low_b, high_b in second:
            low, high = max(low_a, low_b), min(high_a, high_b)
            if low < high:
                result.append((float(low), float(high)))
    return tuple(sorted(result))


@dataclass(frozen=True, eq=False)
class CommonEntryInterval:
    """Values of one gain entry (others fixed) for which every model of the family is stable.

    Attributes
    ----------
    entry : (int, int)
        Zero-based (row = input, column = state).
    intervals : tuple of (float, float)
        Open intervals: the intersection over the models of their exact stable intervals.
    per_model : dict
        Model name → :class:`StableIntervals` of that model.
    limiting_model : dict
        For each end of ``intervals`` (the value as key), the model whose interval puts it there.
    """

    entry: tuple[int, int]
    intervals: tuple[tuple[float, float], ...]
    per_model: dict
    limiting_model: dict

    @property
    def entry_has_effect(self) -> bool:
        """Whether the entry moves a pole of any model."""
        return any(found.entry_has_effect for found in self.per_model.values())

    @property
    def never_stable_reason(self) -> str:
        """Why no value works for every model ("" when some value does)."""
        if self.intervals:
            return ""
        unstable = [name for name, found in self.per_model.items() if not found.intervals]
        if unstable:
            return f"no value is stable for {', '.join(unstable)}"
        return "the stable values of the models do not overlap"


def common_entry_intervals(family: PlantFamily, gain) -> dict:
    """Exact stable intervals of each gain entry common to the nominal model and every operating point.

    Parameters
    ----------
    family : PlantFamily
    gain : array_like, shape (m, n)

    Returns
    -------
    dict
        ``(row, col) -> CommonEntryInterval`` for every entry of K.

    Examples
    --------
    The cubic s³ + 3s² + 2s + g·k1 (Routh–Hurwitz: stable for 0 < g·k1 < 6) at g = 1 and g = 2:

    >>> from gainboard.core import parse_plant_family_text
    >>> family = parse_plant_family_text('''
    ... [parameters.g]
    ... nominal = 1.0
    ... [model]
    ... A = [[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [0.0, -2.0, -3.0]]
    ... B = [[0.0], [0.0], ["g"]]
    ... [[operating_points]]
    ... name = "double"
    ... values = { g = 2.0 }
    ... ''')
    >>> common = common_entry_intervals(family, [[1.0, 0.0, 0.0]])
    >>> [(round(low, 9), round(high, 9)) for low, high in common[(0, 0)].intervals]
    [(0.0, 3.0)]
    """
    models: tuple[FamilyModel, ...] = family.models()
    per_model = {model.name: all_entry_stable_intervals(model.plant, gain) for model in models}
    result = {}
    for entry in per_model[models[0].name]:
        intervals = ((-math.inf, math.inf),)
        ends: dict = {}
        for model in models:
            found: StableIntervals = per_model[model.name][entry]
            intervals = intersect_intervals(intervals, found.intervals)
            for low, high in found.intervals:
                ends.setdefault(low, model.name)
                ends.setdefault(high, model.name)
        limiting = {end: ends[end] for pair in intervals for end in pair if math.isfinite(end) and end in ends}
        result[entry] = CommonEntryInterval(entry, intervals, {name: per_model[name][entry] for name in per_model},
                                            limiting)
    return result


# -- where each parameter breaks the loop ---------------------------------------------------------

#: Points of the first look along a parameter's range, which only finds brackets to refine.
_SCAN_POINTS = 257
#: Bisection steps at most: 60 halvings take any bracket below double-precision spacing.
_BISECTION_STEPS = 80


@dataclass(frozen=True)
class ParameterBoundary:
    """Where one parameter, the others at nominal, takes the loop across the stability boundary.

    Attributes
    ----------
    name : str
    searched_range : (float, float)
        [low, high] of the parameter (nominal ± 4 std for an untruncated normal spread).
    nominal_stable : bool
    boundaries : tuple of float
        Every value where the verdict changes, in increasing order, each bracketed to within a
        few units in the last place by two values whose exact verdicts differ.
    brackets : tuple of (float, float)
        The verified bracket of each boundary: the verdict at the two ends differs.
    stable_intervals : tuple of (float, float)
        The parts of the searched range where the loop is stable.
    nearest_below, nearest_above : float or None
        The boundary closest to nominal on each side (None: none inside the range).
    note : str
        What the search cannot see: unstable pockets narrower than the first look's spacing.
    """

    name: str
    searched_range: tuple[float, float]
    nominal_stable: bool
    boundaries: tuple[float, ...]
    brackets: tuple[tuple[float, float], ...]
    stable_intervals: tuple[tuple[float, float], ...]
    nearest_below: float | None
    nearest_above: float | None
    note: str


def _verdicts_at(family: PlantFamily, K: np.ndarray, name: str, values: np.ndarray) -> np.ndarray:
    """Exact-as-computable stability verdict (1 stable, else not) of the loop at each value of one parameter."""
    stacks = family.matrix_stacks({name: values})
    closed = stacks.A - stacks.B @ K
    _, _, verdict = stability_verdicts(closed, family.nominal.sample_time)
    return np.where(stacks.evaluable, verdict == 1, False)


def parameter_boundaries(family: PlantFamily, gain) -> dict:
    """For each varying parameter (the others at nominal), where the loop with K stops being stable.

    A first look at 257 evenly spaced values of the parameter's range finds every change of
    the verdict between neighbours; each is then bisected on the stability verdict itself
    (stable = every pole strictly inside the boundary by more than the eigenvalues' rounding)
    until the bracket cannot shrink further, and both ends are evaluated again to verify that
    their verdicts differ. Unstable pockets narrower than the first look's spacing can be
    missed; ``note`` says so.

    Parameters
    ----------
    family : PlantFamily
    gain : array_like, shape (m, n)

    Returns
    -------
    dict
        Parameter name → :class:`ParameterBoundary`.

    Examples
    --------
    s³ + 3s² + 2s + g (Routh–Hurwitz: stable for 0 < g < 6), g ranging over [−1, 10]:

    >>> from gainboard.core import parse_plant_family_text
    >>> family = parse_plant_family_text('''
    ... [parameters.g]
    ... nominal = 1.0
    ... low = -1.0
    ... high = 10.0
    ... [model]
    ... A = [[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [0.0, -2.0, -3.0]]
    ... B = [[0.0], [0.0], ["g"]]
    ... ''')
    >>> found = parameter_boundaries(family, [[1.0, 0.0, 0.0]])["g"]
    >>> [round(value, 9) for value in found.boundaries], round(found.nearest_above, 9)
    ([0.0, 6.0], 6.0)
    """
    K = family.nominal.check_gain(gain)
    result = {}
    for parameter in family.varying_parameters:
        low, high = parameter.sweep_range
        grid = np.linspace(low, high, _SCAN_POINTS)
        verdicts = _verdicts_at(family, K, parameter.name, grid)
        boundaries, brackets = [], []
        for index in np.flatnonzero(verdicts[1:] != verdicts[:-1]):
            left, right = float(grid[index]), float(grid[index + 1])
            left_verdict = bool(verdicts[index])
            for _ in range(_BISECTION_STEPS):
                middle = 0.5 * (left + right)
                if middle <= left or middle >= right:
                    break  # adjacent doubles: the bracket is as tight as it gets
                if bool(_verdicts_at(family, K, parameter.name, np.array([middle]))[0]) == left_verdict:
                    left = middle
                else:
                    right = middle
            check = _verdicts_at(family, K, parameter.name, np.array([left, right]))
            if bool(check[0]) == bool(check[1]):  # never expected: the verdict is deterministic
                raise RuntimeError(f"the bracket of parameter {parameter.name!r} did not verify")
            boundaries.append(0.5 * (left + right))
            brackets.append((left, right))
        edges = [low, *boundaries, high]
        stable = tuple((edges[i], edges[i + 1]) for i in range(len(edges) - 1)
                       if _verdicts_at(family, K, parameter.name, np.array([0.5 * (edges[i] + edges[i + 1])]))[0])
        below = [b for b in boundaries if b <= parameter.nominal]
        above = [b for b in boundaries if b > parameter.nominal]
        nominal_stable = bool(_verdicts_at(family, K, parameter.name, np.array([parameter.nominal]))[0])
        spacing = (high - low) / (_SCAN_POINTS - 1)
        note = (f"Boundaries found by a first look every {spacing:.3g} {parameter.unit}".rstrip()
                + " and bisection on the stability verdict; an unstable pocket narrower than that spacing "
                "can be missed. A boundary with the other parameters at nominal says nothing about combinations.")
        result[parameter.name] = ParameterBoundary(
            name=parameter.name, searched_range=(float(low), float(high)), nominal_stable=nominal_stable,
            boundaries=tuple(boundaries), brackets=tuple(brackets), stable_intervals=stable,
            nearest_below=max(below) if below else None, nearest_above=min(above) if above else None, note=note)
    return result
