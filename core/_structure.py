"""Structure of a plant: which poles feedback can move and which outputs reveal them.

Rank decisions are made with singular values against data-scaled tolerances
(:func:`rank_tolerance`). The controllable part is found by an orthogonal
staircase reduction (:func:`controllability_staircase`), never from the rank of
the controllability matrix [B, AB, …, A^{n−1}B]: that matrix has columns growing
like powers of A and is badly conditioned already for ten states, so its
numerical rank can be wrong. The observable part is the same reduction applied
to (Aᵀ, Cᵀ) (duality).

A pole λ is movable by state feedback exactly when the PBH matrix
[λI − A, B] has full row rank (Popov–Belevitch–Hautus test); the staircase
counts multiplicities correctly (A = I₂, B = e₁ has one movable and one fixed
pole at 1), and the smallest singular value of the PBH matrix measures how far
a pole is from becoming fixed.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ._arrays import read_only
from ._closed_loop import _matching_indices, sort_poles
from ._errors import PlantError
from ._plant import as_real_matrix

__all__ = [
    "WEAK_STRUCTURE_MARGIN",
    "rank_tolerance",
    "controllability_matrix",
    "observability_matrix",
    "StaircaseForm",
    "controllability_staircase",
    "StructureReport",
    "analyze_structure",
]

_EPS = np.finfo(float).eps

#: Relative PBH margin below which a movable pole is reported as nearly
#: uncontrollable (or an observable pole as nearly unobservable). Common practice,
#: no source: moving a pole with margin δ needs gains growing like 1/δ, and below
#: 1e-6 those gains are a million times the plant's own scale.
WEAK_STRUCTURE_MARGIN = 1e-6

# The staircase tolerances may grow by at most 10^8 when PBH margins show that a
# rounding-level coupling was kept: n²·eps·10^8 ≈ n²·2e-8, about √eps, the accuracy
# to which a defective eigenvalue can be computed at all.
_LARGEST_TOLERANCE_EXPONENT = 8


def rank_tolerance(matrix, steps: int = 1) -> float:
    """Singular values at or below this value count as zero.

    tolerance = steps · max(rows, columns) · eps · ‖matrix‖₂. With ``steps = 1``
    this is the usual numerical-rank threshold (the default of
    :func:`numpy.linalg.matrix_rank`): the rounding error of one backward-stable
    factorisation of the matrix. A result obtained after ``steps`` successive
    orthogonal transformations carries about that many times more rounding, so
    reductions pass the number of transformations they apply.

    Parameters
    ----------
    matrix : array_like, shape (r, c)
    steps : int
        Number of orthogonal transformations the tested quantities went through (≥ 1).

    Returns
    -------
    float
        Absolute tolerance, in the units of the matrix entries (0 for a zero matrix).

    Examples
    --------
    >>> float(rank_tolerance([[2.0, 0.0], [0.0, 1.0]]) / np.finfo(float).eps)
    4.0
    """
    M = np.atleast_2d(np.asarray(matrix, dtype=complex if np.iscomplexobj(matrix) else float))
    if M.size == 0:
        return 0.0
    if isinstance(steps, bool) or not isinstance(steps, (int, np.integer)) or steps < 1:
        raise ValueError(f"steps must be a positive whole number, got {steps!r}")
    return float(steps * max(M.shape) * _EPS * np.linalg.norm(M, 2))


def _checked_pair(A, B, key: str = "B") -> tuple[np.ndarray, np.ndarray]:
    A = as_real_matrix(A, "A", "n×n")
    if A.shape[0] != A.shape[1]:
        raise PlantError(f"A is {A.shape[0]}×{A.shape[1]} but must be square (n×n)")
    n = A.shape[0]
    B = as_real_matrix(B, key, f"{n}×m")
    if B.shape[0] != n:
        raise PlantError(f"{key} has {B.shape[0]} rows but A is {n}×{n}; {key} must be {n}×m")
    return A, B


def controllability_matrix(A, B) -> np.ndarray:
    """The controllability matrix [B, AB, A²B, …, A^{n−1}B].

    For display and teaching; decisions in gainboard use the staircase reduction
    instead, because this matrix is badly conditioned for more than a few states.

    Parameters
    ----------
    A : array_like, shape (n, n)
    B : array_like, shape (n, m)

    Returns
    -------
    numpy.ndarray, shape (n, n·m)

    Raises
    ------
    PlantError
        If the shapes do not fit.

    Examples
    --------
    >>> controllability_matrix([[0.0, 1.0], [0.0, 0.0]], [[0.0], [1.0]]).tolist()
    [[0.0, 1.0], [1.0, 0.0]]
    """
    A, B = _checked_pair(A, B)
    blocks = [B]
    for _ in range(A.shape[0] - 1):
        blocks.append(A @ blocks[-1])
    return np.hstack(blocks)


def observability_matrix(A, C) -> np.ndarray:
    """The observability matrix [C; CA; CA²; …; CA^{n−1}] (stacked rows).

    Parameters
    ----------
    A : array_like, shape (n, n)
    C : array_like, shape (p, n)

    Returns
    -------
    numpy.ndarray, shape (n·p, n)

    Raises
    ------
    PlantError
        If the shapes do not fit.

    Examples
    --------
    >>> observability_matrix([[0.0, 1.0], [0.0, 0.0]], [[1.0, 0.0]]).tolist()
    [[1.0, 0.0], [0.0, 1.0]]
    """
    A = as_real_matrix(A, "A", "n×n")
    if A.shape[0] != A.shape[1]:
        raise PlantError(f"A is {A.shape[0]}×{A.shape[1]} but must be square (n×n)")
    n = A.shape[0]
    C = as_real_matrix(C, "C", f"p×{n}")
    if C.shape[1] != n:
        raise PlantError(f"C has {C.shape[1]} columns but A is {n}×{n}; C must be p×{n}")
    return controllability_matrix(A.T, C.T).T


@dataclass(frozen=True, eq=False)
class StaircaseForm:
    """Orthogonal reduction separating the controllable part of (A, B).

    With x = Q z (Q = ``transform``, orthogonal) the plant becomes
    z' = Qᵀ A Q z + Qᵀ B u, where, for k = ``controllable_dimension``::

        QᵀAQ = [[A11, A12],      QᵀB = [[B1],
                 [ 0,  A22]]             [ 0]]

    (A11, B1) is controllable, and the poles of A22 cannot be moved by any
    feedback. A11 is block upper Hessenberg with blocks of ``block_sizes``; for
    one input it is upper Hessenberg and B1 = β e₁.

    Attributes
    ----------
    transform : numpy.ndarray, shape (n, n)
        Orthogonal Q; its first k columns span the controllable subspace.
    A : numpy.ndarray, shape (n, n)
        QᵀAQ with the block below the controllable part set exactly to zero.
    B : numpy.ndarray, shape (n, m)
        QᵀB with rows k.. set exactly to zero.
    controllable_dimension : int
        k, the dimension of the controllable subspace (the rank of the
        controllability matrix in exact arithmetic).
    block_sizes : tuple of int
        Rank found at each step of the staircase; they sum to k.
    smallest_kept : float
        Smallest singular value accepted as nonzero in any step, relative to the
        norm it was compared with (1 when nothing was kept); near the tolerance
        means a rank decision was close.
    tolerance_scale : float
        Factor by which the default rank tolerances were raised (1 normally; a
        power of ten when PBH margins showed a rounding-level coupling was kept).
    """

    transform: np.ndarray
    A: np.ndarray
    B: np.ndarray
    controllable_dimension: int
    block_sizes: tuple[int, ...]
    smallest_kept: float
    tolerance_scale: float


def controllability_staircase(A, B) -> StaircaseForm:
    """Reduce (A, B) to controllability staircase form by orthogonal transformations.

    Step 1 rotates the state so that the range of B occupies the first r₁
    coordinates (SVD of B). Each further step takes the block of A coupling the
    newest coordinates into the rest, and rotates the rest so that its range comes
    first (SVD of that block). It stops when the coupling has rank zero (what is
    left is not reached by the inputs) or every coordinate is reached. Ranks are
    decided with :func:`rank_tolerance` of B (step 1) and of A with ``steps = n``
    (later steps), so scaling the inputs or the time unit does not change them.

    Small couplings in early steps can amplify rounding in later ones past that
    tolerance. So the PBH margin (see :class:`StructureReport`) of every pole of
    the controllable part found is checked against n·(n + m)·eps; if one is
    below, the part is not really controllable and the reduction is repeated
    with tolerances ten times larger (at most 10⁸ times, about √eps·‖A‖).

    Parameters
    ----------
    A : array_like, shape (n, n)
    B : array_like, shape (n, m)

    Returns
    -------
    StaircaseForm

    Raises
    ------
    PlantError
        If the shapes do not fit.

    Examples
    --------
    >>> form = controllability_staircase(np.eye(2), [[1.0], [0.0]])
    >>> form.controllable_dimension, form.block_sizes
    (1, (1,))
    """
    A, B = _checked_pair(A, B)
    form, _, _ = _staircase_with_margins(A, B, sort_poles(np.linalg.eigvals(A)))
    return form


def _staircase_with_margins(A: np.ndarray, B: np.ndarray, poles: np.ndarray):
    """:func:`controllability_staircase` of checked (A, B), with the fixed flags and PBH margins of ``poles``.

    ``poles`` are the eigenvalues of A. The PBH margins that decide whether to repeat the
    reduction are those of the movable poles (the poles of the controllable part), so the
    structure report takes them from here instead of running every SVD a second time.
    Returns (form, fixed flags, margins) with margin 0 for the fixed poles.
    """
    n, m = B.shape
    norm_A = float(np.linalg.norm(A, 2))
    norm_B = float(np.linalg.norm(B, 2))
    base_B = rank_tolerance(B)
    base_A = rank_tolerance(A, steps=n)
    # A rounding-level coupling can be amplified past the tolerance by small couplings in
    # earlier steps. The PBH margin of each pole of the controllable part does not suffer
    # from that, so it decides whether to repeat the reduction with a larger tolerance.
    pbh_threshold = n * (n + m) * _EPS
    first = None
    for exponent in range(_LARGEST_TOLERANCE_EXPONENT + 1):
        scale = 10.0**exponent
        form = _staircase(A, B, scale * base_B, scale * base_A, norm_A, norm_B, scale)
        if form.controllable_dimension == 0:
            fixed, _ = _fixed_flags(form, poles)
            return form, fixed, np.zeros(poles.size)
        fixed, _ = _fixed_flags(form, poles)
        margins = np.zeros(poles.size)
        k = form.controllable_dimension
        # a repeat is decided as soon as one margin is below the threshold (the rest is not needed then)
        margins[~fixed] = _pbh_margins(form.A[:k, :k], form.B[:k, :], poles[~fixed], norm_A, norm_B,
                                       stop_below=pbh_threshold)
        if first is None:
            first = form
        if not np.any(np.isnan(margins)) and (margins[~fixed].size == 0 or np.min(margins[~fixed]) > pbh_threshold):
            return form, fixed, margins
    fixed, _ = _fixed_flags(first, poles)
    k = first.controllable_dimension
    margins = np.zeros(poles.size)
    margins[~fixed] = _pbh_margins(first.A[:k, :k], first.B[:k, :], poles[~fixed], norm_A, norm_B)
    return first, fixed, margins


def _staircase(A, B, tolerance_B, tolerance_A, norm_A, norm_B, scale) -> StaircaseForm:
    n = A.shape[0]
    U, singular, _ = np.linalg.svd(B)
    rank = int(np.sum(singular > tolerance_B))
    smallest_kept = float(singular[rank - 1] / norm_B) if rank else 1.0
    Q = U.copy()
    At = U.T @ A @ U
    Bt = U.T @ B
    Bt[rank:, :] = 0.0
    blocks = [rank] if rank else []
    reached = rank
    while rank > 0 and reached < n:
        coupling = At[reached:, reached - rank:reached]
        U, singular, _ = np.linalg.svd(coupling)
        new_rank = int(np.sum(singular > tolerance_A))
        At[reached:, :] = U.T @ At[reached:, :]
        At[:, reached:] = At[:, reached:] @ U
        Q[:, reached:] = Q[:, reached:] @ U
        At[reached + new_rank:, reached - rank:reached] = 0.0
        if new_rank:
            smallest_kept = min(smallest_kept, float(singular[new_rank - 1] / norm_A))
            blocks.append(new_rank)
        reached += new_rank
        rank = new_rank
    At[reached:, :reached] = 0.0
    return StaircaseForm(
        transform=read_only(Q),
        A=read_only(At),
        B=read_only(Bt),
        controllable_dimension=int(reached),
        block_sizes=tuple(blocks),
        smallest_kept=smallest_kept,
        tolerance_scale=scale,
    )


#: PBH matrices (k × (k + m)) per batched SVD call: bounds memory at large n and lets a repeat stop early.
_PBH_BATCH = 16


def _pbh_margins(A_part: np.ndarray, B_part: np.ndarray, poles: np.ndarray, norm_A: float, norm_B: float,
                 stop_below: float | None = None) -> np.ndarray:
    """Relative PBH margin of each pole: σ_min([λI − A, B·‖A‖/‖B‖]) / ‖A‖.

    B is rescaled to the norm of A so that the figure does not depend on the
    units of the inputs; dividing by ‖A‖ makes it independent of the time unit.
    For A = 0 the scale ‖B‖ is used throughout.

    A and B are real, so a pole and its conjugate have the same margin (the PBH matrices are
    conjugates): one SVD per pair, real arithmetic for real poles, in batches of a few poles.
    With ``stop_below``, the work stops after the first batch holding a margin below it, and the
    poles not reached get NaN.
    """
    if poles.size == 0:
        return np.zeros(0)
    if norm_B == 0.0:
        return np.zeros(poles.size)
    scale = norm_A if norm_A > 0.0 else norm_B
    k = A_part.shape[0]
    if k == 0:
        return np.zeros(poles.size)
    scaled_B = B_part * (scale / norm_B)
    # one representative per conjugate pair: the upper half plane (exact pairs from LAPACK)
    representatives = sorted({complex(p.real, abs(p.imag)) for p in np.asarray(poles, dtype=complex)},
                             key=lambda p: (p.imag != 0.0, p.real, p.imag))
    found: dict[complex, float] = {}
    identity = np.eye(k)
    for start in range(0, len(representatives), _PBH_BATCH):
        batch = np.array(representatives[start:start + _PBH_BATCH])
        real = batch.imag == 0.0
        for chosen, dtype in ((real, float), (~real, complex)):
            if not np.any(chosen):
                continue
            values = batch[chosen] if dtype is complex else batch[chosen].real
            pbh = np.empty((values.size, k, k + scaled_B.shape[1]), dtype=dtype)
            pbh[:, :, :k] = values[:, None, None] * identity - A_part
            pbh[:, :, k:] = scaled_B
            smallest = np.linalg.svd(pbh, compute_uv=False)[:, -1] / scale
            found.update(zip(batch[chosen].tolist(), smallest.tolist()))
        if stop_below is not None and min(found.values()) <= stop_below:
            break
    return np.array([found.get(complex(p.real, abs(p.imag)), math.nan) for p in np.asarray(poles, dtype=complex)])


def _fixed_flags(form: StaircaseForm, poles: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Flags (True = fixed) for each of ``poles`` and the fixed values, from a staircase form."""
    n = form.A.shape[0]
    k = form.controllable_dimension
    fixed = np.zeros(poles.size, dtype=bool)
    if k < n:
        unreached = np.linalg.eigvals(form.A[k:, k:]).astype(complex)
        # pair each unreached eigenvalue with a distinct open-loop pole (multiplicity-safe)
        fixed[_matching_indices(unreached, poles)] = True
        # among equal poles, which copy is "the fixed one" is arbitrary: list movable copies first
        tolerance = 100.0 * n * _EPS * max(float(np.max(np.abs(poles))), 1e-300)
        start = 0
        while start < poles.size:
            stop = start + 1
            while stop < poles.size and abs(poles[stop] - poles[start]) <= tolerance:
                stop += 1
            count = int(np.sum(fixed[start:stop]))
            fixed[start:stop] = False
            fixed[stop - count:stop] = True
            start = stop
    return fixed, poles[fixed]


