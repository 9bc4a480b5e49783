"""What a drag on the pole map asks for: the full list of target poles.

Dragging moves one closed-loop pole; the request sent to pole assignment must
still be a self-conjugate set, so this module decides which other pole moves
with it. The rules are about reading the gesture, not about control numerics:

- a complex pole's conjugate follows it as a mirror image;
- a drop within ``snap_distance`` of the real axis lands on the axis;
- a complex pair dropped on the axis becomes a double real pole there;
- a real pole dragged off the axis takes the nearest other movable real pole
  as its partner; with no such partner it stays on the axis (with a note).
"""

from __future__ import annotations

from dataclasses import dataclass

from gainboard.core import PlacementError

__all__ = ["DragRequest", "targets_after_drag", "conjugate_partner"]


@dataclass(frozen=True)
class DragRequest:
    """Targets for pole assignment after a drag.

    Attributes
    ----------
    targets : tuple of complex, length n
        Every closed-loop pole wanted, in the order of the poles before the drag.
    moved : tuple of int
        Indices of the poles that the drag moves (the dragged one and its partner).
    note : str
        Explanation shown to the user when the gesture was reinterpreted, else "".
    """

    targets: tuple[complex, ...]
    moved: tuple[int, ...]
    note: str = ""


def conjugate_partner(poles, index: int) -> int | None:
    """Index of the conjugate of ``poles[index]``, or None for a real pole.

    Complex poles are kept as exact conjugate pairs by the core, so an exact
    match is expected; the nearest pole in the opposite half-plane is the fallback.
    """
    pole = complex(poles[index])
    if pole.imag == 0:
        return None
    mirror = pole.conjugate()
    candidates = [i for i, p in enumerate(poles) if i != index and complex(p).imag * pole.imag < 0]
    for i in candidates:
        if complex(poles[i]) == mirror:
            return i
    if not candidates:
        return None
    return min(candidates, key=lambda i: abs(complex(poles[i]) - mirror))


def targets_after_drag(poles, index: int, target: complex, *, snap_distance: float = 0.0,
                       movable=None) -> DragRequest:
    """Build the target pole set for dragging ``poles[index]`` to ``target``.

    Parameters
    ----------
    poles : sequence of complex, length n
        Closed-loop poles when the drag started.
    index : int
        Which pole is dragged.
    target : complex
        Where it was dropped (s or z value, as drawn on the map).
    snap_distance : float
        Drops with ``|imag| <= snap_distance`` land on the real axis (map units).
    movable : sequence of bool, optional
        Which poles a gain can move; an immovable pole cannot be dragged nor be a partner.

    Returns
    -------
    DragRequest

    Raises
    ------
    PlacementError
        If the dragged pole cannot be moved by any gain.

    Examples
    --------
    >>> request = targets_after_drag([complex(-1, 2), complex(-1, -2), -5], 0, complex(-3, 1))
    >>> request.targets
    ((-3+1j), (-3-1j), (-5+0j))
    """
    poles = [complex(p) for p in poles]
    if not 0 <= index < len(poles):
        raise PlacementError(f"there is no pole number {index + 1}; the plant has {len(poles)} closed-loop poles")
    movable = [True] * len(poles) if movable is None else [bool(m) for m in movable]
    if not movable[index]:
        raise PlacementError(
            f"the pole at {poles[index]:.4g} cannot be moved by any gain (it is uncontrollable); "
            "drag one of the other poles"
        )
    target = complex(target)
    if abs(target.imag) <= snap_distance:
        target = complex(target.real, 0.0)
    targets = list(poles)
    original = poles[index]
    note = ""
    if original.imag != 0:
        partner = conjugate_partner(poles, index)
        targets[index] = target
        if partner is not None:
            targets[partner] = target.conjugate()
            moved = (index, partner)
        else:
            moved = (index,)
        return DragRequest(tuple(targets), moved, note)
    if target.imag == 0:
        targets[index] = target
        return DragRequest(tuple(targets), (index,), note)
    # A real pole leaving the axis needs a real partner to form a conjugate pair.
    partners = [i for i, p in enumerate(poles) if i != index and p.imag == 0 and movable[i]]
    if not partners:
        targets[index] = complex(target.real, 0.0)
        note = (
            "This real pole has no other movable real pole to pair with, so it stays on the real axis "
            "(complex poles come in conjugate pairs)."
        )
        return DragRequest(tuple(targets), (index,), note)
    partner = min(partners, key=lambda i: abs(poles[i] - original))
    targets[index] = target
    targets[partner] = target.conjugate()
    note = f"The real pole at {poles[partner].real:.4g} joined the dragged pole as its conjugate."
    return DragRequest(tuple(targets), (index, partner), note)
