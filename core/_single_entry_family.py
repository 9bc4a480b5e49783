"""Private machinery for a rank-one family of closed-loop matrices.

Changing one gain entry k_ij (all others fixed) changes the closed-loop matrix by
a rank-one term: A − BK(v) = A0 − (v − v0)·b·cᵀ with A0 = A − BK (the current
design), b = B[:, i], c = e_j and v0 = K[i, j]. Scaling the whole gain of a
single-input plant, α·K, is the same kind of family with c = K[0, :] and v0 = 1.

With δ = v − v0 and g(s) = cᵀ(sI − A0)⁻¹b, the closed-loop poles are the roots of
1 + δ·g(s). Everything here works on a *minimal* realisation of g, obtained by
two orthogonal Krylov (Hessenberg) reductions; the poles that the family cannot
move (not reached from b, or not seen through c) are kept aside as fixed poles.

Boundary crossings (a pole on the imaginary axis, or on the unit circle for a
sampled plant) are the values of δ that make g(s) real at a boundary point s.
They come from the zeros of h(s) = g(s) − g(−s) (continuous) or
h(z) = g(z) − g(1/z) (sampled), computed as generalized eigenvalues of a
Rosenbrock pencil of size 2·o + 1 (o = order of the minimal realisation), then
polished by Newton's method on the bordered system

    [ sI − M   b ] [x]   [0]
    [   cᵀ     0 ] [t] = [1]        →   t(s) = −1/g(s),

whose solution is an exact eigenpair (s, x) of M − t·b·cᵀ. Nothing here ever
forms polynomial coefficients.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cached_property

import numpy as np
import scipy.linalg
from scipy.linalg.lapack import dgehrd as _gehrd
from scipy.linalg.lapack import dggev as _ggev
from scipy.linalg.lapack import dorghr as _orghr

from ._errors import AnalysisError
from ._stability import boundary_tolerance

__all__: list[str] = []  # private helpers, nothing re-exported

_EPS = np.finfo(float).eps
# Pencil eigenvalues this close (relative) to the boundary are polished by Newton's
# method; a tangential touch is a double zero of h and is computed only to about
# sqrt(eps) by the pencil, so the net must be much wider than eps.
_CANDIDATE_NET = 1e-4
_NEWTON_STEPS = 40


# ---------------------------------------------------------------------------
# Orthogonal Krylov reduction (controllable / observable part of a SISO system)
# ---------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class KrylovReduction:
    """Qᵀ·matrix·Q = [[H11, H12], [0, H22]] with H11 (r×r) upper Hessenberg and Qᵀ·vector = β·e1.

    The first r columns of Q span the Krylov space of (matrix, vector): the part
    of the state space that the vector can reach.
    """

    transform: np.ndarray  # Q, (n, n), orthogonal
    reduced: np.ndarray  # H, (n, n), upper Hessenberg with H[r, r-1] = 0
    size: int  # r
    leading: float  # β

    @property
    def reached_block(self) -> np.ndarray:
        return self.reduced[: self.size, : self.size]

    @property
    def unreached_block(self) -> np.ndarray:
        return self.reduced[self.size :, self.size :]

    @cached_property
    def unreached_poles(self) -> np.ndarray:
        """Eigenvalues of the unreached block (computed once for all the families sharing the reduction)."""
        n = self.reduced.shape[0]
        return np.linalg.eigvals(self.unreached_block) if self.size < n else np.zeros(0)


def _hessenberg_with_basis(matrix: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(H, Q) with Qᵀ·matrix·Q = H upper Hessenberg, Q e1 = e1: LAPACK gehrd + orghr.

    The same two LAPACK calls as ``scipy.linalg.hessenberg(matrix, calc_q=True)``
    without its per-call checks and workspace query (a block size of 32 is LAPACK's
    own choice for these routines), since every gain entry needs one or two of them.
    """
    n = matrix.shape[0]
    work = 32 * n
    reduced, reflectors, info = _gehrd(matrix, lo=0, hi=n - 1, lwork=work)
    if info != 0:  # cannot happen for a finite matrix; fall back to the checked routine
        return scipy.linalg.hessenberg(matrix, calc_q=True)
    basis, info = _orghr(reduced, reflectors, lo=0, hi=n - 1, lwork=work)
    if info != 0:
        return scipy.linalg.hessenberg(matrix, calc_q=True)
    return np.triu(reduced, -1), basis