@dataclass(frozen=True, eq=False)
class StructureReport:
    """Which poles state feedback can move and which the outputs reveal.

    Attributes
    ----------
    controllable, observable : bool
        Every pole movable / every pole seen in the outputs.
    controllable_rank, observable_rank : int
        Dimension of the controllable / observable subspace (the rank of the
        controllability / observability matrix in exact arithmetic).
    open_loop_poles : numpy.ndarray of complex, shape (n,)
        Eigenvalues of A in canonical order, conjugate pairs exact.
    pole_movable : tuple of bool, length n
        For each open-loop pole, whether feedback can move it (PBH test, with
        repeated poles counted one copy at a time).
    pole_observable : tuple of bool, length n
        For each open-loop pole, whether it shows in the outputs y = Cx + Du.
    uncontrollable_poles, unobservable_poles : numpy.ndarray of complex
        The fixed / hidden open-loop poles (subsets of ``open_loop_poles``).
    pole_controllability_margins : numpy.ndarray of float, shape (n,)
        Relative PBH margin σ_min([λI − A, B̂]) / ‖A‖₂ of each movable pole on the
        controllable part (B̂ is B rescaled to the norm of A, so input units do not
        matter); 0 for fixed poles. It is how far (relative to ‖A‖) the plant is
        from a nearby plant in which that pole cannot be moved.
    pole_observability_margins : numpy.ndarray of float, shape (n,)
        The same with C in place of B (σ_min of [λI − A; Ĉ]).
    controllability_margin, observability_margin : float
        Smallest margin over the movable / observable poles (0 when no pole is).
    nearly_uncontrollable, nearly_unobservable : bool
        Some movable (observable) pole has a margin below ``WEAK_STRUCTURE_MARGIN``:
        feedback can move it only with very large gains (it is barely seen).
    controllability_matrix_condition : float
        2-norm condition number of [B, AB, …, A^{n−1}B] (inf if rank deficient or
        if the powers overflow); for information only, no decision uses it.
    """

    controllable: bool
    observable: bool
    controllable_rank: int
    observable_rank: int
    open_loop_poles: np.ndarray
    pole_movable: tuple[bool, ...]
    pole_observable: tuple[bool, ...]
    uncontrollable_poles: np.ndarray
    unobservable_poles: np.ndarray
    pole_controllability_margins: np.ndarray
    pole_observability_margins: np.ndarray
    controllability_margin: float
    observability_margin: float
    nearly_uncontrollable: bool
    nearly_unobservable: bool
    controllability_matrix_condition: float


