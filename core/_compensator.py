"""The observer-based compensator as a linear system of its own, and its loop with the plant.

The compensator reads the measured outputs y (and the reference r where the
design has a prefilter N or integral action) and drives the actuators:

    u = −K x̂ + N r − Ki ζ,   ζ' = r − y_t   (sampled: ζ[k+1] = ζ[k] + T (r[k] − y_t[k]))

where x̂ comes from the estimator, written for every form as

    ξ⁺ = F ξ + G_y y + G_u u,    x̂ = H ξ + J y        (ξ⁺ = ξ' or ξ[k+1])

(:class:`EstimatorRealization`: full-order and prediction H = I, J = 0; current
and reduced-order use y at once, J ≠ 0). Substituting u gives the compensator
(:class:`Compensator`), c = (ξ, ζ):

    c⁺ = A_c c + B_y y + B_r r,    u = C_c c + D_y y + D_r r.

Closed with the plant x⁺ = A x + B u, y = C x + D u, the 2n (+ integrators) states
(x, c) have the poles eig(A − BK) ∪ eig(estimator error matrix) (with integral
action, eig of the integrator-extended A − BK): the *separation principle*
(Luenberger 1964). :func:`compensator_closed_loop` computes the poles of the
interconnection directly and reports how far they are from that union, so the
principle is checked on every design, not assumed.

Margins (:func:`compensator_margins`) break the loop at the plant input: the
plant receives a test input u, the compensator answers with its command; the
loop is L(s) = −(C_c, D_y) applied to (plant + compensator states) — a strictly
proper system (D_y D = 0 for every form allowed), so the margin machinery of
:func:`gainboard.core.loop_margins` applies to it unchanged. These margins are
*not* those of full-state feedback with the same K and can be far smaller
(Doyle, "Guaranteed margins for LQG regulators: there are none", IEEE TAC 23(4),
1978).

A compensator computed here is a design on a linear model: validate it on the
real system with safe limits and emergency stops, under local codes,
functional-safety standards and licensed engineering practice.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ._arrays import read_only
from ._closed_loop import ClosedLoopReport, _matching_indices, analyze_state_matrix
from ._errors import EstimatorError, GainError
from ._estimator import check_estimator_form, check_estimator_gain, estimator_error_matrix
from ._integral_action import augment_with_integral_action
from ._margins import LoopMargins, loop_margins
from ._plant import Plant
from ._reduced_estimator import reduced_order_coordinates

__all__ = [
    "EstimatorRealization",
    "estimator_realization",
    "Compensator",
    "observer_based_compensator",
    "CompensatorClosedLoop",
    "compensator_closed_loop",
    "compensator_margins",
    "MarginComparison",
    "compare_margins",
]

_EPS = np.finfo(float).eps


@dataclass(frozen=True, eq=False)
class EstimatorRealization:
    """An estimator of any form as ξ⁺ = F ξ + G_y y + G_u u, x̂ = H ξ + J y.

    Attributes
    ----------
    form : str
        The estimator form.
    gain : numpy.ndarray
        L (or L_r for the reduced-order form).
    F, G_y, G_u, H, J : numpy.ndarray
        Shapes (k, k), (k, p), (k, m), (n, k), (n, p) with k = n (full-order,
        prediction, current) or n − p (reduced-order).
    start_from_estimate, start_from_state : numpy.ndarray
        ξ at the start from a prior estimate x̂₀ and the true state x₀:
        ξ₀ = start_from_estimate x̂₀ + start_from_state x₀ (the reduced-order
        estimator reads the measured part from y₀ = C x₀).
    state_names : tuple of str
        Names of ξ ("x̂ of <state>", "x̄ of <state>" or "w of <combination>").
    """

    form: str
    gain: np.ndarray
    F: np.ndarray
    G_y: np.ndarray
    G_u: np.ndarray
    H: np.ndarray
    J: np.ndarray
    start_from_estimate: np.ndarray
    start_from_state: np.ndarray
    state_names: tuple[str, ...]


def estimator_realization(plant: Plant, gain, form: str | None = None) -> EstimatorRealization:
    """The estimator of the given form and gain in the common form ξ⁺ = Fξ + G_y y + G_u u, x̂ = Hξ + Jy.

    full-order / prediction: ξ = x̂, F = A − LC, G_y = L, G_u = B − LD, H = I, J = 0.
    current: ξ = x̄ (the prediction), F = A(I − LC), G_y = AL, G_u = B, H = I − LC, J = L.
    reduced-order: ξ = w, F = Ā_bb − L_r Ā_ab, G_y = F L_r + Ā_ba − L_r Ā_aa,
    G_u = B̄_b − L_r B̄_a, H = T⁻¹[0; I], J = T⁻¹[I; L_r].

    Examples
    --------
    >>> plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]])
    >>> realization = estimator_realization(plant, [[3.0], [2.0]])
    >>> realization.F.tolist(), realization.J.tolist()
    ([[-3.0, 1.0], [-2.0, 0.0]], [[0.0], [0.0]])
    """
    form = check_estimator_form(plant, form)
    L = check_estimator_gain(plant, gain, form)
    A, B, C, D = (np.array(m) for m in (plant.A, plant.B, plant.C, plant.D))
    n, p = plant.state_count, plant.output_count
    names = plant.state_names
    if form in ("full-order", "prediction"):
        F, G_y, G_u, H, J = A - L @ C, L, B - L @ D, np.eye(n), np.zeros((n, p))
        start_estimate, start_state = np.eye(n), np.zeros((n, n))
        state_names = tuple(f"estimate of {name}" for name in names)
    elif form == "current":
        corrected = np.eye(n) - L @ C
        F, G_y, G_u, H, J = A @ corrected, A @ L, B, corrected, L
        start_estimate, start_state = np.eye(n), np.zeros((n, n))
        state_names = tuple(f"prediction of {name}" for name in names)
    else:
        coordinates = reduced_order_coordinates(plant)
        k = n - p
        F = coordinates.A_bb - L @ coordinates.A_ab
        G_y = F @ L + coordinates.A_ba - L @ coordinates.A_aa
        G_u = coordinates.B_b - L @ coordinates.B_a
        H = coordinates.inverse[:, p:]
        J = coordinates.inverse[:, :p] + coordinates.inverse[:, p:] @ L
        M = coordinates.transform[p:]
        start_estimate, start_state = M, -L @ C  # w₀ = ẑ₀ − L_r y₀ with ẑ₀ = M x̂₀, y₀ = C x₀
        state_names = tuple(f"estimator state of {name}" for name in coordinates.names[:k])
    return EstimatorRealization(
        form=form, gain=read_only(L),
        F=read_only(F), G_y=read_only(G_y), G_u=read_only(G_u), H=read_only(H), J=read_only(J),
        start_from_estimate=read_only(start_estimate), start_from_state=read_only(start_state),
        state_names=state_names,
    )


@dataclass(frozen=True, eq=False)
class Compensator:
    """The observer-based compensator: c⁺ = A c + B_y y + B_r r, u = C c + D_y y + D_r r.

    Attributes
    ----------
    A, B_measured, B_reference, C, D_measured, D_reference : numpy.ndarray
        The compensator's state-space matrices; shapes (q, q), (q, p), (q, t), (m, q),
        (m, p), (m, t), where q = estimator states + integrators and t is the number
        of references (the tracked outputs when N or Ki is given, else 0).
    sample_time : float or None
        The plant's sample time (the compensator runs at the same rate).
    state_names : tuple of str
        Names of c: the estimator states, then "∫ error of <output>" per integrator.
    estimator : EstimatorRealization
        The estimator inside.
    state_gain : numpy.ndarray, shape (m, n)
        K.
    prefilter : numpy.ndarray or None, shape (m, t)
        N.
    integral_gain : numpy.ndarray or None, shape (m, t)
        Ki.
    tracked_outputs : tuple of int
        The outputs r refers to (and that the integrators integrate).
    """

    A: np.ndarray
    B_measured: np.ndarray
    B_reference: np.ndarray
    C: np.ndarray
    D_measured: np.ndarray
    D_reference: np.ndarray
    sample_time: float | None
    state_names: tuple[str, ...]
    estimator: EstimatorRealization
    state_gain: np.ndarray
    prefilter: np.ndarray | None
    integral_gain: np.ndarray | None
    tracked_outputs: tuple[int, ...]

    @property
    def state_count(self) -> int:
        return self.A.shape[0]

    @property
    def integrator_count(self) -> int:
        return 0 if self.integral_gain is None else self.integral_gain.shape[1]


def _reference_gain(plant: Plant, value, what: str) -> np.ndarray | None:
    if value is None:
        return None
    m, t = plant.input_count, len(plant.tracked_outputs)
    try:
        matrix = np.array(value, dtype=float)
    except (TypeError, ValueError):
        raise GainError(f"{what} must be an {m}×{t} matrix of numbers (inputs × tracked outputs), got {value!r}") from None
    if matrix.ndim == 1 and m == 1 and matrix.size == t:
        matrix = matrix.reshape(1, t)
    if matrix.shape != (m, t) or not np.all(np.isfinite(matrix)):
        found = "×".join(str(s) for s in matrix.shape) or "a single number"
        raise GainError(f"{what} is {found} but must be {m}×{t} finite numbers (one row per input, one column per "
                        "tracked output)")
    return matrix


def observer_based_compensator(plant: Plant, state_gain, estimator_gain, *, form: str | None = None,
                               prefilter=None, integral_gain=None) -> Compensator:
    """Assemble the compensator u = −K x̂ (+ N r − Ki ζ) with the estimator of the given form.

    Parameters
    ----------
    plant : Plant
    state_gain : array_like, shape (m, n)
        K.
    estimator_gain : array_like, shape (n, p) or (n − p, p)
        L of the chosen form.
    form : str, optional
        Estimator form (default: "full-order" continuous, "prediction" sampled).
    prefilter : array_like, shape (m, t), optional
        N on the references of the tracked outputs.
    integral_gain : array_like, shape (m, t), optional
        Ki on the integrals of the tracking errors of the tracked outputs.

    Returns
    -------
    Compensator

    Raises
    ------
    GainError, EstimatorError
        For a K, N, Ki or L of the wrong shape, or a form that does not suit the plant.

    Examples
    --------
    >>> plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]])
    >>> compensator = observer_based_compensator(plant, [[1.0, 2.0]], [[3.0], [2.0]])
    >>> compensator.A.tolist(), compensator.B_measured.tolist(), compensator.C.tolist()
    ([[-3.0, 1.0], [-3.0, -2.0]], [[3.0], [2.0]], [[-1.0, -2.0]])
    """
    K = plant.check_gain(state_gain)
    realization = estimator_realization(plant, estimator_gain, form)
    N = _reference_gain(plant, prefilter, "the prefilter N")
    Ki = _reference_gain(plant, integral_gain, "the integral gain Ki")
    m, p = plant.input_count, plant.output_count
    tracked = tuple(plant.tracked_outputs)
    t = len(tracked) if (N is not None or Ki is not None) else 0
    q = Ki.shape[1] if Ki is not None else 0
    k = realization.F.shape[0]
    T = plant.sample_time
    F, G_y, G_u, H, J = realization.F, realization.G_y, realization.G_u, realization.H, realization.J

    # u = −K x̂ + N r − Ki ζ with x̂ = H ξ + J y
    u_state = -K @ H
    u_integral = -Ki if Ki is not None else np.zeros((m, 0))
    u_measured = -K @ J
    u_reference = N if N is not None else np.zeros((m, t))
    selector = np.eye(p)[list(tracked)] if q else np.zeros((0, p))
    step = 1.0 if T is None else T
    integrator_self = np.zeros((q, q)) if T is None else np.eye(q)

    A_c = np.block([[F + G_u @ u_state, G_u @ u_integral], [np.zeros((q, k)), integrator_self]])
    B_y = np.vstack([G_y + G_u @ u_measured, -step * selector])
    B_r = np.vstack([G_u @ u_reference, step * np.eye(q, t)])
    C_c = np.hstack([u_state, u_integral])
    names = realization.state_names + tuple(f"∫ error of {plant.output_names[i]}" for i in tracked[:q])
    return Compensator(
        A=read_only(A_c + 0.0), B_measured=read_only(B_y + 0.0), B_reference=read_only(B_r + 0.0),
        C=read_only(C_c + 0.0), D_measured=read_only(u_measured + 0.0), D_reference=read_only(u_reference + 0.0),
        sample_time=T, state_names=names, estimator=realization, state_gain=read_only(K),
        prefilter=None if N is None else read_only(N), integral_gain=None if Ki is None else read_only(Ki),
        tracked_outputs=tracked,
    )


# -- the loop of plant and compensator ---------------------------------------------------------


@dataclass(frozen=True, eq=False)
class CompensatorClosedLoop:
    """Plant and compensator closed together; the separation principle checked.

    Attributes
    ----------
    matrix : numpy.ndarray, shape (n + q, n + q)
        State matrix of (x, c).
    reference_input : numpy.ndarray, shape (n + q, t)
        How r enters.
    disturbance_input : numpy.ndarray, shape (n + q, d)
        How the plant's disturbance enters (the plant states only).
    report : ClosedLoopReport
        Poles of the interconnection (2n + integrators of them), damping, stability.
    state_feedback_poles : numpy.ndarray of complex
        Poles of full-state feedback with the same K (integrator-extended when Ki is given).
    estimator_poles : numpy.ndarray of complex
        Poles of the estimation error.
    separation_error : float
        Largest distance between a pole of the interconnection and its partner in
        the union of the two sets above (optimal one-to-one pairing).
    separation_tolerance : float
        What that distance may be from rounding alone: 10³ × the first-order error
        estimates of the poles of both computations, plus a Jordan-block allowance for
        poles shared by the two sets.
    separation_holds : bool
        ``separation_error ≤ separation_tolerance``.
    """

    matrix: np.ndarray
    reference_input: np.ndarray
    disturbance_input: np.ndarray
    report: ClosedLoopReport
    state_feedback_poles: np.ndarray
    estimator_poles: np.ndarray
    separation_error: float
    separation_tolerance: float
    separation_holds: bool


def _interconnection(plant: Plant, compensator: Compensator) -> tuple[np.ndarray, np.ndarray]:
    """(matrix, reference input) of x⁺ = Ax + Bu, c⁺ = A_c c + B_y y + B_r r with u, y substituted."""
    A, B, C, D = (np.array(m) for m in (plant.A, plant.B, plant.C, plant.D))
    m = plant.input_count
    # u = C_c c + D_y (Cx + Du) + D_r r  ⇒  u = M (C_c c + D_y C x + D_r r), M = (I − D_y D)⁻¹
    loop_gain = np.eye(m) - compensator.D_measured @ D
    M = np.linalg.inv(loop_gain)
    u_x = M @ compensator.D_measured @ C
    u_c = M @ compensator.C
    u_r = M @ compensator.D_reference
    top = np.hstack([A + B @ u_x, B @ u_c])
    bottom = np.hstack([compensator.B_measured @ (C + D @ u_x), compensator.A + compensator.B_measured @ D @ u_c])
    reference = np.vstack([B @ u_r, compensator.B_reference + compensator.B_measured @ D @ u_r])
    return np.vstack([top, bottom]), reference


def _state_feedback_matrix(plant: Plant, compensator: Compensator) -> np.ndarray:
    K = np.array(compensator.state_gain)
    if compensator.integral_gain is None:
        return np.array(plant.A) - np.array(plant.B) @ K
    extended = augment_with_integral_action(plant, compensator.tracked_outputs[: compensator.integrator_count])
    return np.array(extended.A) - np.array(extended.B) @ np.hstack([K, compensator.integral_gain])


def _multiplicity_allowance(poles: np.ndarray, scale: float) -> np.ndarray:
    """Room for poles that coincide: a c-fold cluster splits by about (‖M‖ n eps)^(1/c)."""
    n = poles.size
    allowance = np.zeros(n)
    for i, pole in enumerate(poles):
        count = int(np.sum(np.abs(poles - pole) <= 1e-6 * max(abs(pole), scale)))
        if count > 1:
            allowance[i] = scale * (1e3 * n * _EPS) ** (1.0 / count)
    return allowance


def compensator_closed_loop(plant: Plant, compensator: Compensator) -> CompensatorClosedLoop:
    """The loop of plant and compensator, its poles, and the separation check.

    Examples
    --------
    >>> plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]])
    >>> compensator = observer_based_compensator(plant, [[2.0, 3.0]], [[7.0], [12.0]])
    >>> loop = compensator_closed_loop(plant, compensator)   # eig(A − BK) = {−1, −2}, eig(A − LC) = {−3, −4}
    >>> np.round(loop.report.poles, 9).tolist(), loop.separation_holds
    ([(-4+0j), (-3+0j), (-2+0j), (-1+0j)], True)
    """
    matrix, reference = _interconnection(plant, compensator)
    report = analyze_state_matrix(matrix, plant.sample_time)
    full_state = analyze_state_matrix(_state_feedback_matrix(plant, compensator), plant.sample_time)
    error = analyze_state_matrix(
        estimator_error_matrix(plant, compensator.estimator.gain, compensator.estimator.form), plant.sample_time
    )
    union = np.concatenate([full_state.poles, error.poles])
    union_estimates = np.concatenate([full_state.pole_error_estimates, error.pole_error_estimates])
    slots = _matching_indices(union, report.poles)
    distances = np.abs(report.poles[slots] - union)
    scale = float(np.linalg.norm(matrix, 2))
    allowance = _multiplicity_allowance(union, scale)
    tolerance = 1e3 * (report.pole_error_estimates[slots] + union_estimates) + allowance + 1e3 * union.size * _EPS * scale
    worst = int(np.argmax(distances / np.maximum(tolerance, np.finfo(float).tiny))) if union.size else 0
    d = plant.disturbance_matrix.shape[1]
    disturbance = np.vstack([np.array(plant.disturbance_matrix), np.zeros((compensator.state_count, d))])
    return CompensatorClosedLoop(
        matrix=read_only(matrix),
        reference_input=read_only(reference),
        disturbance_input=read_only(disturbance),
        report=report,
        state_feedback_poles=full_state.poles,
        estimator_poles=error.poles,
        separation_error=float(distances[worst]) if union.size else 0.0,
        separation_tolerance=float(tolerance[worst]) if union.size else 0.0,
        separation_holds=bool(np.all(distances <= tolerance)),
    )


# -- margins at the plant input ----------------------------------------------------------------


def _loop_at_plant_input(plant: Plant, compensator: Compensator) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(A_l, B_l, G_l) with the loop L = G_l (zI − A_l)⁻¹ B_l broken at the plant input.

    States (x, c): the plant driven by the test input u, the compensator driven by y = Cx + Du;
    the loop's output is minus the compensator's command, −(C_c c + D_y y) = G_l (x, c).
    """
    A, B, C, D = (np.array(m) for m in (plant.A, plant.B, plant.C, plant.D))
    feedthrough = compensator.D_measured @ D
    if np.any(np.abs(feedthrough) > 0.0):
        raise EstimatorError(
            "the loop at the plant input has a direct feedthrough (the compensator uses y at once and the plant "
            "has D ≠ 0), so its margins are not computed here; use the prediction or full-order estimator"
        )
    q = compensator.state_count
    A_loop = np.block([[A, np.zeros((A.shape[0], q))], [compensator.B_measured @ C, compensator.A]])
    B_loop = np.vstack([B, compensator.B_measured @ D])
    G_loop = -np.hstack([compensator.D_measured @ C, compensator.C])
    return A_loop, B_loop, G_loop


