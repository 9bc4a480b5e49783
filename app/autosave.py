"""Autosave: the current design of each session, kept in the user's data folder.

Each workbench session writes its design after every edit to one file,
``<folder>/session-<id>.json`` (a design file, see :mod:`gainboard.app.design_file`).
The write is atomic (temporary file + :func:`os.replace`), so a crash or a closed tab
loses at most the edit being written, and a half-written temporary file is never
mistaken for a design. On the next start :meth:`AutosaveStore.latest` offers the
newest readable design for restore.

The folder is, in order of precedence: the ``folder`` argument;
``$GAINBOARD_DATA_DIR/autosave``; ``$XDG_DATA_HOME/gainboard/autosave``;
``~/.local/share/gainboard/autosave``. It is created readable by the user only,
because designs can be confidential.

A served workbench keeps autosaves per server and per person
(:meth:`AutosaveStore.for_person`): ``<folder>/<server>/<person>/``, where the
server is its listening address and port and the person is a hash of the signed-in
name, or of the browser's id cookie when nobody signs in (see
:func:`autosave_owner`). So the next teammate on the same server is never offered
the previous person's design, and two servers sharing one data folder never see
each other's sessions.

Reading is defensive, because anyone who can write the folder could leave
anything there: a file is opened with ``O_NOFOLLOW | O_NONBLOCK`` and read only
if :func:`os.fstat` says it is a regular file (a symlink, FIFO or device is skipped
without blocking), at most :data:`MAX_AUTOSAVE_BYTES` of it; candidates are read
newest first and the search stops at the first usable one. Restoring an autosave
moves its file to the restoring session (:meth:`AutosaveStore.claim`); no other
file is removed. Autosaves older than :data:`KEEP_DAYS` days are removed by
:func:`remove_old_autosaves`.
"""

from __future__ import annotations

import contextlib
import hashlib
import os
import re
import stat
import time
import uuid
from dataclasses import dataclass
from pathlib import Path

from .design_file import MAX_DESIGN_FILE_BYTES, Design, DesignFileError, design_from_json, design_to_json, write_text_atomically

__all__ = ["AutosaveStore", "AutosaveEntry", "default_autosave_folder", "DATA_DIR_VARIABLE", "autosave_owner",
           "read_regular_file", "remove_old_autosaves", "KEEP_DAYS", "MAX_AUTOSAVE_BYTES"]

#: Environment variable that moves gainboard's data folder (used by tests and portable installs).
DATA_DIR_VARIABLE = "GAINBOARD_DATA_DIR"

_PREFIX, _SUFFIX = "session-", ".json"
_SESSION_ID = re.compile(r"[A-Za-z0-9_-]{1,64}")
#: Temporary files older than this (seconds) are left over from a crash and may be removed.
_STALE_TEMPORARY_SECONDS = 3600.0
#: Autosaves untouched for this many days are removed.
KEEP_DAYS = 30
#: Largest autosave file read (the design-file limit).
MAX_AUTOSAVE_BYTES = MAX_DESIGN_FILE_BYTES


def autosave_owner(user: str | None, cookies=None) -> str:
    """Whose autosaves a session sees: the signed-in name, else this browser's id cookie, else "anyone".

    Parameters
    ----------
    user : str or None
        The signed-in name (None without a login; "guest" when someone signed in without a name).
    cookies : mapping, optional
        The request's cookies (``pn.state.cookies``); the browser id is
        :data:`gainboard.app.request_guard.BROWSER_COOKIE`.

    Returns
    -------
    str
        A folder name: 24 hex digits of a SHA-256 hash (names and ids never appear on disk).

    Examples
    --------
    >>> autosave_owner("Ana") == autosave_owner("Ana") != autosave_owner("Ben")
    True
    >>> autosave_owner(None, {"gainboard_browser": "x" * 24}) != autosave_owner(None, {})
    True
    """
    from .request_guard import BROWSER_COOKIE

    browser = (cookies or {}).get(BROWSER_COOKIE) or ""
    if user and user != "guest":
        who = f"user:{user}"
    elif browser:
        who = f"browser:{browser}"
    else:
        who = "anyone"
    return hashlib.sha256(who.encode("utf-8", errors="surrogatepass")).hexdigest()[:24]


def read_regular_file(path, limit: int) -> bytes | None:
    """The bytes of ``path`` if it is a regular file (not a symlink, FIFO or device) of at most ``limit`` bytes.

    Opened with ``O_NOFOLLOW`` (a symlink fails to open) and ``O_NONBLOCK`` (opening a
    FIFO never waits for a writer), then checked with :func:`os.fstat` on the open file,
    so a file swapped after a check is never read. None for anything else or any error.
    """
    flags = os.O_RDONLY | getattr(os, "O_NOFOLLOW", 0) | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_CLOEXEC", 0)
    try:
        descriptor = os.open(path, flags)
    except OSError:
        return None
    try:
        info = os.fstat(descriptor)
        if not stat.S_ISREG(info.st_mode) or info.st_size > limit:
            return None
        chunks, remaining = [], limit + 1
        while remaining > 0:
            chunk = os.read(descriptor, min(remaining, 1 << 20))
            if not chunk:
                break
            chunks.append(chunk)
            remaining -= len(chunk)
        data = b"".join(chunks)
        return data if len(data) <= limit else None
    except OSError:
        return None
    finally:
        os.close(descriptor)


