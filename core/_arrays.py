"""Small array helpers shared by the core's modules."""

from __future__ import annotations

import numpy as np

__all__: list[str] = []  # private helpers; nothing here is public API


def read_only(array, dtype=None) -> np.ndarray:
    """A read-only copy of ``array``, so a frozen result dataclass is really frozen."""
    out = np.array(array, dtype=dtype, copy=True)
    out.setflags(write=False)
    return out
