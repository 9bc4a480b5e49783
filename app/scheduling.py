"""Keeping the page responsive: latest-only scheduling and guarded callbacks.

A slider or a dragged pole sends many events per second. Each one only records
what it asks for; the work runs on the next tick of the session's event loop and
then uses the newest request, so slow recomputation drops stale requests instead
of queueing them. Every callback is guarded: an exception is logged and shown,
never allowed to leave the page without a working server side.
"""

from __future__ import annotations

import functools
import logging
from typing import Callable, Hashable

__all__ = ["LatestOnly", "guarded"]

log = logging.getLogger(__name__)


class LatestOnly:
    """Run only the newest pending request per key, on the next tick of ``document``.

    Parameters
    ----------
    document : bokeh.document.Document or None
        The session's document; None runs each request at once (tests without a server).
    on_error : callable, optional
        Called with the exception when a request fails.
    """

    def __init__(self, document=None, on_error: Callable[[BaseException], None] | None = None):
        self._document = document
        self._pending: dict[Hashable, Callable[[], object]] = {}
        self._scheduled = False
        self._on_error = on_error

    def submit(self, key: Hashable, request: Callable[[], object]) -> None:
        """Record ``request`` under ``key``, replacing an older request with the same key."""
        if self._document is None:
            self._call(request)
            return
        self._pending[key] = request
        if not self._scheduled:
            self._scheduled = True
            self._document.add_next_tick_callback(self._run_pending)

    def discard(self, key: Hashable) -> None:
        """Drop a pending request (a release supersedes the live requests before it)."""
        self._pending.pop(key, None)

    @property
    def pending(self) -> int:
        """Number of requests waiting to run."""
        return len(self._pending)

    def _run_pending(self) -> None:
        self._scheduled = False
        pending, self._pending = self._pending, {}
        for request in pending.values():
            self._call(request)

    def _call(self, request) -> None:
        try:
            request()
        except Exception as error:  # a failing request must not stop the ones after it
            log.exception("a scheduled update failed")
            if self._on_error is not None:
                self._on_error(error)


def guarded(report: Callable[[str], None]):
    """Decorator for UI callbacks: log and report any exception instead of raising it.

    Parameters
    ----------
    report : callable
        Receives a one-line message for the user.
    """

    def decorate(callback):
        @functools.wraps(callback)
        def wrapper(*args, **kwargs):
            try:
                return callback(*args, **kwargs)
            except Exception as error:
                log.exception("callback %s failed", getattr(callback, "__name__", callback))
                report(f"Something went wrong ({type(error).__name__}: {error}); the design was kept as it was.")
                return None

        return wrapper

    return decorate
