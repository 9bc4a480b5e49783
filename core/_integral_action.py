"""Integral action: extra states that integrate the tracking error.

For tracked outputs y_t = C_t x + D_t u the plant is extended with one state per
tracked output,

    continuous:  ξ' = r − y_t = r − C_t x − D_t u
    sampled:     ξ[k+1] = ξ[k] + T (r[k] − y_t[k])     (running sum × T),

so ξ has the units of the output times seconds in both cases and gains designed
for a continuous plant and its sampled version are comparable. A stabilising
gain [K_x  K_ξ] of the extended plant, u = −K_x x − K_ξ ξ, then drives the
tracking error of a constant reference to exactly zero, also under constant
disturbances, because ξ can only stop moving when r − y_t = 0.

The feedthrough D is handled (it enters the ξ equation through u, which is a
state feedback, so no algebraic loop arises). The extension is refused when the
new integrator modes cannot be controlled: rank [[A, B], [C_t, D_t]] < n + q for
continuous plants ([[A − I, B], [C_t, D_t]] for sampled ones), i.e. the plant
has a transmission zero at s = 0 (z = 1) on the tracked channels, an
uncontrollable mode there, or fewer independent inputs than tracked outputs.

Responses computed here are of the linear model only: validate the design on
the real system with safe limits and emergency stops, under local codes,
functional-safety standards and licensed engineering practice.
"""

from __future__ import annotations

from functools import partial
import math
from dataclasses import dataclass

import numpy as np
import scipy.linalg

from ._arrays import read_only
from ._errors import AnalysisError, GainError
from ._plant import Plant

__all__ = [
    "IntegralActionResponse",
    "augment_with_integral_action",
    "split_integral_gain",
    "integral_step_response",
]

_EPS = np.finfo(float).eps


def _tracked(plant: Plant, outputs) -> tuple[int, ...]:
    if outputs is None:
        return tuple(plant.tracked_outputs)
    try:
        chosen = tuple(int(i) for i in outputs)
    except (TypeError, ValueError):
        raise AnalysisError(f"outputs must be a list of zero-based output indices, got {outputs!r}") from None
    p, m = plant.output_count, plant.input_count
    if not chosen or len(set(chosen)) != len(chosen) or any(not 0 <= i < p for i in chosen):
        raise AnalysisError(
            f"outputs must be 1 or more distinct zero-based indices below {p} (the plant has {p} outputs), "
            f"got {list(chosen)!r}"
        )
    if len(chosen) > m:
        raise AnalysisError(
            f"integral action on {len(chosen)} outputs needs at least {len(chosen)} inputs, but the plant has {m}; "
            "integrate fewer outputs"
        )
    return chosen


def _error_state_name(plant: Plant, index: int) -> str:
    return f"∫ error of {plant.output_names[index]}"


def _error_state_unit(plant: Plant, index: int) -> str:
    unit = plant.output_units[index]
    return f"{unit}·s" if unit else "s"


def _check_integrators_controllable(plant: Plant, tracked: tuple[int, ...]) -> None:
    """Refuse when rank [[A − λ₀I, B], [C_t, D_t]] < n + q (λ₀ = 0 continuous, 1 sampled)."""
    n, m = plant.state_count, plant.input_count
    shift = 1.0 if plant.is_sampled else 0.0
    top = np.hstack([plant.A - shift * np.eye(n), plant.B])
    variable = "z = 1" if plant.is_sampled else "s = 0"
    rows = []
    for i in tracked:
        row = np.concatenate([plant.C[i], plant.D[i]])
        size = np.linalg.norm(row)
        if size == 0:
            raise AnalysisError(
                f"output '{plant.output_names[i]}' does not depend on any state or input (its rows of C and D "
                "are zero), so it cannot be driven to a reference; choose another output"
            )
        rows.append(row / size)  # scale each block so the rank test ignores units
    top_size = np.linalg.norm(top, 2)
    top_scaled = top / top_size if top_size > 0 else top

    def deficient(selection) -> bool:
        matrix = np.vstack([top_scaled] + [rows[j] for j in selection])
        singular_values = np.linalg.svd(matrix, compute_uv=False)
        needed = n + len(selection)
        return singular_values[needed - 1] <= 1e3 * (n + m) * _EPS * singular_values[0]

    if not deficient(range(len(tracked))):
        return
    alone = [tracked[j] for j in range(len(tracked)) if deficient([j])]
    if alone:
        names = ", ".join(f"'{plant.output_names[i]}'" for i in alone)
        raise AnalysisError(
            f"integral action on output {names} is impossible: the plant has a zero at {variable} on that channel "
            f"(or a mode at {variable} that the inputs cannot move), so an integrator of its error cannot be "
            "controlled; remove that output from the tracked outputs or change the model"
        )
    names = ", ".join(f"'{plant.output_names[i]}'" for i in tracked)
    raise AnalysisError(
        f"integral action on outputs {names} together is impossible: at steady state ({variable}) the inputs "
        "cannot set these outputs independently (a multivariable zero there); integrate fewer outputs"
    )