def krylov_reduction(matrix: np.ndarray, vector: np.ndarray, scale: float, vector_scale: float) -> KrylovReduction:
    """Orthogonal reduction of (matrix, vector) to Hessenberg form with the vector along e1.

    A Householder reflector maps the vector onto β·e1; the standard Hessenberg
    reduction leaves e1 fixed, so the Hessenberg columns are an orthonormal Krylov
    basis. The first subdiagonal entry below ``10·n·eps·scale`` (scale = ‖matrix‖)
    ends the reachable part: that is the backward error of the reduction itself.
    The vector counts as zero below ``100·n·eps·vector_scale``, where vector_scale is
    the size of the vector it was projected from.
    """
    n = matrix.shape[0]
    norm = float(np.linalg.norm(vector))
    if norm == 0.0 or norm <= 100.0 * n * _EPS * vector_scale:
        return KrylovReduction(np.eye(n), np.array(matrix, dtype=float), 0, 0.0)
    reflector_vector = np.array(vector, dtype=float)
    beta = -math.copysign(norm, reflector_vector[0])
    reflector_vector[0] -= beta
    reflector_vector /= np.linalg.norm(reflector_vector)
    reflector = np.eye(n) - 2.0 * np.outer(reflector_vector, reflector_vector)
    rotated = reflector @ matrix @ reflector
    if n > 2:
        hessenberg, inner = _hessenberg_with_basis(rotated)
    else:
        hessenberg, inner = rotated, np.eye(n)
    transform = reflector @ inner
    hessenberg = np.array(hessenberg)
    size = n
    for k in range(n - 1):
        if abs(hessenberg[k + 1, k]) <= 10.0 * n * _EPS * scale:
            size = k + 1
            break
    hessenberg[size:, :size] = 0.0  # the deflated entry (and rounding below the Hessenberg band)
    return KrylovReduction(transform, hessenberg, size, beta)


# ---------------------------------------------------------------------------
# The minimal family
# ---------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class RankOneFamily:
    """Poles of A0 − (v − v0)·b·cᵀ, split into a fixed set and a minimal moving part.

    The moving poles are the eigenvalues of M − (v − v0)·w·bn·cnᵀ, with bn and cn
    normalised to norm ``pole_scale`` and w = ``direction_weight``; the fixed poles
    do not depend on v.
    """

    sampled: bool
    current_value: float
    moving_matrix: np.ndarray  # M, (o, o)
    moving_input: np.ndarray  # bn, (o,)
    moving_output: np.ndarray  # cn, (o,)
    direction_weight: float  # w
    fixed_poles: np.ndarray  # complex, (n − o,)
    unreached_poles: np.ndarray  # fixed because b cannot reach them
    unseen_poles: np.ndarray  # fixed because c does not see them
    full_norm: float  # ‖A0‖_F
    state_count: int
    pole_scale: float  # size of the moving poles (≥ 1 for a sampled plant: the unit circle)

    @property
    def order(self) -> int:
        return self.moving_matrix.shape[0]

    @property
    def has_effect(self) -> bool:
        return self.order > 0

    @cached_property
    def gain_scale(self) -> float:
        """The change of v at which the feedback term is as large as the plant itself."""
        if not self.has_effect:
            return max(abs(self.current_value), 1.0)
        return 1.0 / (self.direction_weight * self.pole_scale)

    @cached_property
    def _weighted_outer(self) -> np.ndarray:
        return np.outer(self.moving_input, self.moving_output) * self.direction_weight

    def moving_closed_loop(self, values) -> np.ndarray:
        """Moving part M − (v − v0)·w·bn·cnᵀ for each v; shape (len(values), o, o)."""
        shifts = np.asarray(values, dtype=float).reshape(-1) - self.current_value
        return self.moving_matrix - shifts[:, None, None] * self._weighted_outer

    def poles(self, values) -> np.ndarray:
        """All closed-loop poles for each v; shape (len(values), n); moving poles first.

        Called once per round of the adaptive locus with every new sample at once
        (one batched eigenvalue call), so it is kept free of per-call set-up.
        """
        values = np.asarray(values, dtype=float).reshape(-1)
        if self.has_effect:
            moving = np.linalg.eigvals(self.moving_closed_loop(values)).astype(complex, copy=False)
            if not self.fixed_poles.size:
                return moving
        else:
            moving = np.zeros((values.size, 0), dtype=complex)
        fixed = np.broadcast_to(self.fixed_poles, (values.size, self.fixed_poles.size))
        return np.concatenate([moving, fixed], axis=1)


