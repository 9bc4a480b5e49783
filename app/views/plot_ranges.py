"""Axis ranges that stay put while a design is dragged.

A plot whose range moves on every slider step re-measures its tick labels and lays
out the page again in the browser, and the curves jitter against a moving axis.
These helpers round a range outward to whole steps of a 1-2-5 sequence, so a range
changes only when the data crosses a step.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["round_up_to_nice", "steady_time_end", "steady_value_range"]

#: Fraction of the data's span kept free above and below the curves.
VALUE_PADDING = 0.04
#: Steps a range is divided into, at least: few steps leave much of the plot empty,
#: many make the range change often while a slider moves.
RANGE_STEPS = 8


def round_up_to_nice(value: float) -> float:
    """The smallest number of the form {1, 2, 2.5, 5} × 10^k that is ≥ ``value`` (> 0).

    Examples
    --------
    >>> [round_up_to_nice(v) for v in (0.7, 1.0, 2.2, 3.0, 7.3, 9.44)]
    [1.0, 1.0, 2.5, 5.0, 10.0, 10.0]
    """
    if not (math.isfinite(value) and value > 0.0):
        return 1.0
    base = 10.0 ** math.floor(math.log10(value))
    for factor in (1.0, 2.0, 2.5, 5.0, 10.0):
        if value <= factor * base * (1.0 + 1e-12):
            return factor * base
    return 10.0 * base


def steady_time_end(end_time: float) -> float:
    """Right end of a time axis that shows ``end_time`` seconds (rounded up to a whole nice step).

    Examples
    --------
    >>> steady_time_end(9.438), steady_time_end(9.441), steady_time_end(10.2), steady_time_end(13.4)
    (10.0, 10.0, 12.0, 14.0)
    """
    if not (math.isfinite(end_time) and end_time > 0.0):
        return 1.0
    step = round_up_to_nice(end_time / RANGE_STEPS)
    return float(f"{math.ceil(end_time / step * (1.0 - 1e-12)) * step:.12g}")


def steady_value_range(traces) -> tuple[float, float]:
    """(low, high) covering every finite value of ``traces``, padded and rounded out to whole steps.

    Parameters
    ----------
    traces : iterable of array_like
        The curves drawn (NaN marks gaps and is ignored).

    Returns
    -------
    (float, float)
        low < high; (−1, 1) when there is nothing finite to show.

    Examples
    --------
    >>> steady_value_range([[0.1, -0.058, 0.0]])
    (-0.075, 0.125)
    >>> steady_value_range([[-19.9, 3.0]])
    (-25.0, 5.0)
    >>> steady_value_range([[2.0, 2.0], [np.nan]])
    (1.92, 2.08)
    """
    low, high = math.inf, -math.inf
    for trace in traces:
        values = np.asarray(trace, dtype=float)
        finite = values[np.isfinite(values)]
        if finite.size:
            low, high = min(low, float(finite.min())), max(high, float(finite.max()))
    if not math.isfinite(low):
        return (-1.0, 1.0)
    span = high - low
    if span <= 1e-12 * max(abs(low), abs(high), 1e-300):  # a flat line: show it mid-plot
        span = abs(high) if high != 0.0 else 1.0
    low, high = low - VALUE_PADDING * span, high + VALUE_PADDING * span
    step = round_up_to_nice((high - low) / RANGE_STEPS)
    # 12 significant digits: whole steps print as 0.15, not 0.15000000000000002
    return (float(f"{math.floor(low / step) * step:.12g}"), float(f"{math.ceil(high / step) * step:.12g}"))
