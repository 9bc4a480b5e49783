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
"""

from __future__ import annotations

import contextlib
import os
import re
import time
import uuid
from dataclasses import dataclass
from pathlib import Path

from .design_file import Design, DesignFileError, design_to_json, load_design, write_text_atomically

__all__ = ["AutosaveStore", "AutosaveEntry", "default_autosave_folder", "DATA_DIR_VARIABLE"]

#: Environment variable that moves gainboard's data folder (used by tests and portable installs).
DATA_DIR_VARIABLE = "GAINBOARD_DATA_DIR"

_PREFIX, _SUFFIX = "session-", ".json"
_SESSION_ID = re.compile(r"[A-Za-z0-9_-]{1,64}")
#: Temporary files older than this (seconds) are left over from a crash and may be removed.
_STALE_TEMPORARY_SECONDS = 3600.0


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

    def _readable_entries(self, include_own: bool):
        """Autosaved designs newest first, read lazily; unreadable files are skipped."""
        try:
            candidates = sorted(self.folder.glob(f"{_PREFIX}*{_SUFFIX}"), key=_modification_time, reverse=True)
        except OSError:
            return
        for path in candidates:
            session_id = path.name[len(_PREFIX):-len(_SUFFIX)]
            if not _SESSION_ID.fullmatch(session_id) or (session_id == self.session_id and not include_own):
                continue
            try:
                saved_at = path.stat().st_mtime
                design = load_design(path)
            except (OSError, DesignFileError):  # removed meanwhile, damaged, or from a newer gainboard
                continue
            yield AutosaveEntry(session_id=session_id, path=path, saved_at=saved_at, design=design)

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
        return path.stat().st_mtime_ns
    except OSError:
        return -1


def _checked_session_id(session_id) -> str:
    if not isinstance(session_id, str) or not _SESSION_ID.fullmatch(session_id):
        raise DesignFileError(
            f"a session id must be 1 to 64 letters, digits, '_' or '-', got {session_id!r}"
        )
    return session_id