def augment_with_integral_action(plant: Plant, outputs=None) -> Plant:
    """Extend a plant with one integral-of-error state per tracked output.

    Parameters
    ----------
    plant : Plant
        Continuous or sampled plant.
    outputs : sequence of int, optional
        Zero-based indices of the outputs to integrate; ``plant.tracked_outputs``
        when omitted. At most one per input.

    Returns
    -------
    Plant
        States [x; ξ] (n + q of them). Continuous: A = [[A, 0], [−C_t, 0]],
        B = [[B], [−D_t]]; sampled: A = [[A, 0], [−T C_t, I]], B = [[B], [−T D_t]].
        Outputs, inputs and their limits are unchanged; the new states are named
        "∫ error of <output>" with units "<output unit>·s" and start at 0; the
        disturbance enters the plant states only. The reference r enters the new
        states with unit weight (continuous) or weight T (sampled); see
        :func:`integral_step_response`.

    Raises
    ------
    AnalysisError
        If the outputs are invalid, or the integrators would be uncontrollable
        (a plant zero at s = 0 / z = 1 on a tracked channel).

    Examples
    --------
    >>> lag = Plant(A=[[-1.0]], B=[[1.0]], output_names=("speed",), output_units=("m/s",))
    >>> extended = augment_with_integral_action(lag)
    >>> extended.A.tolist(), extended.state_names[1], extended.state_units[1]
    ([[-1.0, 0.0], [-1.0, 0.0]], '∫ error of speed', 'm/s·s')
    """
    tracked = _tracked(plant, outputs)
    _check_integrators_controllable(plant, tracked)
    n, q = plant.state_count, len(tracked)
    C_t, D_t = plant.C[list(tracked)], plant.D[list(tracked)]
    weight = plant.sample_time if plant.is_sampled else 1.0
    A = np.zeros((n + q, n + q))
    A[:n, :n] = plant.A
    A[n:, :n] = -weight * C_t
    if plant.is_sampled:
        A[n:, n:] = np.eye(q)
    B = np.vstack([plant.B, -weight * D_t])
    E = np.vstack([plant.disturbance_matrix, np.zeros((q, plant.disturbance_matrix.shape[1]))])
    initial = None if plant.initial_state is None else np.concatenate([plant.initial_state, np.zeros(q)])
    caution = (
        f"Extended with integral action on {', '.join(plant.output_names[i] for i in tracked)}. "
        "Validate any design on the real system with safe limits and emergency stops, under local codes, "
        "functional-safety standards and licensed practice."
    )
    return Plant(
        A=A,
        B=B,
        C=np.hstack([plant.C, np.zeros((plant.output_count, q))]),
        D=np.array(plant.D),
        sample_time=plant.sample_time,
        name=f"{plant.name} with integral action",
        summary=plant.summary,
        description=(plant.description + "\n\n" if plant.description else "") + caution,
        state_names=tuple(plant.state_names) + tuple(_error_state_name(plant, i) for i in tracked),
        state_units=tuple(plant.state_units) + tuple(_error_state_unit(plant, i) for i in tracked),
        input_names=plant.input_names,
        input_units=plant.input_units,
        output_names=plant.output_names,
        output_units=plant.output_units,
        input_limits=plant.input_limits,
        initial_state=initial,
        tracked_outputs=tracked,
        disturbance_matrix=E,
        disturbance_names=plant.disturbance_names,
        disturbance_units=plant.disturbance_units,
        disturbance_step=plant.disturbance_step,
        specs=plant.specs,
    )