def remove_old_autosaves(folder, days: float = KEEP_DAYS, now: float | None = None) -> int:
    """Remove autosaves (``session-*.json`` and stale temporary files) untouched for ``days`` days.

    Looks in ``folder`` and two levels below it (``<server>/<person>/``); never follows
    symlinks. Returns the number of files removed.
    """
    now = time.time() if now is None else now
    removed = 0
    folders = [Path(folder)]
    for _ in range(2):
        below = []
        for parent in folders:
            with contextlib.suppress(OSError):
                below.extend(child for child in parent.iterdir() if child.is_dir() and not child.is_symlink())
        folders += below
        folders = list(dict.fromkeys(folders))
    for parent in folders:
        try:
            candidates = [*parent.glob(f"{_PREFIX}*{_SUFFIX}"), *parent.glob(f".{_PREFIX}*.tmp")]
        except OSError:
            continue
        for path in candidates:
            with contextlib.suppress(OSError):
                if now - path.lstat().st_mtime > days * 86400.0:
                    path.unlink()
                    removed += 1
    return removed


def default_autosave_folder() -> Path:
    """The autosave folder from the environment (see the module docstring); not created here."""
    explicit = os.environ.get(DATA_DIR_VARIABLE)
    if explicit:
        return Path(explicit).expanduser() / "autosave"
    xdg = os.environ.get("XDG_DATA_HOME")
    # The XDG base-directory rules say a relative XDG_DATA_HOME is invalid and must be ignored.
    base = Path(xdg) if xdg and Path(xdg).is_absolute() else Path.home() / ".local" / "share"
    return base / "gainboard" / "autosave"


@dataclass(frozen=True)
class AutosaveEntry:
    """One autosaved design found on disk.

    Attributes
    ----------
    session_id : str
        The session that wrote it.
    path : pathlib.Path
        The autosave file.
    saved_at : float
        When it was written (seconds since the epoch, from the file's modification time).
    design : Design
        The design, read and validated.
    """

    session_id: str
    path: Path
    saved_at: float
    design: Design


