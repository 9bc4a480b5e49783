"""Live rooms: several browser sessions editing one design together.

A session joins a room by opening the workbench with ``?room=NAME`` (or with the
"Join" button of the Share tab). Sessions without a room each edit their own
design. Everyone in a room shares the plant, K, the specs and the notes; each
session keeps its own view choices (selected entry, pinned design, LQR comparison,
tab) and its own messages.

How a change travels: the session that accepts an edit (a released slider, a typed
value, a drop on the pole map, undo, a new plant ...) publishes the shared part of
its design here; the room records it as the latest version with the author's name
and a short description, then asks every other member to update — through that
member's own ``schedule`` function, which for a browser session is the
``add_next_tick_callback`` of its own Bokeh document. No session ever touches
another session's document, and a member whose update fails (or whose page is
gone) is logged and skipped without affecting the publisher or the others.
Concurrent edits are resolved by last writer wins, and every session shows who
made the last change and what it was.

Rooms live in the memory of one server process: sessions must reach the same
``gainboard serve`` process to share a room (see :mod:`gainboard.app.server`).
An empty room keeps its design until the process ends or more than
:data:`MAX_ROOMS` rooms exist, so reloading a page returns to the same design.

This module knows nothing about Panel or Bokeh and does no numerics.
"""

from __future__ import annotations

import itertools
import logging
import re
import threading
import time
from collections import OrderedDict
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from gainboard import core

from .theme import entry_symbol, format_number

__all__ = [
    "ROOM_PARAMETER",
    "MAX_ROOMS",
    "SharedDesign",
    "RoomChange",
    "RoomMember",
    "Room",
    "RoomRegistry",
    "SharedEvaluations",
    "RoomError",
    "check_room_name",
    "describe_change",
    "ROOMS",
]

log = logging.getLogger(__name__)

#: Query parameter naming the room to join.
ROOM_PARAMETER = "room"
#: Most rooms one server process keeps; beyond it the longest-empty room is forgotten.
MAX_ROOMS = 64
#: Most members in one room (each change is sent to every member).
MAX_MEMBERS = 50
_ROOM_NAME = re.compile(r"[A-Za-z0-9][A-Za-z0-9_.-]{0,39}")


class RoomError(core.GainboardError):
    """A room cannot be joined (bad name, full room, too many rooms)."""


def check_room_name(name: str) -> str:
    """Return ``name`` if it can name a room (1–40 letters, digits, ``_``, ``-``, ``.``), else raise RoomError.

    Examples
    --------
    >>> check_room_name("lab-2")
    'lab-2'
    """
    if not isinstance(name, str) or not _ROOM_NAME.fullmatch(name):
        raise RoomError(
            f"a room name is 1 to 40 letters, digits, '_', '-' or '.', starting with a letter or digit; got {str(name)[:60]!r}"
        )
    return name


@dataclass(frozen=True, eq=False)
class SharedDesign:
    """The part of a design that everyone in a room shares.

    Attributes
    ----------
    plant : gainboard.core.Plant
        The plant (the same object in every session, so evaluations can be shared).
    plant_label : str
        Where the plant came from, for the screen.
    plant_text : str
        Its plant-file (TOML) text for the editor.
    continuous_origin : gainboard.core.Plant or None
        The continuous plant a sampled one was made from.
    gain : numpy.ndarray, shape (m, n)
        K (read only).
    specs : gainboard.core.DesignSpecs or None
        The specs checked.
    notes : str
        The design notes.
    estimator : EstimatorDesign or None
        The estimator (form and L), or None for full-state feedback.
    """

    plant: core.Plant
    plant_label: str
    plant_text: str
    continuous_origin: core.Plant | None
    gain: np.ndarray
    specs: core.DesignSpecs | None
    notes: str = ""
    estimator: object | None = None

    def __post_init__(self):
        gain = np.array(self.plant.check_gain(self.gain), dtype=float, copy=True)
        gain.setflags(write=False)
        object.__setattr__(self, "gain", gain)


