"""Sending plot data to the browser only when it changed.

Bokeh sends a data source's columns again whenever ``source.data`` is assigned, even
with the very same numbers, and the browser then redraws that plot. On a slider step
most of the pole map (open-loop poles, spec region, pinned design) stays the same.
"""

from __future__ import annotations

import numpy as np

__all__ = ["update_source"]


def _same_column(old, new) -> bool:
    if isinstance(old, np.ndarray) or isinstance(new, np.ndarray):
        old, new = np.asarray(old), np.asarray(new)
        if old.dtype.kind in "fc" and new.dtype.kind in "fc":
            return old.shape == new.shape and bool(np.array_equal(old, new, equal_nan=True))
        return old.shape == new.shape and bool(np.array_equal(old, new))
    if isinstance(old, (list, tuple)) and isinstance(new, (list, tuple)):
        return len(old) == len(new) and all(_same_column(a, b) for a, b in zip(old, new))
    try:
        return bool(old == new)
    except (TypeError, ValueError):
        return False


def update_source(source, data: dict) -> bool:
    """Set ``source.data = data`` unless every column already holds the same values.

    Returns
    -------
    bool
        True when the data was replaced (and will be sent to the browser).

    Examples
    --------
    >>> from bokeh.models import ColumnDataSource
    >>> source = ColumnDataSource({"xs": [np.array([0.0, 1.0])], "ys": [np.array([0.0, np.nan])]})
    >>> update_source(source, {"xs": [np.array([0.0, 1.0])], "ys": [np.array([0.0, np.nan])]})
    False
    >>> update_source(source, {"xs": [np.array([0.0, 1.5])], "ys": [np.array([0.0, np.nan])]})
    True
    """
    current = source.data
    if current.keys() == data.keys() and all(_same_column(current[key], data[key]) for key in data):
        return False
    source.data = data
    return True
