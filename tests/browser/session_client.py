"""A workbench session driven over its live connection, without a browser.

Uses Bokeh's own Python client (``bokeh.client``) to open a session of a running
`gainboard serve` exactly as a page does: it pulls the document, announces that the
page is ready (as the browser's script does after rendering), and then changes
widget values, which the server handles like a person's input. Light enough to run
twenty sessions at once on a small machine; used by the load test and the
session-isolation test. Only ever pointed at a server on the loopback address.
"""

from __future__ import annotations

import json
import re
import threading
import time
from urllib.parse import urlsplit

import numpy as np

__all__ = ["SessionClient", "register_workbench_models"]

_REVISION = re.compile(r'data-revision="(\d+)"')
_ROOM_VERSION = re.compile(r'data-room-version="(\d+)"')
_POLE_ROW = re.compile(r'<tr class="gb-pole-row" data-kind="closed" data-real="([^"]+)" data-imag="([^"]+)"')
_registered = False


def register_workbench_models() -> None:
    """Make the workbench's model types known to the client (built once, like the server does)."""
    global _registered
    if _registered:
        return
    import panel.models  # noqa: F401 - registers Panel's model types

    from gainboard import core
    from gainboard.app.workbench import build_workbench

    plant = core.Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]])
    build_workbench(plant).get_root()  # defines the classes of our own components
    _registered = True


class SessionClient:
    """One workbench session over its live connection.

    Parameters
    ----------
    url : str
        The server's URL; must be on 127.0.0.1 (load tests never leave this machine).
    arguments : dict, optional
        Query parameters of the session (``room``, ``name``, ``design``).
    timeout : float
        Seconds to wait for the server to react before giving up.
    """

    def __init__(self, url: str, arguments: dict | None = None, timeout: float = 30.0):
        if urlsplit(url).hostname != "127.0.0.1":
            raise ValueError(f"session clients only connect to 127.0.0.1, not {url}")
        from bokeh.client import pull_session
        from bokeh.document.events import MessageSentEvent
        from bokeh.events import DocumentReady
        from tornado.ioloop import IOLoop

        register_workbench_models()
        self.timeout = timeout
        # The connection gets a thread and event loop of its own from the start: connecting runs an
        # event loop to completion, which asyncio refuses in a thread whose loop is already running
        # (the browser tests' Playwright session keeps one running in the main thread).
        connected, failures = threading.Event(), []

        def connect_and_serve():
            try:
                self.loop = IOLoop()
                self.session = pull_session(url=url, io_loop=self.loop, arguments=arguments or {})
                self._find_models()  # before the loop runs, so no server change is applied meanwhile
            except BaseException as error:  # reported to the constructing thread below
                failures.append(error)
                connected.set()
                return
            connected.set()
            self.session._connection.loop_until_closed()

        self._thread = threading.Thread(target=connect_and_serve, daemon=True, name="session-client")
        self._thread.start()
        if not connected.wait(timeout) or failures:
            raise failures[0] if failures else TimeoutError(f"no session from {url} within {timeout} s")
        # From here on the connection's own thread applies the server's changes; this thread only
        # hands it work (add_callback is thread-safe) and reads plain values.
        connection = self.session._connection
        # Tell the server the page is ready, as the browser does once it has rendered.
        self.loop.add_callback(lambda: connection._send_patch_document(
            self.session.id, MessageSentEvent(self.document, "bokeh_event", DocumentReady())))

    def _find_models(self) -> None:
        self.document = self.session.document
        models = list(self.document.models)
        self._header = self._named(models, "header")
        self._message = self._named(models, "message")
        self._poles = self._named(models, "pole_table")
        self._gain = next(m for m in models if "gb-gain-text" in (getattr(m, "css_classes", None) or []))
        self._numbers = {}
        for model in models:
            for css in getattr(model, "css_classes", None) or []:
                if match := re.fullmatch(r"gb-number-(\d+)-(\d+)", css):
                    self._numbers[(int(match.group(1)) - 1, int(match.group(2)) - 1)] = model

    @staticmethod
    def _named(models, name):
        return next(m for m in models if getattr(m, "name", None) == name)

    # -- reading ----------------------------------------------------------------------------------

    def revision(self) -> int:
        match = _REVISION.search(self._header.html)
        return int(match.group(1)) if match else -1

    def header(self) -> str:
        return self._header.html

    def room_version(self) -> int:
        match = _ROOM_VERSION.search(self._header.html)
        return int(match.group(1)) if match else 0

    def message(self) -> str:
        return re.sub(r"<[^>]+>", "", self._message.html)

    def gain(self) -> np.ndarray:
        return np.array(json.loads(self._gain.value), dtype=float)

    def closed_loop_poles(self) -> np.ndarray:
        return np.array([complex(float(re_), float(im)) for re_, im in _POLE_ROW.findall(self._poles.html)])

    # -- acting -----------------------------------------------------------------------------------

    def pump(self, condition, timeout: float | None = None) -> bool:
        """Wait until ``condition()`` holds (True) or ``timeout`` seconds pass (False)."""
        deadline = time.monotonic() + (self.timeout if timeout is None else timeout)
        while not condition():
            if time.monotonic() >= deadline or not self._thread.is_alive():
                return False
            time.sleep(0.005)
        return True

    def set_entry(self, row: int, col: int, value: float) -> float:
        """Type ``value`` into entry k[row, col] (zero-based); return seconds until the page showed a new design.

        Raises
        ------
        TimeoutError
            If no new design arrived within the timeout.
        """
        before = self.revision()
        model = self._numbers[(row, col)]
        started = time.perf_counter()
        self.loop.add_callback(lambda: setattr(model, "value", float(value)))
        if not self.pump(lambda: self.revision() > before):
            raise TimeoutError(f"no new design within {self.timeout} s after setting k[{row},{col}] = {value}")
        return time.perf_counter() - started

    def wait_for(self, condition, what: str, timeout: float | None = None) -> None:
        if not self.pump(condition, timeout):
            raise TimeoutError(f"timed out waiting for {what}")

    def close(self) -> None:
        """Close the connection and stop its thread."""
        if self._thread.is_alive():
            self.loop.add_callback(self.session.close)
            self._thread.join(timeout=10)
        if not self._thread.is_alive():
            self.loop.close(all_fds=True)
