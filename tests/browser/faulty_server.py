"""Test harness: `gainboard serve` in which one session breaks on purpose.

Sessions opened with ``?name=faulty`` get two deliberate failures: their response
plots raise on every refresh, and taking over a change from their live room raises.
Everything else is the real server (the same command line, the same code). Used by
tests/test_session_isolation.py to show that one session's failing callbacks never
affect the other sessions; never used outside tests.

Usage: python tests/browser/faulty_server.py serve PLANT [serve options]
"""

from __future__ import annotations

import sys

from gainboard.app import room_link as room_link_module
from gainboard.app import workbench as workbench_module
from gainboard.app.cli import main
from gainboard.app.views.responses import ResponsePlots

FAULTY_NAME = "faulty"

_original_refresh = ResponsePlots.refresh
_original_init = workbench_module.Workbench.__init__
_original_room_change = room_link_module.RoomLink._on_room_change


def _refresh(self, evaluation, **options):
    if getattr(self.state, "deliberately_faulty", False):
        raise RuntimeError("deliberate failure in the response plots of the faulty session")
    return _original_refresh(self, evaluation, **options)


def _init(self, state, **options):
    _original_init(self, state, **options)
    state.deliberately_faulty = self.nickname == FAULTY_NAME


def _on_room_change(self, change):
    if self.nickname == FAULTY_NAME:
        raise RuntimeError("deliberate failure while the faulty session takes over a room change")
    return _original_room_change(self, change)


ResponsePlots.refresh = _refresh
workbench_module.Workbench.__init__ = _init
room_link_module.RoomLink._on_room_change = _on_room_change

if __name__ == "__main__":
    sys.exit(main())
