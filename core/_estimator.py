"""The estimator (observer) gain L: its forms, its error dynamics, and L by pole assignment.

An estimator rebuilds the state from the measured outputs y = Cx + Du and the
known inputs u. Its gain L sets how fast the estimation error dies out. Forms:

``"full-order"`` (continuous plants)
    x̂' = A x̂ + B u + L (y − C x̂ − D u); the error e = x − x̂ obeys e' = (A − LC) e.
``"prediction"`` (sampled plants)
    x̂[k+1] = A x̂[k] + B u[k] + L (y[k] − C x̂[k] − D u[k]); e[k+1] = (A − LC) e[k].
    u[k] = −K x̂[k] needs only y up to k − 1: the controller has a whole sample
    period to compute, at the price of estimates one sample behind the measurement.
``"current"`` (sampled plants)
    x̄[k] = A x̂[k−1] + B u[k−1] (prediction), x̂[k] = x̄[k] + L (y[k] − C x̄[k]);
    the error obeys e[k+1] = (A − LCA) e[k]. u[k] = −K x̂[k] uses y[k] itself, so
    the computation must finish right after sampling (taken as instantaneous
    here), and the loop sees no extra sample of lag — usually better margins.
``"reduced-order"`` (both)
    Luenberger's minimal-order estimator: only the n − p state combinations that
    the outputs do not give are estimated; its gain L_r is (n − p)×p and its
    error poles are those of Ā_bb − L_r Ā_ab (see :mod:`gainboard.core._reduced_estimator`).

Every error matrix has the form F − L H (or its reduced analogue), whose
eigenvalues equal those of Fᵀ − Hᵀ Lᵀ: placing estimator poles is placing the
poles of state feedback on the *dual* plant (Fᵀ, Hᵀ) with gain Lᵀ (Kalman's
duality). :func:`estimator_dual_plant` builds that plant, and the placement
engine of :func:`gainboard.core.assign_poles` computes the gain, with the
refusals phrased for estimators here.

An estimator is part of a controller on a linear model: validate the
compensator on the real system with safe limits and emergency stops, under
local codes, functional-safety standards and licensed engineering practice.
"""

from __future__ import annotations

import threading
import weakref
from dataclasses import dataclass

import numpy as np

from ._arrays import read_only
from ._closed_loop import _matching_indices, sort_poles
from ._errors import EstimatorError, PlacementError
from ._noise import NoiseIntensities
from ._placement import FIXED_POLE_TOLERANCE, _prepare_targets, assign_poles
from ._plant import Plant
from ._reduced_estimator import reduced_order_coordinates
from ._structure import controllability_staircase, rank_tolerance

__all__ = [
    "ESTIMATOR_FORMS",
    "EstimatorResult",
    "default_estimator_form",
    "check_estimator_form",
    "estimator_gain_shape",
    "check_estimator_gain",
    "estimator_dual_plant",
    "estimator_error_matrix",
    "assign_estimator_poles",
]

_EPS = np.finfo(float).eps

#: The estimator forms, in words; see the module documentation.
ESTIMATOR_FORMS = ("full-order", "prediction", "current", "reduced-order")

_CONTINUOUS_FORMS = ("full-order", "reduced-order")
_SAMPLED_FORMS = ("prediction", "current", "reduced-order")

_FORM_CONSEQUENCES = {
    "full-order": "Full-order estimator: every state is estimated; the error obeys e' = (A − LC) e.",
    "prediction": (
        "Prediction estimator: x̂[k+1] is formed from y[k], so u[k] = −K x̂[k] can be computed before y[k] "
        "arrives (a whole sample of computing time), but the estimate lags the measurement by one sample, "
        "which costs phase in the loop."
    ),
    "current": (
        "Current estimator: x̂[k] already uses y[k], so the loop sees no extra sample of lag (usually better "
        "margins), but u[k] must be computed right after y[k] is sampled; the computing delay is taken as zero "
        "here, so keep it a small fraction of the sample time on the target."
    ),
    "reduced-order": (
        "Reduced-order estimator: the outputs are used as they are and only the state combinations they do not "
        "give are estimated; measurement noise reaches u without filtering."
    ),
}


