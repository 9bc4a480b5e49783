"""Private adaptive sampler for pole loci, with branch tracking by optimal assignment.

A locus is the set of closed-loop poles as one real parameter sweeps a range. A
uniform grid fine enough for the fastest part of the locus (next to a breakaway
point, where poles move like the square root of the gain) wastes most of its
samples elsewhere, so the range is refined by bisection: an interval is split
while the poles at its midpoint stand further than a small fraction of the plot
span from the straight chord between its ends, or while any pole moves more than
a larger fraction of the span across it (so that consecutive samples can be
matched reliably). Every evaluated sample is kept.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import linear_sum_assignment

__all__: list[str] = []  # private helpers, nothing re-exported

_EPS = np.finfo(float).eps


@dataclass(frozen=True, eq=False)
class SampledLocus:
    """Samples of a locus: parameter values (N,) sorted, poles (N, n) branch-tracked."""

    values: np.ndarray
    poles: np.ndarray
    evaluation_count: int
    span: float


def match_to(reference: np.ndarray, candidates: np.ndarray) -> np.ndarray:
    """Permutation p minimising Σ|reference[k] − candidates[p[k]]| (optimal assignment).

    :func:`match_rows` for one row (the same rule: nearest candidates when all differ).
    """
    size = reference.size
    if size <= 1:
        return np.zeros(size, dtype=int)
    cost = np.abs(reference[:, None] - candidates[None, :])
    nearest = np.argmin(cost, axis=1)
    if len(set(nearest.tolist())) < size:
        rows, cols = linear_sum_assignment(cost)
        nearest[rows] = cols
    return nearest


def match_rows(references: np.ndarray, candidates: np.ndarray) -> np.ndarray:
    """Optimal assignment for each row at once: p[r] minimises Σ_k |references[r, k] − candidates[r, p[r, k]]|.

    When every reference's nearest candidate is a different one, taking the nearest
    for each reaches the lower bound Σ_k min_j cost[k, j] of any assignment, so it is
    optimal; only the rows where two references share a nearest candidate are
    handed to the Hungarian-type solver. On a finely sampled locus that is rare,
    so the matching costs a few array operations instead of one solver call per row.

    Parameters
    ----------
    references, candidates : numpy.ndarray, shape (k, n), complex

    Returns
    -------
    numpy.ndarray of int, shape (k, n)
    """
    count, size = references.shape
    if size <= 1:
        return np.zeros((count, size), dtype=int)
    cost = np.abs(references[:, :, None] - candidates[:, None, :])
    nearest = np.argmin(cost, axis=2)
    shared = np.flatnonzero(np.any(np.sort(nearest, axis=1) != np.arange(size), axis=1))
    for row in shared:
        rows, cols = linear_sum_assignment(cost[row])
        nearest[row, rows] = cols
    return nearest


def track_branches(poles: np.ndarray) -> np.ndarray:
    """Reorder each row of poles (N, n) so that column k follows one branch.

    Consecutive raw rows are matched all at once; since an optimal assignment does
    not depend on how the reference row is ordered, the order of row k is the
    matching from row k − 1 applied to the order of row k − 1.
    """
    tracked = np.array(poles, dtype=complex, copy=True)
    count, size = tracked.shape
    if count <= 1 or size <= 1:
        return tracked
    steps = match_rows(tracked[:-1], tracked[1:])
    orders = np.empty((count, size), dtype=int)
    order = np.arange(size)
    orders[0] = order
    for k in range(1, count):
        order = steps[k - 1][order]
        orders[k] = order
    return np.take_along_axis(tracked, orders, axis=1)


def plot_span(poles: np.ndarray) -> float:
    """Diagonal of the bounding box of all poles (the size of the pole-map plot)."""
    if poles.size == 0:
        return 1.0
    finite = poles[np.isfinite(poles)]
    if finite.size == 0:
        return 1.0
    span = float(np.hypot(np.ptp(finite.real), np.ptp(finite.imag)))
    if span == 0.0:
        span = max(float(np.max(np.abs(finite))), 1.0)
    return span


def _fast_span(poles: np.ndarray) -> float:
    """:func:`plot_span` without the filtering when every pole is finite (the usual case)."""
    if poles.size == 0:
        return 1.0
    real, imag = poles.real, poles.imag
    span = math.hypot(float(real.max() - real.min()), float(imag.max() - imag.min()))
    if math.isfinite(span) and span > 0.0:
        return span
    return plot_span(poles)


def adaptive_locus(
    evaluate,
    low: float,
    high: float,
    required=(),
    *,
    initial_count: int = 21,
    position_tolerance: float = 4e-4,
    movement_limit: float = 0.05,
    max_evaluations: int = 3000,
) -> SampledLocus:
    """Sample ``evaluate(values) -> poles (len(values), n)`` adaptively on [low, high].

    Parameters
    ----------
    evaluate : callable
        Maps a 1-D array of parameter values to an array of poles, one row each.
    low, high : float
        The range (low < high).
    required : iterable of float
        Values that must be among the samples (the current value, crossings); those
        outside [low, high] are ignored (those a rounding error outside are clipped in).
    position_tolerance : float
        Largest distance, as a fraction of the plot span, between the midpoint
        poles and the chord between the ends of an accepted interval.
    movement_limit : float
        Largest pole movement across an accepted interval, as a fraction of the span.
    max_evaluations : int
        Hard cap on the number of evaluated samples.
    """
    base = np.linspace(low, high, initial_count)
    slack = 1e-9 * (high - low)
    # values a rounding error outside the range (a crossing at 0 computed as −1e-17) are clipped in
    extra = np.clip(np.array([v for v in required if low - slack <= v <= high + slack], dtype=float), low, high)
    values = np.unique(np.concatenate([base, extra]))
    poles = np.asarray(evaluate(values), dtype=complex)
    all_values = [values]
    all_poles = [poles]
    count = values.size
    span = plot_span(poles)
    smallest_width = 64.0 * _EPS * max(abs(low), abs(high), high - low)
    # Pending intervals as arrays: ends (lows, highs) and the poles there (k, n).
    lows, highs = values[:-1], values[1:]
    low_poles, high_poles = poles[:-1], poles[1:]
    size = poles.shape[1]
    while lows.size and count < max_evaluations:
        widths = highs - lows
        if widths.min() <= smallest_width or lows.size > max_evaluations - count:
            keep = np.flatnonzero(widths > smallest_width)[: max_evaluations - count]
            if keep.size == 0:
                break
            lows, highs, low_poles, high_poles = lows[keep], highs[keep], low_poles[keep], high_poles[keep]
        mids = 0.5 * (lows + highs)
        mid_poles = np.asarray(evaluate(mids), dtype=complex)
        count += mids.size
        all_values.append(mids)
        all_poles.append(mid_poles)
        span = max(span, _fast_span(mid_poles))
        if size == 0:
            break
        # Follow each pole from the low end through the midpoint to the high end (one
        # batched assignment for both halves), then compare the midpoint with the chord.
        rows = np.arange(lows.size)[:, None]
        matched = match_rows(np.concatenate([low_poles, mid_poles]), np.concatenate([mid_poles, high_poles]))
        to_mid, to_high = matched[: lows.size], matched[lows.size :]
        mid_matched = mid_poles[rows, to_mid]
        high_matched = high_poles[rows, to_high[rows, to_mid]]
        chord_mid = 0.5 * (low_poles + high_matched)
        deviation = np.abs(mid_matched - chord_mid).max(axis=1)
        movement = np.abs(high_matched - low_poles).max(axis=1)
        split = (deviation > position_tolerance * span) | (movement > movement_limit * span)
        if not split.all():
            lows, highs, mids = lows[split], highs[split], mids[split]
            low_poles, high_poles, mid_poles = low_poles[split], high_poles[split], mid_poles[split]
        # each split interval becomes (low, mid) followed by (mid, high)
        halves = 2 * lows.size
        new_lows, new_highs = np.empty(halves), np.empty(halves)
        new_lows[0::2], new_lows[1::2] = lows, mids
        new_highs[0::2], new_highs[1::2] = mids, highs
        new_low_poles = np.empty((halves, size), dtype=complex)
        new_high_poles = np.empty((halves, size), dtype=complex)
        new_low_poles[0::2], new_low_poles[1::2] = low_poles, mid_poles
        new_high_poles[0::2], new_high_poles[1::2] = mid_poles, high_poles
        lows, highs, low_poles, high_poles = new_lows, new_highs, new_low_poles, new_high_poles
    values = np.concatenate(all_values)
    poles = np.concatenate(all_poles, axis=0)
    order = np.argsort(values, kind="stable")
    values = values[order]
    poles = poles[order]
    return SampledLocus(values, track_branches(poles), count, plot_span(poles))