def moving_poles_in_blocks(families, value_lists) -> tuple[np.ndarray, np.ndarray]:
    """Moving poles of families of one order at their values, and the Frobenius norm of each matrix.

    Shapes (N, o) and (N,) with N the total number of values, family after family. The
    matrices M − (v − v0)·w·b·cᵀ are formed and handed to ``numpy.linalg.eigvals`` in blocks
    of at most :data:`_BORDERED_BUDGET` entries, so memory stays O(o²) per block however many
    entries and probes there are (at n = 200 one stack of every probe of every entry was
    4.6 GiB); numpy solves each matrix on its own, so the blocks do not change any number.
    """
    order = families[0].order
    total = sum(np.size(values) for values in value_lists)
    poles = np.empty((total, order), dtype=complex)
    norms = np.empty(total)
    start = 0
    for family, values in zip(families, value_lists):
        values = np.atleast_1d(np.asarray(values, dtype=float))
        for block in _blocks(values.size, order * order):
            matrices = family.moving_closed_loop(values[block])
            stop = start + matrices.shape[0]
            poles[start:stop] = np.linalg.eigvals(matrices)
            norms[start:stop] = np.linalg.norm(matrices, axis=(1, 2))
            start = stop
    return poles, norms


def reduce_input(closed_loop: np.ndarray, direction_input: np.ndarray) -> KrylovReduction:
    """The reachable part of (A0, b): shared by every family with the same A0 and b."""
    vector_norm = float(np.linalg.norm(direction_input))
    return krylov_reduction(closed_loop, direction_input, float(np.linalg.norm(closed_loop)), vector_norm)


def family_from_reduction(
    reduction: KrylovReduction,
    closed_loop: np.ndarray,
    direction_output: np.ndarray,
    current_value: float,
    sampled: bool,
) -> RankOneFamily:
    """Build the minimal family from the reachable part of (A0, b) and the output row c."""
    n = closed_loop.shape[0]
    full_norm = float(np.linalg.norm(closed_loop))
    unreached = reduction.unreached_poles
    r = reduction.size
    empty = np.zeros((0, 0))
    if r == 0:
        return RankOneFamily(sampled, float(current_value), empty, np.zeros(0), np.zeros(0), 0.0,
                             _as_flat_complex(unreached), _as_flat_complex(unreached), np.zeros(0, complex),
                             full_norm, n, 1.0)
    reached = reduction.reached_block
    reached_output = reduction.transform[:, :r].T @ direction_output
    reached_input = np.zeros(r)
    reached_input[0] = reduction.leading
    # The observable part of (reached, reached_output) is the reachable part of the transpose.
    dual = krylov_reduction(reached.T, reached_output, full_norm, float(np.linalg.norm(direction_output)))
    o = dual.size
    unseen = np.linalg.eigvals(dual.unreached_block) if o < r else np.zeros(0)
    fixed = _as_flat_complex(np.concatenate([unreached, unseen]))
    if o == 0:
        return RankOneFamily(sampled, float(current_value), empty, np.zeros(0), np.zeros(0), 0.0,
                             fixed, _as_flat_complex(unreached), _as_flat_complex(unseen), full_norm, n, 1.0)
    moving_matrix = dual.reduced[:o, :o].T.copy()
    moving_input = (dual.transform.T @ reached_input)[:o]
    moving_output = np.zeros(o)
    moving_output[0] = dual.leading
    input_norm = float(np.linalg.norm(moving_input))
    output_norm = abs(dual.leading)
    # A moving matrix of rounding size is zero; a sampled plant's poles live on the scale
    # of the unit circle however small M is.
    pole_scale = max(float(np.linalg.norm(moving_matrix)), 1e3 * _EPS * full_norm, 1.0 if sampled else 0.0)
    if pole_scale == 0.0:
        pole_scale = 1.0
    # Normalise both vectors to the size of M so the pencil and the bordered matrix are balanced.
    weight = input_norm * output_norm / pole_scale**2
    if input_norm == 0.0:
        return RankOneFamily(sampled, float(current_value), empty, np.zeros(0), np.zeros(0), 0.0,
                             _as_flat_complex(np.concatenate([fixed, np.linalg.eigvals(moving_matrix)])),
                             _as_flat_complex(unreached), _as_flat_complex(unseen), full_norm, n, 1.0)
    return RankOneFamily(
        sampled=sampled,
        current_value=float(current_value),
        moving_matrix=moving_matrix,
        moving_input=moving_input * (pole_scale / input_norm),
        moving_output=moving_output * (pole_scale / output_norm),
        direction_weight=weight,
        fixed_poles=fixed,
        unreached_poles=_as_flat_complex(unreached),
        unseen_poles=_as_flat_complex(unseen),
        full_norm=full_norm,
        state_count=n,
        pole_scale=pole_scale,
    )


def rank_one_family(closed_loop, direction_input, direction_output, current_value, sampled) -> RankOneFamily:
    """Family A0 − (v − v0)·b·cᵀ from scratch (one reduction for b, one for c)."""
    closed_loop = np.asarray(closed_loop, dtype=float)
    reduction = reduce_input(closed_loop, np.asarray(direction_input, dtype=float))
    return family_from_reduction(reduction, closed_loop, np.asarray(direction_output, dtype=float),
                                 current_value, sampled)


