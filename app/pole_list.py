"""Reading a list of poles typed by a person, for the workbench's target box and the command line."""

from __future__ import annotations

from gainboard import core

__all__ = ["parse_pole_list"]


def parse_pole_list(text: str) -> list[complex]:
    """Read poles such as ``-2+4j, -2-4j, -10`` (``i`` for ``j`` and a true minus sign accepted).

    Raises
    ------
    PlacementError
        Naming the piece that could not be read, or saying that none was given.

    Examples
    --------
    >>> parse_pole_list("−2+4i, -2-4j, -10")
    [(-2+4j), (-2-4j), (-10+0j)]
    """
    cleaned = (text or "").replace("−", "-").replace("i", "j").replace(" ", "")
    poles = []
    for piece in cleaned.split(","):
        if not piece:
            continue
        try:
            poles.append(complex(piece))
        except ValueError:
            raise core.PlacementError(f"cannot read pole {piece!r}; write poles like -2+4j, -2-4j, -10") from None
    if not poles:
        raise core.PlacementError("no target poles given; write them like -2+4j, -2-4j, -10")
    return poles