@dataclass(frozen=True, eq=False)
class EstimatorResult:
    """An estimator gain and what it does to the estimation error.

    Attributes
    ----------
    gain : numpy.ndarray, shape (n, p) or (n − p, p)
        L in the update of the chosen form (state units per output unit); for
        the reduced-order form L_r of the estimated combinations z.
    form : str
        One of ``ESTIMATOR_FORMS``.
    design : str
        "pole assignment" or "steady-state Kalman filter".
    error_poles : numpy.ndarray of complex
        Poles of the estimation error (eigenvalues of the error matrix), in canonical
        order, conjugate pairs exact; paired with ``requested`` for pole assignment.
    requested : numpy.ndarray of complex or None
        The target estimator poles (pole assignment only).
    worst_error : float or None
        Largest distance between a target and its achieved pole (None for Kalman).
    relative_error : float or None
        worst_error relative to the size of the plant and of the targets.
    accurate : bool
        The achieved poles pass the placement engine's accuracy check (always True
        for Kalman, whose accuracy is ``riccati_residual``).
    method : str
        How L was computed, in words.
    note : str
        Why that method, what the form means for the loop, and any warning.
    eigenvector_condition : float
        Condition number of the eigenvectors of the error matrix.
    observable : bool
        Whether every open-loop pole shows in the outputs.
    unobservable_poles : numpy.ndarray of complex
        Poles no estimator can move (they are among ``error_poles``).
    noise : NoiseIntensities or None
        The noise intensities used (Kalman only).
    error_covariance : numpy.ndarray, shape (n, n), or None
        Steady-state covariance of the estimation error x − x̂ of this form (Kalman
        only): continuous, P of the filter Riccati equation; prediction, the a priori
        P (error of x̂[k] formed from y up to k − 1); current, the filtered
        (I − LC) P (error of x̂[k] formed from y[k]).
    predicted_error_covariance : numpy.ndarray or None
        For the current form, the a priori P as well (error of the prediction x̄[k]).
    riccati_residual : float
        Relative residual of the filter Riccati equation (nan for pole assignment).
    """

    gain: np.ndarray
    form: str
    design: str
    error_poles: np.ndarray
    requested: np.ndarray | None
    worst_error: float | None
    relative_error: float | None
    accurate: bool
    method: str
    note: str
    eigenvector_condition: float
    observable: bool
    unobservable_poles: np.ndarray
    noise: NoiseIntensities | None = None
    error_covariance: np.ndarray | None = None
    predicted_error_covariance: np.ndarray | None = None
    riccati_residual: float = float("nan")


def default_estimator_form(plant: Plant) -> str:
    """"prediction" for a sampled plant, "full-order" for a continuous one.

    Examples
    --------
    >>> default_estimator_form(Plant(A=[[1.0]], B=[[1.0]], sample_time=0.1))
    'prediction'
    """
    return "prediction" if plant.is_sampled else "full-order"


def check_estimator_form(plant: Plant, form: str | None) -> str:
    """The form to use (the default when ``None``), refused if it does not suit the plant.

    Raises
    ------
    EstimatorError
        For an unknown form, a form of the other time domain, or the current /
        reduced-order form on a plant with feedthrough D ≠ 0.
    """
    if form is None:
        return default_estimator_form(plant)
    if form not in ESTIMATOR_FORMS:
        raise EstimatorError(f"unknown estimator form {form!r}; choose one of {', '.join(ESTIMATOR_FORMS)}")
    allowed = _SAMPLED_FORMS if plant.is_sampled else _CONTINUOUS_FORMS
    if form not in allowed:
        kind = "sampled" if plant.is_sampled else "continuous"
        raise EstimatorError(
            f"the {form} estimator is not for a {kind} plant; choose one of {', '.join(allowed)}"
        )
    if form == "current" and np.any(plant.D != 0.0):
        raise EstimatorError(
            "the current estimator needs D = 0: it uses y[k] to form u[k], and with a feedthrough y[k] depends "
            "on u[k] itself (an algebraic loop); use the prediction estimator"
        )
    return form


