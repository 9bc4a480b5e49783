"""Coordinates of the reduced-order (Luenberger minimal-order) estimator.

When the p outputs y = Cx are independent, they already give p combinations of
the state without error; only the remaining n − p need estimating (Luenberger,
"Observing the state of a linear system", IEEE Trans. Military Electronics 8,
1964; "An introduction to observers", IEEE TAC 16(6), 1971). In coordinates

    [y; z] = T x,   T = [C; M]   (M spans what C leaves out)

the plant reads y' = Ā_aa y + Ā_ab z + B̄_a u, z' = Ā_ba y + Ā_bb z + B̄_b u, and
y' − Ā_aa y − B̄_a u = Ā_ab z is a measurement of z. The estimator of z is

    ẑ = w + L_r y,   w' = F w + (F L_r + Ā_ba − L_r Ā_aa) y + (B̄_b − L_r B̄_a) u,
    F = Ā_bb − L_r Ā_ab,

(the same with w[k+1] for a sampled plant), so the error z − ẑ obeys e' = F e:
its n − p poles are placed on the pair (Ā_bb, Ā_ab) exactly as a full-order
estimator's are on (A, C). When every output measures one state directly (a
row of C is a multiple of a unit vector), M picks the unmeasured states
themselves, so z are real states with their names and units.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg

from ._arrays import read_only
from ._errors import EstimatorError
from ._plant import Plant

__all__ = ["ReducedOrderCoordinates", "reduced_order_coordinates"]

_EPS = np.finfo(float).eps


@dataclass(frozen=True, eq=False)
class ReducedOrderCoordinates:
    """The split of the state into measured combinations y = Cx and the estimated rest z = Mx.

    Attributes
    ----------
    transform : numpy.ndarray, shape (n, n)
        T = [C; M], so that [y; z] = T x.
    inverse : numpy.ndarray, shape (n, n)
        T⁻¹, so that x = T⁻¹ [y; z].
    measured_count : int
        p, the number of outputs.
    A_aa, A_ab, A_ba, A_bb : numpy.ndarray
        Blocks of T A T⁻¹ (p×p, p×(n−p), (n−p)×p, (n−p)×(n−p)).
    B_a, B_b : numpy.ndarray
        Blocks of T B (p×m, (n−p)×m).
    names, units : tuple of str
        Names and units of z (the unmeasured states when each output measures one
        state directly, else "z1", … with no unit).
    direct : bool
        Whether every output measures one state directly.
    transform_condition : float
        Condition number of T (large: the outputs are nearly dependent).
    """

    transform: np.ndarray
    inverse: np.ndarray
    measured_count: int
    A_aa: np.ndarray
    A_ab: np.ndarray
    A_ba: np.ndarray
    A_bb: np.ndarray
    B_a: np.ndarray
    B_b: np.ndarray
    names: tuple[str, ...]
    units: tuple[str, ...]
    direct: bool
    transform_condition: float


def _directly_measured_states(C: np.ndarray) -> list[int] | None:
    """The state each output measures when every row of C is a multiple of a distinct unit vector."""
    states = []
    for row in C:
        nonzero = np.flatnonzero(row)
        if nonzero.size != 1:
            return None
        states.append(int(nonzero[0]))
    return states if len(set(states)) == len(states) else None


def reduced_order_coordinates(plant: Plant) -> ReducedOrderCoordinates:
    """Coordinates [y; z] = T x for the reduced-order estimator of ``plant``.

    Parameters
    ----------
    plant : Plant
        Needs D = 0 (the estimate uses y[k] to form u[k]; with a feedthrough that
        is an algebraic loop), independent outputs and fewer outputs than states.

    Returns
    -------
    ReducedOrderCoordinates

    Raises
    ------
    EstimatorError
        If D ≠ 0, the outputs are dependent, or every state is measured.

    Examples
    --------
    >>> plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], C=[[2.0, 0.0]],
    ...               state_names=("position", "velocity"))
    >>> coordinates = reduced_order_coordinates(plant)
    >>> coordinates.names, coordinates.A_ab.tolist(), coordinates.direct
    (('velocity',), [[2.0]], True)
    """
    A, B, C = np.array(plant.A), np.array(plant.B), np.array(plant.C)
    n, p = plant.state_count, plant.output_count
    if np.any(plant.D != 0.0):
        raise EstimatorError(
            "the reduced-order estimator needs D = 0: it uses y to form u at the same instant, and with a "
            "feedthrough y depends on u itself (an algebraic loop); use the full-order (or prediction) estimator"
        )
    if p >= n:
        raise EstimatorError(
            f"the plant measures {p} outputs of {n} states, so nothing is left to estimate in reduced order; "
            "use the full-order estimator, or measure fewer outputs"
        )
    singular = np.linalg.svd(C, compute_uv=False)
    if singular[-1] <= 1e3 * max(C.shape) * _EPS * singular[0]:
        raise EstimatorError(
            "the reduced-order estimator needs independent outputs, but the rows of C are (nearly) dependent "
            f"(smallest singular value {singular[-1]:.3g} of {singular[0]:.3g}); drop a redundant output"
        )
    measured = _directly_measured_states(C)
    if measured is not None:
        rest = [i for i in range(n) if i not in measured]
        M = np.eye(n)[rest]
        names = tuple(plant.state_names[i] for i in rest)
        units = tuple(plant.state_units[i] for i in rest)
    else:
        M = scipy.linalg.null_space(C).T  # orthonormal rows spanning what C leaves out
        names = tuple(f"z{i + 1}" for i in range(n - p))
        units = ("",) * (n - p)
    T = np.vstack([C, M])
    T_inverse = np.linalg.inv(T)
    A_bar = T @ A @ T_inverse
    B_bar = T @ B
    return ReducedOrderCoordinates(
        transform=read_only(T),
        inverse=read_only(T_inverse),
        measured_count=p,
        A_aa=read_only(A_bar[:p, :p]),
        A_ab=read_only(A_bar[:p, p:]),
        A_ba=read_only(A_bar[p:, :p]),
        A_bb=read_only(A_bar[p:, p:]),
        B_a=read_only(B_bar[:p]),
        B_b=read_only(B_bar[p:]),
        names=names,
        units=units,
        direct=measured is not None,
        transform_condition=float(np.linalg.cond(T)),
    )
