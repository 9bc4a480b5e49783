"""One session's membership of a live room: joining, leaving, publishing and taking over changes.

The room itself (members, the latest design, who changed it) lives in
:mod:`gainboard.app.rooms`; this is the session's side of it. A change the session
accepts is published by :meth:`RoomLink.publish`; a change from another member
arrives through the session's own ``run_in_session`` and is taken over by the state
(:meth:`DesignState.adopt_shared`). Whoever shows the room (the header, the Share
tab) is told through ``on_update``. Knows nothing about Panel or Bokeh.
"""

from __future__ import annotations

import logging
import time
from html import escape
from typing import Callable

from gainboard import core

from .rooms import ROOMS, RoomMember, check_room_name

__all__ = ["RoomLink"]

log = logging.getLogger(__name__)


class RoomLink:
    """The live room of one session (none at first).

    Parameters
    ----------
    state : DesignState
        The session's design.
    nickname : str
        The name shown to the others.
    run_in_session : callable
        Runs a function on this session's own event loop (changes from others arrive through it).
    on_update : callable
        Called after the room, its members or its latest change changed (refresh what shows them).
    report_error : callable
        Receives an unexpected exception raised while serving the room.
    """

    def __init__(self, state, *, nickname: str, run_in_session: Callable, on_update: Callable[[], None],
                 report_error: Callable[[BaseException], None]):
        self.state = state
        self.nickname = nickname
        self._run_in_session = run_in_session
        self._on_update = on_update
        self._report_error = report_error
        self.room = None
        self.member = None
        self.latest_change = None
        self.members: list[str] = []
        #: True while a change from the room is being taken over (it is not published again).
        self.adopting = False
        self._published = None

    @property
    def name(self) -> str | None:
        return self.room.name if self.room is not None else None

    def join(self, name: str) -> bool:
        """Join (or start) the live room ``name``; a room that exists already brings its design here."""
        name = (name or "").strip()
        try:
            check_room_name(name)
            if self.room is not None:
                if self.room.name == name:
                    return True
                self.leave()
            room = ROOMS.room(name)
            member = RoomMember(self.nickname, self._run_in_session, self._on_room_change, self._on_room_members,
                                on_error=self._report_error)
            seed = self.state.shared_design()
            latest = room.join(member, seed)
        except core.GainboardError as error:
            self.state.show_message(f"Could not join the room: {error}", "error")
            return False
        self.room, self.member, self.latest_change = room, member, latest
        self.members = room.member_names()
        self.state.evaluation_cache = room.evaluations
        if latest.design is not seed:
            self._adopt(latest.design, f"Joined room {name}: its design is shown here.")
        else:
            self.state.show_message(f"Started room {name}; share its link from the Share tab.", "note")
        self._on_update()
        return True

    def leave(self, *, quietly: bool = False) -> None:
        """Leave the live room; the design stays here as your own (``quietly``: the page is gone)."""
        room, member = self.room, self.member
        self.room = self.member = self.latest_change = None
        self.members = []
        self.state.evaluation_cache = None
        if room is not None and member is not None:
            room.leave(member)
            if not quietly:
                self.state.show_message(f"Left room {room.name}; this design is now yours alone.", "note")
        if not quietly:
            self._on_update()

    def rename(self, name: str) -> None:
        """Change the name shown to others."""
        from .access import clean_display_name

        cleaned = clean_display_name(name)
        if not cleaned or cleaned == self.nickname:
            return
        self.nickname = cleaned
        if self.room is not None and self.member is not None:
            self.room.rename(self.member, cleaned)

    def publish(self) -> None:
        """Send the design this session just accepted to the others (not a change taken over from them)."""
        if self.adopting or self.room is None or self.member is None:
            return
        shared = self.state.shared_design()
        self._published = shared
        try:
            self.room.publish(self.member, shared)
        except Exception as error:
            log.exception("publishing to room %r failed", self.room.name)
            self._report_error(error)

    def _adopt(self, shared, note: str = "") -> None:
        self.adopting = True
        try:
            self.state.adopt_shared(shared, note=note)
        finally:
            self.adopting = False
        if note:
            self.state.show_message(note, "note")

    def _on_room_change(self, change) -> None:
        """Runs in this session: show the room's newest version and who made it."""
        if self.room is None:
            return
        self.latest_change = change
        if change.design is not self._published:
            try:
                self._adopt(change.design)
            except Exception as error:  # stays in this session: the room and the other pages carry on
                log.exception("showing the room's change in this session failed")
                self.state.show_message(
                    f"Could not show the room's latest change ({type(error).__name__}: {error}); "
                    "reload the page to see it.", "error")
        self._on_update()

    def _on_room_members(self, names) -> None:
        if self.room is None:
            return
        self.members = list(names)
        self._on_update()

    def header_html(self) -> str:
        """The room's part of the page header: its name, how many are here, the last change ("" outside a room)."""
        if self.room is None:
            return ""
        change = self.latest_change
        last = ""
        if change is not None:
            who = "you" if self.member is not None and change.author_key == self.member.key else change.author
            when = time.strftime("%H:%M:%S", time.localtime(change.when))
            last = f" · last change: {escape(who)} {escape(change.what)} at {when}"
        version = change.version if change is not None else 0
        return (f'<span class="gb-room" data-room-version="{version}" title="{escape(self.room.name)}">'
                f'room <b>{escape(self.room.name)}</b> · {len(self.members)} here{last}</span>')