def _as_flat_complex(values: np.ndarray) -> np.ndarray:
    """Flat complex copy (LAPACK already returns exact conjugate pairs for real matrices)."""
    return np.array(values, dtype=complex).ravel()


# ---------------------------------------------------------------------------
# Stability measures
# ---------------------------------------------------------------------------
def boundary_distance(poles: np.ndarray, sampled: bool) -> np.ndarray:
    """Signed distance past the stability boundary: Re s, or |z| − 1 (negative = stable)."""
    poles = np.asarray(poles)
    return np.abs(poles) - 1.0 if sampled else poles.real


def unstable_count(poles: np.ndarray, sampled: bool, tolerance: float) -> int:
    """Poles that are not stable by more than ``tolerance`` (on or past the boundary)."""
    return int(np.count_nonzero(boundary_distance(poles, sampled) >= -tolerance))


def margin_tolerance(norm: float, size: int) -> float:
    """How close to the boundary a computed pole must be to count as marginal (the one rule)."""
    return boundary_tolerance(norm, size)


# ---------------------------------------------------------------------------
# Boundary crossings
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class BoundaryPoint:
    """A verified value of v at which a moving pole sits on the stability boundary."""

    gain: float
    point: complex  # the boundary pole (upper half plane)
    parameter: float  # ω ≥ 0 (rad/s) or θ in [0, π] (rad)
    condition: float  # eigenvalue condition number of that pole
    speed: float  # d(boundary distance)/dv at the crossing (NaN where branches meet on the boundary)
    gain_uncertainty: float
    backward_error: float
    exact: bool = True


# ---------------------------------------------------------------------------
# Families stacked by order: the candidates of many families in one batched solve
# ---------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class _Stack:
    """Families of one order and time domain, their data stacked along a first axis.

    In a generic plant every entry of K gives a family of the same order, so the
    bordered systems of all their candidates go to LAPACK in one batched call. Each
    system is still solved on its own (numpy loops over the stack), so every number
    is the one a family analysed alone gets.
    """

    members: tuple[int, ...]  # positions of the families in the caller's list
    order: int
    sampled: bool
    moving_matrix: np.ndarray  # (F, o, o)
    moving_input: np.ndarray  # (F, o)
    moving_output: np.ndarray  # (F, o)
    pole_scale: np.ndarray  # (F,)
    direction_weight: np.ndarray  # (F,)
    current_value: np.ndarray  # (F,)


def _stacks(families) -> list[_Stack]:
    """The families that move poles, grouped by (order, sampled), in their given order within a group."""
    groups: dict[tuple[int, bool], list[int]] = {}
    for position, family in enumerate(families):
        if family.has_effect:
            groups.setdefault((family.order, family.sampled), []).append(position)
    stacks = []
    for (order, sampled), members in groups.items():
        chosen = [families[p] for p in members]
        stacks.append(_Stack(
            members=tuple(members),
            order=order,
            sampled=sampled,
            moving_matrix=np.stack([f.moving_matrix for f in chosen]),
            moving_input=np.stack([f.moving_input for f in chosen]),
            moving_output=np.stack([f.moving_output for f in chosen]),
            pole_scale=np.array([f.pole_scale for f in chosen]),
            direction_weight=np.array([f.direction_weight for f in chosen]),
            current_value=np.array([f.current_value for f in chosen]),
        ))
    return stacks


def _bordered_matrices(stack: _Stack, owner: np.ndarray, points: np.ndarray) -> np.ndarray:
    """Bordered matrices R(s) = [[sI − M, b], [cᵀ, 0]] for each s of family ``owner``; shape (k, o + 1, o + 1)."""
    o = stack.order
    bordered = np.zeros((points.size, o + 1, o + 1), dtype=complex)
    bordered[:, :o, :o] = -stack.moving_matrix[owner]
    diagonal = np.arange(o)
    bordered[:, diagonal, diagonal] += points[:, None]
    bordered[:, :o, o] = stack.moving_input[owner]
    bordered[:, o, :o] = stack.moving_output[owner]
    return bordered


def _solve_each(matrices: np.ndarray, rhs: np.ndarray) -> np.ndarray:
    """Batched solve; a matrix that is exactly singular gives a row of NaN instead of an error."""
    try:
        return np.linalg.solve(matrices, rhs)
    except np.linalg.LinAlgError:
        out = np.full(rhs.shape, np.nan, dtype=complex)
        for k in range(matrices.shape[0]):
            try:
                out[k] = np.linalg.solve(matrices[k], rhs[k])
            except np.linalg.LinAlgError:
                pass
        return out