@dataclass(frozen=True)
class RoomChange:
    """The latest version of a room's design and who made it.

    Attributes
    ----------
    version : int
        Counts accepted changes in the room, from 1 (the design the room started with).
    design : SharedDesign
    author : str
        Name of the person who made the change.
    what : str
        The change in words, e.g. "set k₁₂ = 55" or "opened maglev_ball".
    when : float
        Seconds since the epoch.
    author_key : int
        The :attr:`RoomMember.key` of the author (names need not be unique).
    """

    version: int
    design: SharedDesign
    author: str
    what: str
    when: float
    author_key: int = 0


def _same_gain(a: np.ndarray, b: np.ndarray) -> bool:
    return a.shape == b.shape and a.tobytes() == b.tobytes()


def describe_change(before: SharedDesign | None, after: SharedDesign) -> str:
    """The difference between two shared designs in a few words (for "who changed what").

    Examples
    --------
    >>> plant = core.Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]])
    >>> first = SharedDesign(plant, "double integrator", "", None, [[1.0, 2.0]], None)
    >>> describe_change(first, SharedDesign(plant, "double integrator", "", None, [[1.0, 2.5]], None))
    'set k₁₂ = 2.5'
    """
    if before is None:
        return f"started the room with {after.plant_label or after.plant.name}"
    if after.plant is not before.plant:
        return f"opened {after.plant_label or after.plant.name}"
    parts = []
    if not _same_gain(before.gain, after.gain):
        changed = np.argwhere(before.gain.view(np.uint64) != after.gain.view(np.uint64))
        if len(changed) == 1:
            row, col = (int(v) for v in changed[0])
            parts.append(f"set {entry_symbol(row, col)} = {format_number(after.gain[row, col], 6)}")
        else:
            parts.append(f"changed K ({len(changed)} entries)")
    if after.specs is not before.specs and after.specs != before.specs:
        parts.append("changed the specs")
    if after.notes != before.notes:
        parts.append("edited the notes")
    if after.estimator is not before.estimator:
        parts.append("removed the estimator" if after.estimator is None else "changed the estimator gain L")
    return "; ".join(parts) or "made no change"


class RoomMember:
    """One session's link to a room.

    Parameters
    ----------
    nickname : str
        The name shown to the others.
    schedule : callable
        ``schedule(function)`` runs ``function()`` later in the member's own session
        (for a browser session: its document's ``add_next_tick_callback``).
    on_change : callable
        Called (through ``schedule``) with the room's latest :class:`RoomChange`.
    on_members : callable, optional
        Called (through ``schedule``) with the names of everyone in the room.
    on_error : callable, optional
        Called (inside the member's session) with the exception when one of its updates
        failed, so the member can show it; the room logs it in any case.
    """

    _counter = itertools.count(1)

    def __init__(self, nickname: str, schedule: Callable[[Callable[[], None]], None],
                 on_change: Callable[[RoomChange], None], on_members: Callable[[list[str]], None] | None = None,
                 on_error: Callable[[BaseException], None] | None = None):
        self.key = next(self._counter)
        self.on_error = on_error
        self.nickname = nickname
        self.schedule = schedule
        self.on_change = on_change
        self.on_members = on_members
        self.seen_version = 0


class SharedEvaluations:
    """The newest few evaluations in a room, so that members showing the same design compute it once.

    Keys name the plant and specs objects by identity (the room hands the same objects
    to every member) and the gain by its bytes; the objects are kept with the value so
    an identity is never reused while cached.
    """

    def __init__(self, size: int = 6):
        self._size = size
        self._items: OrderedDict = OrderedDict()
        self._lock = threading.Lock()

    def get(self, key, plant, specs):
        with self._lock:
            found = self._items.get(key)
            if found is None or found[0] is not plant or found[1] is not specs:
                return None
            self._items.move_to_end(key)
            return found[2]

    def put(self, key, plant, specs, evaluation) -> None:
        with self._lock:
            self._items[key] = (plant, specs, evaluation)
            self._items.move_to_end(key)
            while len(self._items) > self._size:
                self._items.popitem(last=False)