def estimator_gain_shape(plant: Plant, form: str | None = None) -> tuple[int, int]:
    """Shape of L for this plant and form: (n, p), or (n − p, p) for the reduced-order form."""
    n, p = plant.state_count, plant.output_count
    return (n - p, p) if check_estimator_form(plant, form) == "reduced-order" else (n, p)


def check_estimator_gain(plant: Plant, gain, form: str | None = None) -> np.ndarray:
    """Validate an estimator gain L for this plant and form; return it as a float array.

    Raises
    ------
    EstimatorError
        If L is not a finite real matrix of the expected shape.

    Examples
    --------
    >>> plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]])
    >>> check_estimator_gain(plant, [[3.0], [2.0]]).shape
    (2, 1)
    """
    rows, cols = estimator_gain_shape(plant, form)
    what = "L_r" if rows != plant.state_count else "L"
    try:
        L = np.array(gain, dtype=float)
    except (TypeError, ValueError):
        raise EstimatorError(f"{what} must be a {rows}×{cols} matrix of numbers (states × outputs), got {gain!r}") from None
    if L.ndim == 1 and cols == 1 and L.size == rows:
        L = L.reshape(rows, 1)
    if L.shape != (rows, cols):
        found = "×".join(str(s) for s in L.shape) or "a single number"
        meaning = ("one row per estimated combination, one column per output" if what == "L_r"
                   else "one row per state, one column per output")
        raise EstimatorError(f"{what} is {found} but must be {rows}×{cols} ({meaning})")
    if not np.all(np.isfinite(L)):
        raise EstimatorError(f"{what} has a non-finite entry (inf or nan); every estimator gain must be a finite number")
    return L


# The dual plants are kept per plant object (a Plant is frozen), so the one-entry machinery's
# caches, which are keyed by plant, keep working while an entry of L is dragged.
_DUALS: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()
_DUALS_LOCK = threading.Lock()


def estimator_dual_plant(plant: Plant, form: str | None = None) -> Plant:
    """The plant whose state feedback with gain Lᵀ has the estimator's error poles.

    full-order and prediction: (Aᵀ, Cᵀ); current: (Aᵀ, (CA)ᵀ), since
    eig(A − LCA) = eig(Aᵀ − (CA)ᵀ Lᵀ); reduced-order: (Ā_bbᵀ, Ā_abᵀ). Its
    inputs are named after the plant's outputs, its states after the estimated
    states, and it keeps the plant's sample time.

    Examples
    --------
    >>> plant = Plant(A=[[0.0, 20.6], [1.0, 0.0]], B=[[1.0], [0.0]], C=[[0.0, 1.0]])
    >>> estimator_dual_plant(plant).B.tolist()
    [[0.0], [1.0]]
    """
    form = check_estimator_form(plant, form)
    with _DUALS_LOCK:
        known = _DUALS.get(plant, {}).get(form)
    if known is not None:
        return known
    if form == "reduced-order":
        coordinates = reduced_order_coordinates(plant)
        A, H = coordinates.A_bb, coordinates.A_ab
        names, units = coordinates.names, coordinates.units
    else:
        A, H = plant.A, plant.C @ plant.A if form == "current" else plant.C
        names, units = plant.state_names, plant.state_units
    dual = Plant(
        A=np.array(A).T, B=np.array(H).T, sample_time=plant.sample_time,
        name=f"{plant.name} (dual of the {form} estimator)",
        state_names=names, state_units=units,
        input_names=plant.output_names, input_units=plant.output_units,
    )
    with _DUALS_LOCK:
        dual = _DUALS.setdefault(plant, {}).setdefault(form, dual)
    return dual