def compensator_margins(plant: Plant, compensator: Compensator) -> LoopMargins:
    """Gain, phase, delay and disk margins of the compensator loop, broken at the plant input.

    Per input (that loop broken, the others closed) and for all inputs at once
    (the disk margin), exactly as :func:`gainboard.core.loop_margins` reports them
    for full-state feedback — but for the loop the compensator really closes.

    Raises
    ------
    EstimatorError
        When the loop has a direct feedthrough (current or reduced-order estimator
        on a plant with D ≠ 0; those forms refuse such plants anyway).

    Examples
    --------
    >>> plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]])
    >>> compensator = observer_based_compensator(plant, [[2.0, 3.0]], [[7.0], [12.0]])
    >>> margins = compensator_margins(plant, compensator)   # full-state feedback: infinite gain margin
    >>> margins.stable_nominal, round(margins.gain_margin_increase, 6)
    (True, 6.04)
    """
    A_loop, B_loop, G_loop = _loop_at_plant_input(plant, compensator)
    loop_plant = Plant(A=A_loop, B=B_loop, sample_time=plant.sample_time, name=f"{plant.name} with its compensator",
                       input_names=plant.input_names, input_units=plant.input_units)
    margins = loop_margins(loop_plant, G_loop)
    prefix = ("Margins of the observer-based compensator, the loop broken at the plant input (the estimator keeps "
              "using the commanded input). ")
    return LoopMargins(**{**margins.__dict__, "note": prefix + margins.note})


