"""What is recomputed and redrawn during a gesture, when it pauses and on release: the one refresh policy.

A *gesture* is a slider drag, a pole drag or a run of arrow-key nudges: many small
changes that end in one accepted change (one undo step). Keeping it fluid means not
computing, sending and laying out what the engineer cannot read at that speed.
Measured with Chromium CPU profiles of a slider drag: the tables and texts are a
fifth of the server's time per step and most of the browser's layout work; the
stable intervals of every entry are the slowest part of an evaluation for a larger K,
the loop margins the slowest for a small one.

Three levels of detail, each a superset of the one before:

========  ==============================================================  =========================
detail    computed                                                        redrawn
========  ==============================================================  =========================
STEP      poles, the selected entry's locus, interval and arrows,          pole map, response plots,
          responses with metrics, view ranges (kept or growing)           gain values
PAUSE     + the exact stable intervals of every entry                     every view
COMPLETE  + loop margins; view ranges fitted to the data again            every view
========  ==============================================================  =========================

The rules: a gesture step is STEP, unless the tables have not caught up for
:attr:`RefreshPolicy.texts_at_least_every` seconds (then PAUSE, so they never lag
far); when no step has come for :attr:`RefreshPolicy.pause_after` seconds the
design shown is brought to PAUSE; a release, a typed value and every change that is
not part of a gesture are COMPLETE. Nothing shown at a lower level is presented as
exact: a view that needs what a level leaves out is not redrawn at that level.

The policy reads time only through the clock it is given, so its rules are tested
without a browser or a server (tests/test_refresh_policy.py). This module knows
nothing about Panel, Bokeh or the core.
"""

from __future__ import annotations

import enum
import math
import time
from dataclasses import dataclass
from typing import Callable

__all__ = ["Detail", "DetailOptions", "RefreshPolicy", "PLOT_VIEWS", "detail_options"]


class Detail(enum.IntEnum):
    """Level of detail of an evaluation (a larger level contains everything of a smaller one)."""

    STEP = 1
    PAUSE = 2
    COMPLETE = 3


@dataclass(frozen=True)
class DetailOptions:
    """What an evaluation at one level of detail computes (the matching core options)."""

    include_all_entry_intervals: bool
    include_margins: bool
    #: View ranges are kept (sliders) or only grow (axes) while a gesture goes on.
    gesture: bool
    #: Only the plot views redraw (the tables and texts wait for the pause).
    plots_only: bool


_OPTIONS = {
    Detail.STEP: DetailOptions(include_all_entry_intervals=False, include_margins=False, gesture=True, plots_only=True),
    Detail.PAUSE: DetailOptions(include_all_entry_intervals=True, include_margins=False, gesture=True,
                                plots_only=False),
    Detail.COMPLETE: DetailOptions(include_all_entry_intervals=True, include_margins=True, gesture=False,
                                   plots_only=False),
}

#: Views redrawn at every level; the others are redrawn from PAUSE on. The values in the gain
#: sliders' number boxes follow too (a nudge moves no handle in the browser); their strips wait.
PLOT_VIEWS = frozenset({"pole_map", "response_plots", "estimator_responses", "slider_values"})


def detail_options(detail: Detail) -> DetailOptions:
    """What an evaluation at ``detail`` computes and which views it redraws.

    Examples
    --------
    >>> detail_options(Detail.STEP).include_margins, detail_options(Detail.COMPLETE).include_margins
    (False, True)
    """
    return _OPTIONS[Detail(detail)]


class RefreshPolicy:
    """The level of detail of each change of one session's design, from the timing of its gesture.

    Parameters
    ----------
    pause_after : float
        A gesture that has had no step for this long (s) has paused.
    texts_at_least_every : float
        During a long gesture, bring the tables up to date at least this often (s).
    clock : callable
        Monotonic seconds (``time.monotonic``; tests pass their own).

    Examples
    --------
    >>> now = [0.0]
    >>> policy = RefreshPolicy(clock=lambda: now[0])
    >>> policy.step(), policy.paused()
    (<Detail.PAUSE: 2>, False)
    >>> now[0] = 0.05; policy.step()
    <Detail.STEP: 1>
    >>> now[0] = 0.3; policy.paused(), policy.paused()
    (True, False)
    >>> policy.release()
    <Detail.COMPLETE: 3>
    """

    def __init__(self, pause_after: float = 0.15, texts_at_least_every: float = 1.0,
                 clock: Callable[[], float] = time.monotonic):
        self.pause_after = pause_after
        self.texts_at_least_every = texts_at_least_every
        self._clock = clock
        self._last_step_at = -math.inf
        self._texts_at = -math.inf
        #: True while the design shown was evaluated at STEP (the tables lag behind it).
        self._behind = False

    def step(self) -> Detail:
        """The detail of a gesture step that happens now."""
        now = self._clock()
        self._last_step_at = now
        if now - self._texts_at >= self.texts_at_least_every:
            self._texts_at = now
            self._behind = False
            return Detail.PAUSE
        self._behind = True
        return Detail.STEP

    def release(self) -> Detail:
        """The detail of a change that ends a gesture or is none (a typed value, a button)."""
        self._texts_at = self._clock()
        self._behind = False
        return Detail.COMPLETE

    @property
    def behind(self) -> bool:
        """Whether the design shown still lacks what the pause adds."""
        return self._behind

    def pause_check_in(self) -> float | None:
        """Seconds until the gesture may have paused (None: nothing waits for a pause)."""
        if not self._behind:
            return None
        return max(0.0, self._last_step_at + self.pause_after - self._clock())

    def paused(self) -> bool:
        """True once per pause: the gesture has paused and the design shown should be brought to PAUSE."""
        if not self._behind or self._clock() - self._last_step_at < self.pause_after:
            return False
        self._texts_at = self._clock()
        self._behind = False
        return True
