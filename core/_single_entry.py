"""One gain entry at a time: exact stable intervals, adaptive loci, pole sensitivities.

With every other entry of K held fixed, the gain entry k_ij (row i = input,
column j = state, both zero-based) changes the closed-loop matrix by a rank-one
term::

    A − B·K(v) = A_z − v·b·e_jᵀ,    A_z = A − B·K₀ with entry (i, j) set to zero,  b = B[:, i],

so det(sI − A + B·K(v)) = p₀(s) + v·q(s) and the closed-loop poles are the roots
of 1 + v·g(s) with the single-input single-output transfer function
g(s) = e_jᵀ(sI − A_z)⁻¹b. The same holds for a sampled plant in z.

The stable set of v is a union of open intervals whose ends are the *exact*
values of v at which a pole lies on the stability boundary (the imaginary axis,
or the unit circle for a sampled plant). Those values come from a structured
eigenvalue problem of size O(n) (see ``_single_entry_family``), are polished by
Newton's method and verified, and every interval between them is classified by
the poles at an interior point.

Safety: every interval here is computed from the linear model. The real loop
has unmodelled dynamics, delays, saturation and noise, and a gain inside a
stable interval can still be unsafe on the machine. Validate every design on the
real system with safe limits and a working emergency stop, under local codes,
functional-safety standards and licensed engineering practice.
"""

from __future__ import annotations

import math
import numbers
import threading
from warnings import catch_warnings, simplefilter
import weakref
from collections import OrderedDict
from dataclasses import dataclass, replace

import numpy as np
import scipy.linalg

from ._arrays import read_only
from ._closed_loop import _Eigensystem, _eigensystem
from ._errors import GainError
from ._number_range import check_analysable
from ._plant import Plant
from ._stability import StabilityDecision, boundary_tolerance, decide_stability
from ._single_entry_family import (
    BoundaryPoint,
    RankOneFamily,
    boundary_distance,
    boundary_is_everywhere_of,
    boundary_points,
    boundary_points_of,
    family_from_reduction,
    gain_tolerance,
    margin_tolerance,
    moving_poles_in_blocks,
    rank_one_family,
    reduce_input,
    unstable_count,
)
from ._single_entry_sampler import adaptive_locus, match_to, plot_span

__all__ = [
    "EntryPolynomials",
    "entry_polynomials",
    "Crossing",
    "StableIntervals",
    "entry_stable_intervals",
    "all_entry_stable_intervals",
    "EntryLocus",
    "entry_locus",
    "ScaledGainLocus",
    "scaled_gain_locus",
    "PoleSensitivity",
    "pole_sensitivity",
    "default_entry_range",
]

_EPS = np.finfo(float).eps


# ---------------------------------------------------------------------------
# Argument checks
# ---------------------------------------------------------------------------
def _check_index(value, count: int, what: str, names: tuple[str, ...]) -> int:
    if isinstance(value, bool) or not isinstance(value, numbers.Integral):
        raise GainError(f"the {what} index must be a whole number from 0 to {count - 1}, but {value!r} was given")
    index = int(value)
    if not 0 <= index < count:
        plural = "s" if count != 1 else ""
        listing = ", ".join(f"{k} = '{name}'" for k, name in enumerate(names))
        raise GainError(
            f"{what} {index} is out of range: K has {count} {what}{plural} ({listing}); "
            f"use a zero-based {what} index from 0 to {count - 1}"
        )
    return index


def _checked_entry(plant: Plant, K, row, col) -> tuple[np.ndarray, int, int]:
    if not isinstance(plant, Plant):
        raise GainError(f"the plant must be a gainboard Plant, but {type(plant).__name__} was given")
    gain = plant.check_gain(K)
    check_analysable(plant, gain, GainError)
    row = _check_index(row, plant.input_count, "row", plant.input_names)
    col = _check_index(col, plant.state_count, "column", plant.state_names)
    return gain, row, col


def _checked_range(low, high, what: str) -> tuple[float, float]:
    try:
        low_value, high_value = float(low), float(high)
    except (TypeError, ValueError):
        raise GainError(f"the {what} range needs two numbers (low, high), got {low!r} and {high!r}") from None
    if not (math.isfinite(low_value) and math.isfinite(high_value)):
        raise GainError(f"the {what} range must have finite ends, got ({low_value}, {high_value})")
    if not low_value < high_value:
        raise GainError(
            f"the {what} range is empty: low = {low_value:g} must be smaller than high = {high_value:g}"
        )
    return low_value, high_value


def _entry_label(plant: Plant, row: int, col: int) -> str:
    return f"K[{row}, {col}] (input '{plant.input_names[row]}', state '{plant.state_names[col]}')"


def _format_pole(pole: complex) -> str:
    pole = complex(pole)
    if pole.imag == 0.0:
        return f"{pole.real:.6g}"
    return f"{pole.real:.6g}{pole.imag:+.6g}j"


def _entry_family(plant: Plant, gain: np.ndarray, row: int, col: int, reduction=None,
                  closed_loop: np.ndarray | None = None) -> RankOneFamily:
    if closed_loop is None:
        closed_loop = plant.A - plant.B @ gain
    output = np.zeros(plant.state_count)
    output[col] = 1.0
    if reduction is None:
        reduction = reduce_input(closed_loop, plant.B[:, row])
    return family_from_reduction(reduction, closed_loop, output, float(gain[row, col]), plant.is_sampled)


# ---------------------------------------------------------------------------
# Polynomials (display and tests only)
# ---------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class EntryPolynomials:
    """det(λI − A + B·K(v)) = base(λ) + v·direction(λ) for the entry K[row, col] = v.

    Attributes
    ----------
    entry : (int, int)
        (row, col), zero-based.
    base : numpy.ndarray, shape (n + 1,)
        Coefficients of p₀ = det(λI − A_z), highest power first (monic).
    direction : numpy.ndarray, shape (n + 1,)
        Coefficients of q = e_jᵀ adj(λI − A_z) b, highest power first (leading entry 0).
    variable : str
        ``"s"`` (continuous) or ``"z"`` (sampled).
    current_value : float
        The entry's value in the given K.

    Monomial coefficients are badly conditioned for n ≳ 10; they are for display
    and cross-checks only and are never used to find roots here.
    """

    entry: tuple[int, int]
    base: np.ndarray
    direction: np.ndarray
    variable: str
    current_value: float


def entry_polynomials(plant: Plant, K, row: int, col: int) -> EntryPolynomials:
    """Characteristic polynomial of the loop as an affine function of one gain entry.

    Parameters
    ----------
    plant : Plant
        The plant (continuous or sampled).
    K : array_like, shape (m, n)
        The state-feedback gain (u = −Kx).
    row, col : int
        Zero-based entry: row = input, col = state.

    Returns
    -------
    EntryPolynomials

    Examples
    --------
    >>> plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]])
    >>> polys = entry_polynomials(plant, [[2.0, 3.0]], 0, 0)
    >>> np.round(polys.base, 12).tolist(), np.round(polys.direction, 12).tolist()
    ([1.0, 3.0, 0.0], [0.0, 0.0, 1.0])
    """
    gain, row, col = _checked_entry(plant, K, row, col)
    zeroed = gain.copy()
    zeroed[row, col] = 0.0
    a_z = plant.A - plant.B @ zeroed
    b = plant.B[:, row]
    c = np.zeros(plant.state_count)
    c[col] = 1.0
    base = np.real(np.poly(a_z))
    # det is affine in v (rank-one change), so q = (det at v = σ − det at v = 0)/σ exactly;
    # σ of the size of A_z keeps both characteristic polynomials on one scale.
    size = float(np.linalg.norm(a_z)) or 1.0
    b_size = float(np.linalg.norm(b))
    if b_size == 0.0:
        direction = np.zeros_like(base)
    else:
        sigma = size / b_size
        direction = (np.real(np.poly(a_z - sigma * np.outer(b, c))) - base) / sigma
    direction[0] = 0.0  # q has degree ≤ n − 1: the leading term cancels exactly
    base.setflags(write=False)
    direction.setflags(write=False)
    return EntryPolynomials((row, col), base, direction, "z" if plant.is_sampled else "s", float(gain[row, col]))


# ---------------------------------------------------------------------------
# Exact stable intervals
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class Crossing:
    """A value of the gain entry at which a closed-loop pole lies on the stability boundary.

    Attributes
    ----------
    gain : float
        The entry's value.
    frequency : float
        Continuous plants: ω ≥ 0 in rad/s (the pole is ±jω). Sampled plants: the
        angle θ in [0, π] rad of the pole e^{±jθ} on the unit circle.
    point : complex
        The boundary pole (the one with non-negative imaginary part).
    unstable_below, unstable_above : int
        Poles on or past the boundary just below and just above ``gain``
        (equal counts: the pole only touches the boundary).
    condition : float
        Eigenvalue condition number of the boundary pole (1 = perfectly conditioned).
    gain_uncertainty : float
        First-order estimate of the error in ``gain`` caused by rounding
        (inf where the pole touches the boundary without crossing it).
    ill_conditioned : bool
        True when ``gain_uncertainty`` exceeds 1e-6 of the gain's size.
    exact : bool
        True when the gain comes from the structured eigenvalue problem; False for
        a change of stability that was located by bisection instead (a safety net
        for degenerate models; ``condition`` is then NaN).
    """

    gain: float
    frequency: float
    point: complex
    unstable_below: int
    unstable_above: int
    condition: float
    gain_uncertainty: float
    ill_conditioned: bool
    exact: bool = True

    @property
    def touches_only(self) -> bool:
        """True when the number of unstable poles is the same on both sides."""
        return self.unstable_below == self.unstable_above