def estimator_error_matrix(plant: Plant, gain, form: str | None = None) -> np.ndarray:
    """The matrix whose eigenvalues are the estimator's error poles.

    A − LC (full-order, prediction), A − LCA (current), Ā_bb − L_r Ā_ab (reduced-order).

    Examples
    --------
    >>> plant = Plant(A=[[0.0, 20.6], [1.0, 0.0]], B=[[1.0], [0.0]], C=[[0.0, 1.0]])
    >>> np.poly(estimator_error_matrix(plant, [[120.6], [20.0]])).round(9).tolist()  # (s + 10)²
    [1.0, 20.0, 100.0]
    """
    form = check_estimator_form(plant, form)
    L = check_estimator_gain(plant, gain, form)
    dual = estimator_dual_plant(plant, form)
    return (dual.A - dual.B @ L.T).T


# -- pole assignment through duality ----------------------------------------------------------

# Words of the placement engine's notes and messages, rephrased for the dual problem (longest first).
_DUAL_WORDS = (
    ("cannot be moved by feedback (uncontrollable)", "cannot be moved by the estimator (unobservable)"),
    ("change the plant so that an input reaches this mode", "add an output that sees this mode"),
    ("No input reaches any state: every pole stays where it is, so K = 0.",
     "No output sees any state: every pole stays where it is, so L = 0."),
    ("controllability matrix", "observability matrix"),
    ("controllability indices", "observability indices"),
    ("controllable part", "observable part"),
    ("not fully controllable", "not fully observable"),
    ("nearly uncontrollable", "nearly unobservable"),
    ("weakly reached poles", "weakly seen poles"),
    ("uncontrollable", "unobservable"),
    ("columns act as", "rows act as"),
    ("B has rank", "C has rank"),
    ("Fixed poles", "Hidden poles"),
    ("inputs", "outputs"),
    ("input", "output"),
    ("closed-loop eigenvectors", "error eigenvectors"),
    ("the closed loop", "the estimation error"),
    ("The closed loop", "The estimation error"),
)


def _in_estimator_words(text: str) -> str:
    for placement_words, estimator_words in _DUAL_WORDS:
        text = text.replace(placement_words, estimator_words)
    return text


def _pole_text(pole) -> str:
    pole = complex(pole)
    if pole.imag == 0.0:
        return f"{pole.real + 0.0:.6g}"
    sign = "+" if pole.imag > 0 else "-"
    return f"{pole.real + 0.0:.6g}{sign}{abs(pole.imag):.6g}j"


def _refuse_impossible_targets(dual: Plant, targets, form: str) -> np.ndarray:
    """Refusals phrased for estimators, before the placement engine sees the dual problem.

    Returns the targets completed with missing conjugates (as the engine completes them).
    """
    n = dual.state_count
    try:
        finite, _ = _prepare_targets(targets, n, complete_conjugates=True)
    except PlacementError as error:
        if "target poles were given" not in str(error):
            raise PlacementError("estimator poles: " + _in_estimator_words(str(error))) from None
        given = np.atleast_1d(np.asarray(targets, dtype=complex)).size
        needed = ("reduced-order estimator poles (one per estimated combination)" if form == "reduced-order"
                  else "estimator poles (one per state)")
        raise PlacementError(
            f"{given} estimator poles were given but {n} {needed} are needed (a complex pole counts with its "
            "conjugate); give exactly that many"
        ) from None
    form_staircase = controllability_staircase(dual.A, dual.B)
    k = form_staircase.controllable_dimension
    if k < n:
        hidden = sort_poles(np.linalg.eigvals(form_staircase.A[k:, k:]))
        # the same pairing and tolerance as the placement engine uses for uncontrollable poles
        slots = _matching_indices(hidden, finite)
        allowed = FIXED_POLE_TOLERANCE * np.maximum(float(np.linalg.norm(dual.A, 2)), np.abs(hidden))
        for pole, slot, room in zip(hidden, slots, allowed):
            if abs(finite[slot] - pole) > room:
                raise PlacementError(
                    f"pole {_pole_text(pole)} cannot be moved by the estimator (unobservable: no output sees its "
                    f"mode); include it among the estimator poles (within {room:.2g}) or add a sensor that sees "
                    f"this mode. Hidden poles of this plant: [{', '.join(_pole_text(p) for p in hidden)}]"
                )
    _, singular, _ = np.linalg.svd(dual.B, full_matrices=False)
    rank = int(np.sum(singular > rank_tolerance(dual.B)))
    if rank > 1:
        for value in finite:
            count = int(np.sum(np.abs(finite - value) <= 8 * _EPS * max(abs(value), 1e-300)))
            if count > rank:
                raise PlacementError(
                    f"estimator pole {_pole_text(value)} is requested {count} times but the plant has only {rank} "
                    f"independent outputs, so at most {rank} estimator poles can coincide there; move some copies "
                    "apart"
                )
    return finite


