"""Estimator gain by steady-state Kalman filtering: noise intensities → L and error covariance.

With process noise w (intensity or covariance W) on the state equation and
measurement noise v (V) on the outputs (see :mod:`gainboard.core._noise`), the
estimator gain that minimises the steady-state error covariance comes from the
filter Riccati equation, the dual of the LQR equation (A → Aᵀ, B → Cᵀ, Q → W,
R → V), solved by scipy's Schur-method solvers:

continuous
    AP + PAᵀ − PCᵀV⁻¹CP + W = 0, L = PCᵀV⁻¹; P is the error covariance.
sampled
    P = APAᵀ − APCᵀ(CPCᵀ + V)⁻¹CPAᵀ + W (P: covariance of the error of the
    prediction from y up to k − 1). The prediction estimator uses
    L = APCᵀ(CPCᵀ + V)⁻¹ and has error covariance P; the current estimator uses
    L = PCᵀ(CPCᵀ + V)⁻¹ and has error covariance (I − LC)P.

Defaults, when the plant carries no ``[noise]`` table and none is given: unit
intensity on every state and every output (W = I, V = I). That is a placeholder,
not a model of any sensor: give the real noise of the plant.

An estimator built from these numbers is still a design on a linear model with
assumed noise: validate the compensator on the real system with safe limits
and emergency stops, under local codes, functional-safety standards and
licensed engineering practice.
"""

from __future__ import annotations

import numpy as np
import scipy.linalg

from ._arrays import read_only
from ._closed_loop import analyze_state_matrix
from ._errors import EstimatorError
from ._estimator import _FORM_CONSEQUENCES, EstimatorResult, check_estimator_form
from ._lqr import _describe_mode, _hidden_unstable_modes, _riccati_residual, _symmetric_square_root
from ._noise import NoiseIntensities, noise_intensities
from ._plant import Plant
from ._structure import analyze_structure

__all__ = ["DEFAULT_NOISE_NOTE", "estimator_noise", "design_kalman_estimator"]

#: What the defaults are, in words (also shown by the command line and the workbench).
DEFAULT_NOISE_NOTE = (
    "unit intensity on every state and every output (W = I, V = I), a placeholder: give the plant's real noise "
    "in a [noise] table"
)


def estimator_noise(plant: Plant, process_noise=None, measurement_noise=None) -> NoiseIntensities:
    """The noise intensities to design with: given ones, else the plant's, else the defaults.

    Each of W and V is taken separately from the first source that has it.

    Examples
    --------
    >>> plant = Plant(A=[[-1.0]], B=[[1.0]])
    >>> noise = estimator_noise(plant, measurement_noise=[[0.1]])
    >>> noise.process.tolist(), noise.measurement.tolist(), noise.source
    ([[1.0]], [[0.1]], 'V given; W default (unit intensity on every state)')
    """
    n, p = plant.state_count, plant.output_count
    own = plant.noise

    def choose(given, plants, size, per):
        if given is not None:
            return given, "given"
        if plants is not None:
            return plants, "from the plant"
        return np.eye(size), f"default (unit intensity on every {per})"

    W, where_W = choose(process_noise, None if own is None else own.process, n, "state")
    V, where_V = choose(measurement_noise, None if own is None else own.measurement, p, "output")
    if where_W == where_V:
        sources = f"W and V {where_W}"
    elif where_V == "given":
        sources = f"V given; W {where_W}"
    else:
        sources = f"W {where_W}; V {where_V}"
    noise = noise_intensities(W, V, source=sources)
    if noise.state_count != n:
        raise EstimatorError(
            f"the process noise W is {noise.state_count}×{noise.state_count} but the plant has {n} states; "
            f"give W as {n}×{n} (or {n} variances)"
        )
    if noise.output_count != p:
        raise EstimatorError(
            f"the measurement noise V is {noise.output_count}×{noise.output_count} but the plant has {p} outputs; "
            f"give V as {p}×{p} (or {p} variances)"
        )
    return noise


