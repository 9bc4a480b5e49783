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
def _hermite_coefficients(t0, t1, y0, y1, d0, d1):
    """Cubic a s³ + b s² + c s + d on s ∈ [0, 1] matching values and slopes (cubic Hermite)."""
    h = t1 - t0
    return (
        float(2 * y0 + h * d0 - 2 * y1 + h * d1),
        float(-3 * y0 - 2 * h * d0 + 3 * y1 - h * d1),
        float(h * d0),
        float(y0),
    )


def _cubic(coefficients, s):
    a, b, c, d = coefficients
    return ((a * s + b) * s + c) * s + d


def _stationary_points(coefficients) -> list[float]:
    """Roots in (0, 1) of the derivative 3a s² + 2b s + c, in increasing order."""
    a, b, c, _ = coefficients
    qa, qb, qc = 3.0 * a, 2.0 * b, c
    roots: list[float] = []
    if qa == 0.0:
        if qb != 0.0:
            roots = [-qc / qb]
    else:
        discriminant = qb * qb - 4.0 * qa * qc
        if discriminant >= 0.0:
            # numerically stable quadratic formula
            q = -0.5 * (qb + math.copysign(math.sqrt(discriminant), qb))
            roots = [q / qa] + ([qc / q] if q != 0.0 else [])
    return sorted(r for r in roots if 0.0 < r < 1.0)


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


def _crossing(time, values, slopes, k: int, level: float, last: bool = False, at_samples: bool = False) -> float:
    """Time in [t_k, t_{k+1}] where the signal crosses ``level`` (first or last crossing).

    With ``at_samples`` (a sampled plant, whose signals exist only at the samples)
    the answer is the sample t_{k+1} where the new side is first seen.
    """
    if at_samples:
        return float(time[k + 1])
    t0, t1 = float(time[k]), float(time[k + 1])
    y0, y1 = float(values[k]), float(values[k + 1])
    if slopes is not None and math.isfinite(slopes[k]) and math.isfinite(slopes[k + 1]):
        coefficients = _hermite_coefficients(t0, t1, y0, y1, slopes[k], slopes[k + 1])
        edges = [0.0, *_stationary_points(coefficients), 1.0]
        pieces = list(zip(edges[:-1], edges[1:]))
        for low, high in reversed(pieces) if last else pieces:
            f_low = _cubic(coefficients, low) - level
            f_high = _cubic(coefficients, high) - level
            if f_low == 0.0 or f_high == 0.0 or (f_low > 0.0) != (f_high > 0.0):
                return t0 + _bisect(coefficients, level, low, high) * (t1 - t0)
    if y1 == y0:
        return t0
    s = min(max((level - y0) / (y1 - y0), 0.0), 1.0)
    return t0 + s * (t1 - t0)


def _refined_extreme(time, values, slopes, k: int, direction: float, at_samples: bool = False):
    """Time and value of the local maximum of direction·y near grid point k."""
    best_t, best_y = float(time[k]), float(values[k])
    if at_samples:
        return best_t, best_y
    count = len(values)
    if slopes is not None:
        for j in (k - 1, k):
            if j < 0 or j + 1 >= count or not (math.isfinite(slopes[j]) and math.isfinite(slopes[j + 1])):
                continue
            coefficients = _hermite_coefficients(time[j], time[j + 1], values[j], values[j + 1],
                                                 slopes[j], slopes[j + 1])
            for s in _stationary_points(coefficients):
                y = _cubic(coefficients, s)
                if direction * y > direction * best_y:
                    best_t, best_y = float(time[j] + s * (time[j + 1] - time[j])), float(y)
        return best_t, best_y
    if 0 < k < count - 1:
        # parabola through three equally spaced points
        ym, y0, yp = float(values[k - 1]), float(values[k]), float(values[k + 1])
        curvature = ym - 2 * y0 + yp
        if curvature != 0.0:
            s = 0.5 * (ym - yp) / curvature
            if -1.0 <= s <= 1.0:
                y = y0 - 0.25 * (ym - yp) * s
                if direction * y > direction * best_y:
                    h = float(time[k + 1] - time[k])
                    best_t, best_y = float(time[k] + s * h), float(y)
    return best_t, best_y


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


def _peak(time, values, slopes, direction: float, at_samples: bool) -> tuple[float, float]:
    """First highest peak of direction·y: (time, value), refined between grid points.

    Every local maximum near the top is refined, and the earliest within 10⁻⁶ (relative)
    of the highest wins (the accuracy of the refinement), so an undamped loop reports
    its first peak.
    """
    signal = direction * np.asarray(values, dtype=float)
    top = float(signal.max())
    scale = max(abs(top), abs(float(signal.min())), 1e-300)
    near = np.flatnonzero(signal >= top - 1e-3 * scale)
    # local maxima among the points near the top (an end point needs only its one neighbour)
    last = signal.size - 1
    here = signal[near]
    local = (here >= signal[np.maximum(near - 1, 0)]) & (here >= signal[np.minimum(near + 1, last)])
    candidates = near[local]
    if candidates.size == 0:
        candidates = np.array([int(signal.argmax())])
    refined = [_refined_extreme(time, values, slopes, int(k), direction, at_samples) for k in candidates[:50]]
    best = max(direction * value for _, value in refined)
    for t, value in refined:
        if direction * value >= best - 1e-6 * scale:
            return t, value
    return refined[0]