@dataclass(frozen=True)
class StableIntervals:
    """Exact set of values of one gain entry (others fixed) that give a stable loop.

    Attributes
    ----------
    entry : (int, int)
        (row, col), zero-based.
    intervals : tuple of (float, float)
        Sorted open intervals (low, high); ``-inf``/``inf`` mark unbounded ends.
        Empty when no value of the entry stabilises the loop.
    crossings : tuple of Crossing
        Every value at which a pole is on the boundary, sorted by gain.
    current_value : float
        The entry's value in the given K.
    current_is_stable : bool
        Whether the given K gives a stable loop (``current_verdict == "stable"``).
    never_stable_reason : str
        Why no value works (empty when ``intervals`` is not empty).
    pieces : tuple of (float, float, int)
        The whole real line cut at the crossing gains, each piece with its number
        of poles on or past the boundary (0 = stable). Empty when the entry only
        moves poles in mirror pairs (then every boundary point is on the locus).
    fixed_poles : tuple of complex
        Poles that this entry cannot move (not reached from the input, or not seen
        through the state).
    entry_has_effect : bool
        False when changing the entry moves no pole at all.
    sampled : bool
        True for a sampled plant (boundary = unit circle).
    gain_tolerance : float
        Crossing gains closer than this are treated as one.
    warnings : tuple of str
        Conditioning notes (ill-conditioned or touching crossings).
    current_verdict : str
        The one stability decision (:func:`gainboard.core.decide_stability`) on the loop with
        the given K: ``"stable"``, ``"on the boundary"`` or ``"unstable"``. It always agrees
        with the intervals: stable exactly when the current value lies inside one.
    """

    entry: tuple[int, int]
    intervals: tuple[tuple[float, float], ...]
    crossings: tuple[Crossing, ...]
    current_value: float
    current_is_stable: bool
    never_stable_reason: str
    pieces: tuple[tuple[float, float, int], ...]
    fixed_poles: tuple[complex, ...]
    entry_has_effect: bool
    sampled: bool
    gain_tolerance: float
    warnings: tuple[str, ...]
    current_verdict: str

    def contains(self, value: float) -> bool:
        """True when ``value`` lies inside one of the (open) stable intervals."""
        return any(low < value < high for low, high in self.intervals)


#: A value is "far" when its feedback term outweighs the moving matrix this many times.
_FAR_RATIO = 1e3


def _far_values(family: RankOneFamily, values) -> np.ndarray:
    """Where the poles are computed from the scaled pencil instead of the matrix (see _far_poles)."""
    shifts = np.abs(np.asarray(values, dtype=float).reshape(-1) - family.current_value)
    feedback = shifts * family.direction_weight * family.pole_scale**2
    return feedback > _FAR_RATIO * max(float(np.linalg.norm(family.moving_matrix)), family.pole_scale)


def _far_poles(family: RankOneFamily, value: float) -> tuple[np.ndarray, float]:
    """Moving poles at a very large change t = v − v0 from a pencil in the scaled variable 1/t.

    M − t·w·bn·cnᵀ has a norm of order |t| there, so its eigenvalues carry errors of
    eps·|t|·w·‖bn‖‖cn‖ — more than the distance of the slow poles from the boundary on badly
    scaled entries (published benchmark ROC4). The same poles are the finite eigenvalues of

        [[M, −ρ], [−σᵀ, 1/t]] − s·[[I, 0], [0, 0]],   ρ = √w·bn, σ = √w·cn,

    (the second row says u = t·σᵀx), whose entries stay of the size of M: QZ computes them
    with errors of eps times that size instead. Returns the poles and their band around the
    boundary (:func:`gainboard.core.boundary_tolerance` of ‖pencil‖_F, at least that of A0).
    """
    t = value - family.current_value
    o = family.order
    root = math.sqrt(family.direction_weight)
    F = np.zeros((o + 1, o + 1))
    F[:o, :o] = family.moving_matrix
    F[:o, o] = -root * family.moving_input
    F[o, :o] = -root * family.moving_output
    F[o, o] = 1.0 / t
    E = np.zeros((o + 1, o + 1))
    E[:o, :o] = np.eye(o)
    alpha, beta = scipy.linalg.eigvals(F, E, homogeneous_eigvals=True)
    infinite = int(np.argmin(np.abs(beta)))  # E has rank o: one eigenvalue is infinite
    keep = np.arange(o + 1) != infinite
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        poles = alpha[keep] / beta[keep]
    poles = np.where(np.isfinite(poles), poles, complex(math.inf, 0.0))
    band = boundary_tolerance(float(np.linalg.norm(F)), family.state_count)  # QZ: backward error eps·‖F‖
    return poles, max(band, boundary_tolerance(family.full_norm, family.state_count))


def _closed_loop_norm_bound(family: RankOneFamily, values) -> np.ndarray:
    """Upper bound on ‖A0 − (v − v0)·b·cᵀ‖_F at each v: ‖A0‖_F + |v − v0|·w·‖bn‖·‖cn‖."""
    shifts = np.abs(np.asarray(values, dtype=float).reshape(-1) - family.current_value)
    with np.errstate(over="ignore", invalid="ignore"):
        return family.full_norm + shifts * family.direction_weight * family.pole_scale**2


def _band_at(family: RankOneFamily, values) -> np.ndarray:
    """The band of :func:`gainboard.core.boundary_tolerance` for the whole closed loop at each v."""
    return np.asarray(boundary_tolerance(_closed_loop_norm_bound(family, values), family.state_count)).reshape(-1)


def _decision_at(family: RankOneFamily, value: float, poles: np.ndarray) -> StabilityDecision:
    """The one stability decision on the closed loop at ``value`` (poles: all n of them there)."""
    norm = float(_closed_loop_norm_bound(family, [value])[0])
    return decide_stability(poles, norm, family.state_count, 1.0 if family.sampled else None)


