"""A continuous observer-based design made ready for a controller running at sample time T.

Firmware runs the compensator once per period. For a continuous design the parts are
discretised consistently, and each step is stated:

* the plant is sampled through a zero-order hold (:func:`gainboard.core.discretize_zero_order_hold`),
  its noise intensities with it;
* K is kept: the continuous gain applied through the hold (its sampled loop is what
  :func:`gainboard.core.check_sampled_implementation` judges);
* L is designed again for the sampled plant in the chosen sampled form: a Kalman design
  from the sampled noise, otherwise by placing the continuous estimator poles s mapped to
  z = e^{sT} (the exact map of the error's modes over one period);
* the prefilter N (when the design has one) is recomputed for the sampled loop so the
  tracked outputs still settle exactly on the reference; Ki is kept, with the integrator
  ξ[k+1] = ξ[k] + T (r[k] − y[k]) that :func:`gainboard.core.augment_with_integral_action` uses.

The sampled loop of plant and compensator is then checked: an unstable result is refused.
A sampled design is still a design on a linear model: validate it on the real system with
safe limits and emergency stops, under local codes, functional-safety standards and
licensed engineering practice.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._arrays import read_only
from ._closed_loop import analyze_state_matrix
from ._compensator import compensator_closed_loop, observer_based_compensator
from ._errors import EstimatorError
from ._estimator import assign_estimator_poles, check_estimator_form, estimator_error_matrix
from ._kalman import design_kalman_estimator, estimator_noise
from ._plant import Plant, discretize_zero_order_hold
from ._responses import reference_prefilter

__all__ = ["SampledObserverDesign", "sample_observer_design"]


@dataclass(frozen=True, eq=False)
class SampledObserverDesign:
    """An observer-based design for a sampled controller.

    Attributes
    ----------
    plant : Plant
        The sampled plant.
    state_gain, estimator_gain : numpy.ndarray
        K and L for the sampled plant (L in ``form``).
    form : str
        "prediction", "current" or "reduced-order".
    prefilter, integral_gain : numpy.ndarray or None
        N (recomputed for the sampled loop when the design had one) and Ki.
    estimator_poles, closed_loop_poles : numpy.ndarray of complex
        z-plane poles of the estimation error and of the whole loop.
    steps : tuple of str
        What was done to each part, in words (written into exports).
    """

    plant: Plant
    state_gain: np.ndarray
    estimator_gain: np.ndarray
    form: str
    prefilter: np.ndarray | None
    integral_gain: np.ndarray | None
    estimator_poles: np.ndarray
    closed_loop_poles: np.ndarray
    steps: tuple[str, ...]


def sample_observer_design(plant: Plant, state_gain, estimator_gain, sample_time: float | None = None, *,
                           form: str | None = None, sampled_form: str = "prediction", prefilter=None,
                           integral_gain=None, kalman: bool = False, process_noise=None,
                           measurement_noise=None) -> SampledObserverDesign:
    """The design for a controller running at ``sample_time`` (or the plant's own, if sampled).

    Parameters
    ----------
    plant : Plant
        Continuous (then ``sample_time`` is required) or sampled (``sample_time`` must be None).
    state_gain : array_like, shape (m, n)
    estimator_gain : array_like
        L of ``form`` for ``plant``.
    sample_time : float, optional
        T in seconds for a continuous design.
    form : str, optional
        The form of ``estimator_gain`` (default for the plant when omitted).
    sampled_form : {"prediction", "current"}
        The sampled form to design for a continuous full-order design (a reduced-order
        design stays reduced-order).
    prefilter, integral_gain : array_like, optional
        N and Ki of the design.
    kalman : bool
        Redesign L as a Kalman filter from the sampled noise (``process_noise`` and
        ``measurement_noise`` are the continuous intensities; the plant's when omitted).

    Returns
    -------
    SampledObserverDesign

    Raises
    ------
    EstimatorError
        For a missing or superfluous sample time, or when the sampled loop is unstable.

    Examples
    --------
    >>> plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]])
    >>> sampled = sample_observer_design(plant, [[2.0, 3.0]], [[7.0], [12.0]], 0.01)
    >>> sampled.form, np.round(np.sort(sampled.estimator_poles.real), 6).tolist()   # e^{−4T}, e^{−3T}
    ('prediction', [0.960789, 0.970446])
    """
    form = check_estimator_form(plant, form)
    K = plant.check_gain(state_gain)
    steps: list[str] = []
    if plant.is_sampled:
        if sample_time is not None:
            raise EstimatorError(f"the design is already sampled (T = {plant.sample_time:g} s); leave out the sample time")
        sampled_plant, L, sampled_form = plant, np.array(estimator_gain, dtype=float), form
        steps.append(f"Sampled design at T = {plant.sample_time:g} s, exported as designed ({form} estimator).")
        N = None if prefilter is None else np.array(prefilter, dtype=float)
    else:
        if sample_time is None:
            raise EstimatorError("a continuous design needs a sample time to run as firmware; give the controller's "
                                 "period in seconds")
        if form == "reduced-order":
            sampled_form = "reduced-order"
        elif sampled_form not in ("prediction", "current"):
            raise EstimatorError(f"the sampled form must be prediction or current, got {sampled_form!r}")
        sampled_plant = discretize_zero_order_hold(plant, float(sample_time))
        T = sampled_plant.sample_time
        steps.append(f"Plant sampled through a zero-order hold at T = {T:g} s.")
        steps.append("K kept: the continuous gain applied through the hold.")
        if kalman:
            # the continuous intensities (given, the plant's, or the stated defaults), sampled with the plant
            noisy = plant.with_changes(noise=estimator_noise(plant, process_noise, measurement_noise))
            sampled_plant = discretize_zero_order_hold(noisy, T)
            L = design_kalman_estimator(sampled_plant, form=sampled_form).gain
            steps.append(f"L designed again as the steady-state Kalman filter of the sampled plant ({sampled_form} "
                         "estimator; process noise accumulated over T, measurement noise averaged over T).")
        else:
            poles = analyze_state_matrix(estimator_error_matrix(plant, estimator_gain, form)).poles
            mapped = np.exp(poles * T)
            L = assign_estimator_poles(sampled_plant, mapped, form=sampled_form).gain
            steps.append(f"L placed again for the sampled plant ({sampled_form} estimator) with the continuous "
                         "estimator poles s mapped to z = e^(sT).")
        N = None
        if prefilter is not None:
            N = reference_prefilter(sampled_plant, K)
            steps.append("N recomputed for the sampled loop, so the tracked outputs settle exactly on the reference.")
        if integral_gain is not None:
            steps.append("Ki kept, with the integrator xi[k+1] = xi[k] + T (r[k] - y[k]).")
    compensator = observer_based_compensator(sampled_plant, K, L, form=sampled_form, prefilter=N,
                                             integral_gain=integral_gain)
    loop = compensator_closed_loop(sampled_plant, compensator)
    if not loop.report.stable:
        worst = loop.report.poles[int(np.argmax(np.abs(loop.report.poles)))]
        raise EstimatorError(
            f"the sampled loop of plant and compensator is unstable (pole at z = {complex(worst):.4g}, |z| = "
            f"{abs(worst):.4g}); choose a shorter sample time or redesign K and L for the sampled plant"
        )
    return SampledObserverDesign(
        plant=sampled_plant, state_gain=read_only(K), estimator_gain=read_only(compensator.estimator.gain),
        form=sampled_form, prefilter=compensator.prefilter, integral_gain=compensator.integral_gain,
        estimator_poles=loop.estimator_poles, closed_loop_poles=loop.report.poles, steps=tuple(steps),
    )