def assign_estimator_poles(plant: Plant, targets, *, form: str | None = None, method: str = "auto") -> EstimatorResult:
    """Compute the estimator gain L whose error poles are the targets (duality).

    Parameters
    ----------
    plant : Plant
        Continuous (targets in s) or sampled (targets in z) plant; C says what is measured.
    targets : array_like of complex, shape (n,) or (n − p,)
        Estimator poles: n for the full-order, prediction and current forms, n − p
        for the reduced-order form. Missing conjugates are added (and said so).
    form : str, optional
        One of ``ESTIMATOR_FORMS``; "full-order" for continuous plants and
        "prediction" for sampled ones when omitted.
    method : {"auto", "ackermann", "hessenberg", "robust"}
        As for :func:`gainboard.core.assign_poles` (one output ↔ one input).

    Returns
    -------
    EstimatorResult

    Raises
    ------
    PlacementError
        For a wrong number of poles, a target set that leaves out an unobservable
        pole, a pole repeated more often than there are independent outputs (or than
        the observability indices allow), or when no method can compute L.
    EstimatorError
        For an unknown form or one that does not suit the plant.

    Notes
    -----
    The gain is a design on a linear model: validate the compensator on the
    real system with safe limits and emergency stops, following local codes,
    functional-safety standards and licensed practice.

    Examples
    --------
    >>> plant = Plant(A=[[0.0, 20.6], [1.0, 0.0]], B=[[1.0], [0.0]], C=[[0.0, 1.0]])
    >>> result = assign_estimator_poles(plant, [-10.0, -10.0])
    >>> np.round(result.gain, 9).tolist(), result.form
    ([[120.6], [20.0]], 'full-order')
    """
    form = check_estimator_form(plant, form)
    dual = estimator_dual_plant(plant, form)
    _refuse_impossible_targets(dual, targets, form)
    try:
        placed = assign_poles(dual, targets, method=method)
    except PlacementError as error:
        raise PlacementError("estimator poles: " + _in_estimator_words(str(error))) from None
    gain = np.array(placed.gain).T + 0.0
    hidden = placed.fixed_poles
    note = " ".join(part for part in (_FORM_CONSEQUENCES[form], _in_estimator_words(placed.note)) if part)
    return EstimatorResult(
        gain=read_only(gain),
        form=form,
        design="pole assignment",
        error_poles=read_only(placed.achieved),
        requested=read_only(placed.requested),
        worst_error=float(placed.worst_error),
        relative_error=float(placed.relative_error),
        accurate=bool(placed.accurate),
        method=placed.method,
        note=note,
        eigenvector_condition=float(placed.eigenvector_condition),
        observable=bool(hidden.size == 0),
        unobservable_poles=read_only(hidden),
    )