def _matrix_condition(matrix: np.ndarray) -> float:
    if not np.all(np.isfinite(matrix)):
        return math.inf
    singular = np.linalg.svd(matrix, compute_uv=False)
    if singular[-1] <= rank_tolerance(matrix):
        return math.inf
    return float(singular[0] / singular[-1])


def analyze_structure(plant) -> StructureReport:
    """Controllability and observability of a plant, pole by pole.

    Continuous and sampled plants are treated alike (the PBH test is the same
    for s and z).

    Parameters
    ----------
    plant : Plant

    Returns
    -------
    StructureReport

    Examples
    --------
    >>> from gainboard.core import Plant
    >>> report = analyze_structure(Plant(A=np.eye(2), B=[[1.0], [0.0]]))
    >>> report.controllable_rank, report.pole_movable, report.uncontrollable_poles.tolist()
    (1, (True, False), [(1+0j)])
    """
    A, B, C = plant.A, plant.B, plant.C
    norm_A = float(np.linalg.norm(A, 2))
    poles = sort_poles(np.linalg.eigvals(A))

    # each side's PBH margins come out of its staircase check: every SVD runs once
    reach, fixed, reach_margins = _staircase_with_margins(*_checked_pair(A, B), poles)
    fixed_values = poles[fixed]
    seen, hidden, seen_margins = _staircase_with_margins(*_checked_pair(A.T, C.T, "C"), poles)
    hidden_values = poles[hidden]

    def smallest(margins, flags):
        chosen = margins[~flags]
        return float(np.min(chosen)) if chosen.size else 0.0

    with np.errstate(over="ignore", invalid="ignore"):
        condition = _matrix_condition(controllability_matrix(A, B))
    return StructureReport(
        controllable=bool(not np.any(fixed)),
        observable=bool(not np.any(hidden)),
        controllable_rank=reach.controllable_dimension,
        observable_rank=seen.controllable_dimension,
        open_loop_poles=read_only(poles),
        pole_movable=tuple(bool(not f) for f in fixed),
        pole_observable=tuple(bool(not h) for h in hidden),
        uncontrollable_poles=read_only(fixed_values),
        unobservable_poles=read_only(hidden_values),
        pole_controllability_margins=read_only(reach_margins),
        pole_observability_margins=read_only(seen_margins),
        controllability_margin=smallest(reach_margins, fixed),
        observability_margin=smallest(seen_margins, hidden),
        nearly_uncontrollable=bool(np.any(reach_margins[~fixed] < WEAK_STRUCTURE_MARGIN)),
        nearly_unobservable=bool(np.any(seen_margins[~hidden] < WEAK_STRUCTURE_MARGIN)),
        controllability_matrix_condition=condition,
    )