def _bordered_solutions(stack: _Stack, owner: np.ndarray, points: np.ndarray):
    """Solve R(s)·[x; t] = e and R(s)ᴴ·[y; w] = e for every s (of family ``owner``) at once.

    Returns t (k,), x (k, o), y (k, o), t' = dt/ds = −yᴴx (k,), and a condition
    estimate ‖R‖·max(‖R⁻¹e‖, ‖R⁻ᴴe‖) (k,). That estimate is a lower bound on
    cond(R); it blows up next to a zero of g (where R is singular) because the
    left null vector of R has a non-zero last entry for a minimal realisation.

    The systems go to LAPACK in blocks of at most :data:`_BORDERED_BUDGET` entries of
    matrices, so memory stays O(o²) times a fixed block whatever the number of candidates;
    each system is solved on its own, so the blocks do not change any number.
    """
    o = stack.order
    k = points.size
    t = np.empty(k, dtype=complex)
    x = np.empty((k, o), dtype=complex)
    y = np.empty((k, o), dtype=complex)
    derivative = np.empty(k, dtype=complex)
    condition = np.empty(k)
    for block in _blocks(k, 2 * (o + 1) ** 2):
        bordered = _bordered_matrices(stack, owner[block], points[block])
        size = bordered.shape[0]
        pair = np.concatenate([bordered, bordered.conj().transpose(0, 2, 1)])
        unit = np.zeros((2 * size, o + 1, 1), dtype=complex)
        unit[:, o, 0] = 1.0
        solutions = _solve_each(pair, unit)[:, :, 0]
        right, left = solutions[:size], solutions[size:]
        x[block], t[block], y[block] = right[:, :o], right[:, o], left[:, :o]
        # d/ds of R·[x; t] = e gives R·[x'; t'] = −[x; 0], so t' = −eᵀR⁻¹[x; 0] = −yᴴx.
        derivative[block] = -np.einsum("ki,ki->k", left[:, :o].conj(), right[:, :o])
        condition[block] = np.linalg.norm(bordered, axis=(1, 2)) * np.maximum(
            np.linalg.norm(right, axis=1), np.linalg.norm(left, axis=1)
        )
    return t, x, y, derivative, condition


#: Matrix entries handed to one batched LAPACK call (2²¹ complex: 32 MiB): the fixed block size.
_BORDERED_BUDGET = 2**21