def design_kalman_estimator(plant: Plant, process_noise=None, measurement_noise=None, *,
                            form: str | None = None) -> EstimatorResult:
    """The steady-state Kalman filter gain L and its estimation-error covariance.

    Parameters
    ----------
    plant : Plant
        Continuous or sampled plant.
    process_noise : array_like, shape (n, n) or (n,), optional
        W, symmetric positive semidefinite (a flat list is a diagonal): intensity
        ((state unit)²/s) for a continuous plant, covariance per sample for a sampled
        one. Default: the plant's ``[noise]``, else W = I.
    measurement_noise : array_like, shape (p, p) or (p,), optional
        V, symmetric positive definite; default the plant's, else V = I.
    form : str, optional
        "full-order" (continuous), "prediction" (sampled, default) or "current" (sampled).

    Returns
    -------
    EstimatorResult
        With ``error_covariance`` (and for the current form ``predicted_error_covariance``),
        ``noise`` and ``riccati_residual`` set.

    Raises
    ------
    EstimatorError
        For bad noise intensities (shape, not symmetric, W not positive semidefinite,
        V not positive definite), the reduced-order form, an unstable mode that no
        output sees (not detectable) or that no process noise reaches, or when the
        Riccati solver finds no stabilising solution.

    Examples
    --------
    >>> plant = Plant(A=[[-1.0]], B=[[1.0]])            # x' = −x + w, y = x + v
    >>> result = design_kalman_estimator(plant, [[1.0]], [[1.0]])
    >>> round(float(result.error_covariance[0, 0]), 8)  # √2 − 1
    0.41421356
    """
    form = check_estimator_form(plant, form)
    if form == "reduced-order":
        raise EstimatorError(
            "the steady-state Kalman filter here is full-order (prediction or current for a sampled plant); "
            "design a reduced-order estimator by pole assignment instead"
        )
    noise = estimator_noise(plant, process_noise, measurement_noise)
    A, C = np.array(plant.A), np.array(plant.C)
    n = plant.state_count
    sampled = plant.is_sampled
    W, V = np.array(noise.process), np.array(noise.measurement)

    hidden = _hidden_unstable_modes(A, C, sampled, stacked_beside=False)
    if hidden:
        modes = "; ".join(_describe_mode(v, sampled) for v in hidden)
        raise EstimatorError(
            f"(A, C) is not detectable: the mode at {modes} is on or outside the stability boundary and no output "
            "sees it, so no estimator can follow it; add a sensor that sees this mode"
        )
    quiet = _hidden_unstable_modes(A, _symmetric_square_root(W), sampled, stacked_beside=True)
    if quiet:
        modes = "; ".join(_describe_mode(v, sampled) for v in quiet)
        raise EstimatorError(
            f"no process noise reaches the mode at {modes}, which is on or outside the stability boundary, so the "
            "filter would trust the model there forever and has no stabilising solution; give the states of that "
            "mode some process noise in W"
        )

    solver = scipy.linalg.solve_discrete_are if sampled else scipy.linalg.solve_continuous_are
    # Outputs whitened first (ỹ = R⁻¹y with V = R Rᵀ, so Ṽ = I): the same P, since C and V enter the
    # equation only as Cᵀ(·)⁻¹C, but far better scaled. Measured on the bundled cart (V entries 1e-11
    # and 2.5e-6): relative Riccati residual 4.3e-7 solved as given, 3.8e-15 whitened.
    whitening = np.linalg.cholesky(V)
    whitened_C = scipy.linalg.solve_triangular(whitening, C, lower=True)
    try:
        P = solver(A.T, whitened_C.T, W, np.eye(V.shape[0]))
    except (np.linalg.LinAlgError, ValueError) as error:
        raise EstimatorError(
            f"the filter Riccati equation has no stabilising solution ({error}); a mode is probably nearly hidden "
            "from the outputs or nearly free of process noise — check C and raise W"
        ) from None
    P = (P + P.T) / 2
    predicted = None
    if not sampled:
        L = np.linalg.solve(V, C @ P).T                        # P Cᵀ V⁻¹
        covariance = P
        error_matrix = A - L @ C
    else:
        innovation = C @ P @ C.T + V
        filter_gain = np.linalg.solve(innovation, C @ P).T      # P Cᵀ (CPCᵀ + V)⁻¹
        if form == "current":
            L = filter_gain
            filtered = (np.eye(n) - L @ C) @ P
            covariance = (filtered + filtered.T) / 2
            predicted = P
            error_matrix = A - L @ C @ A
        else:
            L = A @ filter_gain
            covariance = P
            error_matrix = A - L @ C
    report = analyze_state_matrix(error_matrix, plant.sample_time)
    if not report.stable or not np.all(np.isfinite(L)):
        raise EstimatorError(
            "the Riccati solution found does not give a stable estimation error; a mode is nearly hidden from the "
            "outputs or nearly free of process noise — check C and raise W"
        )
    residual = _riccati_residual(A.T, C.T, W, V, np.zeros(C.T.shape), P, sampled)
    structure = analyze_structure(plant)
    equation = "discrete" if sampled else "continuous"
    note = (
        f"{_FORM_CONSEQUENCES[form]} Steady-state Kalman filter from the {equation} filter Riccati equation "
        f"(scipy solve_{equation}_are on the dual); noise: {noise.source}."
    )
    if "default" in noise.source:
        note += f" Defaults are {DEFAULT_NOISE_NOTE}."
    return EstimatorResult(
        gain=read_only(L + 0.0),
        form=form,
        design="steady-state Kalman filter",
        error_poles=report.poles,
        requested=None,
        worst_error=None,
        relative_error=None,
        accurate=True,
        method=f"steady-state Kalman filter (solve_{equation}_are on the dual)",
        note=note,
        eigenvector_condition=float(report.eigenvector_condition),
        observable=bool(structure.observable),
        unobservable_poles=structure.unobservable_poles,
        noise=noise,
        error_covariance=read_only(covariance),
        predicted_error_covariance=None if predicted is None else read_only(predicted),
        riccati_residual=float(residual),
    )
