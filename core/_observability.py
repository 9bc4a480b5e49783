"""Observability pole by pole: which open-loop poles an estimator can move, and why not.

An estimator x̂' = A x̂ + B u + L (y − C x̂ − D u) has the estimation error
e = x − x̂ with e' = (A − LC) e. A pole λ of A can be moved by some L exactly when
the PBH matrix [λI − A; C] has full column rank (Popov–Belevitch–Hautus test,
the dual of the controllability test): otherwise its mode x = v (with Av = λv,
Cv = 0) never shows in the outputs and stays a pole of A − LC for every L.

The decisions are those of :func:`gainboard.core.analyze_structure` (the
staircase reduction of (Aᵀ, Cᵀ), with the same data-scaled tolerances as for
controllability); this module adds, per pole, the states the hidden mode moves
and whether the plant is at least detectable (every hidden pole decays by
itself, so a stable estimator still exists).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._arrays import read_only
from ._plant import Plant
from ._structure import WEAK_STRUCTURE_MARGIN, analyze_structure

__all__ = ["ModeObservability", "ObservabilityReport", "analyze_observability"]

# A state counts as "moved by" a hidden mode when its share of the mode shape is at least this
# fraction of the largest share (common practice, no source: it names the few states that matter).
_NOTABLE_SHARE = 0.1


def _pole_text(pole: complex) -> str:
    pole = complex(pole)
    if pole.imag == 0.0:
        return f"{pole.real + 0.0:.6g}"
    sign = "+" if pole.imag > 0 else "-"
    return f"{pole.real + 0.0:.6g}{sign}{abs(pole.imag):.6g}j"


def _decays(pole: complex, sampled: bool, scale: float) -> bool:
    tolerance = 1e3 * np.finfo(float).eps * max(scale, 1.0 if sampled else 0.0)
    return abs(pole) < 1.0 - tolerance if sampled else pole.real < -tolerance


@dataclass(frozen=True)
class ModeObservability:
    """One open-loop pole as the estimator sees it.

    Attributes
    ----------
    pole : complex
        The open-loop pole (s or z).
    observable : bool
        Some output shows this mode, so the estimator can move it.
    margin : float
        Relative PBH margin σ_min([λI − A; Ĉ]) / ‖A‖₂ (0 for a hidden pole).
    hidden_states : tuple of str
        For a hidden pole, the states its mode moves (largest shares of the mode shape).
    explanation : str
        One sentence: why the estimator can or cannot move this pole.
    """

    pole: complex
    observable: bool
    margin: float
    hidden_states: tuple[str, ...]
    explanation: str


@dataclass(frozen=True, eq=False)
class ObservabilityReport:
    """Which open-loop poles an estimator can move.

    Attributes
    ----------
    observable : bool
        Every pole shows in the outputs: an estimator can place all error poles.
    detectable : bool
        Every hidden pole decays by itself, so a stable estimator exists.
    observable_rank : int
        Dimension of the observable subspace.
    modes : tuple of ModeObservability
        One per open-loop pole, in canonical pole order.
    unobservable_poles : numpy.ndarray of complex
        The hidden poles (they stay poles of A − LC for every L).
    observability_margin : float
        Smallest PBH margin over the observable poles (0 when none is).
    nearly_unobservable : bool
        Some observable pole has a margin below ``WEAK_STRUCTURE_MARGIN``: it is barely
        seen, and moving it takes very large estimator gains.
    note : str
        A plain summary.
    """

    observable: bool
    detectable: bool
    observable_rank: int
    modes: tuple[ModeObservability, ...]
    unobservable_poles: np.ndarray
    observability_margin: float
    nearly_unobservable: bool
    note: str


def _hidden_mode_states(plant: Plant, pole: complex) -> tuple[str, ...]:
    """States moved by the mode of ``pole`` that C does not see (null vector of [λI − A; C])."""
    n = plant.state_count
    scale = max(float(np.linalg.norm(plant.A, 2)), 1.0)
    c_norm = float(np.linalg.norm(plant.C, 2)) or 1.0
    stacked = np.vstack([(pole * np.eye(n) - plant.A) / scale, plant.C.astype(complex) / c_norm])
    _, _, right = np.linalg.svd(stacked)
    shape = np.abs(right[-1].conj())
    notable = np.flatnonzero(shape >= _NOTABLE_SHARE * shape.max())
    return tuple(plant.state_names[i] for i in notable)


def analyze_observability(plant: Plant) -> ObservabilityReport:
    """Which open-loop poles the estimator can move (PBH test per pole), and why.

    Parameters
    ----------
    plant : Plant
        Continuous or sampled plant; C defines what is measured.

    Returns
    -------
    ObservabilityReport

    Examples
    --------
    >>> plant = Plant(A=[[-1.0, 0.0], [0.0, -2.0]], B=[[1.0], [1.0]], C=[[1.0, 0.0]],
    ...               state_names=("fast", "slow"))
    >>> report = analyze_observability(plant)
    >>> report.observable, report.detectable, report.unobservable_poles.tolist()
    (False, True, [(-2+0j)])
    >>> report.modes[0].hidden_states
    ('slow',)
    """
    structure = analyze_structure(plant)
    sampled = plant.is_sampled
    scale = float(np.linalg.norm(plant.A, 2))
    modes = []
    for pole, seen, margin in zip(structure.open_loop_poles, structure.pole_observable,
                                  structure.pole_observability_margins):
        pole = complex(pole)
        if seen:
            hidden: tuple[str, ...] = ()
            if margin < WEAK_STRUCTURE_MARGIN:
                explanation = (
                    f"pole {_pole_text(pole)} is barely seen in the outputs (relative PBH margin {margin:.2g}): "
                    "an estimator can move it only with very large gains, which amplify sensor noise"
                )
            else:
                explanation = f"pole {_pole_text(pole)} shows in the outputs (relative PBH margin {margin:.2g})"
        else:
            hidden = _hidden_mode_states(plant, pole)
            fate = ("it decays by itself, so the estimation error in it does too"
                    if _decays(pole, sampled, scale)
                    else "it does not decay, so no estimator can track it: add a sensor that sees it")
            explanation = (
                f"pole {_pole_text(pole)} is hidden from every output: its mode moves "
                f"{', '.join(hidden)} in a direction C does not see, so it stays a pole of the estimation error "
                f"for every L; {fate}"
            )
        modes.append(ModeObservability(pole=pole, observable=bool(seen), margin=float(margin),
                                       hidden_states=hidden, explanation=explanation))
    hidden_poles = structure.unobservable_poles
    detectable = bool(all(_decays(complex(p), sampled, scale) for p in hidden_poles))
    if structure.observable:
        note = "Every pole shows in the outputs: the estimator can place all its error poles."
    elif detectable:
        note = (f"Pole(s) {', '.join(_pole_text(p) for p in hidden_poles)} are hidden from the outputs but decay by "
                "themselves: an estimator must keep them among its error poles.")
    else:
        note = (f"Pole(s) {', '.join(_pole_text(p) for p in hidden_poles)} are hidden from the outputs and do not "
                "decay: no estimator can follow the state; measure more.")
    if structure.nearly_unobservable:
        note += " Some pole is barely seen: estimator gains that move it will be very large."
    return ObservabilityReport(
        observable=bool(structure.observable),
        detectable=detectable,
        observable_rank=int(structure.observable_rank),
        modes=tuple(modes),
        unobservable_poles=read_only(hidden_poles),
        observability_margin=float(structure.observability_margin),
        nearly_unobservable=bool(structure.nearly_unobservable),
        note=note,
    )