def _first_reaching(time, values, slopes, start, change, fraction, at_samples=False):
    """First time y has travelled ``fraction`` of ``change`` from ``start`` (nan if never)."""
    reached = (values - start) / change >= fraction
    k = int(reached.argmax())
    if not reached[k]:
        return NAN
    if k == 0:
        return float(time[0])
    return _crossing(time, values, slopes, k - 1, start + fraction * change, at_samples=at_samples)


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
    """
    reasons: list[tuple[str, str]] = []
    result = dict(
        rise_time=NAN,
        settling_time=NAN,
        overshoot_percent=NAN,
        peak_value=NAN,
        peak_time=NAN,
        steady_state_error=NAN,
    )
    values = np.asarray(values, dtype=float)
    regulation = kind != "step"

    excursion = max(float(np.abs(values - values[0]).max()), abs(float(values[0]) - start))
    if excursion <= noise_floor and (not math.isfinite(final) or abs(final - start) <= noise_floor):
        why = "the output does not move in this response"
        reasons.extend((metric, why) for metric in result)
        if math.isfinite(final) and math.isfinite(target):
            result["steady_state_error"] = target - final
            reasons = [(m, w) for m, w in reasons if m != "steady_state_error"]
        return OutputMetrics(index, name, **result, final_value=final, start_value=start, target=target,
                             undefined_reasons=tuple(reasons))

    # Peak: regulation → largest magnitude; step → extreme in the direction of the change.
    if regulation:
        k = int(np.abs(values).argmax())
        direction = 1.0 if values[k] >= 0 else -1.0
    else:
        if math.isfinite(final) and abs(final - start) > NEGLIGIBLE_CHANGE * excursion:
            direction = 1.0 if final > start else -1.0
        else:
            farthest = int(np.argmax(np.abs(values - start)))
            direction = 1.0 if values[farthest] >= start else -1.0
    result["peak_time"], result["peak_value"] = _peak(time, values, slopes, direction, at_samples)

    if not math.isfinite(final):
        for metric in ("rise_time", "settling_time", "overshoot_percent", "steady_state_error"):
            reasons.append((metric, final_reason or "the response has no final value"))
        return OutputMetrics(index, name, **result, final_value=final, start_value=start, target=target,
                             undefined_reasons=tuple(reasons))
    if final_note:
        reasons.append(("final_value", final_note))

    if math.isfinite(target):
        result["steady_state_error"] = target - final
    else:
        reasons.append(("steady_state_error", target_reason or "this output has no target"))

    change = final - start
    farthest = int(np.abs(values - final).argmax())
    side = 1.0 if values[farthest] >= final else -1.0
    _, extreme = _refined_extreme(time, values, slopes, farthest, side, at_samples)
    deviation = max(abs(extreme - final), abs(start - final))
    moves = abs(change) > NEGLIGIBLE_CHANGE * deviation

    # Settling band: relative to the step size for a reference step, to the largest
    # deviation from the final value for regulation (or when the output ends where it began).
    scale = abs(change) if (moves and not regulation) else deviation
    result["settling_time"] = settling_time(time, values, slopes, final, band * scale, at_samples)
    if not math.isfinite(result["settling_time"]):
        reasons.append(("settling_time", f"still outside the ±{band:.3g} band at the end of the horizon"))

    if moves:
        t10 = _first_reaching(time, values, slopes, start, change, 0.1, at_samples)
        t90 = _first_reaching(time, values, slopes, start, change, 0.9, at_samples)
        if math.isfinite(t10) and math.isfinite(t90):
            result["rise_time"] = t90 - t10
        else:
            reasons.append(("rise_time", "the output does not reach 90 % of its change within the horizon"))
        direction = 1.0 if change > 0 else -1.0
        j = int((direction * (values - final)).argmax())
        _, extreme = _refined_extreme(time, values, slopes, j, direction, at_samples)
        result["overshoot_percent"] = max(0.0, direction * (extreme - final)) / abs(change) * 100.0
    else:
        why = "the output starts and ends at the same value, so it has no rise or overshoot"
        reasons.append(("rise_time", why))
        reasons.append(("overshoot_percent", why))

    return OutputMetrics(index, name, **result, final_value=final, start_value=start, target=target,
                         undefined_reasons=tuple(reasons))


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
    k = int(np.argmax(np.abs(values)))
    direction = 1.0 if values[k] >= 0 else -1.0
    peak_time, peak = _refined_extreme(time, values, slopes, k, direction, at_samples)
    reasons = () if math.isfinite(energy) else (("energy", energy_reason or "not available"),)
    return InputMetrics(index, name, abs(peak), peak_time, energy, reasons)


def _time_beyond(time, values, slopes, level: float, side: float) -> float:
    """Total time where side·(y − level) > 0, with crossings placed as in :func:`_crossing`."""
    signal = side * (values - level)
    a, b = signal[:-1], signal[1:]
    width = np.diff(time)
    total = float(np.sum(width[(a > 0) & (b > 0)]))
    for k in np.flatnonzero((a > 0) != (b > 0)):
        crossing = _crossing(time, values, slopes, int(k), level)
        total += (crossing - time[k]) if a[k] > 0 else (time[k + 1] - crossing)
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
    low, high = float(low), float(high)
    above = values - high
    below = low - values
    excess = np.maximum(np.maximum(above, below), 0.0)
    if not np.any(excess > 0.0):
        return LimitViolation(index, name, low, high, False, NAN, 0.0, 0.0, "", 0.0)
    k = int(np.flatnonzero(excess > 0.0)[0])
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
        beyond = float(np.sum(np.diff(time) * (excess[:-1] > 0.0)))
    else:
        beyond = _time_beyond(time, values, slopes, high, 1.0) + _time_beyond(time, values, slopes, low, -1.0)
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