def split_integral_gain(plant: Plant, augmented_gain) -> tuple[np.ndarray, np.ndarray]:
    """Split a gain of the extended plant into its plant-state and integral parts.

    Parameters
    ----------
    plant : Plant
        The original plant (n states), not the extended one.
    augmented_gain : array_like, shape (m, n + q)
        Gain of the extended plant from :func:`augment_with_integral_action`.

    Returns
    -------
    state_gain : numpy.ndarray, shape (m, n)
        K_x, acting on the plant states.
    integral_gain : numpy.ndarray, shape (m, q)
        K_ξ, acting on the integrated errors.

    Raises
    ------
    GainError
        If the gain has the wrong number of rows, no integral columns, more integral
        columns than inputs or outputs, or non-finite entries.

    Examples
    --------
    >>> lag = Plant(A=[[-1.0]], B=[[1.0]])
    >>> state_gain, integral_gain = split_integral_gain(lag, [[3.0, -4.0]])
    >>> state_gain.tolist(), integral_gain.tolist()
    ([[3.0]], [[-4.0]])
    """
    n, m = plant.state_count, plant.input_count
    try:
        gain = np.array(augmented_gain, dtype=float)
    except (TypeError, ValueError):
        raise GainError(f"the extended gain must be an {m}×(n + q) matrix of numbers, got {augmented_gain!r}") from None
    if gain.ndim == 1 and m == 1:
        gain = gain.reshape(1, -1)
    if gain.ndim != 2 or gain.shape[0] != m:
        found = "×".join(str(s) for s in gain.shape) or "a single number"
        raise GainError(f"the extended gain is {found} but must have {m} rows (one per input)")
    q = gain.shape[1] - n
    if q < 1 or q > min(m, plant.output_count):
        raise GainError(
            f"the extended gain has {gain.shape[1]} columns, but the plant has {n} states and can take 1 to "
            f"{min(m, plant.output_count)} integral states: expected {n + 1} to {n + min(m, plant.output_count)} "
            "columns (pass the original plant, not the extended one)"
        )
    if not np.all(np.isfinite(gain)):
        raise GainError("the extended gain has a non-finite entry (inf or nan); every gain must be a finite number")
    return gain[:, :n].copy(), gain[:, n:].copy()


@dataclass(frozen=True, eq=False)
class IntegralActionResponse:
    """Step responses of the loop with integral action (linear model).

    Two experiments from rest: a step of the references (``reference_step``), and
    a step of the disturbances (``disturbance_step``) with zero reference.

    Attributes
    ----------
    times : numpy.ndarray, shape (N,)
        Time points in seconds (multiples of the sample time for sampled plants).
    tracked_outputs : tuple of int
        Zero-based indices of the integrated outputs.
    reference_step : numpy.ndarray, shape (q,)
        Size of the reference step on each tracked output, in output units.
    disturbance_step : numpy.ndarray, shape (d,)
        Size of the disturbance step on each disturbance channel.
    reference_outputs, disturbance_outputs : numpy.ndarray, shape (N, p)
        All plant outputs y over time in each experiment.
    reference_inputs, disturbance_inputs : numpy.ndarray, shape (N, m)
        Actuator commands u over time in each experiment.
    closed_loop_stable : bool
        Whether the extended closed loop is stable.
    steady_state_error_reference, steady_state_error_disturbance : numpy.ndarray or None, shape (q,)
        Exact final tracking error r − y_t of each experiment, from the
        equilibrium of the closed loop (final value theorem); ``None`` when the
        loop is unstable.
    """

    times: np.ndarray
    tracked_outputs: tuple[int, ...]
    reference_step: np.ndarray
    disturbance_step: np.ndarray
    reference_outputs: np.ndarray
    disturbance_outputs: np.ndarray
    reference_inputs: np.ndarray
    disturbance_inputs: np.ndarray
    closed_loop_stable: bool
    steady_state_error_reference: np.ndarray | None
    steady_state_error_disturbance: np.ndarray | None


_read_only = partial(read_only, dtype=float)