@dataclass
class Room:
    """One live room: its members, the latest design and who changed it."""

    name: str
    members: dict = field(default_factory=dict)
    latest: RoomChange | None = None
    evaluations: SharedEvaluations = field(default_factory=SharedEvaluations)
    emptied_at: float | None = None

    def __post_init__(self):
        self._lock = threading.RLock()

    # -- membership ----------------------------------------------------------------------------

    def join(self, member: RoomMember, seed: SharedDesign) -> RoomChange:
        """Add ``member``; a new room starts with ``seed``. Returns the design the member must show."""
        with self._lock:
            if member.key not in self.members and len(self.members) >= MAX_MEMBERS:
                raise RoomError(f"room {self.name!r} already has {MAX_MEMBERS} people; open another room")
            if self.latest is None:
                self.latest = RoomChange(1, seed, member.nickname, describe_change(None, seed), time.time(), member.key)
            self.members[member.key] = member
            member.seen_version = self.latest.version  # the caller shows the returned version itself
            self.emptied_at = None
            latest = self.latest
        self._announce_members()
        return latest

    def leave(self, member: RoomMember) -> None:
        """Remove ``member`` (a closed page, or leaving from the Share tab)."""
        with self._lock:
            if self.members.pop(member.key, None) is None:
                return
            if not self.members:
                self.emptied_at = time.time()
        self._announce_members()

    def rename(self, member: RoomMember, nickname: str) -> None:
        """Show ``member`` under a new name."""
        member.nickname = nickname
        self._announce_members()

    def member_names(self) -> list[str]:
        """Names of everyone in the room, in the order they joined."""
        with self._lock:
            return [member.nickname for member in self.members.values()]

    # -- changes -------------------------------------------------------------------------------

    def publish(self, member: RoomMember, design: SharedDesign) -> RoomChange:
        """Make ``design`` the room's latest version (last writer wins) and tell the others."""
        with self._lock:
            previous = self.latest.design if self.latest is not None else None
            version = (self.latest.version if self.latest is not None else 0) + 1
            change = RoomChange(version, design, member.nickname, describe_change(previous, design), time.time(), member.key)
            self.latest = change
            member.seen_version = version
            others = [other for other in self.members.values() if other.key != member.key]
        for other in others:
            self._send(other, lambda other=other: self._deliver(other))
        # The author's own page also shows "who changed what last".
        self._send(member, lambda: self._deliver(member, own=True))
        return change

    def _deliver(self, member: RoomMember, own: bool = False) -> None:
        """Runs inside the member's own session: hand it the newest version once."""
        with self._lock:
            latest = self.latest
            if latest is None or member.key not in self.members:
                return
            if not own and member.seen_version >= latest.version:
                return
            member.seen_version = latest.version
        member.on_change(latest)

    def _announce_members(self) -> None:
        names = self.member_names()
        with self._lock:
            members = list(self.members.values())
        for member in members:
            if member.on_members is not None:
                self._send(member, lambda member=member: member.on_members(list(names)))

    def _send(self, member: RoomMember, function: Callable[[], None]) -> None:
        """Schedule ``function`` in the member's session; a member that cannot take it is dropped."""

        def guarded():
            try:
                function()
            except Exception as error:  # one session's failure must never reach the others
                log.exception("room %r: updating the session of %r failed", self.name, member.nickname)
                if member.on_error is not None:
                    try:
                        member.on_error(error)
                    except Exception:
                        log.exception("room %r: reporting a failure to %r failed too", self.name, member.nickname)

        try:
            member.schedule(guarded)
        except Exception:
            log.warning("room %r: the session of %r is gone; removing it", self.name, member.nickname, exc_info=True)
            with self._lock:
                self.members.pop(member.key, None)


class RoomRegistry:
    """The rooms of one server process, by name."""

    def __init__(self, max_rooms: int = MAX_ROOMS):
        self.max_rooms = max_rooms
        self._rooms: dict[str, Room] = {}
        self._lock = threading.Lock()

    def room(self, name: str) -> Room:
        """The room called ``name``, created when it does not exist yet."""
        check_room_name(name)
        with self._lock:
            room = self._rooms.get(name)
            if room is not None:
                return room
            if len(self._rooms) >= self.max_rooms:
                empty = [r for r in self._rooms.values() if not r.members]
                if not empty:
                    raise RoomError(f"this server already has {self.max_rooms} rooms in use; join one of them")
                oldest = min(empty, key=lambda r: r.emptied_at or 0.0)
                del self._rooms[oldest.name]
            room = self._rooms[name] = Room(name)
            return room

    def names(self) -> list[str]:
        """Names of the rooms that exist now."""
        with self._lock:
            return sorted(self._rooms)


#: The rooms of this server process.
ROOMS = RoomRegistry()