@dataclass(frozen=True)
class MarginComparison:
    """The compensator's margins beside full-state feedback's, with a plain verdict.

    Attributes
    ----------
    much_smaller : bool
        Some compensator margin is much smaller than full-state feedback's (see ``reasons``).
    reasons : tuple of str
        Each margin that shrank much, in words.
    warning : str
        One plain sentence for the screen ("" when nothing shrank much).
    """

    much_smaller: bool
    reasons: tuple[str, ...]
    warning: str


# "Much smaller" (common practice, no source): a disk margin or a gain margin in dB below half of
# full-state feedback's, or a phase margin 15° or more below it.
_MUCH_SMALLER_FRACTION = 0.5
_MUCH_SMALLER_PHASE_DEG = 15.0


def _finite_or_large(value) -> float:
    return 1e300 if value is None or math.isinf(value) else float(value)


def compare_margins(full_state: LoopMargins | None, compensator: LoopMargins | None) -> MarginComparison:
    """Say whether the compensator's margins are much smaller than full-state feedback's.

    "Much smaller" means the disk margin or a loop's gain margin (dB) below half
    of the full-state value, or a loop's phase margin 15° or more below it
    (common practice, no source). An unstable compensator loop is always much worse.

    Examples
    --------
    >>> plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]])
    >>> compensator = observer_based_compensator(plant, [[2.0, 3.0]], [[7.0], [12.0]])
    >>> verdict = compare_margins(loop_margins(plant, [[2.0, 3.0]]), compensator_margins(plant, compensator))
    >>> verdict.much_smaller
    True
    """
    if full_state is None or compensator is None or not full_state.stable_nominal:
        return MarginComparison(False, (), "")
    if not compensator.stable_nominal:
        text = "the loop with the estimator is unstable although full-state feedback with this K is stable"
        return MarginComparison(True, (text,), f"Warning: {text}.")
    reasons = []
    if compensator.disk_margin < _MUCH_SMALLER_FRACTION * full_state.disk_margin:
        reasons.append(f"disk margin {compensator.disk_margin:.3g} against {full_state.disk_margin:.3g} "
                       "with full-state feedback")
    for ours, theirs in zip(compensator.loop_at_a_time, full_state.loop_at_a_time):
        label = f"input '{ours.input_name}'"
        if _finite_or_large(ours.gain_margin_db_min) < _MUCH_SMALLER_FRACTION * _finite_or_large(theirs.gain_margin_db_min):
            reasons.append(f"{label}: gain margin {ours.gain_margin_db_min:.3g} dB against "
                           f"{theirs.gain_margin_db_min:.3g} dB")
        if _finite_or_large(ours.phase_margin_deg) < _finite_or_large(theirs.phase_margin_deg) - _MUCH_SMALLER_PHASE_DEG:
            reasons.append(f"{label}: phase margin {ours.phase_margin_deg:.3g}° against "
                           f"{theirs.phase_margin_deg:.3g}°")
    if not reasons:
        return MarginComparison(False, (), "")
    warning = ("Warning: with the estimator the loop has much smaller margins than full-state feedback with the "
               "same K (" + "; ".join(reasons) + "). Slow the estimator, change K, or measure more states.")
    return MarginComparison(True, tuple(reasons), warning)