def _blocks(count: int, entries_each: int):
    """Slices of range(count) holding at most :data:`_BORDERED_BUDGET` matrix entries each (at least one item)."""
    size = max(1, _BORDERED_BUDGET // max(entries_each, 1))
    return [slice(start, min(start + size, count)) for start in range(0, count, size)]


def _closed_norm_bound(scale, t):
    """Upper bound ‖M‖ + |t|·‖b‖·‖c‖ on ‖M − t·b·cᵀ‖_F (cheaper than forming it); scale = pole_scale."""
    return scale + np.abs(t) * scale * scale


def _singular_limit(order: int) -> float:
    return 1.0 / (1e3 * max(order, 1) * _EPS)


def _points_from_parameters(parameters: np.ndarray, sampled: bool) -> np.ndarray:
    parameters = np.asarray(parameters, dtype=float)
    if not sampled:
        return 1j * parameters
    points = np.exp(1j * parameters)
    # z = ±1 exactly, so that g (real there) gives an exactly real gain
    points = np.where(parameters == 0.0, 1.0 + 0j, points)
    return np.where(parameters == math.pi, -1.0 + 0j, points)


def _refine_boundary_points(stack: _Stack, owner: np.ndarray, parameters) -> list[tuple[int, BoundaryPoint]]:
    """Newton's method on φ(p) = Im t(s(p)) = 0 along the boundary, for all candidates at once.

    Candidate k belongs to family ``owner[k]`` of the stack. s(p) = jp (continuous)
    or e^{jp} (sampled); φ'(p) = Re t'(s) or Re(t'(s)·s). A candidate is kept when
    its backward error (below) reaches rounding level and the bordered matrix is
    not singular there. Returns (owner, point) pairs in candidate order.
    """
    o = stack.order
    sampled = stack.sampled
    parameters = np.array(parameters, dtype=float)
    count = parameters.size
    scale = stack.pole_scale[owner]
    best_backward = np.full(count, np.inf)
    best_parameter = parameters.copy()
    best_point = np.zeros(count, dtype=complex)
    best_t = np.zeros(count, dtype=complex)
    best_x = np.zeros((count, o), dtype=complex)
    best_y = np.zeros((count, o), dtype=complex)
    best_derivative = np.zeros(count, dtype=complex)
    best_condition = np.full(count, np.inf)
    active = np.ones(count, dtype=bool)
    reference = 1.0 if sampled else scale
    for _ in range(_NEWTON_STEPS):
        index = np.flatnonzero(active)
        if index.size == 0:
            break
        s = _points_from_parameters(parameters[index], sampled)
        t, x, y, derivative, condition = _bordered_solutions(stack, owner[index], s)
        finite = np.isfinite(t) & np.all(np.isfinite(x), axis=1) & np.all(np.isfinite(y), axis=1)
        with np.errstate(divide="ignore", invalid="ignore"):
            # (s, x) is an exact eigenpair of M − t·bn·cnᵀ; dropping Im t leaves the residual
            # |Im t|·‖bn‖ (cnᵀx = 1): the backward error of s as a pole at the real gain Re t.
            backward = np.abs(t.imag) * scale[index] / (
                np.linalg.norm(x, axis=1) * _closed_norm_bound(scale[index], t.real)
            )
            slope = (derivative * s).real if sampled else derivative.real
            step = -t.imag / slope
        backward = np.where(finite, backward, np.inf)
        better = backward < best_backward[index]
        chosen = index[better]
        best_backward[chosen] = backward[better]
        best_parameter[chosen] = parameters[chosen]
        best_point[chosen] = s[better]
        best_t[chosen] = t[better]
        best_x[chosen] = x[better]
        best_y[chosen] = y[better]
        best_derivative[chosen] = derivative[better]
        best_condition[chosen] = condition[better]
        stop = (backward <= 4.0 * _EPS) | ~finite | ~np.isfinite(step)
        moving = index[~stop]
        parameters[moving] += step[~stop]
        floor = reference if sampled else reference[index]
        tiny = np.abs(step) <= 4.0 * _EPS * np.maximum(np.abs(parameters[index]), floor)
        active[index[stop | tiny]] = False
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        gains = stack.current_value[owner] + best_t.real / stack.direction_weight[owner]
    keep = (
        (best_backward <= 1e3 * max(o, 1) * _EPS)
        # next to a zero of g on the boundary the bordered matrix is singular: that pole is
        # reached only at infinite gain
        & (best_condition <= _singular_limit(o))
        & np.isfinite(gains)
    )
    if not keep.any():
        return []
    kept = np.flatnonzero(keep)
    conditions, speeds, uncertainties = _crossing_measures(
        o, sampled, scale[kept], stack.direction_weight[owner[kept]],
        best_point[kept], best_t[kept], best_x[kept], best_y[kept], best_derivative[kept]
    )
    if sampled:
        kept_parameters = np.array([abs(math.remainder(p, 2.0 * math.pi)) for p in best_parameter[kept]])
    else:
        kept_parameters = np.abs(best_parameter[kept])
    points = _points_from_parameters(kept_parameters, sampled)
    return [
        (int(owner[candidate]),
         BoundaryPoint(float(gains[candidate]), complex(points[k]), float(kept_parameters[k]), float(conditions[k]),
                       float(speeds[k]), float(uncertainties[k]), float(best_backward[candidate])))
        for k, candidate in enumerate(kept)
    ]


def _crossing_measures(order: int, sampled: bool, scale, weight, points, t, x, y, derivative):
    """Condition numbers, boundary speeds dρ/dv and gain uncertainties of boundary poles (arrays).

    ``scale`` and ``weight`` are each pole's family's pole_scale and direction_weight.
    """
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        y_dot_x = np.abs(np.einsum("ki,ki->k", y.conj(), x))
        conditions = np.linalg.norm(x, axis=1) * np.linalg.norm(y, axis=1) / y_dot_x
        conditions = np.where(np.isfinite(conditions), conditions, np.inf)
        # λ(t) is the inverse function of t(s): dλ/dt = 1/t'(s); v = v0 + t/w. Where t'(s) = 0
        # two branches meet on the boundary and the speed is undefined (NaN).
        pole_speed = np.where(derivative != 0, weight / derivative, np.nan)
        speeds = (np.conj(points) * pole_speed).real if sampled else pole_speed.real
        pole_errors = max(order, 1) * _EPS * _closed_norm_bound(scale, t.real) * conditions
        uncertainties = np.where(np.isfinite(speeds) & (speeds != 0), pole_errors / np.abs(speeds), np.inf)
    return conditions, speeds, uncertainties


def boundary_pencil(family: RankOneFamily) -> tuple[np.ndarray, np.ndarray]:
    """(F, E) whose generalized eigenvalues are the zeros of h (times fixed factors).

    Continuous: Rosenbrock pencil of g(s) − g(−s) with realisation
    (diag(M, −M), [b; b], [c; c]). Sampled: a descriptor pencil for g(z) − g(1/z):
    (zI − M)x = b·u, (I − zM)y = z·b·u (so y = (z⁻¹I − M)⁻¹b·u), cᵀx − cᵀy = 0.
    """
    M, b, c = family.moving_matrix, family.moving_input, family.moving_output
    o = family.order
    size = 2 * o + 1
    F = np.zeros((size, size))
    E = np.zeros((size, size))
    identity = np.eye(o)
    F[:o, :o] = M
    F[:o, 2 * o] = b
    E[:o, :o] = identity
    if family.sampled:
        F[o : 2 * o, o : 2 * o] = identity
        E[o : 2 * o, o : 2 * o] = M
        E[o : 2 * o, 2 * o] = b
        F[2 * o, :o] = c
        F[2 * o, o : 2 * o] = -c
    else:
        F[o : 2 * o, o : 2 * o] = -M
        F[o : 2 * o, 2 * o] = b
        E[o : 2 * o, o : 2 * o] = identity
        F[2 * o, :o] = c
        F[2 * o, o : 2 * o] = c
    return F, E


_PENCIL_WORKSPACE: dict[int, int] = {}


def _finite_pencil_eigenvalues(F: np.ndarray, E: np.ndarray) -> np.ndarray:
    """Finite generalized eigenvalues of (F, E), as ``scipy.linalg.eigvals(F, E)`` computes them.

    The same LAPACK call (ggev, no eigenvectors, scipy's workspace size) and the same
    α/β division, in LAPACK's order, with infinite and undetermined eigenvalues left
    out; without scipy's per-call checks, which cost more than the work at this size.
    """
    size = F.shape[0]
    workspace = _PENCIL_WORKSPACE.get(size)
    if workspace is None:
        query = _ggev(F, E, lwork=-1)
        workspace = _PENCIL_WORKSPACE.setdefault(size, int(query[-2][0].real))
    alpha_real, alpha_imag, beta, _, _, _, info = _ggev(F, E, 0, 0, workspace)
    if info != 0:
        raise AnalysisError(
            f"the {size}×{size} boundary-crossing eigenvalue problem did not converge (LAPACK ggev info {info}); "
            "the plant or the gain may hold extreme values"
        )
    alpha = alpha_real + 1j * alpha_imag
    determined = beta != 0
    eigenvalues = alpha[determined] / beta[determined]
    return eigenvalues[np.isfinite(eigenvalues)]


_EVERYWHERE_FRACTIONS = np.array([0.3711, 1.1307, 2.7183])


def boundary_is_everywhere(family: RankOneFamily) -> bool:
    """True when g(s) is real at every boundary point (h ≡ 0).

    Then every boundary point is a closed-loop pole for some real v and the
    moving poles come in mirror pairs (s, −s̄) or (z, 1/z̄): no value of v makes
    them all stable. Tested at three boundary points away from 0 and ±1.
    """
    return boundary_is_everywhere_of([family])[0]


def boundary_is_everywhere_of(families) -> list[bool]:
    """:func:`boundary_is_everywhere` for each family (False for a family that moves no pole)."""
    results = [False] * len(families)
    fractions = _EVERYWHERE_FRACTIONS
    for stack in _stacks(families):
        count = len(stack.members)
        owner = np.repeat(np.arange(count), fractions.size)
        if stack.sampled:
            points = np.tile(np.exp(1j * fractions), count)
        else:
            points = (1j * fractions * stack.pole_scale[:, None]).ravel()
        t = np.empty(points.size, dtype=complex)
        for block in _blocks(points.size, (stack.order + 1) ** 2):
            bordered = _bordered_matrices(stack, owner[block], points[block])
            unit = np.zeros((bordered.shape[0], stack.order + 1, 1), dtype=complex)
            unit[:, -1, 0] = 1.0
            with np.errstate(all="ignore"):
                t[block] = _solve_each(bordered, unit)[:, -1, 0]
        t = t.reshape(count, fractions.size)
        with np.errstate(all="ignore"):
            # a singular point gives nan: inconclusive
            conclusive = np.isfinite(t) & (t != 0.0)
            complex_there = conclusive & (np.abs(t.imag) > 1e4 * max(stack.order, 1) * _EPS * np.abs(t))
        everywhere = ~complex_there.any(axis=1) & (np.count_nonzero(conclusive, axis=1) >= 2)
        for position, verdict in zip(stack.members, everywhere):
            results[position] = bool(verdict)
    return results


def _boundary_candidates(family: RankOneFamily) -> list[float]:
    """Boundary parameters (ω or θ) from the pencil, plus the trivial ones, to be polished."""
    F, E = boundary_pencil(family)
    with np.errstate(divide="ignore", invalid="ignore"):
        eigenvalues = _finite_pencil_eigenvalues(F, E)
    scale = family.pole_scale
    if family.sampled:
        near = np.abs(np.abs(eigenvalues) - 1.0) <= _CANDIDATE_NET
        parameters = np.abs(np.angle(eigenvalues[near]))
    else:
        near = np.abs(eigenvalues.real) <= _CANDIDATE_NET * (np.abs(eigenvalues) + scale)
        parameters = np.abs(eigenvalues[near].imag)
    # s = 0 and z = ±1 are always zeros of h (g is real there) and are added exactly;
    # pencil candidates next to them are still polished, since a genuine slow
    # crossing can sit close by (a polished copy of a trivial root merges with it below).
    trivial = [0.0, math.pi] if family.sampled else [0.0]
    parameters = np.sort(parameters)
    unique: list[float] = list(trivial)
    for parameter in parameters:
        if all(abs(parameter - kept) > 1e-9 * max(parameter, 1.0 if family.sampled else scale) for kept in unique[-1:] + trivial):
            unique.append(float(parameter))
    return unique


def _merged_points(family: RankOneFamily, found: list[BoundaryPoint]) -> list[BoundaryPoint]:
    """Polished candidates sorted by gain, copies of one crossing merged (the best kept)."""
    scale = family.pole_scale
    found = sorted(found, key=lambda p: (p.gain, p.parameter))
    merged: list[BoundaryPoint] = []
    for candidate in found:
        duplicate = False
        for k, kept in enumerate(merged):
            same_gain = abs(candidate.gain - kept.gain) <= gain_tolerance(family, candidate.gain)
            same_point = abs(candidate.point - kept.point) <= 1e-7 * (1.0 if family.sampled else scale + abs(kept.point))
            if same_gain and same_point:
                duplicate = True
                if candidate.backward_error < kept.backward_error:
                    merged[k] = candidate
                break
        if not duplicate:
            merged.append(candidate)
    merged.sort(key=lambda p: (p.gain, p.parameter))
    return merge_touching_pairs(family, merged)


def boundary_points(family: RankOneFamily) -> list[BoundaryPoint]:
    """Every value of v at which a moving pole is on the stability boundary, sorted by v."""
    return boundary_points_of([family])[0]


def boundary_points_of(families) -> list[list[BoundaryPoint]]:
    """:func:`boundary_points` of each family, the candidates of families of one order polished together."""
    candidates = [_boundary_candidates(family) if family.has_effect else [] for family in families]
    found: list[list[BoundaryPoint]] = [[] for _ in families]
    for stack in _stacks(families):
        owner = np.repeat(np.arange(len(stack.members)), [len(candidates[p]) for p in stack.members])
        parameters = [parameter for p in stack.members for parameter in candidates[p]]
        for member, point in _refine_boundary_points(stack, owner, parameters):
            found[stack.members[member]].append(point)
    return [_merged_points(family, points) if family.has_effect else [] for family, points in zip(families, found)]


def merge_touching_pairs(family: RankOneFamily, points: list[BoundaryPoint]) -> list[BoundaryPoint]:
    """Replace two crossings that rounding cannot tell apart from a touch by one touch.

    When a pole touches the boundary without crossing it, h has a double zero;
    rounding may split it into two crossings (out and back in) a few sqrt(eps)
    apart, with a sliver of "instability" between them. If two consecutive
    crossings have opposite directions, nearly the same boundary pole, and gains
    closer than their combined uncertainty, they are reported as one touching point
    at the midpoint (speed 0, uncertainty covering both).
    """
    points = sorted(points, key=lambda p: p.gain)
    merged: list[BoundaryPoint] = []
    k = 0
    while k < len(points):
        first = points[k]
        if k + 1 < len(points):
            second = points[k + 1]
            gap = second.gain - first.gain
            near_pole = abs(first.point - second.point) <= 1e-6 * (
                1.0 if family.sampled else family.pole_scale + abs(first.point)
            )
            opposite = first.speed * second.speed < 0.0
            if first.exact and second.exact and near_pole and opposite and gap <= (
                first.gain_uncertainty + second.gain_uncertainty
            ):
                middle_parameter = 0.5 * (first.parameter + second.parameter)
                merged.append(
                    BoundaryPoint(
                        gain=0.5 * (first.gain + second.gain),
                        point=complex(_points_from_parameters(np.array([middle_parameter]), family.sampled)[0]),
                        parameter=middle_parameter,
                        condition=max(first.condition, second.condition),
                        speed=0.0,
                        gain_uncertainty=math.inf,
                        backward_error=max(first.backward_error, second.backward_error),
                    )
                )
                k += 2
                continue
        merged.append(first)
        k += 1
    return merged


def gain_tolerance(family: RankOneFamily, gain: float) -> float:
    """Two crossing gains closer than this are one and the same."""
    return 1e-9 * max(abs(gain), abs(family.current_value), family.gain_scale)
