"""Snapshot links: a URL that reopens a design (plant, K, specs) in a fresh session.

The design travels inside the link, so a snapshot works on any gainboard server
that can read its format version and needs no storage on the server::

    http://host:port/?design=g1.eNq1Vk1v2zAM...

The value is the design-file JSON (plant, K and specs; notes and gain history are
left out, as they may be long or private) compressed with zlib and written in
base64url (RFC 4648 §5) after a version prefix ``g1.``. Decoding never executes
anything: it checks the characters and length, decodes base64, inflates with a hard
bound on the output size, and hands the text to
:func:`gainboard.app.design_file.design_from_json`, which is JSON parsing plus
field-by-field validation.
"""

from __future__ import annotations

import base64
import binascii
import re
import zlib
from urllib.parse import urlencode, urlsplit, urlunsplit

from .design_file import Design, DesignFileError, design_from_json, design_to_json

__all__ = [
    "SNAPSHOT_PARAMETER",
    "SNAPSHOT_PREFIX",
    "MAX_SNAPSHOT_CHARACTERS",
    "MAX_SNAPSHOT_JSON_BYTES",
    "SnapshotError",
    "snapshot_code",
    "design_from_snapshot",
    "snapshot_url",
]

#: Query parameter that carries a snapshot.
SNAPSHOT_PARAMETER = "design"
#: Version prefix of the encoded value (a later encoding gets a new prefix).
SNAPSHOT_PREFIX = "g1."
#: Longest encoded snapshot accepted or made. The server copies request arguments into the
#: session token that the browser sends in a header of the live connection, and headers are
#: limited to 64 KiB by the web server, so links stay well below that.
MAX_SNAPSHOT_CHARACTERS = 16_000
#: Largest design text a snapshot may inflate to (zlib can expand about a thousandfold).
MAX_SNAPSHOT_JSON_BYTES = 1_000_000

_CODE = re.compile(r"[A-Za-z0-9_-]+")


class SnapshotError(DesignFileError):
    """A snapshot link cannot be made or read (too long, damaged, unknown version ...)."""


def _shared_part(design: Design) -> Design:
    """The part of a design a link carries: plant, K, prefilter, integral gain and specs."""
    return design.with_changes(notes="", gain_history=(), modified=design.modified)


def snapshot_code(design: Design) -> str:
    """The encoded snapshot of ``design`` (the value of the ``design`` query parameter).

    Raises
    ------
    SnapshotError
        If the encoded design is longer than :data:`MAX_SNAPSHOT_CHARACTERS`
        (save a design file instead).

    Examples
    --------
    >>> from gainboard import core
    >>> design = Design(plant=core.Plant(A=[[-1.0]], B=[[1.0]]), gain=[[0.25]])
    >>> code = snapshot_code(design)
    >>> code.startswith("g1.") and design_from_snapshot(code).gain.tolist()
    [[0.25]]
    """
    text = design_to_json(_shared_part(design))
    packed = zlib.compress(text.encode("utf-8"), 9)
    code = SNAPSHOT_PREFIX + base64.urlsafe_b64encode(packed).decode("ascii").rstrip("=")
    if len(code) > MAX_SNAPSHOT_CHARACTERS:
        raise SnapshotError(
            f"this design needs {len(code)} characters as a link, more than the {MAX_SNAPSHOT_CHARACTERS} "
            "a link may have; share the design file instead"
        )
    return code


def design_from_snapshot(code: str) -> Design:
    """Read the design a snapshot code carries.

    Parameters
    ----------
    code : str
        The value of the ``design`` query parameter.

    Raises
    ------
    SnapshotError
        For a code that is too long, has other characters than base64url, an unknown
        prefix, damaged compressed data, or inflates beyond :data:`MAX_SNAPSHOT_JSON_BYTES`;
        and (as :class:`DesignFileError`) for any design the design-file reader refuses.
    """
    if not isinstance(code, str):
        raise SnapshotError(f"a snapshot code is text, got {type(code).__name__}")
    code = code.strip()
    if len(code) > MAX_SNAPSHOT_CHARACTERS:
        raise SnapshotError(f"the snapshot in this link has {len(code)} characters; at most {MAX_SNAPSHOT_CHARACTERS} are read")
    if not code.startswith(SNAPSHOT_PREFIX):
        found = code.split(".", 1)[0][:12] if "." in code else "none"
        raise SnapshotError(
            f"the snapshot in this link has version prefix {found!r}; this gainboard reads {SNAPSHOT_PREFIX!r} "
            "(was the link cut short, or made by a newer gainboard?)"
        )
    body = code[len(SNAPSHOT_PREFIX):]
    if not _CODE.fullmatch(body):
        raise SnapshotError("the snapshot in this link contains characters other than letters, digits, '-' and '_'; "
                            "was it changed while copying?")
    try:
        packed = base64.urlsafe_b64decode(body + "=" * (-len(body) % 4))
    except (binascii.Error, ValueError):
        raise SnapshotError("the snapshot in this link is not valid base64url; was it cut short while copying?") from None
    inflater = zlib.decompressobj()
    try:
        raw = inflater.decompress(packed, MAX_SNAPSHOT_JSON_BYTES + 1)
    except zlib.error:
        raise SnapshotError("the snapshot in this link is damaged (its compressed data does not inflate); "
                            "was it cut short while copying?") from None
    if len(raw) > MAX_SNAPSHOT_JSON_BYTES or inflater.unconsumed_tail:
        raise SnapshotError(f"the snapshot in this link inflates to more than {MAX_SNAPSHOT_JSON_BYTES} bytes; it is refused")
    if not inflater.eof:
        raise SnapshotError("the snapshot in this link is incomplete; was it cut short while copying?")
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise SnapshotError("the snapshot in this link does not hold UTF-8 text") from None
    return design_from_json(text, "snapshot link")


def snapshot_url(page_url: str, design: Design) -> str:
    """``page_url`` with its query replaced by the snapshot of ``design``.

    Examples
    --------
    >>> from gainboard import core
    >>> design = Design(plant=core.Plant(A=[[-1.0]], B=[[1.0]]), gain=[[0.25]])
    >>> snapshot_url("http://127.0.0.1:5006/?room=lab#top", design).startswith("http://127.0.0.1:5006/?design=g1.")
    True
    """
    parts = urlsplit(page_url)
    query = urlencode({SNAPSHOT_PARAMETER: snapshot_code(design)})
    return urlunsplit((parts.scheme, parts.netloc, parts.path or "/", query, ""))
