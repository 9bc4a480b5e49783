"""Undo and redo of gain changes, and the timestamped gain history saved with a design.

Two records with different jobs: :class:`UndoHistory` holds the gains to go back and
forth between in this session (a whole gesture is one step); :class:`GainLog` is the
design's own history of accepted gains with their times, saved in the design file.
Neither knows about Panel or the core.
"""

from __future__ import annotations

import numpy as np

from .design_file import MAX_GAIN_HISTORY, now_timestamp

__all__ = ["UndoHistory", "GainLog"]


def _same(first: np.ndarray, second: np.ndarray) -> bool:
    return first.shape == second.shape and first.tobytes() == second.tobytes()


class UndoHistory:
    """Gains to undo and redo; the live steps of a gesture make one step together.

    The values are K arrays by default; a caller that undoes more than K (the workbench
    also undoes the estimator gain L) passes its own ``same`` and ``copy`` for its values.
    """

    def __init__(self, same=None, copy=None):
        self._same = same or (lambda first, second: np.array_equal(first, second))
        self._copy = copy or (lambda value: np.array(value, copy=True))
        self._back: list = []
        self._forward: list = []
        self._gesture_start = None

    @property
    def undo_depth(self) -> int:
        return len(self._back)

    @property
    def redo_depth(self) -> int:
        return len(self._forward)

    @property
    def in_gesture(self) -> bool:
        """True between the first live step of a gesture and its end."""
        return self._gesture_start is not None

    def live_step(self, before: np.ndarray) -> None:
        """A live step of a gesture from ``before`` (only the gesture's first step is remembered)."""
        if self._gesture_start is None:
            self._gesture_start = self._copy(before)

    def accepted(self, before: np.ndarray, after: np.ndarray) -> None:
        """An accepted change (or the end of a gesture) from ``before`` to ``after``: one undo step."""
        start = self._gesture_start if self._gesture_start is not None else before
        self._gesture_start = None
        if not self._same(start, after):
            self._back.append(self._copy(start))
            self._forward.clear()

    def cancel_gesture(self) -> None:
        self._gesture_start = None

    def step(self, current: np.ndarray, *, back: bool) -> np.ndarray | None:
        """Take one undo (``back``) or redo step from ``current``; the gain to show, or None when there is none."""
        source, target = (self._back, self._forward) if back else (self._forward, self._back)
        if not source:
            return None
        target.append(self._copy(current))
        self._gesture_start = None
        return source.pop()

    def revert_step(self, *, back: bool) -> None:
        """Undo the bookkeeping of the last :meth:`step` (its gain could not be shown)."""
        source, target = (self._back, self._forward) if back else (self._forward, self._back)
        source.append(target.pop())

    def clear(self) -> None:
        self._back.clear()
        self._forward.clear()
        self._gesture_start = None


class GainLog:
    """The accepted gains of a design with their times (newest last, at most MAX_GAIN_HISTORY)."""

    def __init__(self, entries=(), plant=None):
        self.entries: tuple = tuple(entries)
        self._plant = plant
        self.modified = now_timestamp()

    def record(self, plant, gain) -> None:
        """Add ``gain`` if it differs from the last entry (a new plant starts a new log) and stamp the time."""
        when = now_timestamp()
        gain = np.array(gain, dtype=float, copy=True)
        if self._plant is not plant:
            self.entries, self._plant = (), plant
        if not self.entries or not _same(self.entries[-1][1], gain):
            self.entries = (self.entries + ((when, gain),))[-MAX_GAIN_HISTORY:]
        self.modified = when

    def follow(self, plant) -> None:
        """Keep the entries for ``plant``: the same design moved to another time domain (sampled or back)."""
        self._plant = plant

    def restart(self, plant, entries=()) -> None:
        """Start over for ``plant`` with ``entries`` (e.g. those of an opened design file)."""
        self.entries, self._plant = tuple(entries), plant