class AutosaveStore:
    """Autosave for one workbench session, plus restore of earlier sessions' designs.

    Parameters
    ----------
    folder : str or pathlib.Path, optional
        Where autosave files live; :func:`default_autosave_folder` when omitted.
    session_id : str, optional
        This session's id (letters, digits, ``_`` and ``-``, at most 64); a new random
        id when omitted.

    Examples
    --------
    >>> import shutil, tempfile
    >>> from gainboard import core
    >>> folder = tempfile.mkdtemp()
    >>> plant = core.Plant(A=[[-1.0]], B=[[1.0]])
    >>> _ = AutosaveStore(folder).save(Design(plant=plant, gain=[[2.0]]))  # a session autosaves, then dies
    >>> AutosaveStore(folder).latest().design.gain.tolist()  # the next start offers it for restore
    [[2.0]]
    >>> shutil.rmtree(folder)
    """

    def __init__(self, folder=None, session_id: str | None = None):
        self.folder = Path(folder).expanduser() if folder is not None else default_autosave_folder()
        self.session_id = uuid.uuid4().hex if session_id is None else _checked_session_id(session_id)
        self._last_text: str | None = None

    @classmethod
    def for_person(cls, server: str, owner: str, folder=None) -> "AutosaveStore":
        """The store of one person on one server: ``<folder>/<server>/<owner>/`` (see the module docstring)."""
        base = Path(folder).expanduser() if folder is not None else default_autosave_folder()
        return cls(base / _checked_session_id(server) / _checked_session_id(owner))

    @property
    def path(self) -> Path:
        """This session's autosave file."""
        return self._path_of(self.session_id)

    def _path_of(self, session_id: str) -> Path:
        return self.folder / f"{_PREFIX}{_checked_session_id(session_id)}{_SUFFIX}"

    def save(self, design: Design) -> Path:
        """Write ``design`` as this session's autosave (atomically); cheap to call after every edit.

        Nothing is written when the design text is the same as the last one saved.

        Raises
        ------
        DesignFileError
            If the design cannot be written exactly, or the folder cannot be written.
        """
        text = design_to_json(design)
        if text == self._last_text and self.path.exists():
            return self.path
        try:
            self.folder.mkdir(mode=0o700, parents=True, exist_ok=True)
            write_text_atomically(self.path, text, private=True)
        except OSError as error:
            raise DesignFileError(
                f"cannot autosave to {str(self.folder)!r}: {error.strerror or error}; set {DATA_DIR_VARIABLE} "
                "to a writable folder"
            ) from None
        self._last_text = text
        return self.path

    def _readable_entries(self, include_own: bool, skip=frozenset()):
        """Autosaved designs newest first, read lazily (one file at a time); unusable files are skipped."""
        try:
            candidates = sorted(self.folder.glob(f"{_PREFIX}*{_SUFFIX}"), key=_modification_time, reverse=True)
        except OSError:
            return
        for path in candidates:
            session_id = path.name[len(_PREFIX):-len(_SUFFIX)]
            if (not _SESSION_ID.fullmatch(session_id) or session_id in skip
                    or (session_id == self.session_id and not include_own)):
                continue
            raw = read_regular_file(path, MAX_AUTOSAVE_BYTES)  # None: a symlink, FIFO, too large, gone
            if raw is None:
                continue
            try:
                design = design_from_json(raw.decode("utf-8"), path.name)
            except (UnicodeDecodeError, DesignFileError):  # damaged, or from a newer gainboard
                continue
            saved_at = _modification_time(path) / 1e9
            yield AutosaveEntry(session_id=session_id, path=path, saved_at=saved_at, design=design)

    def first_offerable(self, live_sessions=frozenset()) -> AutosaveEntry | None:
        """The newest usable autosave of a session that is not open now (``live_sessions``), or None.

        Reads files newest first and stops at the first usable one.
        """
        return next(self._readable_entries(False, skip=frozenset(live_sessions)), None)

    def claim(self, entry: AutosaveEntry) -> bool:
        """Make ``entry``'s file this session's autosave (moved, not copied; nothing else is removed).

        True when moved; False when it had gone meanwhile (then this session simply saves anew).
        """
        if entry.path.parent != self.folder:
            raise DesignFileError(f"the autosave {entry.path.name!r} is not in this person's folder; it is left alone")
        try:
            os.replace(entry.path, self.path)
        except FileNotFoundError:
            return False
        except OSError as error:
            raise DesignFileError(f"cannot take over autosave {str(entry.path)!r}: {error.strerror or error}") from None
        self._last_text = None
        return True

    def entries(self, include_own: bool = False) -> list[AutosaveEntry]:
        """Every readable autosaved design, newest first.

        Files that cannot be read as designs (damaged, from a newer gainboard) and
        temporary files left by a crash are skipped, never deleted here.

        Parameters
        ----------
        include_own : bool
            Also list this session's own autosave (normally one restores an earlier session's).
        """
        return list(self._readable_entries(include_own))

    def latest(self, include_own: bool = False) -> AutosaveEntry | None:
        """The newest readable autosaved design (from an earlier session by default), or None."""
        return next(self._readable_entries(include_own), None)

    def discard(self, session_id: str | None = None) -> bool:
        """Remove the autosave of ``session_id`` (default: this session). True if a file was removed."""
        path = self._path_of(self.session_id if session_id is None else session_id)
        if session_id is None or session_id == self.session_id:
            self._last_text = None
        try:
            path.unlink()
        except FileNotFoundError:
            return False
        except OSError as error:
            raise DesignFileError(f"cannot remove autosave {str(path)!r}: {error.strerror or error}") from None
        return True

    def prune(self, keep: int = 20, now: float | None = None) -> int:
        """Keep the ``keep`` newest autosaves of other sessions and drop the rest; drop stale temporary files.

        Temporary files are removed only when older than an hour, so a write in
        progress in another session is never disturbed. Returns the number of files removed.
        """
        if keep < 0:
            raise ValueError(f"keep must be 0 or more, got {keep}")
        now = time.time() if now is None else now
        removed = 0
        try:
            saved = sorted(self.folder.glob(f"{_PREFIX}*{_SUFFIX}"), key=_modification_time, reverse=True)
            temporaries = list(self.folder.glob(f".{_PREFIX}*.tmp"))
        except OSError:
            return 0
        others = [path for path in saved if path != self.path]
        for path in others[keep:]:
            with contextlib.suppress(OSError):
                path.unlink()
                removed += 1
        for path in temporaries:
            with contextlib.suppress(OSError):
                if now - path.stat().st_mtime > _STALE_TEMPORARY_SECONDS:
                    path.unlink()
                    removed += 1
        return removed


def _modification_time(path: Path) -> int:
    try:
        return path.lstat().st_mtime_ns  # lstat: a symlink is never followed, not even to sort
    except OSError:
        return -1


def _checked_session_id(session_id) -> str:
    if not isinstance(session_id, str) or not _SESSION_ID.fullmatch(session_id):
        raise DesignFileError(
            f"a session id must be 1 to 64 letters, digits, '_' or '-', got {session_id!r}"
        )
    return session_id
