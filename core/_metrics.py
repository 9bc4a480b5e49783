"""Measurements taken on a sampled response: rise, settling, overshoot, peaks, limits.

Private helper of :mod:`gainboard.core._responses` (which re-exports the result
types). Times between grid points are found by cubic Hermite interpolation when
the exact slopes at the grid points are known (linear continuous loops), which is
accurate to about h⁴; otherwise by straight-line interpolation (about h²).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = [
    "OutputMetrics",
    "InputMetrics",
    "LimitViolation",
    "measure_output",
    "measure_input",
    "find_limit_violation",
    "settling_time",
]

NAN = float("nan")
#: Excesses over a limit smaller than this times the size of the data are round-off (see find_limit_violation).
_LIMIT_ROUND_OFF = 1e3 * np.finfo(float).eps

#: A change smaller than this fraction of an output's largest excursion counts as
#: "starts and ends at the same value" (rounding noise of the steady-state solve).
NEGLIGIBLE_CHANGE = 1e-8


@dataclass(frozen=True)
class OutputMetrics:
    """Time-domain measurements of one output in one response.

    Every response is read as a move from a *start value* to a *final value*
    (change Δ = final − start):

    - reference step: start = the output at rest before the step (0), final =
      exact steady state of the loop;
    - initial-condition response: start = the output at t = 0, final = 0 (the loop
      regulates back to rest), so Δ = −start;
    - disturbance step: start = 0 (at rest), final = the exact steady state under
      the disturbance (0 with integral action).

    Attributes
    ----------
    output_index : int
        Zero-based index of the output.
    output_name : str
    rise_time : float
        Seconds from 10 % to 90 % of Δ (first crossings). For regulation this is
        the time from 90 % to 10 % of the initial deviation. ``nan`` when Δ is
        negligible or 90 % is not reached within the horizon.
    settling_time : float
        Seconds after which the output stays within ±band·scale of the final
        value, up to the horizon. ``scale`` is |Δ| for a reference step and the
        largest deviation from the final value for regulation (the initial
        deviation when the output heads straight back; the peak deviation when
        it starts at rest, as after a disturbance). ``nan`` if still outside at
        the end of the horizon.
    overshoot_percent : float
        How far the output goes past its final value, on the far side from its
        start, in percent of |Δ| (0 when it never does). For regulation this is
        the undershoot past zero in percent of the initial value. ``nan`` when Δ
        is negligible.
    peak_value, peak_time : float
        Reference step: the extreme value in the direction of the change (the
        largest value of an upward step). Regulation: the value of largest
        magnitude (largest deviation from rest), and when it occurs.
    steady_state_error : float
        target − final value, with target the reference of a tracked output in a
        reference step and 0 (rest) in regulation; ``nan`` for an untracked
        output in a reference step.
    final_value : float
        Exact steady state of the linear loop (last sample for a saturated loop
        still pinned at a limit at the end; see ``undefined_reasons``).
    start_value : float
        The start value described above.
    target : float
        The reference or 0; ``nan`` when the output is not tracked.
    undefined_reasons : tuple of (str, str)
        (metric name, reason) for every metric that is ``nan``, and notes on
        approximations.
    """

    output_index: int
    output_name: str
    rise_time: float
    settling_time: float
    overshoot_percent: float
    peak_value: float
    peak_time: float
    steady_state_error: float
    final_value: float
    start_value: float
    target: float
    undefined_reasons: tuple[tuple[str, str], ...] = ()

    def reason(self, metric: str) -> str:
        """Why ``metric`` is undefined (or a note on it); "" when there is nothing to say."""
        return "; ".join(text for name, text in self.undefined_reasons if name == metric)


@dataclass(frozen=True)
class InputMetrics:
    """Actuator effort of one input in one response.

    Attributes
    ----------
    input_index : int
    input_name : str
    peak_magnitude : float
        Largest |u| over the response, in input units.
    peak_time : float
        When it occurs (s).
    energy : float
        ∫ u² dt over the horizon, in (input unit)²·s. Exact for a continuous plant
        (integrated through the matrix exponential, not a quadrature rule); for a
        sampled plant each held value counts for one sample period: T·Σ u[k]² over
        the samples before the last.
    undefined_reasons : tuple of (str, str)
    """

    input_index: int
    input_name: str
    peak_magnitude: float
    peak_time: float
    energy: float
    undefined_reasons: tuple[tuple[str, str], ...] = ()

    def reason(self, metric: str) -> str:
        """Why ``metric`` is undefined; "" when it is defined."""
        return "; ".join(text for name, text in self.undefined_reasons if name == metric)


@dataclass(frozen=True)
class LimitViolation:
    """Whether the *linear* loop asks an input for more than its actuator range.

    Attributes
    ----------
    input_index : int
    input_name : str
    low, high : float
        The actuator range (input units).
    exceeded : bool
        True if the demanded input leaves [low, high] at some grid point.
    first_time : float
        First time the demand crosses a limit (interpolated between grid points;
        0 if it starts outside), ``nan`` if never.
    worst_excess : float
        Largest amount beyond a limit at the grid points (input units, ≥ 0).
    worst_excess_percent : float
        ``worst_excess`` in percent of the magnitude of the limit it crossed (of
        the whole range high − low when that limit is 0).
    worst_side : str
        "high", "low" or "" (not exceeded).
    fraction_beyond : float
        Fraction of the horizon spent beyond a limit (crossings interpolated between
        grid points like ``first_time``; whole sample periods for a sampled plant).
    """

    input_index: int
    input_name: str
    low: float
    high: float
    exceeded: bool
    first_time: float
    worst_excess: float
    worst_excess_percent: float
    worst_side: str
    fraction_beyond: float


# -- interpolation between grid points ---------------------------------------------------
# These scalar helpers run a handful of times per signal, so they work on Python floats
# (read from the arrays a few at a time) instead of numpy scalars: the same IEEE
# arithmetic, several times less interpreter overhead.
def _bisect(coefficients, level, low, high) -> float:
    """Root of cubic(s) = level in [low, high], where the cubic is monotone and changes side.

    Newton's method started from the chord and kept inside the shrinking bracket
    (a step that would leave it bisects instead): the same root as plain bisection to
    1e-15, in a handful of steps instead of about fifty.
    """
    a, b, c, d = coefficients
    d -= level
    f_low = ((a * low + b) * low + c) * low + d
    f_high = ((a * high + b) * high + c) * high + d
    if f_low == 0.0:
        return low
    if f_high == 0.0:
        return high
    s = low - f_low * (high - low) / (f_high - f_low)
    if not low < s < high:
        s = 0.5 * (low + high)
    for _ in range(60):
        f = ((a * s + b) * s + c) * s + d
        if f == 0.0:
            return s
        if (f > 0.0) == (f_low > 0.0):
            low, f_low = s, f
        else:
            high = s
        slope = (3.0 * a * s + 2.0 * b) * s + c
        following = s - f / slope if slope != 0.0 else 0.5 * (low + high)
        if not low < following < high:
            following = 0.5 * (low + high)
        if abs(following - s) <= 1e-16 or high - low <= 1e-15:
            return following
        s = following
    return s


def _cubic_roots_in_unit(a: float, b: float, c: float) -> list[float]:
    """Roots in (0, 1) of 3a s² + 2b s + c (the stationary points of the cubic), increasing."""
    qa, qb = 3.0 * a, 2.0 * b
    if qa == 0.0:
        if qb == 0.0:
            return []
        root = -c / qb
        return [root] if 0.0 < root < 1.0 else []
    discriminant = qb * qb - 4.0 * qa * c
    if discriminant < 0.0:
        return []
    # numerically stable quadratic formula
    q = -0.5 * (qb + math.copysign(math.sqrt(discriminant), qb))
    first = q / qa
    if q == 0.0:
        return [first] if 0.0 < first < 1.0 else []
    second = c / q
    roots = [r for r in ((first, second) if first <= second else (second, first)) if 0.0 < r < 1.0]
    return roots


def _crossing(time, values, slopes, k: int, level: float, last: bool = False, at_samples: bool = False) -> float:
    """Time in [t_k, t_{k+1}] where the signal crosses ``level`` (first or last crossing).

    With ``at_samples`` (a sampled plant, whose signals exist only at the samples)
    the answer is the sample t_{k+1} where the new side is first seen. With slopes, the
    crossing of the cubic Hermite interpolant is found on its first (or last) monotone
    piece that changes side, by :func:`_bisect`.
    """
    if at_samples:
        return float(time[k + 1])
    t0, t1 = time[k : k + 2].tolist()
    y0, y1 = values[k : k + 2].tolist()
    if slopes is not None:
        d0, d1 = slopes[k : k + 2].tolist()
        if math.isfinite(d0) and math.isfinite(d1):
            h = t1 - t0
            # cubic Hermite a s³ + b s² + c s + y0 on s ∈ [0, 1] matching values and slopes
            a = 2 * y0 + h * d0 - 2 * y1 + h * d1
            b = -3 * y0 - 2 * h * d0 + 3 * y1 - h * d1
            c = h * d0
            edges = [0.0, *_cubic_roots_in_unit(a, b, c), 1.0]
            pieces = range(len(edges) - 2, -1, -1) if last else range(len(edges) - 1)
            for j in pieces:
                low, high = edges[j], edges[j + 1]
                f_low = ((a * low + b) * low + c) * low + y0 - level
                f_high = ((a * high + b) * high + c) * high + y0 - level
                if not (f_low == 0.0 or f_high == 0.0 or (f_low > 0.0) != (f_high > 0.0)):
                    continue
                return t0 + _bisect((a, b, c, y0), level, low, high) * h
    if y1 == y0:
        return t0
    s = min(max((level - y0) / (y1 - y0), 0.0), 1.0)
    return t0 + s * (t1 - t0)


def _refined_extreme(time, values, slopes, k: int, direction: float, at_samples: bool = False):
    """Time and value of the local maximum of direction·y near grid point k."""
    if at_samples:
        return float(time[k]), float(values[k])
    count = len(values)
    low, high = max(k - 1, 0), min(k + 2, count)
    t = time[low:high].tolist()
    y = values[low:high].tolist()
    here = k - low
    best_t, best_y = t[here], y[here]
    if slopes is not None:
        slope = slopes[low:high].tolist()
        last = len(y) - 1
        for j in (here - 1, here):
            if j < 0 or j >= last:
                continue
            d0, d1 = slope[j], slope[j + 1]
            if not (math.isfinite(d0) and math.isfinite(d1)):
                continue
            # cubic Hermite a s³ + b s² + c s + d on s ∈ [0, 1] matching values and slopes
            h, y0, y1 = t[j + 1] - t[j], y[j], y[j + 1]
            a = 2 * y0 + h * d0 - 2 * y1 + h * d1
            b = -3 * y0 - 2 * h * d0 + 3 * y1 - h * d1
            c = h * d0
            d = y0
            for s in _cubic_roots_in_unit(a, b, c):
                value = ((a * s + b) * s + c) * s + d
                if direction * value > direction * best_y:
                    best_t, best_y = t[j] + s * (t[j + 1] - t[j]), value
        return best_t, best_y
    if 0 < k < count - 1:
        # parabola through three equally spaced points
        ym, y0, yp = y
        curvature = ym - 2 * y0 + yp
        if curvature != 0.0:
            s = 0.5 * (ym - yp) / curvature
            if -1.0 <= s <= 1.0:
                value = y0 - 0.25 * (ym - yp) * s
                if direction * value > direction * best_y:
                    best_t, best_y = t[1] + s * (t[2] - t[1]), value
    return best_t, best_y


class _Column:
    """One signal of a batch, with its refinements remembered (several metrics refine the same point)."""

    __slots__ = ("_refined", "at_samples", "slopes", "time", "values")

    def __init__(self, time, values, slopes, at_samples):
        self.time, self.values, self.slopes, self.at_samples = time, values, slopes, at_samples
        self._refined = {}

    def extreme(self, k: int, direction: float):
        key = (k, direction)
        found = self._refined.get(key)
        if found is None:
            found = self._refined[key] = _refined_extreme(self.time, self.values, self.slopes, k, direction,
                                                          self.at_samples)
        return found

    def crossing(self, k: int, level: float, last: bool = False) -> float:
        return _crossing(self.time, self.values, self.slopes, k, level, last=last, at_samples=self.at_samples)


# -- the individual measurements ------------------------------------------------------------
def settling_time(time, values, slopes, final: float, band_width: float, at_samples: bool = False) -> float:
    """First time after which |y − final| ≤ band_width at every remaining grid point.

    Parameters
    ----------
    time, values : numpy.ndarray, shape (N,)
    slopes : numpy.ndarray, shape (N,) or None
        Exact dy/dt at the grid points, for cubic interpolation of the crossing
        (None: straight lines between grid points).
    final : float
        Final value.
    band_width : float
        Half-width of the band in output units (> 0).
    at_samples : bool
        Sampled signal: the answer is the first sample from which it stays inside.

    Returns
    -------
    float
        Seconds; 0 if always inside, ``nan`` if outside at the last grid point.

    Examples
    --------
    >>> t = np.linspace(0.0, 10.0, 1001)
    >>> round(settling_time(t, np.exp(-t), -np.exp(-t), 0.0, 0.02), 6)  # e^{-t} = 0.02 at ln 50
    3.912023
    """
    outside = np.abs(values - final) > band_width
    from_end = int(outside[::-1].argmax())
    last = len(values) - 1 - from_end
    if not outside[last]:
        return 0.0
    if last == len(values) - 1:
        return NAN
    level = final + math.copysign(band_width, values[last] - final)
    return _crossing(time, values, slopes, last, level, last=True, at_samples=at_samples)


def _peak_candidates(padded: np.ndarray, tops, scales) -> list[list[int]]:
    """Per signal row: the local maxima within 10⁻³·scale of the row's top, in time order.

    ``padded`` (c, N + 2) holds the signals (c, N) between a column of −∞ on either
    side, so every point has two neighbours and an end point counts as a local maximum
    on its one real neighbour alone. ``tops`` and ``scales`` are sequences of c floats.
    Returns one list of grid indices (0 … N − 1) per row.
    """
    rows, width = padded.shape
    limits = [top - 1e-3 * scale for top, scale in zip(tops, scales)]
    near = np.flatnonzero(padded >= np.array(limits)[:, None])  # few points, sorted by row then time
    flat = padded.reshape(-1)
    here = flat[near]
    chosen = near[(here >= flat[near - 1]) & (here >= flat[near + 1])]
    if chosen.size <= _FEW_CANDIDATES:  # the usual case: about one per row
        candidates = [[] for _ in range(rows)]
        for i in chosen.tolist():
            candidates[i // width].append(i % width - 1)
        return candidates
    row, k = np.divmod(chosen, width)
    bounds = np.searchsorted(row, np.arange(rows + 1)).tolist()
    return [(k[bounds[j] : bounds[j + 1]] - 1).tolist() for j in range(rows)]


#: Up to this many candidates in all, :func:`_peak_candidates` sorts them to their rows in Python.
_FEW_CANDIDATES = 64


def _peak(cell: _Column, candidates: list, scale: float, direction: float) -> tuple[float, float]:
    """First highest peak of direction·y among the candidate grid points, refined between grid points.

    Every local maximum near the top is refined, and the earliest within 10⁻⁶ (relative)
    of the highest wins (the accuracy of the refinement), so an undamped loop reports
    its first peak.
    """
    if not candidates:
        candidates = [int((direction * cell.values).argmax())]
    if len(candidates) == 1:  # the usual case: one point at the top
        return cell.extreme(candidates[0], direction)
    refined = [cell.extreme(k, direction) for k in candidates[:50]]
    best = max(direction * value for _, value in refined)
    for t, value in refined:
        if direction * value >= best - 1e-6 * scale:
            return t, value
    return refined[0]


_STILL = "the output does not move in this response"
_STILL_METRICS = tuple((metric, _STILL) for metric in ("rise_time", "settling_time", "overshoot_percent",
                                                         "peak_value", "peak_time"))


def _measure_output_rows(time, values, slopes, *, regulation, starts, finals, targets, band, noise_floors,
                         indices, names, final_reasons, final_notes, target_reasons,
                         at_samples, extremes=None) -> list[OutputMetrics]:
    """:func:`measure_output` for every row of ``values`` (c, N) at once.

    Each row is one output of one response, on the common time grid ``time`` (N,);
    ``slopes`` is None or (c, N) like ``values``. The passes over the N grid points are
    done for all rows together (a few numpy calls along contiguous rows); only the
    refinements between grid points run row by row. ``regulation`` … ``target_reasons``
    are sequences with one entry per row; ``extremes`` may bring the lists of each row's
    largest and smallest value when the caller has them.
    """
    values = np.asarray(values, dtype=float)
    rows, count = values.shape
    start_list = [float(s) for s in starts]
    final_list = [float(f) for f in finals]
    target_list = [float(t) for t in targets]
    highest, lowest = extremes if extremes is not None else (values.max(axis=1).tolist(), values.min(axis=1).tolist())
    first = values[:, 0].tolist()

    # 1. Rows that do not move; the direction of each peak. Extremes of y − y₀ and of |y|
    # are read from the row's largest and smallest value (subtraction and |·| are monotone
    # in y, so this is exactly the maximum over the grid points).
    results: list = [None] * rows
    directions = [1.0] * rows
    for j in range(rows):
        start, final, y0 = start_list[j], final_list[j], first[j]
        excursion = max(max(highest[j] - y0, y0 - lowest[j]), abs(y0 - start))
        finite_final = math.isfinite(final)
        if excursion <= noise_floors[j] and (not finite_final or abs(final - start) <= noise_floors[j]):
            if finite_final and math.isfinite(target_list[j]):
                error, extra = target_list[j] - final, ()
            else:
                error, extra = NAN, (("steady_state_error", _STILL),)
            results[j] = OutputMetrics(indices[j], names[j], NAN, NAN, NAN, NAN, NAN, error, final, start,
                                       target_list[j], _STILL_METRICS + extra)
            continue
        # Peak: regulation → largest magnitude; step → extreme in the direction of the change.
        if regulation[j]:
            # the sign of y where |y| is largest (first such point on a tie of the two extremes)
            if abs(highest[j]) > abs(lowest[j]):
                at_largest = highest[j]
            elif abs(lowest[j]) > abs(highest[j]):
                at_largest = lowest[j]
            else:
                row = values[j]
                at_largest = highest[j] if int(row.argmax()) <= int(row.argmin()) else lowest[j]
            directions[j] = 1.0 if at_largest >= 0 else -1.0
        elif finite_final and abs(final - start) > NEGLIGIBLE_CHANGE * excursion:
            directions[j] = 1.0 if final > start else -1.0
        else:
            farthest = int(np.argmax(np.abs(values[j] - start)))
            directions[j] = 1.0 if values[j, farthest] >= start else -1.0
    active = [j for j in range(rows) if results[j] is None]
    if not active:
        return results

    # 2. Peaks: signal = direction·y, whose top and bottom follow from the extremes of y.
    tops = [highest[j] if directions[j] > 0 else -lowest[j] for j in range(rows)]
    bottoms = [lowest[j] if directions[j] > 0 else -highest[j] for j in range(rows)]
    peak_scales = [max(abs(tops[j]), abs(bottoms[j]), 1e-300) for j in range(rows)]
    # The signals direction·y go between columns of −∞ (see _peak_candidates); one contiguous
    # scratch block then serves the successive full-size passes (deviations, distances, travel),
    # so a long response needs no fresh memory for each of them (and no strided passes).
    padded = np.empty((rows, count + 2))
    padded[:, 0] = padded[:, -1] = -math.inf
    np.multiply(values, np.array(directions)[:, None], out=padded[:, 1:-1])
    candidates = _peak_candidates(padded, tops, peak_scales)
    scratch = deviations = np.subtract(values, np.array(final_list)[:, None])
    # first grid point farthest above / below the final value; |y − final| is largest at
    # one of them (the earlier one on a tie), and so is the overshoot past it
    above_at, below_at = deviations.argmax(axis=1).tolist(), deviations.argmin(axis=1).tolist()
    farthest_from_final = []
    for j in range(rows):
        high, low = abs(float(deviations[j, above_at[j]])), abs(float(deviations[j, below_at[j]]))
        farthest_from_final.append(above_at[j] if high > low else below_at[j] if low > high
                                   else min(above_at[j], below_at[j]))
    distance = np.abs(deviations, out=scratch)

    cells = {}
    peaks = {}
    bands = [math.inf] * rows
    changes = [1.0] * rows  # rows that do not move divide by 1 (their travel is not used)
    moving = [False] * rows
    measured = []
    for j in active:
        cell = cells[j] = _Column(time, values[j], None if slopes is None else slopes[j], at_samples)
        peaks[j] = _peak(cell, candidates[j], peak_scales[j], directions[j])
        final, start = final_list[j], start_list[j]
        if not math.isfinite(final):
            continue
        measured.append(j)
        k = farthest_from_final[j]
        side = 1.0 if values[j, k] >= final else -1.0
        _, extreme = cell.extreme(k, side)
        deviation = max(abs(extreme - final), abs(start - final))
        change = final - start
        moving[j] = abs(change) > NEGLIGIBLE_CHANGE * deviation
        if moving[j]:
            changes[j] = change
        # Settling band: relative to the step size for a reference step, to the largest
        # deviation from the final value for regulation (or when the output ends where it began).
        scale = abs(change) if (moving[j] and not regulation[j]) else deviation
        bands[j] = band * scale

    last_outside = first_10 = first_90 = overshoot_at = None
    if measured:
        outside = distance > np.array(bands)[:, None]
        last_outside = (count - 1 - outside[:, ::-1].argmax(axis=1)).tolist()
        if any(moving):
            travelled = np.subtract(values, np.array(start_list)[:, None], out=scratch)
            np.divide(travelled, np.array(changes)[:, None], out=travelled)
            reached_10, reached_90 = travelled >= 0.1, travelled >= 0.9
            first_10, first_90 = reached_10.argmax(axis=1).tolist(), reached_90.argmax(axis=1).tolist()
            overshoot_at = [above_at[j] if changes[j] > 0 else below_at[j] for j in range(rows)]

    for j in active:
        cell, final, start = cells[j], final_list[j], start_list[j]
        peak_time, peak_value = peaks[j]
        rise = settle = overshoot = error = NAN
        note = []
        if not math.isfinite(final):
            why = final_reasons[j] or "the response has no final value"
            note = [(metric, why) for metric in ("rise_time", "settling_time", "overshoot_percent",
                                                 "steady_state_error")]
        else:
            if final_notes[j]:
                note.append(("final_value", final_notes[j]))
            if math.isfinite(target_list[j]):
                error = target_list[j] - final
            else:
                note.append(("steady_state_error", target_reasons[j] or "this output has no target"))
            k = last_outside[j]
            if not outside[j, k]:
                settle = 0.0
            elif k < count - 1:
                level = final + math.copysign(bands[j], float(values[j, k]) - final)
                settle = cell.crossing(k, level, last=True)
            if not math.isfinite(settle):
                note.append(("settling_time", f"still outside the ±{band:.3g} band at the end of the horizon"))
            if moving[j]:
                change = changes[j]
                times = []
                for fraction, reached, first_at in ((0.1, reached_10, first_10), (0.9, reached_90, first_90)):
                    k = first_at[j]
                    if not reached[j, k]:
                        times.append(NAN)
                    elif k == 0:
                        times.append(float(time[0]))
                    else:
                        times.append(cell.crossing(k - 1, start + fraction * change))
                if math.isfinite(times[0]) and math.isfinite(times[1]):
                    rise = times[1] - times[0]
                else:
                    note.append(("rise_time", "the output does not reach 90 % of its change within the horizon"))
                direction = 1.0 if change > 0 else -1.0
                _, extreme = cell.extreme(overshoot_at[j], direction)
                overshoot = max(0.0, direction * (extreme - final)) / abs(change) * 100.0
            else:
                why = "the output starts and ends at the same value, so it has no rise or overshoot"
                note.append(("rise_time", why))
                note.append(("overshoot_percent", why))
        results[j] = OutputMetrics(indices[j], names[j], rise, settle, overshoot, peak_value, peak_time, error,
                                   final, start, target_list[j], tuple(note))
    return results


def measure_output(
    time,
    values,
    slopes,
    *,
    kind: str,
    start: float,
    final: float,
    target: float,
    band: float,
    index: int,
    name: str,
    noise_floor: float,
    final_reason: str = "",
    final_note: str = "",
    target_reason: str = "",
    at_samples: bool = False,
) -> OutputMetrics:
    """Measure one output of one response (see :class:`OutputMetrics` for the definitions).

    Parameters
    ----------
    time, values : numpy.ndarray, shape (N,)
        Grid times (s) and output values.
    slopes : numpy.ndarray, shape (N,) or None
        Exact dy/dt at the grid points when known.
    kind : {"initial", "step", "disturbance"}
    start, final, target : float
        See :class:`OutputMetrics`; ``final`` is ``nan`` when there is no steady
        state, with ``final_reason`` saying why.
    band : float
        Settling band as a fraction (0.02 for 2 %).
    index, name
        Which output.
    noise_floor : float
        Excursions at or below this size count as "the output does not move".
    final_note, target_reason : str
        Notes recorded with the final value and the steady-state error.
    at_samples : bool
        The signal exists only at the samples (sampled plant): times and peaks are
        read at the samples instead of interpolated between them.

    Examples
    --------
    >>> t = np.linspace(0.0, 8.0, 801)
    >>> y = 1.0 - np.exp(-t)  # first-order step: no overshoot, rise time ln 9
    >>> m = measure_output(t, y, np.exp(-t), kind="step", start=0.0, final=1.0, target=1.0, band=0.02,
    ...                    index=0, name="y", noise_floor=0.0)
    >>> round(m.rise_time, 6), m.overshoot_percent, round(m.settling_time, 6)  # ln 9, 0, ln 50
    (2.197225, 0.0, 3.912023)
    """
    values = np.asarray(values, dtype=float)
    return _measure_output_rows(
        np.asarray(time, dtype=float), values[None, :], None if slopes is None else np.asarray(slopes, float)[None, :],
        regulation=[kind != "step"], starts=[start], finals=[final], targets=[target], band=band,
        noise_floors=[noise_floor], indices=[index], names=[name], final_reasons=[final_reason],
        final_notes=[final_note], target_reasons=[target_reason], at_samples=at_samples,
    )[0]


def _measure_input_rows(time, values, slopes, *, energies, indices, names, energy_reasons,
                        at_samples) -> list[InputMetrics]:
    """:func:`measure_input` for every row of ``values`` (c, N) at once (``slopes`` None or (c, N))."""
    values = np.asarray(values, dtype=float)
    largest_at = np.abs(values).argmax(axis=1).tolist()
    results = []
    for j, k in enumerate(largest_at):
        row = values[j]
        direction = 1.0 if row[k] >= 0 else -1.0
        peak_time, peak = _refined_extreme(time, row, None if slopes is None else slopes[j], k, direction,
                                           at_samples)
        energy = energies[j]
        reasons = () if math.isfinite(energy) else (("energy", energy_reasons[j] or "not available"),)
        results.append(InputMetrics(indices[j], names[j], abs(peak), peak_time, energy, reasons))
    return results


def measure_input(time, values, slopes, *, energy: float, index: int, name: str, energy_reason: str = "",
                  at_samples: bool = False) -> InputMetrics:
    """Peak |u| (refined between grid points when slopes are known) and the given energy.

    Parameters
    ----------
    time, values : numpy.ndarray, shape (N,)
    slopes : numpy.ndarray, shape (N,) or None
    energy : float
        ∫u² dt computed by the caller (``nan`` with ``energy_reason`` if unavailable).
    index, name
        Which input.
    """
    values = np.asarray(values, dtype=float)
    return _measure_input_rows(
        np.asarray(time, dtype=float), values[None, :], None if slopes is None else np.asarray(slopes, float)[None, :],
        energies=[energy], indices=[index], names=[name], energy_reasons=[energy_reason], at_samples=at_samples,
    )[0]


def _time_beyond(time, values, slopes, level: float, side: float, widths=None) -> float:
    """Total time where side·(y − level) > 0, with crossings placed as in :func:`_crossing`."""
    signal = values - level if side > 0 else level - values  # side·(y − level), exactly
    positive = signal > 0
    a, b = positive[:-1], positive[1:]
    width = np.diff(time) if widths is None else widths
    total = float(np.sum(width[a & b]))
    changes = np.flatnonzero(a != b)
    if changes.size:
        times = time.tolist() if changes.size > 8 else None
        for k in changes.tolist():
            crossing = _crossing(time, values, slopes, k, level)
            t0, t1 = (times[k], times[k + 1]) if times is not None else time[k : k + 2].tolist()
            total += (crossing - t0) if a[k] else (t1 - crossing)
    return total


def find_limit_violation(time, values, slopes, *, low: float, high: float, index: int, name: str,
                         at_samples: bool = False) -> LimitViolation:
    """Compare one input's demand with its actuator range (see :class:`LimitViolation`).

    Examples
    --------
    >>> t = np.linspace(0.0, 1.0, 11)
    >>> v = find_limit_violation(t, 2.0 * t, None, low=-1.0, high=1.0, index=0, name="u1")
    >>> v.exceeded, round(v.first_time, 6), round(v.worst_excess, 6), round(v.fraction_beyond, 6)
    (True, 0.5, 1.0, 0.5)
    """
    values = np.asarray(values, dtype=float)
    time = np.asarray(time, dtype=float)
    low, high = float(low), float(high)
    above = values - high
    below = low - values
    excess = np.maximum(np.maximum(above, below), 0.0)
    # A demand that equals its limit up to round-off is at the limit, not beyond it: the
    # simulated values carry relative errors of a few eps (a step whose exact peak is the
    # limit came out 2.25e-15 above it), so excesses below 1e3·eps of the data's size count as 0.
    finite = values[np.isfinite(values)]
    scale = max(abs(low) if math.isfinite(low) else 0.0, abs(high) if math.isfinite(high) else 0.0,
                float(np.max(np.abs(finite))) if finite.size else 0.0)
    excess = np.where(excess > _LIMIT_ROUND_OFF * scale, excess, 0.0)
    outside = excess > 0.0
    k = int(outside.argmax())
    if not outside[k]:
        return LimitViolation(index, name, low, high, False, NAN, 0.0, 0.0, "", 0.0)
    if k == 0:
        first = float(time[0])
    else:
        level = high if above[k] > 0.0 else low
        first = _crossing(time, values, slopes, k - 1, level, at_samples=at_samples)
    worst = int(np.argmax(excess))
    side = "high" if above[worst] > 0.0 else "low"
    limit = high if side == "high" else low
    reference = abs(limit) if limit != 0.0 else high - low
    span = float(time[-1] - time[0])
    if at_samples:  # each sample is held for one period; the last one starts after the horizon
        beyond = float(np.sum(np.diff(time) * outside[:-1]))
    else:
        widths = np.diff(time)
        beyond = (_time_beyond(time, values, slopes, high, 1.0, widths)
                  + _time_beyond(time, values, slopes, low, -1.0, widths))
    return LimitViolation(
        index,
        name,
        low,
        high,
        True,
        first,
        float(excess[worst]),
        float(excess[worst] / reference * 100.0),
        side,
        float(beyond / span) if span > 0 else 1.0,
    )