def _poles_and_counts(family: RankOneFamily, values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Poles (len(values), n) and the number on or past the boundary at each value."""
    return _poles_and_counts_each([family], [values])[0]


def _poles_and_counts_each(families, value_lists) -> list[tuple[np.ndarray, np.ndarray]]:
    """:func:`_poles_and_counts` of each family at its values, one eigenvalue call per matrix size.

    numpy solves each matrix of a stack on its own, so a family's numbers do not
    depend on the company it is computed in.
    """
    value_lists = [np.atleast_1d(np.asarray(values, dtype=float)) for values in value_lists]
    counts_of = [np.zeros(values.size, dtype=int) for values in value_lists]
    moving_of: list = [None] * len(families)
    by_order: dict[int, list[int]] = {}
    for position, family in enumerate(families):
        if family.order:
            by_order.setdefault(family.order, []).append(position)
    for o, members in by_order.items():
        # in blocks of bounded size (memory O(o²) per block, not one stack of every probe)
        moving, _ = moving_poles_in_blocks([families[p] for p in members], [value_lists[p] for p in members])
        # the one rule, with the band of the whole closed loop at each value (not of its moving
        # part), so that a count of 0 is exactly the verdict "stable" of decide_stability
        tolerances = np.concatenate([_band_at(families[p], value_lists[p]) for p in members])
        start = 0
        for p in members:
            stop = start + value_lists[p].size
            for offset in np.flatnonzero(_far_values(families[p], value_lists[p])):
                # far out the scaled pencil gives the poles, with the band of its own size
                moving[start + offset], tolerances[start + offset] = _far_poles(families[p], value_lists[p][offset])
            outside = boundary_distance(moving[start:stop], families[p].sampled) >= -tolerances[start:stop, None]
            counts_of[p] += np.count_nonzero(outside, axis=1)
            moving_of[p] = moving[start:stop]
            start = stop
    results = []
    for family, values, counts, moving in zip(families, value_lists, counts_of, moving_of):
        order = 0 if moving is None else moving.shape[1]
        poles = np.empty((values.size, order + family.fixed_poles.size), dtype=complex)
        if order:
            poles[:, :order] = moving
        poles[:, order:] = family.fixed_poles  # the same row of fixed poles at every value
        if family.fixed_poles.size:
            fixed_tolerance = _band_at(family, values)
            counts += np.count_nonzero(boundary_distance(family.fixed_poles[None, :], family.sampled)
                                       >= -fixed_tolerance[:, None], axis=1)
        results.append((poles, counts))
    return results


def _merge_gains(family: RankOneFamily, values) -> list[float]:
    merged: list[float] = []
    for value in sorted(values):
        if not merged or value - merged[-1] > gain_tolerance(family, value):
            merged.append(float(value))
    return merged


def _piece_probes(edges: list[float], reach: float, current: float) -> list[tuple[list[float], int]]:
    """Probe values inside each piece and the index of the representative one.

    Three probes per piece (five for the whole line): the status of a piece is read
    at the representative probe; the others only check that it does not change
    inside the piece, which would reveal a crossing that the exact method missed.
    """
    probes = []
    # besides the middle, probes close to each finite end (relative 1e-4 and 1e-2 of the piece),
    # so that a crossing computed in the wrong place near an end is still bracketed
    for low, high in zip(edges[:-1], edges[1:]):
        if math.isinf(low) and math.isinf(high):
            probes.append(([current - 10 * reach, current - reach, current, current + reach, current + 10 * reach], 2))
        elif math.isinf(low):
            probes.append(([high - 10 * reach, high - reach, high - 0.1 * reach, high - 1e-2 * reach,
                            high - 1e-4 * reach], 1))
        elif math.isinf(high):
            probes.append(([low + 1e-4 * reach, low + 1e-2 * reach, low + 0.1 * reach, low + reach,
                            low + 10 * reach], 3))
        else:
            width = high - low
            probes.append(([low + 1e-4 * width, low + 1e-2 * width, low + 0.5 * width, high - 1e-2 * width,
                            high - 1e-4 * width], 2))
    return probes


def _piece_reach(family: RankOneFamily, gains: list[float]) -> float:
    if gains:
        return max(family.gain_scale, gains[-1] - gains[0], 0.1 * max(abs(gains[0]), abs(gains[-1])))
    return max(family.gain_scale, abs(family.current_value))


def _expected_change(family: RankOneFamily, points: list[BoundaryPoint], gain: float) -> int | None:
    """Change of the unstable count across ``gain`` predicted by the crossing directions.

    A well-conditioned crossing moves one real pole (at s = 0 or z = ±1) or a
    conjugate pair across the boundary, outward when the boundary speed is positive.
    None when some crossing there is ill-conditioned or only touches.
    """
    change = 0
    tolerance = gain_tolerance(family, gain)
    for point in points:
        if abs(point.gain - gain) > tolerance:
            continue
        if not point.exact or not point.gain_uncertainty <= 1e-6 * max(abs(gain), family.gain_scale):
            return None
        change += (1 if point.point.imag == 0.0 else 2) * (1 if point.speed > 0 else -1)
    return change


def _quick_probe(family: RankOneFamily, exact_points: list[BoundaryPoint]) -> tuple[list[float], np.ndarray, int]:
    """The merged crossing gains, the values to classify them at, and how many pieces there are.

    The values are the current value, one representative inside each piece, and two
    (four without crossings) far out on the unbounded ends.
    """
    v0 = family.current_value
    gains = _merge_gains(family, [p.gain for p in exact_points])
    reach = _piece_reach(family, gains)
    if gains and _changes_are_exact(family, exact_points, gains):
        # every crossing is well-conditioned and v0 is on none: the count at v0 is carried across
        # them (see _carried_counts); the far ends verify it. No count of the pieces themselves.
        return gains, np.array([v0, gains[0] - 10 * reach, gains[-1] + 10 * reach]), 0
    if gains:
        representatives = [gains[0] - reach] + [0.5 * (a + b) for a, b in zip(gains[:-1], gains[1:])] + [gains[-1] + reach]
        far = [gains[0] - 10 * reach, gains[-1] + 10 * reach]
    else:
        representatives = [v0]
        far = [v0 - 10 * reach, v0 - reach, v0 + reach, v0 + 10 * reach]
    return gains, np.array([v0] + representatives + far), len(representatives)


def _changes_are_exact(family: RankOneFamily, exact_points: list[BoundaryPoint], gains: list[float]) -> bool:
    """True when the count change across every crossing gain is known exactly and v0 lies on none."""
    v0 = family.current_value
    if any(abs(v0 - gain) <= gain_tolerance(family, gain) for gain in gains):
        return False
    return all(_expected_change(family, exact_points, gain) is not None for gain in gains)


def _carried_counts(family: RankOneFamily, exact_points: list[BoundaryPoint], gains: list[float], current: int,
                    far_counts) -> list[int] | None:
    """Piece counts carried from the count at v0 across the exact crossings; None if the far ends disagree.

    Across a well-conditioned crossing the count changes by the crossing directions
    (:func:`_expected_change`): exact, so one eigenvalue call at v0 fixes every piece. The
    counts far out on both unbounded ends, computed independently, must equal the carried
    ones (and no count may leave 0..n); a crossing the structured method missed breaks that.
    """
    changes = [_expected_change(family, exact_points, gain) for gain in gains]
    start = sum(1 for gain in gains if gain < family.current_value)  # the piece holding v0
    counts = [0] * (len(gains) + 1)
    counts[start] = current
    for k in range(start, len(gains)):
        counts[k + 1] = counts[k] + changes[k]
    for k in range(start - 1, -1, -1):
        counts[k] = counts[k + 1] - changes[k]
    size = family.state_count
    if not all(0 <= c <= size for c in counts) or counts[0] != int(far_counts[0]) or counts[-1] != int(far_counts[1]):
        return None
    return counts


def _full_probe(family: RankOneFamily, gains: list[float]) -> tuple[list[float], np.ndarray, int]:
    """:func:`_quick_probe`'s values with one representative per piece (no counts carried)."""
    reach = _piece_reach(family, gains)
    representatives = [gains[0] - reach] + [0.5 * (a + b) for a, b in zip(gains[:-1], gains[1:])] + [gains[-1] + reach]
    far = [gains[0] - 10 * reach, gains[-1] + 10 * reach]
    return gains, np.array([family.current_value] + representatives + far), len(representatives)


def _classify_pieces(family: RankOneFamily, exact_points: list[BoundaryPoint], probe=None, quick=None):
    """Unstable count of every piece between crossing gains, with a safety net.

    Returns (gains, counts per piece, current value stable?, crossings located by
    bisection). The count of each piece is read at one interior point. Two cheap
    checks follow: across every well-conditioned crossing the count must change as
    the crossing directions predict, and the unbounded end pieces must keep their
    count far out. If either fails, a crossing was missed (a degenerate or badly
    conditioned model): every piece is then probed at three points and each change
    of count inside a piece is located by bisection and reported as such, never
    silently skipped. ``probe`` (from :func:`_quick_probe`) and ``quick`` (the
    counts at its values) may be given when already computed.
    """
    v0 = family.current_value
    if probe is None:
        probe = _quick_probe(family, exact_points)
        _, quick = _poles_and_counts(family, probe[1])
    gains, _, piece_count = probe
    if piece_count == 0 and gains:
        counts = _carried_counts(family, exact_points, gains, int(quick[0]), quick[1:])
        if counts is not None:
            return gains, counts, bool(quick[0] == 0), []
        # the carried counts do not meet the far ends: count every piece, as without carrying
        probe = _full_probe(family, gains)
        _, quick = _poles_and_counts(family, probe[1])
        gains, _, piece_count = probe
    counts = [int(c) for c in quick[1 : 1 + piece_count]]
    far_counts = quick[1 + piece_count :]
    consistent = (
        all(c == counts[0] for c in far_counts) if not gains
        else far_counts[0] == counts[0] and far_counts[1] == counts[-1]
    )
    for k, gain in enumerate(gains):
        expected = _expected_change(family, exact_points, gain)
        if expected is not None and counts[k + 1] - counts[k] != expected:
            consistent = False
    # the current value must agree with the piece it lies in (badly scaled entries: the
    # exact crossings can be off, and the verdict at v0 is the one the user sees)
    here = _piece_of(gains, v0, family)
    if here is not None and (counts[here] == 0) != (quick[0] == 0):
        consistent = False
    if consistent:
        return gains, counts, bool(quick[0] == 0), []

    located: list[BoundaryPoint] = []
    for _ in range(4):
        reach = _piece_reach(family, gains)
        edges = [-math.inf] + gains + [math.inf]
        probes = _piece_probes(edges, reach, v0)
        here = _piece_of(gains, v0, family)
        if here is not None and v0 not in probes[here][0]:
            # probe the current value too, so that a change between it and the piece's
            # other probes is located (and the verdict at v0 cannot contradict its piece)
            piece_values, representative = probes[here]
            chosen = piece_values[representative]
            piece_values = sorted(piece_values + [v0])
            probes[here] = (piece_values, piece_values.index(chosen))
        values = [v0] + [v for piece_values, _ in probes for v in piece_values]
        _, all_counts = _poles_and_counts(family, np.array(values))
        current_is_stable = bool(all_counts[0] == 0)
        position = 1
        counts = []
        missed = []
        for piece_values, representative in probes:
            piece_counts = all_counts[position : position + len(piece_values)]
            position += len(piece_values)
            counts.append(int(piece_counts[representative]))
            for k in range(len(piece_values) - 1):
                if piece_counts[k] != piece_counts[k + 1]:
                    missed.append(_bisect_count_change(family, piece_values[k], piece_values[k + 1], int(piece_counts[k])))
        if not missed:
            return gains, counts, current_is_stable, located
        located.extend(missed)
        gains = _merge_gains(family, gains + [p.gain for p in missed])
    # rounds used up: classify the pieces between the final gains (one count per piece), so
    # that there is always one count more than there are gains
    reach = _piece_reach(family, gains)
    probes = _piece_probes([-math.inf] + gains + [math.inf], reach, v0)
    _, final_counts = _poles_and_counts(family, np.array([v0] + [values[k] for values, k in probes]))
    return gains, [int(c) for c in final_counts[1:]], bool(final_counts[0] == 0), located


def _without_unconfirmed_edges(family: RankOneFamily, gains: list[float], counts: list[int]):
    """Drop crossing gains that change nothing: the same count on both sides and at the gain itself.

    A pole on the boundary at the gain would count there (a touch keeps its gain); an edge
    with the count of its neighbours everywhere is a crossing the exact method put in the
    wrong place on an ill-conditioned entry (published benchmark BDT1). Returns the kept
    gains, their pieces' counts and the dropped gains.
    """
    suspects = [k for k in range(len(gains)) if counts[k] == counts[k + 1]]
    if not suspects:
        return gains, counts, []
    _, at_gain = _poles_and_counts(family, np.array([gains[k] for k in suspects]))
    drop = {k for k, count in zip(suspects, at_gain) if int(count) == counts[k]}
    kept_gains = [g for k, g in enumerate(gains) if k not in drop]
    kept_counts = [counts[0]] + [counts[k + 1] for k in range(len(gains)) if k not in drop]
    return kept_gains, kept_counts, [gains[k] for k in sorted(drop)]


def _without_rounding_slivers(family: RankOneFamily, gains: list[float], counts: list[int]):
    """Fold stable pieces narrower than the ends can be known into their unstable neighbours.

    Past the end of an interval on an ill-conditioned entry the computed count can flip a few
    times within a relative width of order 1e-8 (published benchmark BDT1): those pieces are
    rounding, not stable gains. A stable piece narrower than 1e-6 of the gains' size (the limit
    beyond which a crossing is reported as ill-conditioned) and not holding the current value
    takes the larger count of its neighbours; equal neighbours then merge. Returns the kept
    gains, their counts and the dropped gains.
    """
    counts = list(counts)
    changed, folding = False, True
    while folding:  # a chain of slivers is eaten from its unstable side
        folding = False
        for k in range(1, len(counts) - 1):
            low, high = gains[k - 1], gains[k]
            width_limit = 1e-6 * max(abs(low), abs(high), family.gain_scale)
            neighbour = max(counts[k - 1], counts[k + 1])
            if (counts[k] == 0 and neighbour > 0 and high - low < width_limit
                    and not low <= family.current_value <= high):
                counts[k] = neighbour
                changed = folding = True
    if not changed:
        return gains, counts, []
    kept_gains, kept_counts, dropped = [], [counts[0]], []
    for k, gain in enumerate(gains):
        if counts[k + 1] == kept_counts[-1] and counts[k + 1] != 0:
            dropped.append(gain)
        else:
            kept_gains.append(gain)
            kept_counts.append(counts[k + 1])
    return kept_gains, kept_counts, dropped


#: Newton steps on h′ for a touching point (quadratic convergence from a √eps start).
_TOUCH_NEWTON_STEPS = 8


def _refined_touch(family: RankOneFamily, point: BoundaryPoint) -> BoundaryPoint:
    """A touching point to full precision: Newton's method on the derivative of the crossing condition.

    A boundary pole s(p) = jp (sampled: e^{jp}) is a pole at the real change
    t = −1/(w·g(s)) of the entry exactly where h(p) = Im g(s(p)) = 0, with
    g(s) = cnᵀ(sI − M)⁻¹bn. Where a pole touches the boundary without crossing it, two zeros
    of h meet: h has a double zero, which the crossing search resolves only to about √eps
    (4.00000005 for an exact 4). The double zero is a simple zero of h′, found by Newton's
    method on h′ to rounding level; from g′ = −cnᵀR²bn and g″ = 2cnᵀR³bn (R = (sI − M)⁻¹):
    continuous h′ = Re g′, h″ = −Im g″; sampled h′ = Re(z g′), h″ = −Im(z g′ + z² g″).
    The refined point is kept only when |h| is no larger there than at the start.
    """
    if family.order == 0:
        return point
    M, bn, cn, w = family.moving_matrix, family.moving_input, family.moving_output, family.direction_weight
    identity = np.eye(family.order)

    def derivatives(parameter: float):
        s = complex(math.cos(parameter), math.sin(parameter)) if family.sampled else complex(0.0, parameter)
        factor = scipy.linalg.lu_factor(s * identity - M)
        first = scipy.linalg.lu_solve(factor, bn.astype(complex))
        second = scipy.linalg.lu_solve(factor, first)
        third = scipy.linalg.lu_solve(factor, second)
        g, g1, g2 = cn @ first, -(cn @ second), 2.0 * (cn @ third)
        if family.sampled:
            return s, g, (s * g1).real, -(s * g1 + s * s * g2).imag
        return s, g, g1.real, -g2.imag

    try:
        with np.errstate(all="ignore"), catch_warnings():
            simplefilter("ignore")  # a singular step is caught by the checks below
            parameter = point.parameter
            s, g, slope, curvature = derivatives(parameter)
            start_residual = abs(g.imag)
            for _ in range(_TOUCH_NEWTON_STEPS):
                if not (math.isfinite(slope) and math.isfinite(curvature)) or curvature == 0.0:
                    break
                step = slope / curvature
                parameter -= step
                s, g, slope, curvature = derivatives(parameter)
                if abs(step) <= 4.0 * _EPS * max(abs(parameter), 1.0):
                    break
    except (np.linalg.LinAlgError, ValueError):
        return point
    if not (np.isfinite(g) and g.real != 0.0 and abs(g.imag) <= max(start_residual, 8.0 * _EPS * abs(g))):
        return point
    gain = family.current_value - 1.0 / (w * g.real)
    if not math.isfinite(gain):
        return point
    return replace(point, gain=float(gain), point=complex(s), parameter=float(abs(parameter)), speed=0.0)


def _with_refined_touches(family: RankOneFamily, gains: list[float], counts: list[int], points):
    """Gains and points with every touching edge (equal counts on both sides) refined."""
    gains, points = list(gains), list(points)
    for k, gain in enumerate(gains):
        if counts[k] != counts[k + 1] or counts[k] != 0:
            continue  # only a touch inside a stable range is an end of two intervals
        near = [i for i, p in enumerate(points) if abs(p.gain - gain) <= gain_tolerance(family, gain) and p.exact]
        if len(near) != 1:
            continue
        refined = _refined_touch(family, points[near[0]])
        low = gains[k - 1] if k else -math.inf
        high = gains[k + 1] if k + 1 < len(gains) else math.inf
        if low < refined.gain < high:
            points[near[0]] = refined
            gains[k] = refined.gain
    return gains, points


def _piece_of(gains: list[float], value: float, family: RankOneFamily | None = None) -> int | None:
    """Index of the piece (between consecutive crossing gains) holding ``value``; None on a gain.

    With ``family``, a value within :func:`gain_tolerance` of a gain counts as on it.
    """
    if family is not None and any(abs(value - gain) <= gain_tolerance(family, gain) for gain in gains):
        return None
    edges = [-math.inf] + list(gains) + [math.inf]
    for k in range(len(edges) - 1):
        if edges[k] < value < edges[k + 1]:
            return k
    return None


def _bisect_count_change(family: RankOneFamily, low: float, high: float, low_count: int) -> BoundaryPoint:
    """Locate, by bisection, a value where the number of unstable poles changes."""
    while high - low > gain_tolerance(family, high):
        middle = 0.5 * (low + high)
        if _poles_and_counts(family, np.array([middle]))[1][0] == low_count:
            low = middle
        else:
            high = middle
    gain = 0.5 * (low + high)
    poles = family.poles(np.array([gain]))[0]
    nearest = complex(poles[int(np.argmin(np.abs(boundary_distance(poles, family.sampled))))])
    if family.sampled:
        parameter = abs(math.atan2(nearest.imag, nearest.real))
        point = complex(math.cos(parameter), math.sin(parameter))
    else:
        parameter = abs(nearest.imag)
        point = complex(0.0, parameter)
    return BoundaryPoint(gain, point, parameter, math.nan, math.nan, high - low, math.nan, exact=False)


def _fixed_unstable(family: RankOneFamily) -> list[complex]:
    tolerance = margin_tolerance(family.full_norm, family.state_count)
    return [complex(p) for p in family.fixed_poles if boundary_distance(p, family.sampled) >= -tolerance]


def _fixed_pole_reason(plant: Plant, family: RankOneFamily, row: int, col: int, label: str) -> str:
    bad = _fixed_unstable(family)
    if not bad:
        return ""
    where = "on or outside the unit circle" if family.sampled else "on or to the right of the imaginary axis"
    unreached = {complex(p) for p in family.unreached_poles}
    causes = []
    if any(p in unreached for p in bad):
        causes.append(f"input '{plant.input_names[row]}' cannot move them")
    if any(p not in unreached for p in bad):
        causes.append(f"they do not show up in state '{plant.state_names[col]}'")
    listing = ", ".join(_format_pole(p) for p in bad)
    return (
        f"pole(s) {listing} do not move when {label} changes ({' and '.join(causes)}) and lie {where}; "
        "no value of this entry stabilises the loop: change another entry or the plant"
    )


def _family_job(plant: Plant, family: RankOneFamily, row: int, col: int):
    """(family, entry, label, fixed_reason) for :func:`_intervals_from_families`."""
    label = _entry_label(plant, row, col)
    return family, (row, col), label, lambda: _fixed_pole_reason(plant, family, row, col, label)


def _analyze_family(plant: Plant, family: RankOneFamily, row: int, col: int) -> StableIntervals:
    return _intervals_from_family(*_family_job(plant, family, row, col))


def _intervals_from_family(family: RankOneFamily, entry, label: str, fixed_reason) -> StableIntervals:
    return _intervals_from_families([(family, entry, label, fixed_reason)])[0]


def _intervals_from_families(jobs) -> list[StableIntervals]:
    """Stable intervals of several families, each job (family, entry, label, fixed_reason).

    The work is done stage by stage for all families at once (mirror-pair test,
    crossing search, piece classification), so families of one order share each
    batched LAPACK call; every family still gets exactly the numbers it gets alone.
    """
    families = [job[0] for job in jobs]
    everywhere = boundary_is_everywhere_of(families)  # False for a family that moves no pole
    searched = [k for k, family in enumerate(families) if family.has_effect and not everywhere[k]]
    if len(searched) == 1:
        # a single family goes through boundary_points itself (the same computation; tests replace
        # it there to simulate a crossing the structured method misses)
        found = [boundary_points(families[searched[0]])]
    else:
        found = boundary_points_of([families[k] for k in searched])
    points_of = dict(zip(searched, found))
    probes = {k: _quick_probe(families[k], points_of[k]) for k in searched}
    values = [probes[k][1] if k in probes else np.array([families[k].current_value]) for k in range(len(jobs))]
    counted = _poles_and_counts_each(families, values)
    return [
        _intervals_result(*job, everywhere[k], points_of.get(k), probes.get(k), counted[k][1], counted[k][0][0])
        for k, job in enumerate(jobs)
    ]


def _intervals_result(family: RankOneFamily, entry, label: str, fixed_reason, everywhere: bool, points, probe,
                      quick, current_poles) -> StableIntervals:
    """One family's intervals from its stages: mirror-pair verdict, crossings, and the counts at the probe.

    Without crossings to classify (no effect, or mirror pairs) ``quick`` holds the
    count at the current value only. ``current_poles`` are the poles at the current value
    (the probe's first value in every case), so its verdict needs no eigenvalue problem of its own.
    """
    v0 = family.current_value
    sampled = family.sampled
    fixed = tuple(complex(p) for p in family.fixed_poles)
    tolerance = gain_tolerance(family, v0)
    where = "on or outside the unit circle" if sampled else "on or right of the imaginary axis"

    if not family.has_effect:
        current_counts = quick
        current_is_stable = bool(current_counts[0] == 0)
        count = int(current_counts[0])
        intervals = ((-math.inf, math.inf),) if count == 0 else ()
        reason = ""
        if not intervals:
            reason = (
                f"changing {label} moves no pole (the input cannot influence that state), and "
                f"{count} pole(s) stay {where} whatever its value: change another entry or the plant"
            )
        return StableIntervals(entry, intervals, (), v0, current_is_stable, reason,
                               ((-math.inf, math.inf, count),), fixed, False, sampled, tolerance, (),
                               _decision_at(family, v0, current_poles).verdict)

    if everywhere:
        current_is_stable = bool(quick[0] == 0)
        pairs = "reciprocal pairs z and 1/z̄ about the unit circle" if sampled else \
            "mirror-image pairs s and −s̄ about the imaginary axis"
        reason = (
            f"changing {label} only moves poles in {pairs}, so at every value at least one pole is {where}; "
            "no value of this entry stabilises the loop: change another entry first"
        )
        return StableIntervals(entry, (), (), v0, current_is_stable, reason, (), fixed, True, sampled,
                               tolerance, (), _decision_at(family, v0, current_poles).verdict)

    points = list(points)
    gains, counts, current_is_stable, located = _classify_pieces(family, points, probe, quick)
    gains, counts, dropped = _without_unconfirmed_edges(family, gains, counts)
    gains, counts, slivers = _without_rounding_slivers(family, gains, counts)
    dropped += slivers
    points = [p for p in points + located if not any(abs(p.gain - g) <= gain_tolerance(family, g) for g in dropped)]
    points = sorted(points, key=lambda p: (p.gain, p.parameter))
    gains, points = _with_refined_touches(family, gains, counts, points)
    edges = [-math.inf] + gains + [math.inf]
    pieces = tuple((edges[k], edges[k + 1], int(counts[k])) for k in range(len(counts)))
    intervals = tuple((low, high) for low, high, count in pieces if count == 0)
    warnings = []
    decision = _decision_at(family, v0, current_poles)
    current_is_stable = decision.stable
    inside = [(low, high) for low, high in intervals if low < v0 < high]
    if inside and not decision.stable:
        # the loop at v0 itself has a pole on the boundary inside a stable piece: a touch that
        # the crossings missed (or placed a rounding error away); v0 is not a stable value
        low, high = inside[0]
        replaced = {inside[0]}
        near_low, near_high = v0 - low <= tolerance, high - v0 <= tolerance
        below = next((i for i in intervals if i[1] == low), None) if near_low else None
        above = next((i for i in intervals if i[0] == high), None) if near_high else None
        if below:  # a touching end a rounding error below v0: v0 takes its place
            replaced.add(below)
            new = [(below[0], v0), (v0, high)]
        elif above:  # the same, above
            replaced.add(above)
            new = [(low, v0), (v0, above[1])]
        elif near_low:  # a crossing end a rounding error from v0: v0 becomes that end
            new = [(v0, high)]
        elif near_high:
            new = [(low, v0)]
        else:  # a touch at v0 that the crossings missed
            new = [(low, v0), (v0, high)]
        intervals = tuple(sorted([i for i in intervals if i not in replaced] + new))
        warnings.append(f"at the current value {v0:.9g} of {label} a pole is {decision.verdict} "
                        "(margin within rounding): that value is not in a stable interval")

    crossings = []
    for point in points:
        # the piece boundary this crossing belongs to
        k = int(np.argmin([abs(point.gain - g) for g in gains]))
        uncertainty_limit = 1e-6 * max(abs(point.gain), family.gain_scale)
        ill = not (point.gain_uncertainty <= uncertainty_limit) or not point.exact
        crossing = Crossing(
            gain=point.gain,
            frequency=point.parameter,
            point=point.point,
            unstable_below=int(counts[k]),
            unstable_above=int(counts[k + 1]),
            condition=point.condition,
            gain_uncertainty=point.gain_uncertainty,
            ill_conditioned=ill,
            exact=point.exact,
        )
        crossings.append(crossing)
        if not point.exact:
            warnings.append(
                f"a change of stability at {label} = {point.gain:.9g} was missed by the exact method and "
                f"located by bisection (to ±{point.gain_uncertainty:.3g}); the model may be close to a "
                "degenerate case: treat that end with caution"
            )
        elif ill and crossing.touches_only:
            warnings.append(
                f"at {label} = {point.gain:.9g} a pole touches the boundary at {_format_pole(point.point)} "
                "without crossing it: the loop is only marginally stable there, and that value is "
                "sensitive to rounding and to model error"
            )
        elif ill:
            warnings.append(
                f"the crossing at {label} = {point.gain:.9g} (pole {_format_pole(point.point)}) is "
                f"ill-conditioned (pole condition number {point.condition:.3g}); that end is known only "
                f"to about ±{point.gain_uncertainty:.3g}"
            )

    reason = ""
    if not intervals:
        reason = fixed_reason()
        if not reason:
            fewest = min(counts)
            best = [(low, high) for low, high, count in pieces if count == fewest]
            low, high = best[0]
            reason = (
                f"no value of {label} makes every pole stable: at least {fewest} pole(s) stay {where} "
                f"for every value (fewest between {low:.6g} and {high:.6g}); change another entry first"
            )
    return StableIntervals(entry, intervals, tuple(crossings), v0, current_is_stable, reason, pieces, fixed,
                           True, sampled, tolerance, tuple(warnings), decision.verdict)


def entry_stable_intervals(plant: Plant, K, row: int, col: int) -> StableIntervals:
    """Exact open intervals of one gain entry (others fixed) for which the loop is stable.

    The ends are the values at which a pole is on the stability boundary
    (imaginary axis, or unit circle for a sampled plant), from a structured
    eigenvalue problem of size 2·o + 1 (o ≤ n: the part of the plant this entry
    can move), polished by Newton's method and verified; each piece between them
    is classified by the poles at an interior point.

    Parameters
    ----------
    plant : Plant
        The plant (continuous or sampled).
    K : array_like, shape (m, n)
        The state-feedback gain (u = −Kx).
    row, col : int
        Zero-based entry: row = input, col = state.

    Returns
    -------
    StableIntervals

    Raises
    ------
    GainError
        If K has the wrong shape or the entry is out of range.

    Notes
    -----
    The intervals come from the linear model: validate any design on the real
    system with safe limits and emergency stops, under local codes, functional-safety
    standards and licensed practice.

    Examples
    --------
    A cubic with poles moved by the first gain (Routh–Hurwitz gives 0 < k < 6):

    >>> plant = Plant(A=[[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [0.0, -2.0, -3.0]], B=[[0.0], [0.0], [1.0]])
    >>> result = entry_stable_intervals(plant, [[1.0, 0.0, 0.0]], 0, 0)
    >>> [(round(low, 9), round(high, 9)) for low, high in result.intervals]
    [(0.0, 6.0)]
    """
    gain, row, col = _checked_entry(plant, K, row, col)
    return _analyze_family(plant, _entry_family(plant, gain, row, col), row, col)


def all_entry_stable_intervals(plant: Plant, K) -> dict[tuple[int, int], StableIntervals]:
    """Stable intervals of every gain entry, sharing one Krylov reduction per input.

    The entries are analysed together, stage by stage, so that entries whose
    families have the same order share batched LAPACK calls; each entry's result is
    exactly what :func:`entry_stable_intervals` gives for it.

    Parameters
    ----------
    plant : Plant
    K : array_like, shape (m, n)

    Returns
    -------
    dict
        ``{(row, col): StableIntervals}`` for every entry, zero-based.

    Examples
    --------
    The cubic of :func:`entry_stable_intervals` (Routh–Hurwitz: 0 < k1 < 6 with k2 = k3 = 0):

    >>> plant = Plant(A=[[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [0.0, -2.0, -3.0]], B=[[0.0], [0.0], [1.0]])
    >>> every = all_entry_stable_intervals(plant, [[1.0, 0.0, 0.0]])
    >>> sorted(every), [(round(low, 9), round(high, 9)) for low, high in every[(0, 0)].intervals]
    ([(0, 0), (0, 1), (0, 2)], [(0.0, 6.0)])
    """
    if not isinstance(plant, Plant):
        raise GainError(f"the plant must be a gainboard Plant, but {type(plant).__name__} was given")
    gain = plant.check_gain(K)
    check_analysable(plant, gain, GainError)
    return _all_entry_intervals(plant, gain, {})


#: Matrix entries held by the families analysed together in :func:`_all_entry_intervals` (2²¹: 16 MiB of floats).
_FAMILY_GROUP_ENTRIES = 2**21


def _all_entry_intervals(plant: Plant, gain: np.ndarray, known: dict) -> dict[tuple[int, int], StableIntervals]:
    """:func:`all_entry_stable_intervals` taking the entries in ``known`` as given (checked gain)."""
    closed_loop = plant.A - plant.B @ gain
    n = plant.state_count
    wanted = [(row, col) for row in range(plant.input_count) for col in range(n) if (row, col) not in known]
    # Entries go through in groups whose families hold a bounded number of matrix entries in all
    # (each family keeps an o×o matrix, o ≤ n): memory O(n²) times a fixed group size, not O(m·n³).
    # Families of a group share batched LAPACK calls; every entry's numbers are those it gets alone.
    group = max(1, _FAMILY_GROUP_ENTRIES // (n * n))
    reductions: dict[int, object] = {}
    analysed = {}
    for start in range(0, len(wanted), group):
        jobs = []
        for row, col in wanted[start:start + group]:
            if row not in reductions:
                reductions[row] = reduce_input(closed_loop, plant.B[:, row])
            jobs.append(_family_job(plant, _entry_family(plant, gain, row, col, reductions[row], closed_loop), row, col))
        analysed.update(zip([job[1] for job in jobs], _intervals_from_families(jobs)))
    return {(row, col): known[(row, col)] if (row, col) in known else analysed[(row, col)]
            for row in range(plant.input_count) for col in range(plant.state_count)}


# ---------------------------------------------------------------------------
# Loci
# ---------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class EntryLocus:
    """Closed-loop poles as one gain entry sweeps [low, high] (adaptively sampled).

    Attributes
    ----------
    entry : (int, int)
    gains : numpy.ndarray, shape (N,)
        Sorted sample values of the entry (always including low, high, the current
        value and every crossing inside the range).
    poles : numpy.ndarray, shape (N, n), complex
        Poles at each sample; column k follows one branch (consecutive samples
        matched by optimal assignment).
    start_poles, end_poles : numpy.ndarray, shape (n,)
        Poles at low and at high.
    crossings : tuple of Crossing
        Boundary crossings inside [low, high].
    current_value : float
    evaluation_count : int
        Number of eigenvalue evaluations used.
    span : float
        Diagonal of the bounding box of all sampled poles.
    sampled : bool
    """

    entry: tuple[int, int]
    gains: np.ndarray
    poles: np.ndarray
    start_poles: np.ndarray
    end_poles: np.ndarray
    crossings: tuple[Crossing, ...]
    current_value: float
    evaluation_count: int
    span: float
    sampled: bool


def _crossings_inside(analysis: StableIntervals, low: float, high: float) -> tuple[Crossing, ...]:
    """Crossings within [low, high], allowing for rounding at the ends (a crossing at 0 may come out as −1e-17)."""
    slack = max(analysis.gain_tolerance, 1e-12 * (high - low))
    return tuple(c for c in analysis.crossings if low - slack <= c.gain <= high + slack)


def entry_locus(plant: Plant, K, row: int, col: int, low: float, high: float) -> EntryLocus:
    """Branch-tracked locus of the closed-loop poles as K[row, col] sweeps [low, high].

    Sampling is adaptive: an interval is bisected while its midpoint poles stray
    from the straight chord by more than 4e-4 of the plot span or any pole moves
    more than 5 % of the span across it.

    Parameters
    ----------
    plant : Plant
    K : array_like, shape (m, n)
    row, col : int
        Zero-based entry.
    low, high : float
        Sweep range (low < high), in the entry's units.

    Returns
    -------
    EntryLocus

    Examples
    --------
    >>> plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]])
    >>> locus = entry_locus(plant, [[1.0, 2.0]], 0, 0, 0.5, 4.0)
    >>> sorted(np.round(locus.start_poles.real, 6).tolist())
    [-1.707107, -0.292893]
    """
    gain, row, col = _checked_entry(plant, K, row, col)
    low, high = _checked_range(low, high, f"sweep of {_entry_label(plant, row, col)}")
    family = _entry_family(plant, gain, row, col)
    return _locus_of_family(plant, family, _analyze_family(plant, family, row, col), row, col, low, high)


def _locus_of_family(plant: Plant, family: RankOneFamily, analysis: StableIntervals, row: int, col: int,
                     low: float, high: float) -> EntryLocus:
    inside = _crossings_inside(analysis, low, high)
    sampled = adaptive_locus(family.poles, low, high, [family.current_value] + [c.gain for c in inside])
    return EntryLocus(
        entry=(row, col),
        gains=read_only(sampled.values),
        poles=read_only(sampled.poles),
        start_poles=read_only(sampled.poles[0]),
        end_poles=read_only(sampled.poles[-1]),
        crossings=inside,
        current_value=family.current_value,
        evaluation_count=sampled.evaluation_count,
        span=sampled.span,
        sampled=plant.is_sampled,
    )


@dataclass(frozen=True, eq=False)
class ScaledGainLocus:
    """Closed-loop poles of A − α·B·K as the scale α sweeps [low, high].

    Attributes
    ----------
    scales : numpy.ndarray, shape (N,)
        Sorted sample values of α (always including 1, the given K, when in range).
    poles : numpy.ndarray, shape (N, n), complex
        Branch-tracked poles.
    start_poles, end_poles : numpy.ndarray, shape (n,)
    crossings : tuple of Crossing
        Boundary crossings inside the range (``gain`` holds α).
    stable_intervals : tuple of (float, float)
        Stable ranges of α over the whole real line (rank-one B·K) or inside
        [low, high] (otherwise).
    exact : bool
        True when B·K has rank one (or zero) and crossings come from the exact
        structured eigenvalue problem; False when they were located by sampling and
        bisection (touching points can then be missed).
    evaluation_count : int
    span : float
    sampled : bool
    """

    scales: np.ndarray
    poles: np.ndarray
    start_poles: np.ndarray
    end_poles: np.ndarray
    crossings: tuple[Crossing, ...]
    stable_intervals: tuple[tuple[float, float], ...]
    exact: bool
    evaluation_count: int
    span: float
    sampled: bool


def _scaled_evaluator(plant: Plant, gain: np.ndarray):
    feedback = plant.B @ gain

    def evaluate(values):
        values = np.atleast_1d(np.asarray(values, dtype=float))
        return np.linalg.eigvals(plant.A[None, :, :] - values[:, None, None] * feedback[None, :, :])

    return evaluate


def _count_unstable(poles: np.ndarray, sampled: bool, norm: float) -> int:
    return unstable_count(poles, sampled, margin_tolerance(norm, poles.size))


def scaled_gain_locus(plant: Plant, K, low: float = 0.0, high: float = 2.0) -> ScaledGainLocus:
    """Locus of the poles of A − α·B·K as α sweeps [low, high] (α = 1 is the given design).

    When B·K has rank one (always for a single input) the crossings and stable
    ranges of α are exact, by the same structured eigenvalue problem as
    :func:`entry_stable_intervals`. Otherwise they are located by bisection on the
    number of unstable poles between samples (``exact`` is False).

    Parameters
    ----------
    plant : Plant
    K : array_like, shape (m, n)
    low, high : float
        Range of the scale α (low < high).

    Returns
    -------
    ScaledGainLocus

    Examples
    --------
    >>> plant = Plant(A=[[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [0.0, -2.0, -3.0]], B=[[0.0], [0.0], [1.0]])
    >>> locus = scaled_gain_locus(plant, [[1.0, 0.0, 0.0]], 0.0, 10.0)
    >>> [round(c.gain, 9) + 0.0 for c in locus.crossings]  # + 0.0 turns a rounded -0.0 into 0.0
    [0.0, 6.0]
    """
    if not isinstance(plant, Plant):
        raise GainError(f"the plant must be a gainboard Plant, but {type(plant).__name__} was given")
    gain = plant.check_gain(K)
    low, high = _checked_range(low, high, "gain-scale")
    feedback = plant.B @ gain
    evaluate = _scaled_evaluator(plant, gain)
    singular_values = np.linalg.svd(feedback, compute_uv=False)
    rank_one = singular_values.size < 2 or singular_values[1] <= 10.0 * plant.state_count * _EPS * singular_values[0]
    if rank_one:
        left, sizes, right = np.linalg.svd(feedback)
        family = rank_one_family(plant.A - feedback, left[:, 0] * sizes[0], right[0], 1.0, plant.is_sampled)
        label = "the gain scale α"
        analysis = _intervals_from_family(family, (-1, -1), label, lambda: "")
        crossings = _crossings_inside(analysis, low, high)
        sampled = adaptive_locus(evaluate, low, high, [1.0] + [c.gain for c in crossings])
        intervals = analysis.intervals
    else:
        sampled = adaptive_locus(evaluate, low, high, [1.0])
        crossings, intervals, extra = _sampled_crossings(plant, feedback, sampled.values, sampled.poles)
        sampled = type(sampled)(sampled.values, sampled.poles, sampled.evaluation_count + extra, sampled.span)
    return ScaledGainLocus(
        scales=read_only(sampled.values),
        poles=read_only(sampled.poles),
        start_poles=read_only(sampled.poles[0]),
        end_poles=read_only(sampled.poles[-1]),
        crossings=crossings,
        stable_intervals=intervals,
        exact=bool(rank_one),
        evaluation_count=sampled.evaluation_count,
        span=sampled.span,
        sampled=plant.is_sampled,
    )


def gain_factor_intervals(closed_loop: np.ndarray, input_column: np.ndarray, gain_row: np.ndarray,
                          sampled: bool) -> StableIntervals:
    """Exact stable intervals of the factor α in A1 − (α − 1)·b·k, where A1 = ``closed_loop`` (α = 1).

    One actuator loop u = −α·k·x with the loop matrix at α = 1 given: the same exact
    structured method as :func:`entry_stable_intervals` (``entry`` is (−1, −1)). Loop
    margins read their gain margins from it: crossings at ω → 0 of an integrating loop are
    exact here, where a frequency sweep only sees rounding.
    """
    family = rank_one_family(np.asarray(closed_loop, dtype=float), np.asarray(input_column, dtype=float),
                             np.asarray(gain_row, dtype=float), 1.0, sampled)
    return _intervals_from_family(family, (-1, -1), "the loop's gain factor", lambda: "")


def _sampled_crossings(plant: Plant, feedback: np.ndarray, values: np.ndarray, poles: np.ndarray):
    """Crossings of A − α·B·K located by bisection where the unstable count changes."""
    sampled = plant.is_sampled

    def count_at(alpha: float) -> tuple[int, np.ndarray]:
        matrix = plant.A - alpha * feedback
        eigenvalues = np.linalg.eigvals(matrix)
        return _count_unstable(eigenvalues, sampled, float(np.linalg.norm(matrix))), eigenvalues

    norms = np.linalg.norm(plant.A[None] - values[:, None, None] * feedback[None], axis=(1, 2))
    counts = [_count_unstable(row, sampled, float(norm)) for row, norm in zip(poles, norms)]
    extra = 0
    crossings = []
    for k in range(len(values) - 1):
        if counts[k] == counts[k + 1]:
            continue
        a, b = float(values[k]), float(values[k + 1])
        count_a = counts[k]
        while b - a > 4.0 * _EPS * max(abs(a), abs(b), 1.0):
            middle = 0.5 * (a + b)
            count_m, _ = count_at(middle)
            extra += 1
            if count_m == count_a:
                a = middle
            else:
                b = middle
        alpha = 0.5 * (a + b)
        _, eigenvalues = count_at(alpha)
        nearest = complex(eigenvalues[int(np.argmin(np.abs(boundary_distance(eigenvalues, sampled))))])
        if sampled:
            frequency = abs(math.atan2(nearest.imag, nearest.real))
            point = complex(math.cos(frequency), math.sin(frequency))
        else:
            frequency = abs(nearest.imag)
            point = complex(0.0, frequency)
        crossings.append(Crossing(alpha, frequency, point, counts[k], counts[k + 1], math.nan, b - a, False, False))
    intervals = []
    edges = [float(values[0])] + [c.gain for c in crossings] + [float(values[-1])]
    piece_counts = [counts[0]] + [c.unstable_above for c in crossings]
    for (low, high), count in zip(zip(edges[:-1], edges[1:]), piece_counts):
        if count == 0 and high > low:
            intervals.append((low, high))
    return tuple(crossings), tuple(intervals), extra


# ---------------------------------------------------------------------------
# Sensitivity
# ---------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class PoleSensitivity:
    """Rate of change of each closed-loop pole with one gain entry.

    Attributes
    ----------
    entry : (int, int)
    poles : numpy.ndarray, shape (n,), complex
        Closed-loop poles at the given K.
    derivatives : numpy.ndarray, shape (n,), complex
        dλ/dk_ij = −(yᴴb)(e_jᵀx)/(yᴴx) with right and left eigenvectors x, y
        (units: pole units per gain unit). NaN where ``defective`` is True.
    defective : numpy.ndarray, shape (n,), bool
        True where the pole is repeated (numerically) or defective: there the
        pole is not a differentiable function of the gain.
    condition_numbers : numpy.ndarray, shape (n,)
        Eigenvalue condition numbers ‖x‖‖y‖/|yᴴx|.
    note : str
        Explains any NaN entries.
    """

    entry: tuple[int, int]
    poles: np.ndarray
    derivatives: np.ndarray
    defective: np.ndarray
    condition_numbers: np.ndarray
    note: str


def pole_sensitivity(plant: Plant, K, row: int, col: int) -> PoleSensitivity:
    """First-order sensitivity of every closed-loop pole to the gain entry K[row, col].

    With K(v) = K₀ + (v − K₀[row, col])·e_i·e_jᵀ, the closed loop changes by
    −b·e_jᵀ per unit of v, so a simple pole λ with right/left eigenvectors x, y
    moves at dλ/dv = −(yᴴb)(e_jᵀx)/(yᴴx) (first-order eigenvalue perturbation).

    Parameters
    ----------
    plant : Plant
    K : array_like, shape (m, n)
    row, col : int
        Zero-based entry.

    Returns
    -------
    PoleSensitivity

    Examples
    --------
    >>> plant = Plant(A=[[-1.0]], B=[[2.0]])
    >>> pole_sensitivity(plant, [[0.5]], 0, 0).derivatives.tolist()
    [(-2+0j)]
    """
    gain, row, col = _checked_entry(plant, K, row, col)
    return _sensitivity_from_eigensystem(plant, _eigensystem(plant.A - plant.B @ gain), row, col)


def _sensitivity_from_eigensystem(plant: Plant, system: _Eigensystem, row: int, col: int) -> PoleSensitivity:
    """:func:`pole_sensitivity` from the closed loop's eigendecomposition (checked entry).

    ``evaluate_design`` passes the decomposition its pole report was built from, so
    the closed loop is decomposed once per update.
    """
    n = plant.state_count
    eigenvalues, left, right = system.eigenvalues, system.left, system.right
    b = plant.B[:, row]
    projections = np.einsum("ik,ik->k", left.conj(), right)
    with np.errstate(divide="ignore", invalid="ignore"):
        derivatives = -(left.conj().T @ b) * right[col, :] / projections
    conditions = system.condition_numbers  # ‖x‖‖y‖/|yᴴx| with unit x, y (inf where yᴴx = 0)
    norm = float(np.linalg.norm(system.matrix))
    # Two computed poles closer than their combined rounding radius cannot be told apart.
    radius = 10.0 * n * _EPS * max(norm, _EPS) * (conditions[:, None] + conditions[None, :])
    close = np.abs(eigenvalues[:, None] - eigenvalues[None, :]) <= radius
    # every pole is within its own radius (the diagonal), so a second one close by makes two
    defective = ~np.isfinite(conditions) | (np.count_nonzero(close, axis=1) > 1)
    derivatives = np.where(defective, complex(math.nan, math.nan), derivatives)
    note = ""
    if defective.any():
        listing = ", ".join(_format_pole(p) for p in eigenvalues[defective])
        note = (
            f"pole(s) {listing} are repeated or defective: they split as sqrt-like or unevenly when "
            f"{_entry_label(plant, row, col)} changes, so no single derivative exists (reported as NaN)"
        )
    return PoleSensitivity((row, col), read_only(eigenvalues), read_only(derivatives), read_only(defective),
                           read_only(conditions), note)


# ---------------------------------------------------------------------------
# Default sweep range
# ---------------------------------------------------------------------------
def default_entry_range(plant: Plant, K, row: int, col: int) -> tuple[float, float]:
    """A sensible slider or sweep range for one gain entry.

    The range covers the current value ± max(3·|value|, natural scale), where the
    natural scale is the change of the entry at which the feedback term is as large
    as the plant itself; it is widened to take in the finite ends of the stable
    interval that contains the current value (or the nearest one) when they lie
    within 20 times that width, then padded by 10 %. It is never empty.

    Parameters
    ----------
    plant : Plant
    K : array_like, shape (m, n)
    row, col : int
        Zero-based entry.

    Returns
    -------
    (float, float)
        low < high.

    Examples
    --------
    >>> plant = Plant(A=[[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [0.0, -2.0, -3.0]], B=[[0.0], [0.0], [1.0]])
    >>> low, high = default_entry_range(plant, [[1.0, 0.0, 0.0]], 0, 0)
    >>> low < 0.0 and high > 6.0
    True
    """
    gain, row, col = _checked_entry(plant, K, row, col)
    family = _entry_family(plant, gain, row, col)
    return _range_of_family(family, _analyze_family(plant, family, row, col))


def _range_of_family(family: RankOneFamily, analysis: StableIntervals) -> tuple[float, float]:
    current = family.current_value
    width = max(3.0 * abs(current), family.gain_scale)
    anchors = [current - width, current + width]
    if analysis.intervals:
        nearest = min(
            analysis.intervals,
            key=lambda iv: 0.0 if iv[0] < current < iv[1] else min(abs(current - iv[0]), abs(current - iv[1])),
        )
        for end in nearest:
            if math.isfinite(end) and abs(end - current) <= 20.0 * width:
                anchors.append(end)
    low, high = min(anchors), max(anchors)
    pad = 0.1 * (high - low)
    return (low - pad, high + pad)


# ---------------------------------------------------------------------------
# Everything about one entry at once (for evaluate_design), reused while the slider moves
# ---------------------------------------------------------------------------
# While the engineer drags the slider of the selected entry k_ij, A_z = A − B·K with
# k_ij set to zero stays the same, and so does the whole family of that entry: its
# minimal system, crossings, stable intervals and the locus over a given range. The
# selected entry is therefore analysed from A_z (reference value 0), never from the
# current closed loop, so the analysis is a function of (plant, entry, A_z) alone and
# can be kept; only the current value, its stability verdict and its sample on the
# locus are worked out per call. A cached result is the very object an uncached call
# computes for the same (plant, K with k_ij zeroed, entry, range): bit-for-bit equal.
_FAMILIES_PER_PLANT = 4  # a few gain matrices per plant (the selected entry and one or two others)
_RANGES_PER_FAMILY = 4  # a few locus ranges per family (the automatic range moves in coarse steps)


@dataclass(eq=False)
class _EntryRecord:
    """The value-free analysis of one entry: family at k_ij = 0, its intervals, loci by range."""

    family: RankOneFamily
    analysis: StableIntervals
    loci: OrderedDict  # (low, high) -> (values, poles, evaluation_count, span), all read-only


_ENTRY_RECORDS: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()
_ENTRY_RECORDS_LOCK = threading.Lock()


def _clear_entry_records() -> None:
    """Forget every kept analysis (tests use it to compare with uncached results)."""
    with _ENTRY_RECORDS_LOCK:
        _ENTRY_RECORDS.clear()


def _entry_record(plant: Plant, gain: np.ndarray, row: int, col: int, use_cache: bool) -> _EntryRecord:
    zeroed = gain.copy()
    zeroed[row, col] = 0.0
    key = (row, col, zeroed.tobytes())
    if use_cache:
        with _ENTRY_RECORDS_LOCK:
            records = _ENTRY_RECORDS.get(plant)
            record = records.get(key) if records is not None else None
            if record is not None:
                records.move_to_end(key)
                return record
    family = _entry_family(plant, zeroed, row, col)
    record = _EntryRecord(family, _analyze_family(plant, family, row, col), OrderedDict())
    if use_cache:
        with _ENTRY_RECORDS_LOCK:
            records = _ENTRY_RECORDS.setdefault(plant, OrderedDict())
            # another thread may have stored the same analysis meanwhile: keep the first one
            record = records.setdefault(key, record)
            records.move_to_end(key)
            while len(records) > _FAMILIES_PER_PLANT:
                records.popitem(last=False)
    return record


def _reference_locus(record: _EntryRecord, low: float, high: float, use_cache: bool):
    """Locus samples of the family over [low, high] without the current value (cached per range).

    Returns (values, poles, evaluation_count, span, extremes), the arrays read-only;
    ``extremes`` = (min Re, max Re, min Im, max Im) of the poles when they are all finite
    and not all equal (else None), so the span with one more sample is cheap.
    """
    key = (low, high)
    if use_cache:
        with _ENTRY_RECORDS_LOCK:
            found = record.loci.get(key)
            if found is not None:
                record.loci.move_to_end(key)
                return found
    inside = _crossings_inside(record.analysis, low, high)
    sampled = adaptive_locus(record.family.poles, low, high, [c.gain for c in inside])
    poles = sampled.poles
    extremes = None
    if poles.size and np.all(np.isfinite(poles)):
        extremes = (poles.real.min(), poles.real.max(), poles.imag.min(), poles.imag.max())
        if extremes[1] - extremes[0] == 0.0 and extremes[3] - extremes[2] == 0.0:
            extremes = None  # plot_span's special case of a single point
    found = (read_only(sampled.values), read_only(poles), sampled.evaluation_count, sampled.span, extremes)
    if use_cache:
        with _ENTRY_RECORDS_LOCK:
            found = record.loci.setdefault(key, found)
            record.loci.move_to_end(key)
            while len(record.loci) > _RANGES_PER_FAMILY:
                record.loci.popitem(last=False)
    return found


def _intervals_at(record: _EntryRecord, value: float) -> tuple[StableIntervals, np.ndarray]:
    """The entry's intervals with the current value and its verdict filled in, and the poles there.

    The poles, shape (n,), are those of ``record.family.poles`` at ``value`` (the same
    eigenvalue call), ready to be added to the locus.
    """
    poles, counts = _poles_and_counts(record.family, np.array([value]))
    decision = _decision_at(record.family, value, poles[0])
    analysis = replace(record.analysis, current_value=value, current_is_stable=decision.stable,
                       current_verdict=decision.verdict, gain_tolerance=gain_tolerance(record.family, value))
    return analysis, poles[0]


def _span_with(extremes, poles: np.ndarray, here: np.ndarray) -> float:
    """:func:`plot_span` of ``poles`` (the locus with the sample ``here`` added), from the locus' extremes."""
    if extremes is None or not np.all(np.isfinite(here)):
        return plot_span(poles)
    real_low, real_high, imag_low, imag_high = extremes
    here_real, here_imag = here.real, here.imag
    # max − min, as numpy.ptp takes it, over the old extremes and the new sample
    real_range = max(real_high, here_real.max()) - min(real_low, here_real.min())
    imag_range = max(imag_high, here_imag.max()) - min(imag_low, here_imag.min())
    return float(np.hypot(real_range, imag_range))  # not 0: the old poles alone already spread


def _locus_at(plant: Plant, record: _EntryRecord, analysis: StableIntervals, current_poles: np.ndarray,
              row: int, col: int, low: float, high: float, use_cache: bool) -> EntryLocus:
    """The range's locus with the current value's sample (``current_poles``) added, matched to its left neighbour."""
    values, poles, evaluation_count, span, extremes = _reference_locus(record, low, high, use_cache)
    value = analysis.current_value
    place = int(np.searchsorted(values, value))
    if low < value < high and values[place] != value:
        here = current_poles[match_to(poles[place - 1], current_poles)]
        values = np.concatenate((values[:place], [value], values[place:]))
        poles = np.concatenate((poles[:place], here[None, :], poles[place:]))
        evaluation_count += 1
        span = _span_with(extremes, poles, here)
    return EntryLocus(
        entry=(row, col),
        gains=read_only(values),
        poles=read_only(poles),
        start_poles=read_only(poles[0]),
        end_poles=read_only(poles[-1]),
        crossings=_crossings_inside(analysis, low, high),
        current_value=value,
        evaluation_count=evaluation_count,
        span=span,
        sampled=plant.is_sampled,
    )


def _coarse_range(family: RankOneFamily, analysis: StableIntervals) -> tuple[float, float]:
    """The automatic locus range of the selected entry, constant while the value moves a little.

    Like :func:`default_entry_range`, but the half-width max(3·|value|, natural
    scale) is rounded up to a power of two W and the centre is the multiple of W/2
    nearest to the value, so the range [centre − W, centre + W] (widened to the
    nearest stable interval's finite ends within 20·W, then padded by 10 %) keeps
    the value at least 3W/4 from its ends and only changes when the value leaves the
    middle half of the range, its size doubles, or it enters another interval.
    """
    current = analysis.current_value
    width = max(3.0 * abs(current), family.gain_scale)
    if width < 1e300:  # beyond that the next power of two would overflow
        width = 2.0 ** math.ceil(math.log2(width))
    centre = round(current / (0.5 * width)) * (0.5 * width)
    anchors = [centre - width, centre + width]
    if analysis.intervals:
        nearest = min(
            analysis.intervals,
            key=lambda iv: 0.0 if iv[0] < current < iv[1] else min(abs(current - iv[0]), abs(current - iv[1])),
        )
        for end in nearest:
            if math.isfinite(end) and abs(end - centre) <= 20.0 * width:
                anchors.append(end)
    low, high = min(anchors), max(anchors)
    pad = 0.1 * (high - low)
    return (low - pad, high + pad)


def _entry_views(plant: Plant, K, row: int, col: int, entry_range=None,
                 use_cache: bool = True) -> tuple[StableIntervals, EntryLocus]:
    """Stable intervals and locus of one entry, reused while only that entry changes.

    The family is built from A_z = A − B·K with K[row, col] set to zero, so the
    crossings, intervals and locus samples depend on (plant, A_z, entry, range) and
    not on the current value; they are kept per plant (a few gain matrices and ranges
    each) and ``use_cache=False`` computes the same results afresh. The locus covers
    ``entry_range``, or, when ``None``, the coarse automatic range of
    :func:`_coarse_range`, and always holds a sample at the current value when it
    lies inside the range. The results agree with :func:`entry_stable_intervals` and
    :func:`entry_locus` up to rounding (those start from the current closed loop).
    """
    gain, row, col = _checked_entry(plant, K, row, col)
    return _checked_entry_views(plant, gain, row, col, entry_range, use_cache)


def _checked_entry_views(plant: Plant, gain: np.ndarray, row: int, col: int, entry_range=None,
                         use_cache: bool = True) -> tuple[StableIntervals, EntryLocus]:
    """:func:`_entry_views` for a gain already checked by ``plant.check_gain`` and a valid entry."""
    if entry_range is not None:
        low, high = _checked_range(*entry_range, f"sweep of {_entry_label(plant, row, col)}")
    record = _entry_record(plant, gain, row, col, use_cache)
    analysis, current_poles = _intervals_at(record, float(gain[row, col]))
    if entry_range is None:
        low, high = _coarse_range(record.family, analysis)
    return analysis, _locus_at(plant, record, analysis, current_poles, row, col, low, high, use_cache)
