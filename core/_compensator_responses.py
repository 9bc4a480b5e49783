"""Time responses of the loop closed through the estimator: true state, estimate and error.

The loop of plant and estimator is itself a state-feedback loop on an *estimator-
augmented plant* with states (x, ξ) (ξ the estimator's state, see
:class:`gainboard.core.EstimatorRealization`):

    x⁺ = A x + B u,   ξ⁺ = G_y C x + F ξ + (G_y D + G_u) u,   u = −K x̂ = −K (J C x + H ξ)

so :func:`gainboard.core.simulate_responses` computes its responses exactly —
with the same grid, metrics, prefilter and actuator saturation as full-state
feedback. The estimator is fed the input actually applied, so when the actuator
saturates the estimate stays right (the way firmware should run it). The
estimate is x̂ = J C x + H ξ and the error x − x̂.

Three experiments: from the plant's initial state with a wrong initial estimate
(by default x̂₀ = 0, the estimator knowing nothing), a reference step (u = −K x̂ + N r:
the estimator sees the commanded change, so the error stays zero and the step
equals full-state feedback's), and a disturbance step (the estimator does not
know the disturbance, so an error builds up).

These are predictions of a linear model: validate the compensator on the real
system with safe limits and emergency stops, under local codes,
functional-safety standards and licensed engineering practice.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._arrays import read_only
from ._compensator import Compensator
from ._errors import AnalysisError
from ._integral_action import IntegralActionResponse, augment_with_integral_action, integral_step_response
from ._plant import Plant
from ._responses import Response, ResponseSet, simulate_responses

__all__ = [
    "estimator_augmented_plant",
    "CompensatorResponse",
    "CompensatorResponses",
    "simulate_compensator_responses",
]


def estimator_augmented_plant(plant: Plant, compensator: Compensator, *,
                              with_integrators: bool = True) -> tuple[Plant, np.ndarray]:
    """The plant with the estimator's states appended, and the state feedback that closes the loop.

    With ``with_integrators`` (default) the compensator's integrators are appended too
    (:func:`gainboard.core.augment_with_integral_action`).

    Returns
    -------
    (Plant, numpy.ndarray)
        States (x, ξ[, ζ]), the same inputs, outputs, limits, disturbance and tracked outputs;
        and the gain K̃ with u = −K̃ (x, ξ[, ζ]).

    Examples
    --------
    >>> from gainboard.core import observer_based_compensator
    >>> plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]])
    >>> augmented, gain = estimator_augmented_plant(plant, observer_based_compensator(plant, [[2.0, 3.0]], [[7.0], [12.0]]))
    >>> augmented.state_count, gain.tolist()
    (4, [[0.0, 0.0, 2.0, 3.0]])
    """
    estimator = compensator.estimator
    A, B, C, D = (np.array(m) for m in (plant.A, plant.B, plant.C, plant.D))
    n, k = plant.state_count, estimator.F.shape[0]
    K = np.array(compensator.state_gain)
    top = np.hstack([A, np.zeros((n, k))])
    bottom = np.hstack([estimator.G_y @ C, estimator.F])
    E = np.array(plant.disturbance_matrix)
    initial = None if plant.initial_state is None else np.concatenate(
        [plant.initial_state, estimator.start_from_state @ plant.initial_state])
    augmented = Plant(
        A=np.vstack([top, bottom]),
        B=np.vstack([B, estimator.G_y @ D + estimator.G_u]),
        C=np.hstack([C, np.zeros((plant.output_count, k))]),
        D=D,
        sample_time=plant.sample_time,
        name=f"{plant.name} with its estimator",
        state_names=tuple(plant.state_names) + estimator.state_names,
        state_units=tuple(plant.state_units) + ("",) * k,
        input_names=plant.input_names, input_units=plant.input_units,
        output_names=plant.output_names, output_units=plant.output_units,
        input_limits=plant.input_limits,
        initial_state=initial,
        tracked_outputs=plant.tracked_outputs,
        disturbance_matrix=np.vstack([E, np.zeros((k, E.shape[1]))]),
        disturbance_names=plant.disturbance_names, disturbance_units=plant.disturbance_units,
        disturbance_step=plant.disturbance_step,
    )
    # u = −K x̂ with x̂ = J y + H ξ = J C x + H ξ (J ≠ 0 only for forms that require D = 0)
    gain = np.hstack([K @ estimator.J @ C, K @ estimator.H]) + 0.0
    if not with_integrators or compensator.integral_gain is None:
        return augmented, gain
    extended = augment_with_integral_action(augmented, compensator.tracked_outputs[: compensator.integrator_count])
    return extended, np.hstack([gain, compensator.integral_gain]) + 0.0


@dataclass(frozen=True, eq=False)
class CompensatorResponse:
    """One response of the loop through the estimator.

    Attributes
    ----------
    loop : Response
        The response of the augmented loop (time, outputs, inputs, metrics, saturation);
        its ``states`` hold (x, ξ[, ζ]).
    true_states, estimates, estimation_errors : numpy.ndarray, shape (N, n)
        x, x̂ and x − x̂ of the linear loop.
    saturated_true_states, saturated_estimates, saturated_estimation_errors : numpy.ndarray or None
        The same for the loop with the inputs clipped to their limits (None without limits).
    """

    loop: Response
    true_states: np.ndarray
    estimates: np.ndarray
    estimation_errors: np.ndarray
    saturated_true_states: np.ndarray | None
    saturated_estimates: np.ndarray | None
    saturated_estimation_errors: np.ndarray | None

    @property
    def kind(self) -> str:
        return self.loop.kind

    @property
    def time(self) -> np.ndarray:
        return self.loop.time


@dataclass(frozen=True, eq=False)
class CompensatorResponses:
    """The responses of the loop through the estimator.

    Attributes
    ----------
    initial : CompensatorResponse
        From ``initial_state`` with the estimate starting at ``initial_estimate``.
    step : CompensatorResponse or None
        Reference step with the prefilter (None with integral action or without a prefilter).
    disturbance : CompensatorResponse
        Disturbance step from rest (estimate right at the start).
    integral_step : IntegralActionResponse or None
        With integral action, the reference and disturbance steps of the extended loop.
    loop_set : ResponseSet
        The full result of :func:`gainboard.core.simulate_responses` on the augmented loop.
    initial_state, initial_estimate : numpy.ndarray, shape (n,)
        Where the plant and the estimate started.
    """

    initial: CompensatorResponse
    step: CompensatorResponse | None
    disturbance: CompensatorResponse
    integral_step: IntegralActionResponse | None
    loop_set: ResponseSet
    initial_state: np.ndarray
    initial_estimate: np.ndarray

    @property
    def responses(self) -> tuple[CompensatorResponse, ...]:
        return tuple(r for r in (self.initial, self.step, self.disturbance) if r is not None)


def _split(response: Response, n: int, estimate_map: np.ndarray) -> CompensatorResponse:
    def parts(states):
        if states is None:
            return None, None, None
        truth = states[:, :n]
        estimate = states @ estimate_map.T
        return read_only(truth), read_only(estimate), read_only(truth - estimate)

    linear = parts(response.states)
    saturated = parts(response.saturated_states)
    return CompensatorResponse(response, *linear, *saturated)


def simulate_compensator_responses(plant: Plant, compensator: Compensator, *, initial_state=None,
                                   initial_estimate=None, horizon: float | None = None,
                                   settling_band: float = 0.02) -> CompensatorResponses:
    """Responses of the loop closed through the estimator: true state, estimate and error.

    Parameters
    ----------
    plant : Plant
    compensator : Compensator
    initial_state : array_like, shape (n,), optional
        The plant's start; ``plant.initial_state`` (else a unit first state) when omitted.
    initial_estimate : array_like, shape (n,), optional
        The estimator's prior estimate at the start; zero (the estimator knows nothing)
        when omitted. For the current form it is the prediction before the first
        measurement; the reduced-order form reads the measured part from y₀ anyway.
    horizon : float, optional
        Seconds to simulate; chosen from the slowest pole of the whole loop when omitted.
    settling_band : float
        As for :func:`gainboard.core.simulate_responses`.

    Returns
    -------
    CompensatorResponses

    Raises
    ------
    AnalysisError
        For a bad initial state or estimate (or horizon, settling band).

    Examples
    --------
    >>> from gainboard.core import observer_based_compensator
    >>> plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]])
    >>> compensator = observer_based_compensator(plant, [[2.0, 3.0]], [[7.0], [12.0]])
    >>> responses = simulate_compensator_responses(plant, compensator, initial_state=[1.0, 0.0])
    >>> responses.initial.estimation_errors[0].tolist(), bool(abs(responses.initial.estimation_errors[-1]).max() < 1e-6)
    ([1.0, 0.0], True)
    """
    n = plant.state_count
    estimator = compensator.estimator

    def vector(value, default, what):
        if value is None:
            return np.array(default, dtype=float)
        out = np.asarray(value, dtype=float).reshape(-1)
        if out.shape != (n,) or not np.all(np.isfinite(out)):
            raise AnalysisError(f"{what} must be {n} finite numbers (one per state: {', '.join(plant.state_names)}), "
                                f"got {list(np.ravel(value))!r}")
        return out

    x0 = vector(initial_state, plant.initial_state if plant.initial_state is not None else np.eye(1, n).ravel(),
                "the initial state")
    estimate0 = vector(initial_estimate, np.zeros(n), "the initial estimate")
    augmented, gain = estimator_augmented_plant(plant, compensator)
    xi0 = estimator.start_from_estimate @ estimate0 + estimator.start_from_state @ x0
    start = np.concatenate([x0, xi0, np.zeros(compensator.integrator_count)])
    loop_set = simulate_responses(augmented, gain, initial_state=start, horizon=horizon, settling_band=settling_band)

    C = np.array(plant.C)
    k = estimator.F.shape[0]
    estimate_map = np.zeros((n, augmented.state_count))
    estimate_map[:, :n] = estimator.J @ C
    estimate_map[:, n:n + k] = estimator.H
    integral_step = None
    step = None
    if compensator.integral_gain is not None:
        base, _ = estimator_augmented_plant(plant, compensator, with_integrators=False)
        integral_step = integral_step_response(
            base, gain, horizon=float(loop_set.horizon),
            outputs=compensator.tracked_outputs[: compensator.integrator_count])
    elif loop_set.step is not None:
        step = _split(loop_set.step, n, estimate_map)
    return CompensatorResponses(
        initial=_split(loop_set.initial, n, estimate_map),
        step=step,
        disturbance=_split(loop_set.disturbance, n, estimate_map),
        integral_step=integral_step,
        loop_set=loop_set,
        initial_state=read_only(x0),
        initial_estimate=read_only(estimate0),
    )