def integral_step_response(
    plant: Plant,
    augmented_gain,
    horizon: float,
    time_step: float | None = None,
    *,
    outputs=None,
    reference_step=None,
    disturbance_step=None,
) -> IntegralActionResponse:
    """Simulate the loop with integral action for a reference step and a disturbance step.

    The closed loop is [x; ξ]' = (A_e − B_e K) [x; ξ] + [0; I] r + [E; 0] d with
    constant r and d, propagated exactly between time points by the matrix
    exponential of a block matrix (the response of a linear system to a constant
    input). Sampled plants are iterated sample by sample.

    Parameters
    ----------
    plant : Plant
        The original plant (not the extended one).
    augmented_gain : array_like, shape (m, n + q)
        Gain of the extended plant.
    horizon : float
        Length of the simulation in seconds (> 0).
    time_step : float, optional
        Output spacing in seconds for continuous plants (default: horizon/1000).
        Ignored for sampled plants, which use their sample time.
    outputs : sequence of int, optional
        Integrated outputs, as given to :func:`augment_with_integral_action`.
    reference_step : sequence of float, shape (q,), optional
        Reference step on each tracked output; 1 for each when omitted.
    disturbance_step : sequence of float, optional
        Disturbance step on each channel; ``plant.disturbance_step`` when omitted.

    Returns
    -------
    IntegralActionResponse

    Raises
    ------
    AnalysisError, GainError
        For invalid arguments (messages say which) or an uncontrollable extension.

    Examples
    --------
    >>> lag = Plant(A=[[-1.0]], B=[[1.0]])
    >>> response = integral_step_response(lag, [[1.0, -2.0]], horizon=20.0)
    >>> bool(response.closed_loop_stable), abs(float(response.steady_state_error_reference[0])) < 1e-12
    (True, True)
    """
    tracked = _tracked(plant, outputs)
    extended = augment_with_integral_action(plant, tracked)
    gain = extended.check_gain(augmented_gain)
    n, q = plant.state_count, len(tracked)
    if isinstance(horizon, bool) or not isinstance(horizon, (int, float)) or not (math.isfinite(horizon) and horizon > 0):
        raise AnalysisError(f"the horizon must be a positive number of seconds, got {horizon!r}")
    if plant.is_sampled:
        step_length = plant.sample_time
    elif time_step is None:
        step_length = horizon / 1000.0
    else:
        if isinstance(time_step, bool) or not isinstance(time_step, (int, float)) or not (
            math.isfinite(time_step) and 0 < time_step <= horizon
        ):
            raise AnalysisError(f"the time step must be a positive number of seconds no longer than the horizon, got {time_step!r}")
        step_length = float(time_step)
    count = int(math.floor(horizon / step_length + 1e-9)) + 1
    if count > 200_001:
        raise AnalysisError(f"{count} time points requested; use a longer time step or a shorter horizon (≤ 200000 steps)")

    r = np.ones(q) if reference_step is None else np.array(reference_step, dtype=float).reshape(-1)
    if r.shape != (q,) or not np.all(np.isfinite(r)):
        raise AnalysisError(f"the reference step must be {q} finite numbers, one per tracked output, got {reference_step!r}")
    d_count = plant.disturbance_matrix.shape[1]
    d = np.array(plant.disturbance_step if disturbance_step is None else disturbance_step, dtype=float).reshape(-1)
    if d.shape != (d_count,) or not np.all(np.isfinite(d)):
        raise AnalysisError(
            f"the disturbance step must be {d_count} finite numbers, one per disturbance channel, got {disturbance_step!r}"
        )

    closed = extended.A - extended.B @ gain
    weight = plant.sample_time if plant.is_sampled else 1.0
    reference_entry = np.vstack([np.zeros((n, q)), weight * np.eye(q)])
    size = n + q
    if plant.is_sampled:
        transition, forcing = closed, np.eye(size)
        stable = bool(np.max(np.abs(np.linalg.eigvals(closed))) < 1.0 - 1e3 * size * _EPS)
    else:
        # exp([[M, I], [0, 0]] h) = [[e^{Mh}, ∫₀ʰ e^{Mτ} dτ], [0, I]]
        block = np.zeros((2 * size, 2 * size))
        block[:size, :size] = closed
        block[:size, size:] = np.eye(size)
        exponential = scipy.linalg.expm(block * step_length)
        transition, forcing = exponential[:size, :size], exponential[:size, size:]
        scale = max(np.linalg.norm(closed, 2), np.finfo(float).tiny)
        stable = bool(np.max(np.linalg.eigvals(closed).real) < -1e3 * size * _EPS * scale)

    def run(constant_input):
        states = np.zeros((count, size))
        drive = forcing @ constant_input
        for k in range(1, count):
            states[k] = transition @ states[k - 1] + drive
        inputs = -states @ gain.T
        outputs_ = states[:, :n] @ plant.C.T + inputs @ plant.D.T
        return states, inputs, outputs_

    def final_error(constant_input, reference):
        if not stable:
            return None
        # Equilibrium: 0 = M x + w (continuous) or x = M x + w (sampled).
        matrix = np.eye(size) - closed if plant.is_sampled else -closed
        state = np.linalg.solve(matrix, constant_input)
        u = -gain @ state
        y = plant.C @ state[:n] + plant.D @ u
        return _read_only(reference - y[list(tracked)])

    reference_input = reference_entry @ r
    disturbance_input = extended.disturbance_matrix @ d
    _, u_r, y_r = run(reference_input)
    _, u_d, y_d = run(disturbance_input)
    return IntegralActionResponse(
        times=_read_only(np.arange(count) * step_length),
        tracked_outputs=tracked,
        reference_step=_read_only(r),
        disturbance_step=_read_only(d),
        reference_outputs=_read_only(y_r),
        disturbance_outputs=_read_only(y_d),
        reference_inputs=_read_only(u_r),
        disturbance_inputs=_read_only(u_d),
        closed_loop_stable=stable,
        steady_state_error_reference=final_error(reference_input, r),
        steady_state_error_disturbance=final_error(disturbance_input, np.zeros(q)),
    )
