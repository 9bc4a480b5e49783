"""Pole assignment: the state-feedback gain K that puts the poles of A − BK where asked.

One input: Ackermann's formula K = e_nᵀ 𝒞⁻¹ φ(A) (𝒞 the controllability matrix,
φ the target characteristic polynomial) while 𝒞 is well conditioned; otherwise
the same formula in orthogonal controller-Hessenberg coordinates, where 𝒞 is
triangular and never formed (the "single-input Hessenberg method"), or scipy's
eigenvector method. Several inputs: the robust eigenvector method of Kautsky,
Nichols & Van Dooren with the Tits–Yang update, as implemented by
:func:`scipy.signal.place_poles`. Poles that no feedback can move are split off
first by the controllability staircase and must be among the targets.

Every result is checked: the poles of A − BK are recomputed, paired with the
targets one to one, and compared against a tolerance derived from their
condition numbers; the result says which method was used and why.

A gain computed here is a design on a linear model. Before it drives a real
machine it must be validated on the real system with safe actuator limits and
emergency stops, following local codes, functional-safety standards and
licensed engineering practice.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np
import scipy.linalg
import scipy.signal

from ._arrays import read_only
from ._closed_loop import (
    _as_pole_array,
    _default_conjugate_tolerance,
    _matching_indices,
    _pair_conjugates,
    analyze_state_matrix,
    sort_poles,
)
from ._errors import PlacementError
from ._number_range import check_analysable
from ._plant import Plant
from ._structure import (
    WEAK_STRUCTURE_MARGIN,
    _pbh_margins,
    controllability_matrix,
    controllability_staircase,
    rank_tolerance,
)

__all__ = [
    "ACKERMANN_CONDITION_LIMIT",
    "FIXED_POLE_TOLERANCE",
    "PLACEMENT_METHODS",
    "PlacementResult",
    "assign_poles",
]

_EPS = np.finfo(float).eps

#: Largest condition number of the controllability matrix for which the automatic
#: choice uses Ackermann's formula: 1/√eps ≈ 6.7e7, beyond which the solve with
#: 𝒞 loses more than half of the sixteen digits of double precision.
ACKERMANN_CONDITION_LIMIT = 1.0 / math.sqrt(_EPS)

#: A target counts as "the" fixed (uncontrollable) pole λ when it lies within
#: this fraction of max(‖A‖₂, |λ|) of it.
FIXED_POLE_TOLERANCE = 1e-6

#: Method names accepted by :func:`assign_poles`.
PLACEMENT_METHODS = ("auto", "ackermann", "hessenberg", "robust")

# The accuracy check allows this many times the rounding error that the
# eigenvalue problem of the closed loop carries by itself: it accepts a gain that
# is exact for a plant within a relative 1e6 · n · eps ≈ 2e-10 · n of the given
# one (far below any modelling error) and exists to catch gross loss of digits,
# such as Ackermann's formula on an ill-conditioned controllability matrix.
_ACCURACY_FACTOR = 1e6

# Above this relative error the note warns that the closed loop is very sensitive
# (common practice, no source: six digits is far more than any plant model has).
_SENSITIVE_RELATIVE_ERROR = 1e-6

_ACKERMANN = "Ackermann's formula"
_HESSENBERG = "single-input Hessenberg method (Ackermann's formula in orthogonal controller-Hessenberg coordinates)"
_EIGENVECTOR_ONE_INPUT = "eigenvector method for one input (scipy place_poles)"
_ROBUST_YT = "robust eigenvector method (Kautsky–Nichols–Van Dooren with the Tits–Yang update, scipy place_poles)"
_ROBUST_KNV0 = "robust eigenvector method (Kautsky–Nichols–Van Dooren method 0, scipy place_poles)"


def _format_pole(pole) -> str:
    pole = complex(pole)
    real = pole.real + 0.0  # turns -0.0 into 0.0
    if pole.imag == 0.0:
        return f"{real:.6g}"
    sign = "+" if pole.imag > 0 else "-"
    return f"{real:.6g}{sign}{abs(pole.imag):.6g}j"


def _format_poles(poles) -> str:
    return "[" + ", ".join(_format_pole(p) for p in poles) + "]"


@dataclass(frozen=True, eq=False)
class PlacementResult:
    """A gain K and how well it puts the poles of A − BK on the targets.

    Attributes
    ----------
    gain : numpy.ndarray, shape (m, n)
        K for the control law u = −Kx (input units per state unit).
    requested : numpy.ndarray of complex, shape (n,)
        The targets, completed with missing conjugates, in canonical order.
    achieved : numpy.ndarray of complex, shape (n,)
        Eigenvalues of A − BK, each paired with the entry of ``requested`` at the
        same position (optimal one-to-one assignment).
    errors : numpy.ndarray of float, shape (n,)
        |requested − achieved| per pole.
    worst_error : float
        max(errors), absolute (rad/s for continuous plants, z units for sampled).
    relative_error : float
        worst_error / max(‖A‖₂, max|requested|): the error relative to the size
        of the plant's poles and of the targets (worst_error itself if both are 0).
    accurate : bool
        Every error is within its entry of ``error_tolerances``: the gain is as
        accurate as the conditioning of this closed loop allows. For a very
        sensitive closed loop that can still mean visible errors; ``note`` then
        says so (relative error above 1e-6).
    error_tolerances : numpy.ndarray of float, shape (n,)
        Error allowed for each pole by the accuracy check: 10⁶ · n · eps ·
        (‖A‖₂ + ‖B‖₂‖K‖₂) times the pole's condition number for a simple pole;
        for a target repeated c times, (‖A‖₂ + ‖B‖₂‖K‖₂) · (10⁶ · n · eps)^(1/c),
        the size of the splitting of a c-fold Jordan block; never more than
        the n-fold value; plus
        ``FIXED_POLE_TOLERANCE`` scaled for targets that stand for a fixed pole.
    method : str
        The family of solution used, in words.
    note : str
        Why that method, what was completed or split off, and any warning
        (sensitivity, near-uncontrollability, accuracy).
    eigenvector_condition : float
        Condition number of the closed-loop eigenvector matrix (inf when defective).
        Large values mean the poles move a lot when the plant differs from its model.
    fixed_poles : numpy.ndarray of complex
        Uncontrollable poles that stayed where they are (in canonical order).
    controllability_matrix_condition : float
        Condition number of the controllability matrix of the part that was
        placed, when a single-input method was considered; nan otherwise.
    """

    gain: np.ndarray
    requested: np.ndarray
    achieved: np.ndarray
    errors: np.ndarray
    worst_error: float
    relative_error: float
    accurate: bool
    error_tolerances: np.ndarray
    method: str
    note: str
    eigenvector_condition: float
    fixed_poles: np.ndarray
    controllability_matrix_condition: float


class _MethodFailed(Exception):
    """A candidate method could not produce a gain (internal)."""


# -- targets -----------------------------------------------------------------------------------


def _prepare_targets(targets, n: int, complete_conjugates: bool) -> tuple[np.ndarray, list[str]]:
    values = _as_pole_array(targets, "the target poles", PlacementError)
    for position, value in enumerate(values):
        if not np.isfinite(value):
            raise PlacementError(
                f"target {position + 1} ({value.real if value.imag == 0 else value}) is not a finite number; "
                "every target pole must be finite"
            )
    notes = []
    cleaned, unpaired = _pair_conjugates(values, _default_conjugate_tolerance(values))
    if unpaired.size:
        lonely = cleaned[unpaired]
        if not complete_conjugates:
            pole = lonely[0]
            raise PlacementError(
                f"pole {_format_pole(pole)} has no conjugate partner {_format_pole(np.conj(pole))} among the targets; "
                "the poles of a real plant come in conjugate pairs: add the partner or pass complete_conjugates=True"
            )
        cleaned = np.concatenate([cleaned, np.conj(lonely)])
        notes.append(f"Added the missing conjugate(s) {_format_poles(np.conj(lonely))} to the targets.")
    if cleaned.size != n:
        after = " (after adding missing conjugates)" if unpaired.size else ""
        raise PlacementError(
            f"{cleaned.size} target poles were given{after} but the plant has {n} states; give exactly {n} poles"
        )
    return sort_poles(cleaned), notes


def _multiplicities(values: np.ndarray) -> np.ndarray:
    """How many of ``values`` equal each value (to rounding)."""
    if values.size == 0:
        return np.zeros(0, dtype=int)
    magnitude = np.maximum(np.abs(values)[:, None], np.abs(values)[None, :])
    same = np.abs(values[:, None] - values[None, :]) <= 8.0 * _EPS * magnitude
    return same.sum(axis=1)


def _repeated_values(values: np.ndarray) -> list[tuple[complex, int]]:
    """Distinct repeated values with their counts (upper half-plane member for pairs)."""
    counts = _multiplicities(values)
    seen: list[complex] = []
    result = []
    for value, count in zip(values, counts):
        if count < 2 or value.imag < 0:
            continue
        if any(abs(value - other) <= 8.0 * _EPS * max(abs(value), abs(other)) for other in seen):
            continue
        seen.append(complex(value))
        result.append((complex(value), int(count)))
    return result


def _check_input_structure(targets: np.ndarray, block_sizes: tuple[int, ...]) -> None:
    """Refuse repeated targets that no non-defective closed loop of this plant can have.

    The staircase block sizes r₁ ≥ r₂ ≥ … give the controllability indices
    κ_j = #{i : r_i ≥ j} (how many integrations separate input j from the states it
    reaches last). A closed loop without Jordan blocks whose poles have
    multiplicities c has invariant polynomials of degrees d_j = number of distinct
    poles repeated at least j times, and by Rosenbrock's theorem such a closed loop
    is reachable by state feedback only if d₁ + … + d_k ≥ κ₁ + … + κ_k for every k.
    (k = m is the rule "no pole more often than there are inputs", checked before.)
    """
    indices = [sum(1 for size in block_sizes if size >= j) for j in range(1, (block_sizes[0] if block_sizes else 0) + 1)]
    counts = _multiplicities(targets)
    distinct_counts = []
    for value, count in zip(targets, counts):
        if not any(abs(value - other) <= 8.0 * _EPS * max(abs(value), abs(other)) for other, _ in distinct_counts):
            distinct_counts.append((value, int(count)))
    degrees = [sum(1 for _, count in distinct_counts if count >= j) for j in range(1, len(indices) + 1)]
    for k in range(1, len(indices) + 1):
        if sum(degrees[:k]) < sum(indices[:k]):
            most = max(distinct_counts, key=lambda item: item[1])
            if k == 1:
                detail = (
                    f"at least {indices[0]} of the targets must be different from each other, "
                    f"but only {degrees[0]} are"
                )
            else:
                detail = (
                    f"the numbers of distinct targets repeated at least 1, 2, … times {tuple(degrees)} must add up, "
                    f"term by term, to at least the running sums of the controllability indices {tuple(indices)}"
                )
            raise PlacementError(
                f"the targets repeat poles more than this plant's inputs allow without a Jordan block "
                f"(controllability indices {tuple(indices)}, Rosenbrock's theorem): {detail}. Move some copies of "
                f"pole {_format_pole(most[0])} (requested {most[1]} times) apart"
            )


# -- characteristic polynomial applied to a row vector ------------------------------------------


def _apply_target_polynomial(row: np.ndarray, A: np.ndarray, targets: np.ndarray, divisors=None) -> np.ndarray:
    """row · φ(A) for φ(s) = ∏(s − λ) over the targets, one real factor at a time.

    Conjugate pairs enter as real quadratics A² − 2Re(λ)A + |λ|²I so that every
    product is real. Products are taken row-vector times matrix (O(n²) each)
    instead of forming φ(A). When ``divisors`` is given, the row is divided by
    the next divisor after each degree, which keeps the intermediate numbers on
    the scale of the result (the divisions commute with the factors).
    """
    out = np.array(row, dtype=float)
    pending = list(divisors) if divisors is not None else []
    upper_or_real = [p for p in targets if p.imag >= 0.0]
    for pole in upper_or_real:
        if pole.imag == 0.0:
            out = out @ A - pole.real * out
            degree = 1
        else:
            times_A = out @ A
            out = times_A @ A - 2.0 * pole.real * times_A + (pole.real**2 + pole.imag**2) * out
            degree = 2
        for _ in range(degree):
            if pending:
                out = out / pending.pop(0)
    return out


def _ackermann_gain(A: np.ndarray, b: np.ndarray, targets: np.ndarray) -> np.ndarray:
    """K = e_nᵀ 𝒞⁻¹ φ(A) (Ackermann's formula), for one input column b."""
    n = A.shape[0]
    reach = controllability_matrix(A, b)
    last = np.zeros(n)
    last[-1] = 1.0
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("error", scipy.linalg.LinAlgWarning)
            last_row_of_inverse = scipy.linalg.solve(reach.T, last)
    except (np.linalg.LinAlgError, scipy.linalg.LinAlgWarning, ValueError) as error:
        raise _MethodFailed(f"the controllability matrix is numerically singular ({error})") from None
    return _apply_target_polynomial(last_row_of_inverse, A, targets).reshape(1, n)


def _hessenberg_gain(A: np.ndarray, b: np.ndarray, targets: np.ndarray) -> np.ndarray:
    """Ackermann's formula in controller-Hessenberg coordinates.

    With an orthogonal Q giving H = QᵀAQ upper Hessenberg and Qᵀb = β e₁, the
    controllability matrix of (H, βe₁) is upper triangular with last diagonal
    entry β·h₂₁·h₃₂⋯h_{n,n−1}, so e_nᵀ𝒞_H⁻¹ = e_nᵀ / (β ∏ h_{i+1,i}) and
    K = e_nᵀ φ(H) Qᵀ / (β ∏ h_{i+1,i}), without forming or inverting 𝒞.
    """
    n = A.shape[0]
    form = controllability_staircase(A, b)
    if form.controllable_dimension < n:
        raise _MethodFailed("the staircase reduction found this single-input pair not fully controllable")
    H = form.A
    divisors = [form.B[0, 0]] + list(np.diag(H, -1))
    last = np.zeros(n)
    last[-1] = 1.0
    row = _apply_target_polynomial(last, H, targets, divisors)
    return (row @ form.transform.T).reshape(1, n)


def _scipy_gain(A: np.ndarray, B: np.ndarray, targets: np.ndarray, method: str) -> tuple[np.ndarray, list[str]]:
    notes = []
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            result = scipy.signal.place_poles(A, B, targets, method=method)
        except (ValueError, np.linalg.LinAlgError) as error:
            raise _MethodFailed(str(error).replace("\n", " ")) from None
    for warning in caught:
        if "Convergence" in str(warning.message):
            notes.append(
                f"scipy's {method} iteration stopped before its convergence test was met "
                "(the eigenvector conditioning may not be the best possible)."
            )
    return np.asarray(result.gain_matrix, dtype=float), notes


# -- accuracy check ------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class _Check:
    gain: np.ndarray
    achieved: np.ndarray
    errors: np.ndarray
    tolerances: np.ndarray
    ratio: float  # max(errors / tolerances); ≤ 1 passes
    report: object


def _check(A: np.ndarray, B: np.ndarray, K: np.ndarray, targets: np.ndarray, sample_time=None) -> _Check:
    """Recompute eig(A − BK), pair with targets, compare with condition-scaled tolerances."""
    if not np.all(np.isfinite(K)):
        raise _MethodFailed("the computed gain is not finite (the problem is too badly conditioned)")
    report = analyze_state_matrix(A - B @ K, sample_time)
    index = _matching_indices(targets, report.poles)
    achieved = report.poles[index]
    errors = np.abs(targets - achieved)
    n = targets.size
    scale = float(np.linalg.norm(A, 2) + np.linalg.norm(B, 2) * np.linalg.norm(K, 2))
    base = _ACCURACY_FACTOR * n * _EPS
    counts = _multiplicities(targets)
    condition = report.pole_condition_numbers[index]
    simple = base * scale * condition
    clustered = scale * base ** (1.0 / counts)
    # no pole can deserve more room than an n-fold Jordan block would need
    tolerances = np.minimum(np.where(counts == 1, simple, clustered), scale * base ** (1.0 / n))
    with np.errstate(divide="ignore", invalid="ignore"):
        ratios = np.where(errors == 0.0, 0.0, errors / tolerances)
    return _Check(K, achieved, errors, tolerances, float(np.max(ratios)) if n else 0.0, report)


# -- single input and several inputs -----------------------------------------------------------


def _controllability_condition(A: np.ndarray, b: np.ndarray) -> float:
    with np.errstate(over="ignore", invalid="ignore"):
        reach = controllability_matrix(A, b)
    if not np.all(np.isfinite(reach)):
        return math.inf
    singular = np.linalg.svd(reach, compute_uv=False)
    if singular[-1] == 0.0:
        return math.inf
    return float(singular[0] / singular[-1])


def _place_single_input(A, b, targets, method, notes) -> tuple[np.ndarray, str, float]:
    """Gain (1×k) for one input column b; appends explanations to ``notes``."""
    condition = _controllability_condition(A, b)
    repeated = _repeated_values(targets)
    limit_text = f"{ACKERMANN_CONDITION_LIMIT:.3g} = 1/√eps"
    attempts: list[tuple[str, _Check]] = []
    failures: list[str] = []

    def attempt(name, compute):
        try:
            checked = _check(A, b, compute(), targets)
        except _MethodFailed as error:
            failures.append(f"{name} failed: {error}.")
            return None
        attempts.append((name, checked))
        return checked

    if method == "ackermann":
        result = attempt(_ACKERMANN, lambda: _ackermann_gain(A, b, targets))
        if result is None:
            raise PlacementError(
                f"Ackermann's formula cannot be used here: {failures[-1]} "
                "Use method='auto' or 'hessenberg', which do not invert the controllability matrix."
            )
        if condition > ACKERMANN_CONDITION_LIMIT:
            notes.append(
                f"Ackermann's formula was used as asked although the controllability matrix is ill-conditioned "
                f"(condition number {condition:.3g} > {limit_text}); method='auto' would avoid it."
            )
        else:
            notes.append(f"Ackermann's formula was used as asked (controllability matrix condition number {condition:.3g}).")
    elif method == "hessenberg":
        if attempt(_HESSENBERG, lambda: _hessenberg_gain(A, b, targets)) is None:
            raise PlacementError(f"the single-input Hessenberg method cannot be used here: {failures[-1]}")
        notes.append("The single-input Hessenberg method was used as asked.")
    elif method == "robust":
        if repeated:
            value, count = repeated[0]
            raise PlacementError(
                f"pole {_format_pole(value)} is requested {count} times, but with one input the eigenvector method "
                "cannot place a repeated pole (the closed loop needs a Jordan block there); "
                "use method='auto', 'ackermann' or 'hessenberg', or move the copies apart"
            )
        if attempt(_EIGENVECTOR_ONE_INPUT, lambda: _scipy_gain(A, b, targets, "YT")[0]) is None:
            raise PlacementError(f"the eigenvector method could not place these poles: {failures[-1]}")
        notes.append("With one input the eigenvectors are fixed by the targets; scipy's eigenvector method was used as asked.")
    else:  # auto
        if condition <= ACKERMANN_CONDITION_LIMIT:
            first = attempt(_ACKERMANN, lambda: _ackermann_gain(A, b, targets))
            if first is not None and first.ratio <= 1.0:
                notes.append(
                    f"One input and a well-conditioned controllability matrix (condition number {condition:.3g} "
                    f"≤ {limit_text}), so Ackermann's formula was used."
                )
            elif first is not None:
                notes.append(
                    f"Ackermann's formula missed the targets by {np.max(first.errors):.3g}, more than the accuracy "
                    "check allows, so a numerically robust single-input method was tried."
                )
        else:
            notes.append(
                f"The controllability matrix is ill-conditioned (condition number {condition:.3g} > {limit_text}), "
                "so Ackermann's formula was not used."
            )
        if not (attempts and attempts[0][1].ratio <= 1.0):
            second = attempt(_HESSENBERG, lambda: _hessenberg_gain(A, b, targets))
            if (second is None or second.ratio > 1.0) and not repeated:
                attempt(_EIGENVECTOR_ONE_INPUT, lambda: _scipy_gain(A, b, targets, "YT")[0])
        if not attempts:
            raise PlacementError("no single-input method could place these poles: " + " ".join(failures))
    notes.extend(failures)
    passing = [(name, checked) for name, checked in attempts if checked.ratio <= 1.0]
    name, chosen = passing[0] if passing else min(attempts, key=lambda item: item[1].ratio)
    if method == "auto" and name != _ACKERMANN:
        notes.append(f"Used the {name}.")
    for value, count in repeated:
        notes.append(
            f"Pole {_format_pole(value)} is requested {count} times; with one input the closed loop has a Jordan "
            f"block there, so those poles are sensitive: a relative change ε in K or the plant moves them by about "
            f"ε^(1/{count})."
        )
    return chosen.gain, name, condition


def _place_several_inputs(A, B, targets, notes) -> tuple[np.ndarray, str]:
    attempts: list[tuple[str, _Check, list[str]]] = []
    failures: list[str] = []
    for scipy_method, name in (("YT", _ROBUST_YT), ("KNV0", _ROBUST_KNV0)):
        if attempts and attempts[-1][1].ratio <= 1.0:
            break
        if scipy_method == "KNV0" and np.any(targets.imag != 0.0):
            if attempts:
                break
            failures.append("The Kautsky–Nichols–Van Dooren method 0 fallback takes real poles only.")
            break
        try:
            gain, extra = _scipy_gain(A, B, targets, scipy_method)
            attempts.append((name, _check(A, B, gain, targets), extra))
        except _MethodFailed as error:
            failures.append(f"scipy place_poles ({scipy_method}) failed: {error}.")
    if not attempts:
        raise PlacementError(
            "the robust eigenvector method could not place these poles. " + " ".join(failures)
            + " Try targets further apart or further from the open-loop poles."
        )
    passing = [item for item in attempts if item[1].ratio <= 1.0]
    name, chosen, extra = passing[0] if passing else min(attempts, key=lambda item: item[1].ratio)
    notes.append(
        "Several inputs: the robust eigenvector method chooses, among the many gains giving these poles, "
        "one whose closed-loop eigenvectors are well conditioned."
    )
    notes.extend(failures)
    if name == _ROBUST_KNV0 and len(attempts) > 1:
        notes.append(
            f"The Tits–Yang result missed the targets by {np.max(attempts[0][1].errors):.3g}, more than the "
            "accuracy check allows, so method 0 of Kautsky, Nichols & Van Dooren was used."
        )
    notes.extend(extra)
    return chosen.gain, name


# -- entry point -----------------------------------------------------------------------------------


def assign_poles(plant: Plant, targets, *, method: str = "auto", complete_conjugates: bool = True) -> PlacementResult:
    """Compute K so that the poles of A − BK are the target poles.

    Parameters
    ----------
    plant : Plant
        Continuous plant (targets are s values, rad/s) or sampled plant (targets
        are z values; any finite value is accepted, the caller judges sense).
    targets : array_like of complex, shape (n,)
        Desired closed-loop poles, one per state. Complex poles come in conjugate pairs.
    method : {"auto", "ackermann", "hessenberg", "robust"}
        "auto" (default): one input → Ackermann's formula if the controllability
        matrix is well conditioned (condition number ≤ ``ACKERMANN_CONDITION_LIMIT``)
        and its result passes the accuracy check, otherwise the single-input
        Hessenberg method, then scipy's eigenvector method; several inputs → the
        robust eigenvector method (Tits–Yang update, falling back to method 0 of
        Kautsky, Nichols & Van Dooren for real targets). "ackermann" and
        "hessenberg" need one input (or a B of rank one); "robust" forces the
        eigenvector method.
    complete_conjugates : bool
        Add the missing conjugate of a complex target (and say so in ``note``);
        when False such a target is refused.

    Returns
    -------
    PlacementResult

    Raises
    ------
    PlacementError
        For a wrong number of targets, a non-finite target, a complex target
        without its conjugate (when not completed), a target set that leaves out
        an uncontrollable pole, a pole repeated more often than the plant has
        independent inputs or than its controllability indices allow without a
        Jordan block (several inputs; Rosenbrock's theorem), an unknown method,
        or when no method can compute a gain.

    Notes
    -----
    A gain is a design on a linear model: validate it on the real system with
    safe limits and emergency stops, following local codes, functional-safety
    standards and licensed practice.

    Examples
    --------
    >>> plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]])
    >>> result = assign_poles(plant, [-1.0 + 1.0j, -1.0 - 1.0j])
    >>> np.round(result.gain, 12).tolist(), result.method
    ([[2.0, 2.0]], "Ackermann's formula")
    """
    if not isinstance(plant, Plant):
        raise PlacementError(f"assign_poles needs a Plant, got {type(plant).__name__}")
    if method not in PLACEMENT_METHODS:
        raise PlacementError(f"unknown placement method {method!r}; choose one of {', '.join(PLACEMENT_METHODS)}")
    check_analysable(plant, error=PlacementError)
    A, B = plant.A, plant.B
    n, m = plant.state_count, plant.input_count
    requested, notes = _prepare_targets(targets, n, complete_conjugates)

    # split off the poles that no feedback can move
    form = controllability_staircase(A, B)
    k = form.controllable_dimension
    norm_A = float(np.linalg.norm(A, 2))
    fixed = np.zeros(0, dtype=complex)
    fixed_slots = np.zeros(0, dtype=int)
    fixed_tolerances = np.zeros(0)
    if k < n:
        fixed = sort_poles(np.linalg.eigvals(form.A[k:, k:]))
        fixed_slots = _matching_indices(fixed, requested)
        fixed_tolerances = FIXED_POLE_TOLERANCE * np.maximum(norm_A, np.abs(fixed))
        for pole, slot, allowed in zip(fixed, fixed_slots, fixed_tolerances):
            if abs(requested[slot] - pole) > allowed:
                raise PlacementError(
                    f"pole {_format_pole(pole)} cannot be moved by feedback (uncontrollable); include it among the "
                    f"targets (within {allowed:.2g}) or change the plant so that an input reaches this mode. "
                    f"Fixed poles of this plant: {_format_poles(fixed)}"
                )
        if k:
            notes.append(
                f"The plant is not fully controllable: pole(s) {_format_poles(fixed)} stay where they are; "
                f"the other {k} pole(s) were placed on the controllable part."
            )
        else:
            notes.append("No input reaches any state: every pole stays where it is, so K = 0.")
    free = np.delete(requested, fixed_slots)
    _, lonely = _pair_conjugates(free, _default_conjugate_tolerance(free)) if free.size else (None, np.zeros(0))
    if lonely.size:
        raise PlacementError(
            f"after setting aside the fixed poles {_format_poles(fixed)}, target {_format_pole(free[lonely[0]])} "
            "is left without its conjugate; give the fixed poles exactly and the other targets in conjugate pairs"
        )

    method_name = "no feedback (every pole is uncontrollable)"
    controllability_condition = math.nan
    if k == 0:
        gain = np.zeros((m, n))
    else:
        if k == n:
            A_part, B_part, transform = A, B, None
        else:
            A_part, B_part, transform = form.A[:k, :k], form.B[:k, :], form.transform
        _, singular, right = np.linalg.svd(B_part, full_matrices=False)
        rank = int(np.sum(singular > rank_tolerance(B_part)))
        if rank < m:
            directions = right[:rank].T  # m × rank, orthonormal
            B_used = B_part @ directions
            notes.append(
                f"B has rank {rank}, so its {m} columns act as {rank} independent input direction(s); "
                "the gain uses those directions only."
            )
        else:
            directions, B_used = None, B_part
        if rank > 1:
            if method in ("ackermann", "hessenberg"):
                raise PlacementError(
                    f"method {method!r} needs a single input, but this plant has {rank} independent inputs; "
                    "use method='auto' or 'robust'"
                )
            counts = _multiplicities(free)
            worst = int(np.argmax(counts))
            if counts[worst] > rank:
                inputs = f"{rank} inputs" if rank == m else f"{rank} independent inputs (B has rank {rank})"
                # The true limit (PBH): A − BK − λI has rank ≥ n − rank(B), so λ has at most rank(B)
                # independent eigenvectors (geometric multiplicity); the algebraic multiplicity can
                # reach n, but only with a Jordan block, which these multi-input methods do not build.
                raise PlacementError(
                    f"pole {_format_pole(free[worst])} is requested {counts[worst]} times but the plant has only "
                    f"{inputs}: a pole may repeat up to {n} times, but it then has at most {rank} independent "
                    f"eigenvectors, so {counts[worst]} copies need a Jordan block, which the multi-input "
                    "methods do not build (and which would make the pole very sensitive to any error); "
                    "move some copies apart"
                )
            _check_input_structure(free, form.block_sizes)
            part_gain, method_name = _place_several_inputs(A_part, B_used, free, notes)
        else:
            part_gain, method_name, controllability_condition = _place_single_input(A_part, B_used, free, method, notes)
        if directions is not None:
            part_gain = directions @ part_gain
        if transform is None:
            gain = part_gain
        else:
            gain = np.hstack([part_gain, np.zeros((m, n - k))]) @ transform.T

    # placement of the controllable part, never a very weakly controllable one, without a warning
    if 0 < k:
        part_A = A if k == n else form.A[:k, :k]
        part_B = B if k == n else form.B[:k, :]
        margins = _pbh_margins(part_A, part_B, np.linalg.eigvals(part_A), norm_A, float(np.linalg.norm(B, 2)))
        if margins.size and np.min(margins) < WEAK_STRUCTURE_MARGIN:
            notes.append(
                f"The plant is nearly uncontrollable (relative PBH margin {np.min(margins):.2g}): "
                "moving its weakly reached poles takes large gains, and the closed loop is sensitive to model errors."
            )

    gain = gain + 0.0  # no negative zeros in what the engineer reads
    final = _check(A, B, gain, requested, plant.sample_time)
    tolerances = final.tolerances.copy()
    tolerances[fixed_slots] += fixed_tolerances
    accurate = bool(np.all(final.errors <= tolerances))
    worst_error = float(np.max(final.errors))
    # the size of the poles the engineer works with: the plant's own and the targets'
    scale = max(norm_A, float(np.max(np.abs(requested))))
    relative_error = worst_error / scale if scale > 0.0 else worst_error
    if accurate and relative_error > _SENSITIVE_RELATIVE_ERROR:
        notes.append(
            f"The achieved poles differ from the targets by up to {worst_error:.3g} (relative {relative_error:.2g}) "
            "although the gain is as accurate as this problem allows: the closed loop is very sensitive "
            f"(eigenvector condition number {final.report.eigenvector_condition:.3g}), so tiny changes of the plant "
            "or of K move its poles. Consider fewer coinciding targets, targets nearer the open-loop poles, "
            "or more inputs."
        )
    if not accurate:
        notes.append(
            f"Warning: the achieved poles miss the targets by up to {worst_error:.3g}, more than the accuracy check "
            "allows; the problem is badly conditioned, so check this gain carefully (or choose other targets)."
        )
    return PlacementResult(
        gain=read_only(gain),
        requested=read_only(requested),
        achieved=read_only(final.achieved),
        errors=read_only(final.errors),
        worst_error=worst_error,
        relative_error=float(relative_error),
        accurate=accurate,
        error_tolerances=read_only(tolerances),
        method=method_name,
        note=" ".join(notes),
        eigenvector_condition=float(final.report.eigenvector_condition),
        fixed_poles=read_only(fixed),
        controllability_matrix_condition=float(controllability_condition),
    )
