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
    """Permutation p minimising Σ|reference[k] − candidates[p[k]]| (optimal assignment)."""
    if reference.size <= 1:
        return np.arange(reference.size)
    cost = np.abs(reference[:, None] - candidates[None, :])
    rows, cols = linear_sum_assignment(cost)
    permutation = np.empty(reference.size, dtype=int)
    permutation[rows] = cols
    return permutation


def track_branches(poles: np.ndarray) -> np.ndarray:
    """Reorder each row of poles (N, n) so that column k follows one branch."""
    tracked = np.array(poles, dtype=complex, copy=True)
    for k in range(1, tracked.shape[0]):
        tracked[k] = tracked[k][match_to(tracked[k - 1], tracked[k])]
    return tracked


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


def adaptive_locus(
    evaluate,
    low: float,
    high: float,
    required=(),
    *,
    initial_count: int = 41,
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
    pending = [(values[k], values[k + 1], poles[k], poles[k + 1]) for k in range(values.size - 1)]
    while pending and count < max_evaluations:
        pending = [p for p in pending if p[1] - p[0] > smallest_width][: max_evaluations - count]
        if not pending:
            break
        mids = np.array([0.5 * (a + b) for a, b, _, _ in pending])
        mid_poles = np.asarray(evaluate(mids), dtype=complex)
        count += mids.size
        all_values.append(mids)
        all_poles.append(mid_poles)
        span = max(span, plot_span(mid_poles))
        next_pending = []
        for (a, b, pa, pb), m, pm in zip(pending, mids, mid_poles):
            pb_matched = pb[match_to(pa, pb)]
            chord_mid = 0.5 * (pa + pb_matched)
            deviation = float(np.max(np.abs(pm[match_to(chord_mid, pm)] - chord_mid), initial=0.0))
            movement = float(np.max(np.abs(pb_matched - pa), initial=0.0))
            if deviation > position_tolerance * span or movement > movement_limit * span:
                next_pending.append((a, m, pa, pm))
                next_pending.append((m, b, pm, pb))
        pending = next_pending
    values = np.concatenate(all_values)
    poles = np.concatenate(all_poles, axis=0)
    order = np.argsort(values, kind="stable")
    values = values[order]
    poles = poles[order]
    return SampledLocus(values, track_branches(poles), count, plot_span(poles))
