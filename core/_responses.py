"""Time responses of a state-feedback loop u = −Kx, with actuator effort and saturation.

Three responses are computed for a design (plant, K):

- **initial**: regulation from an initial state x0 back to rest, u = −Kx;
- **step**: a reference step with a static prefilter, u = −Kx + N r, where N is
  chosen so that the tracked outputs settle exactly on the reference;
- **disturbance**: a step of the plant's disturbance (size ``plant.disturbance_step``
  on the channels of ``plant.disturbance_matrix``) while regulating, u = −Kx.

Each is computed twice when the plant has input limits: for the linear loop (what
the design asks of the actuators) and for the loop with the inputs clipped to their
limits (what a real actuator would deliver).

Continuous plants are propagated exactly at the grid points through zero-order-hold
transition matrices of the closed loop (one matrix exponential per response, no ODE
solver); sampled plants are propagated sample by sample with their own matrices.

These are predictions of a linear model. A design must be validated on the real
system with safe limits and emergency stops, following local codes,
functional-safety standards and licensed engineering practice.
"""

from __future__ import annotations

from functools import partial
import cmath
import math
from dataclasses import dataclass

import numpy as np

from ._arrays import read_only
from ._errors import AnalysisError
from ._metrics import (
    InputMetrics,
    LimitViolation,
    OutputMetrics,
    find_limit_violation,
    measure_input,
    measure_output,
)
from ._plant import Plant
from ._propagation import SwitchingLoop, integral_of_quadratic, matrix_exponential, propagate_many

__all__ = [
    "Response",
    "ResponseSet",
    "OutputMetrics",
    "InputMetrics",
    "LimitViolation",
    "simulate_responses",
    "reference_prefilter",
]

NAN = float("nan")

#: Most grid points chosen automatically (the app redraws these on every slider move).
AUTOMATIC_POINT_LIMIT = 2000
#: Most grid points accepted when the caller sets the horizon and time step.
REQUESTED_POINT_LIMIT = 100_001
#: A response is cut off once its state grows past this multiple of its natural size.
BLOW_UP_FACTOR = 1e6
#: Horizon in slowest time constants (e^{-7} ≈ 0.1 %: every 2 % settling is visible).
HORIZON_TIME_CONSTANTS = 7.0


@dataclass(frozen=True, eq=False)
class Response:
    """One time response of the loop, linear and (when the plant has limits) saturated.

    Attributes
    ----------
    kind : str
        "initial", "step" or "disturbance".
    time : numpy.ndarray, shape (N,)
        Grid times in seconds (t_k = k·h). Shorter than the requested horizon when
        the linear loop blows up (see ``diverged_at``).
    states : numpy.ndarray, shape (N, n)
        States of the linear loop.
    outputs : numpy.ndarray, shape (N, p)
        Outputs y = Cx + Du of the linear loop.
    inputs : numpy.ndarray, shape (N, m)
        Inputs the linear loop demands, u = −Kx (+ N r for the step).
    saturated_states, saturated_outputs, saturated_inputs : numpy.ndarray or None
        The same for the loop whose inputs are clipped to ``plant.input_limits``
        (None when the plant has no limits). The limits are applied at the grid
        points; samples after a blow-up of the saturated loop are ``nan``.
    limit_violations : tuple of LimitViolation
        Per input, whether the linear loop's demand leaves the actuator range
        (empty when the plant has no limits).
    output_metrics : tuple of OutputMetrics
        Per output, measured on the linear loop.
    input_metrics : tuple of InputMetrics
        Per input, measured on the linear loop.
    saturated_output_metrics, saturated_input_metrics : tuple or None
        The same measured on the saturated loop (None without limits).
    targets : numpy.ndarray, shape (p,)
        Target of each output: the reference for tracked outputs of the step, 0 for
        regulation, ``nan`` for untracked outputs of the step.
    diverged_at : float or None
        Time at which the linear loop's state passed the blow-up threshold (the
        arrays end there); None if it did not.
    saturated_diverged_at : float or None
        The same for the saturated loop.
    description : str
        One sentence on what was simulated.
    """

    kind: str
    time: np.ndarray
    states: np.ndarray
    outputs: np.ndarray
    inputs: np.ndarray
    saturated_states: np.ndarray | None
    saturated_outputs: np.ndarray | None
    saturated_inputs: np.ndarray | None
    limit_violations: tuple[LimitViolation, ...]
    output_metrics: tuple[OutputMetrics, ...]
    input_metrics: tuple[InputMetrics, ...]
    saturated_output_metrics: tuple[OutputMetrics, ...] | None
    saturated_input_metrics: tuple[InputMetrics, ...] | None
    targets: np.ndarray
    diverged_at: float | None
    saturated_diverged_at: float | None
    description: str


@dataclass(frozen=True, eq=False)
class ResponseSet:
    """The three responses of a design and how they were computed.

    Attributes
    ----------
    initial : Response
        Regulation from ``initial_state``.
    step : Response or None
        Reference step; None when no prefilter exists (``step_unavailable_reason``).
    disturbance : Response
        Disturbance step.
    step_unavailable_reason : str
        Why there is no step response ("" when there is one).
    horizon : float
        Last grid time in seconds.
    time_step : float
        Grid spacing h in seconds (the sample time for a sampled plant).
    prefilter : numpy.ndarray or None, shape (m, len(tracked_outputs))
        Static prefilter N of the step, u = −Kx + N r.
    prefilter_condition_number : float
        Condition number of the steady-state gain that N inverts (``nan`` when none).
    reference : numpy.ndarray, shape (len(tracked_outputs),)
        Size of the reference step on each tracked output.
    initial_state : numpy.ndarray, shape (n,)
        Starting state used for the initial-condition response.
    poles : numpy.ndarray, shape (n,)
        Closed-loop poles, eigenvalues of A − BK (s-plane, or z-plane when sampled).
    diverging : bool
        True when the closed loop is unstable.
    diverging_reason : str
        Which poles make it unstable ("" when stable).
    sample_time : float or None
        The plant's sample time (None for a continuous plant).
    settling_band : float
        Band used for the settling times.
    notes : tuple of str
        Further remarks (e.g. poles on the stability boundary).
    """

    initial: Response
    step: Response | None
    disturbance: Response
    step_unavailable_reason: str
    horizon: float
    time_step: float
    prefilter: np.ndarray | None
    prefilter_condition_number: float
    reference: np.ndarray
    initial_state: np.ndarray
    poles: np.ndarray
    diverging: bool
    diverging_reason: str
    sample_time: float | None
    settling_band: float
    notes: tuple[str, ...]

    @property
    def responses(self) -> tuple[Response, ...]:
        """The responses that exist, in the order initial, step, disturbance."""
        return tuple(r for r in (self.initial, self.step, self.disturbance) if r is not None)


# -- small helpers -----------------------------------------------------------------------
_read_only = partial(read_only, dtype=float)


def _pole_text(pole: complex, sampled: bool) -> str:
    variable = "z" if sampled else "s"
    if abs(pole.imag) <= 1e-12 * max(1.0, abs(pole)):
        return f"{variable} = {pole.real:.4g}"
    return f"{variable} = {pole.real:.4g} ± {abs(pole.imag):.4g}j"


def _pole_list_text(poles, sampled: bool) -> str:
    seen = [p for p in poles if p.imag >= 0.0]  # one of each conjugate pair
    return ", ".join(_pole_text(complex(p), sampled) for p in seen)


def _stability_tolerance(loop: np.ndarray, sampled: bool) -> float:
    """Rounding level of the closed-loop eigenvalues (in 1/s, or in |z| when sampled)."""
    n = loop.shape[0]
    size = np.linalg.norm(loop, 1)
    return 100.0 * n * np.finfo(float).eps * (max(size, 1.0) if sampled else size)


def _classify_poles(poles, loop, sampled):
    """(unstable poles, poles on the stability boundary) of the closed loop."""
    tolerance = _stability_tolerance(loop, sampled)
    if sampled:
        distance = np.abs(poles) - 1.0
    else:
        distance = poles.real
    unstable = poles[distance > tolerance]
    boundary = poles[np.abs(distance) <= tolerance]
    return unstable, boundary


def _equivalent_continuous(poles, sample_time):
    """s = ln(z)/T for sampled poles (z = 0 maps to −∞ and is left out)."""
    nonzero = poles[poles != 0]
    return np.array([cmath.log(complex(z)) / sample_time for z in nonzero], dtype=complex)


def _choose_grid(poles, loop, sampled, sample_time, horizon, time_step):
    """Horizon (s), time step (s) and number of grid points."""
    if sampled:
        if time_step is not None and not math.isclose(time_step, sample_time, rel_tol=1e-9):
            raise AnalysisError(
                f"a sampled plant is simulated at its sample time T = {sample_time:g} s; "
                f"the time step {time_step:g} s cannot be used (leave it unset)"
            )
        rates = _equivalent_continuous(poles, sample_time)
        tolerance = _stability_tolerance(loop, True) / sample_time
    else:
        rates = np.asarray(poles, dtype=complex)
        tolerance = _stability_tolerance(loop, False)

    if horizon is None:
        decaying = np.abs(rates.real) > tolerance
        length = 0.0
        if np.any(decaying):
            length = HORIZON_TIME_CONSTANTS / float(np.min(np.abs(rates.real[decaying])))
        ringing = (~decaying) & (np.abs(rates.imag) > tolerance)
        if np.any(ringing):  # undamped oscillation: show three periods of the slowest
            length = max(length, 3.0 * 2.0 * math.pi / float(np.min(np.abs(rates.imag[ringing]))))
        if length == 0.0:
            length = 20.0 * sample_time if sampled else 10.0
        growth = rates.real[rates.real > tolerance]
        if growth.size:  # enough to watch an unstable loop blow up, no more
            length = min(length, 2.0 * math.log(BLOW_UP_FACTOR) / float(np.max(growth)))
        if sampled:
            length = max(length, 20.0 * sample_time)
        automatic_horizon = True
    else:
        length = float(horizon)
        automatic_horizon = False

    if sampled:
        step = sample_time
    elif time_step is not None:
        step = float(time_step)
    else:
        fastest = float(np.max(np.abs(rates))) if rates.size else 0.0
        step = length / 400.0
        if fastest > 0.0:
            step = min(step, 0.1 / fastest)
        step = max(step, length / (AUTOMATIC_POINT_LIMIT - 1))

    count = int(math.floor(length / step + 1e-9)) + 1
    if automatic_horizon and time_step is None:
        count = min(count, AUTOMATIC_POINT_LIMIT)
    if count < 2:
        raise AnalysisError(
            f"the horizon {length:g} s is shorter than one time step ({step:g} s); lengthen the horizon"
        )
    if count > REQUESTED_POINT_LIMIT:
        raise AnalysisError(
            f"a horizon of {length:g} s with a time step of {step:g} s needs {count} points; the most is "
            f"{REQUESTED_POINT_LIMIT}: lengthen the time step or shorten the horizon"
        )
    return (count - 1) * step, step, count


def _positive_number(value, what: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.floating, np.integer)) or not (
        math.isfinite(value) and value > 0
    ):
        raise AnalysisError(f"{what} must be a positive number of seconds, got {value!r}")
    return float(value)


def _steady_state_gain(plant: Plant, K: np.ndarray):
    """Steady-state gain from a constant u₀ (added to −Kx) to the tracked outputs, and its pieces."""
    A, B, C, D = plant.A, plant.B, plant.C, plant.D
    n = plant.state_count
    loop = A - B @ K
    sampled = plant.is_sampled
    # equilibrium: 0 = loop x + B u0 (continuous) or x = loop x + B u0 (sampled)
    system = (np.eye(n) - loop) if sampled else -loop
    condition = np.linalg.cond(system)
    if not math.isfinite(condition) or condition * n * np.finfo(float).eps * 100.0 >= 1.0:
        poles = np.linalg.eigvals(loop)
        target = 1.0 if sampled else 0.0
        closest = complex(poles[np.argmin(np.abs(poles - target))])
        where = "z = 1" if sampled else "s = 0"
        raise AnalysisError(
            f"the closed loop has a pole at {where} (closest pole {_pole_text(closest, sampled)}), so the "
            "outputs have no steady state for a constant reference; move that pole before asking for a "
            "reference step"
        )
    to_state = np.linalg.solve(system, B)
    tracked = list(plant.tracked_outputs)
    output_of_state = (C - D @ K)[tracked]
    gain = output_of_state @ to_state + D[tracked]
    return gain, output_of_state, to_state, condition


def _spectral_norm(matrix: np.ndarray) -> float:
    """‖M‖₂; for a single row or column that is its Euclidean length (no SVD needed)."""
    if min(matrix.shape) <= 1:
        return float(np.sqrt(np.sum(matrix * matrix)))
    return float(np.linalg.norm(matrix, 2))


def _prefilter_with_condition(plant: Plant, K: np.ndarray):
    """(N, condition number of the steady-state gain, (I − A + BK)⁻¹B or −(A − BK)⁻¹B)."""
    gain, output_of_state, to_state, _ = _steady_state_gain(plant, K)
    q, m = gain.shape
    singular_values = np.linalg.svd(gain, compute_uv=False)
    natural_size = _spectral_norm(output_of_state) * _spectral_norm(to_state) + _spectral_norm(
        plant.D[list(plant.tracked_outputs)]
    )
    tolerance = 1e3 * max(q, m) * np.finfo(float).eps * natural_size
    if singular_values[-1] <= tolerance:
        names = ", ".join(plant.output_names[i] for i in plant.tracked_outputs)
        where = "z = 1" if plant.is_sampled else "s = 0"
        raise AnalysisError(
            f"the steady-state gain from the inputs to the tracked output(s) {names} is singular "
            f"(smallest singular value {singular_values[-1]:.3g} against a natural size of {natural_size:.3g}): "
            f"the loop has a zero at {where} on that path, or the tracked outputs cannot be set independently, "
            "so no constant prefilter reaches the reference; track other outputs or add integral action"
        )
    if q == m:
        prefilter = np.linalg.solve(gain, np.eye(q))
    else:
        # fewer tracked outputs than inputs: the smallest prefilter (minimum norm) that
        # gives gain @ N = I, i.e. the pseudo-inverse of a full-row-rank gain
        prefilter = np.linalg.pinv(gain)
    return prefilter, float(singular_values[0] / singular_values[-1]), to_state


def reference_prefilter(plant: Plant, K) -> np.ndarray:
    """Static prefilter N of u = −Kx + N r giving zero steady-state error on the tracked outputs.

    With the steady-state gain M from a constant u₀ to the tracked outputs
    (rows ``plant.tracked_outputs`` of y = Cx + Du)::

        continuous:  M = −(C − DK)_t (A − BK)⁻¹ B + D_t
        sampled:     M =  (C − DK)_t (I − A + BK)⁻¹ B + D_t

    N = M⁻¹ when as many outputs are tracked as there are inputs; with fewer
    tracked outputs, N = M⁺ (pseudo-inverse): the smallest N, in the least-squares
    sense, that still gives M N = I. A sampled plant is read at the sample instants.

    Parameters
    ----------
    plant : Plant
    K : array_like, shape (m, n)
        Feedback gain.

    Returns
    -------
    numpy.ndarray, shape (m, len(plant.tracked_outputs))

    Raises
    ------
    GainError
        If K has the wrong shape.
    AnalysisError
        If the closed loop has a pole at s = 0 (z = 1), or M is singular (a zero at
        s = 0 / z = 1 on the tracked path, or outputs that cannot be set independently).

    Examples
    --------
    >>> plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]])
    >>> reference_prefilter(plant, [[4.0, 4.0]]).tolist()
    [[4.0]]
    """
    K = plant.check_gain(K)
    prefilter, _, _ = _prefilter_with_condition(plant, K)
    return _read_only(prefilter)


# -- one response ----------------------------------------------------------------------------------
@dataclass(frozen=True)
class _Context:
    plant: Plant
    K: np.ndarray
    loop: np.ndarray
    sampled: bool
    time_step: float
    count: int
    stable: bool
    no_steady_state_reason: str
    diverging_reason: str
    band: float


def _blow_up_index(states: np.ndarray, threshold: float):
    """First row whose largest |entry| passes ``threshold`` (or is not finite); None if none."""
    if threshold <= 0.0:
        return None
    with np.errstate(invalid="ignore"):
        if np.abs(states).max(initial=0.0) <= threshold:  # the usual case: nothing to cut
            return None
        size = np.max(np.abs(states), axis=1)
    bad = ~(size <= threshold)
    if not bad.any():
        return None
    return int(np.argmax(bad))


def _natural_size(ctx: _Context, start, forcing, equilibrium) -> float:
    """Size a response should stay well within: its start, its equilibrium, its forcing."""
    size = float(np.max(np.abs(start)))
    if np.any(forcing != 0.0):
        if np.all(np.isfinite(equilibrium)):
            size = max(size, float(np.max(np.abs(equilibrium))))
        steps = ctx.count - 1
        size = max(size, float(np.max(np.abs(forcing))) * (steps if ctx.sampled else steps * ctx.time_step))
    return size


def _equilibria(ctx: _Context, forcings: np.ndarray) -> np.ndarray:
    """Equilibrium of each forcing (rows of ``forcings``): 0 = loop x + f, or x = loop x + f.

    One solve for all of them; rows of ``nan`` where the loop has a pole exactly at
    s = 0 (z = 1), so that the state ramps instead of settling. A zero forcing has
    the zero equilibrium.
    """
    equilibria = np.zeros_like(forcings)
    forced = np.flatnonzero(np.any(forcings != 0.0, axis=1))
    if forced.size:
        n = ctx.loop.shape[0]
        system = (np.eye(n) - ctx.loop) if ctx.sampled else -ctx.loop
        try:
            with np.errstate(all="ignore"):
                equilibria[forced] = np.linalg.solve(system, forcings[forced].T).T
        except np.linalg.LinAlgError:  # pole exactly at s = 0 / z = 1: the state ramps
            equilibria[forced] = np.nan
    return equilibria


class _Energies:
    """∫u² dt of every input over the first grid points of a response (exact for continuous loops).

    All responses of one design share the augmented generator F = [[A − BK, f₁ … f_r], [0, 0]]
    (state z = [x; e_r] for response r) and the applied input u = G z with
    G = [−K, u₀₁ … u₀_r]. Over one step the energy of input i is z[k]ᵀ Q_i z[k] with
    Q_i = ∫₀ʰ e^{Fᵀτ} g_iᵀ g_i e^{Fτ} dτ, so a response's energy is
    trace(Q_i Σₖ z[k] z[k]ᵀ): one block exponential per input serves all responses.
    Sampled loops hold u over each period: T Σ u[k]².
    """

    def __init__(self, ctx: _Context, generator: np.ndarray, applied: np.ndarray):
        self.ctx = ctx
        self.generator = generator
        self.applied = applied
        self._weights = None

    def _quadratic_weights(self) -> np.ndarray:
        if self._weights is None:
            generator_t = self.generator.T
            self._weights = np.stack([
                integral_of_quadratic(generator_t, np.outer(row, row), self.ctx.time_step) for row in self.applied
            ])
        return self._weights

    def of(self, trajectory: np.ndarray, inputs: np.ndarray, valid: int) -> np.ndarray:
        """Energies (m,) from the augmented trajectory (count, d) and inputs (count, m)."""
        if valid < 2:
            return np.zeros(inputs.shape[1])
        if self.ctx.sampled:
            return self.ctx.time_step * np.sum(inputs[: valid - 1] ** 2, axis=0)
        points = trajectory[: valid - 1]
        weight = points.T @ points
        return np.einsum("ijk,jk->i", self._quadratic_weights(), weight)


def _nan_metrics(plant: Plant, reason: str):
    outputs = tuple(
        OutputMetrics(i, name, NAN, NAN, NAN, NAN, NAN, NAN, NAN, NAN, NAN,
                      tuple((metric, reason) for metric in ("rise_time", "settling_time", "overshoot_percent",
                                                            "peak_value", "peak_time", "steady_state_error",
                                                            "final_value")))
        for i, name in enumerate(plant.output_names)
    )
    inputs = tuple(
        InputMetrics(i, name, NAN, NAN, NAN, (("peak_magnitude", reason), ("energy", reason)))
        for i, name in enumerate(plant.input_names)
    )
    return outputs, inputs


def _measure_all(ctx, kind, time, outputs, output_slopes, starts, finals, targets, final_reason, final_note,
                 target_reasons):
    plant = ctx.plant
    if np.isfinite(outputs).all():
        largest = float(np.abs(outputs).max()) if outputs.size else 0.0
    else:
        finite_outputs = outputs[np.all(np.isfinite(outputs), axis=1)]
        largest = float(np.max(np.abs(finite_outputs))) if finite_outputs.size else 0.0
    if np.any(np.isfinite(finals)):
        largest = max(largest, float(np.nanmax(np.abs(finals))))
    noise_floor = 1e-10 * largest
    return tuple(
        measure_output(
            time,
            outputs[:, i],
            None if output_slopes is None else output_slopes[:, i],
            kind=kind,
            start=float(starts[i]),
            final=float(finals[i]),
            target=float(targets[i]),
            band=ctx.band,
            index=i,
            name=name,
            noise_floor=noise_floor,
            final_reason=final_reason,
            final_note=final_note,
            target_reason=target_reasons[i],
            at_samples=ctx.sampled,
        )
        for i, name in enumerate(plant.output_names)
    )


def _simulate_one(ctx: _Context, kind: str, trajectory, energies: _Energies, start, law_offset, outside_forcing,
                  forcing, equilibrium, targets, target_reasons, description):
    plant, K, loop = ctx.plant, ctx.K, ctx.loop
    C, D = plant.C, plant.D
    n = plant.state_count
    states = trajectory[:, :n]

    threshold = BLOW_UP_FACTOR * _natural_size(ctx, start, forcing, equilibrium)
    diverged_at = None
    cut = _blow_up_index(states, threshold)
    if cut is not None:
        keep = cut + 1 if np.all(np.isfinite(states[cut])) else max(cut, 2)
        states = states[:keep]
        trajectory = trajectory[:keep]
        diverged_at = float(cut * ctx.time_step)
    states = np.ascontiguousarray(states)
    count = states.shape[0]
    time = ctx.time_step * np.arange(count)

    inputs = law_offset - states @ K.T
    outputs = states @ C.T + inputs @ D.T
    if ctx.sampled:
        output_slopes = input_slopes = None
    else:
        # x' = loop x + f, so y' = (C − DK) x' and u' = −K x': one product with the (p + m)×n
        # maps (C − DK)·loop and −K·loop instead of forming x' (count × n) first
        slope_maps = np.vstack([C - D @ K, -K])
        slopes = states @ (slope_maps @ loop).T + slope_maps @ forcing
        output_slopes, input_slopes = slopes[:, : plant.output_count], slopes[:, plant.output_count :]

    # exact steady state of the linear loop
    starts = (outputs[0] if kind == "initial" else np.zeros(plant.output_count))
    final_reason = ""
    if not ctx.stable:
        finals = np.full(plant.output_count, NAN)
        final_reason = ctx.no_steady_state_reason
    elif np.any(forcing != 0.0):
        finals = C @ equilibrium + D @ (law_offset - K @ equilibrium)
    else:
        finals = np.zeros(plant.output_count)

    if diverged_at is not None:
        output_metrics, input_metrics = _nan_metrics(plant, ctx.diverging_reason or "the response blows up")
    else:
        output_metrics = _measure_all(ctx, kind, time, outputs, output_slopes, starts, finals, targets,
                                      final_reason, "", target_reasons)
        energy = energies.of(trajectory, inputs, count)
        input_metrics = tuple(
            measure_input(time, inputs[:, i], None if input_slopes is None else input_slopes[:, i],
                          energy=float(energy[i]), index=i, name=name, at_samples=ctx.sampled)
            for i, name in enumerate(plant.input_names)
        )

    saturated = dict(
        saturated_states=None,
        saturated_outputs=None,
        saturated_inputs=None,
        saturated_output_metrics=None,
        saturated_input_metrics=None,
        saturated_diverged_at=None,
    )
    violations: tuple[LimitViolation, ...] = ()
    if plant.input_limits is not None:
        low = np.array([pair[0] for pair in plant.input_limits])
        high = np.array([pair[1] for pair in plant.input_limits])
        violations = tuple(
            find_limit_violation(time, inputs[:, i], None if input_slopes is None else input_slopes[:, i],
                                 low=low[i], high=high[i], index=i, name=name, at_samples=ctx.sampled)
            for i, name in enumerate(plant.input_names)
        )
        saturated = _simulate_saturated(
            ctx, kind, time, states, inputs, outputs, output_metrics, input_metrics, law_offset,
            outside_forcing, low, high, threshold, starts, finals, targets, final_reason, target_reasons,
        )

    return Response(
        kind=kind,
        time=_read_only(time),
        states=_read_only(states),
        outputs=_read_only(outputs),
        inputs=_read_only(inputs),
        limit_violations=violations,
        output_metrics=output_metrics,
        input_metrics=input_metrics,
        targets=_read_only(targets),
        diverged_at=diverged_at,
        description=description,
        **saturated,
    )


def _simulate_saturated(ctx, kind, time, states, inputs, outputs, output_metrics, input_metrics, law_offset,
                        outside_forcing, low, high, threshold, starts, finals, targets, final_reason,
                        target_reasons):
    plant, K = ctx.plant, ctx.K
    A, B, C, D = plant.A, plant.B, plant.C, plant.D
    m = plant.input_count
    count = states.shape[0]
    beyond = np.any((inputs < low) | (inputs > high), axis=1)
    if not beyond.any():
        # The demand never leaves the actuator range at a grid point, so the clipped
        # loop never switches away from the linear law: it is the same trajectory.
        return dict(
            saturated_states=_read_only(states),
            saturated_outputs=_read_only(outputs),
            saturated_inputs=_read_only(inputs),
            saturated_output_metrics=output_metrics,
            saturated_input_metrics=input_metrics,
            saturated_diverged_at=None,
        )
    first = int(np.argmax(beyond))
    switching = SwitchingLoop(A, B, K, law_offset, outside_forcing, low, high, ctx.time_step, ctx.sampled)
    tail_states, tail_law, tail_patterns = switching.run(states[first], count - first)
    sat_states = np.vstack([states[:first], tail_states])
    law = np.vstack([inputs[:first], tail_law])
    patterns = np.vstack([np.zeros((first, m), dtype=int), tail_patterns])
    sat_inputs = np.clip(law, low, high)

    diverged_at = None
    cut = _blow_up_index(sat_states, threshold)
    valid = count
    if cut is not None:
        valid = cut + 1 if np.all(np.isfinite(sat_states[cut])) else cut
        sat_states[valid:] = np.nan
        sat_inputs[valid:] = np.nan
        diverged_at = float(cut * ctx.time_step)
    sat_outputs = sat_states @ C.T + sat_inputs @ D.T

    # energy: exact per pattern of pinned inputs (continuous), held samples (sampled)
    energies = np.zeros(m)
    if ctx.sampled:
        energies = ctx.time_step * np.sum(sat_inputs[: max(valid - 1, 0)] ** 2, axis=0)
    elif valid >= 2:
        used = patterns[: valid - 1]
        # one whole number per pattern (digits −1/0/+1 in base 3), to group the steps by pattern
        codes = (used + 1) @ (3 ** np.arange(m))
        for code in np.unique(codes):
            rows = np.flatnonzero(codes == code)
            generator, applied = switching.mode_generator(used[rows[0]])
            augmented = np.hstack([sat_states[rows], np.ones((rows.size, 1))])
            integral = integral_of_quadratic(generator, augmented.T @ augmented, ctx.time_step)
            energies = energies + np.einsum("ij,jk,ik->i", applied, integral, applied)

    if diverged_at is not None:
        reason = "the loop with clipped inputs blows up"
        out_metrics, in_metrics = _nan_metrics(plant, reason)
    else:
        ends_free = not np.any((law[valid - 1] < low) | (law[valid - 1] > high))
        note = ""
        sat_finals = finals
        if not (ends_free and np.all(np.isfinite(finals))):
            sat_finals = sat_outputs[valid - 1].copy()
            note = ("taken from the last grid point: the input is still at a limit at the end of the horizon"
                    if not ends_free else "taken from the last grid point")
        out_metrics = _measure_all(ctx, kind, time, sat_outputs, None, starts, sat_finals, targets,
                                   final_reason, note, target_reasons)
        in_metrics = tuple(
            measure_input(time, sat_inputs[:, i], None, energy=float(energies[i]), index=i, name=name,
                          at_samples=ctx.sampled)
            for i, name in enumerate(plant.input_names)
        )
    return dict(
        saturated_states=_read_only(sat_states),
        saturated_outputs=_read_only(sat_outputs),
        saturated_inputs=_read_only(sat_inputs),
        saturated_output_metrics=out_metrics,
        saturated_input_metrics=in_metrics,
        saturated_diverged_at=diverged_at,
    )


# -- the public entry point ---------------------------------------------------------------------
def simulate_responses(
    plant: Plant,
    K,
    *,
    initial_state=None,
    reference=None,
    horizon: float | None = None,
    time_step: float | None = None,
    settling_band: float = 0.02,
) -> ResponseSet:
    """Initial-condition, reference-step and disturbance-step responses of u = −Kx.

    Parameters
    ----------
    plant : Plant
        Continuous or sampled plant; its ``input_limits`` switch on the saturated
        simulation, its ``disturbance_matrix``/``disturbance_step`` define the
        disturbance, its ``tracked_outputs`` the reference step.
    K : array_like, shape (m, n)
        Feedback gain.
    initial_state : array_like, shape (n,), optional
        Start of the initial-condition response. Default: ``plant.initial_state``,
        or else a unit deviation of the first state, x0 = (1, 0, …, 0).
    reference : array_like, shape (len(plant.tracked_outputs),), optional
        Size of the reference step on each tracked output, all applied at t = 0.
        Default: a unit step on every tracked output at once.
    horizon : float, optional
        Simulated time in seconds. Default: 7 × the slowest closed-loop time
        constant 1/|Re s| (three periods of an undamped pole; for an unstable loop
        just long enough to show the growth).
    time_step : float, optional
        Grid spacing in seconds (continuous plants only; a sampled plant uses its
        sample time). Default: a tenth of the fastest pole's time scale 1/|s|, at
        most horizon/400, with at most 2000 points.
    settling_band : float
        Settling band as a fraction of the change (0.02 = 2 %).

    Returns
    -------
    ResponseSet

    Notes
    -----
    The linear loop is exact at the grid points (zero-order-hold transition of the
    closed loop with constant forcing). The saturated loop clips each input to its
    limits: at each grid point an input whose linear law lies outside its range is
    held at the limit over the next step, otherwise the linear law is applied
    (continuously for a continuous plant). Entering or leaving saturation between
    grid points is only seen at the next grid point: the saturated simulation is
    sampled at the response time step. An unstable loop is simulated until its state
    grows a million-fold past its natural size and then cut off (``diverging``).

    These are predictions of a linear model: validate any design on the real system
    with safe limits and emergency stops, under local codes, functional-safety
    standards and licensed engineering practice.

    Raises
    ------
    GainError
        If K has the wrong shape.
    AnalysisError
        For a bad initial state, reference, horizon, time step or settling band.

    Examples
    --------
    >>> plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]])
    >>> result = simulate_responses(plant, [[1.0, 1.4]])
    >>> result.diverging, result.prefilter.tolist()
    (False, [[1.0]])
    >>> round(result.step.output_metrics[0].overshoot_percent, 2)  # ζ = 0.7: e^{-πζ/√(1-ζ²)}
    4.6
    """
    K = plant.check_gain(K)
    n, m, p = plant.state_count, plant.input_count, plant.output_count
    sampled = plant.is_sampled
    if isinstance(settling_band, bool) or not isinstance(settling_band, (int, float)) or not 0 < settling_band < 1:
        raise AnalysisError(f"the settling band must lie between 0 and 1 (0.02 for 2 %), got {settling_band!r}")
    if horizon is not None:
        horizon = _positive_number(horizon, "the horizon")
    if time_step is not None:
        time_step = _positive_number(time_step, "the time step")

    if initial_state is None:
        start = plant.initial_state if plant.initial_state is not None else np.eye(n)[0]
    else:
        start = np.asarray(initial_state, dtype=float).reshape(-1)
        if start.shape != (n,) or not np.all(np.isfinite(start)):
            raise AnalysisError(
                f"the initial state must be {n} finite numbers (one per state: "
                f"{', '.join(plant.state_names)}), got {list(np.ravel(initial_state))!r}"
            )
    start = np.array(start, dtype=float)

    tracked = plant.tracked_outputs
    if reference is None:
        reference_values = np.ones(len(tracked))
    else:
        reference_values = np.asarray(reference, dtype=float).reshape(-1)
        if reference_values.shape != (len(tracked),) or not np.all(np.isfinite(reference_values)):
            names = ", ".join(plant.output_names[i] for i in tracked)
            raise AnalysisError(
                f"the reference must be {len(tracked)} finite number(s), one per tracked output ({names}), "
                f"got {list(np.ravel(reference))!r}"
            )

    loop = plant.A - plant.B @ K
    poles = np.linalg.eigvals(loop)
    unstable, boundary = _classify_poles(poles, loop, sampled)
    diverging = unstable.size > 0
    diverging_reason = ""
    notes: list[str] = []
    if diverging:
        region = "outside the unit circle |z| = 1" if sampled else "in the right half-plane"
        diverging_reason = f"the closed loop is unstable: pole(s) {_pole_list_text(unstable, sampled)} lie {region}"
        no_steady = diverging_reason
    elif boundary.size:
        region = "on the unit circle" if sampled else "on the imaginary axis"
        no_steady = (f"the closed loop has pole(s) {_pole_list_text(boundary, sampled)} {region}, "
                     "so the response does not settle to a final value")
        notes.append(no_steady)
    else:
        no_steady = ""
    stable = not diverging and boundary.size == 0

    sample_time = plant.sample_time
    horizon_used, step, count = _choose_grid(poles, loop, sampled, sample_time, horizon, time_step)
    ctx = _Context(plant, K, loop, sampled, step, count, stable, no_steady, diverging_reason, float(settling_band))

    zeros_m, zeros_n = np.zeros(m), np.zeros(n)
    rest_targets = np.zeros(p)
    no_reasons = ("",) * p

    prefilter = None
    condition = NAN
    step_reason = ""
    try:
        prefilter, condition, _ = _prefilter_with_condition(plant, K)
    except AnalysisError as error:
        step_reason = str(error)

    # (kind, start, law offset u₀, outside forcing, targets, target reasons, description)
    plans = [("initial", start, zeros_m, zeros_n, rest_targets, no_reasons,
              "regulation from the initial state with u = −Kx")]
    if prefilter is not None:
        step_targets = np.full(p, NAN)
        step_targets[list(tracked)] = reference_values
        target_reasons = tuple(
            "" if i in tracked else "this output is not tracked, so it has no reference" for i in range(p)
        )
        plans.append(("step", zeros_n, prefilter @ reference_values, zeros_n, step_targets, target_reasons,
                      "reference step on the tracked outputs with u = −Kx + N r"))
    plans.append(("disturbance", zeros_n, zeros_m, plant.disturbance_matrix @ np.asarray(plant.disturbance_step),
                  rest_targets, no_reasons, "disturbance step while regulating with u = −Kx"))

    # All responses share the loop: response r is z = [x; e_r] of one augmented system
    # whose extra states carry the constant forcings, so one matrix exponential and one
    # doubling chain give every trajectory exactly at the grid points.
    count_r = len(plans)
    forcings = np.array([plant.B @ law + outside for _, _, law, outside, _, _, _ in plans])
    equilibria = _equilibria(ctx, forcings)
    size = n + count_r
    generator = np.zeros((size, size))
    generator[:n, :n] = loop
    generator[:n, n:] = forcings.T
    if sampled:
        step_map = generator.copy()
        step_map[n:, n:] = np.eye(count_r)
    else:
        step_map = matrix_exponential(generator * step)
        # the constant states stay exactly constant through the products
        step_map[n:, :] = 0.0
        step_map[n:, n:] = np.eye(count_r)
    starts = np.zeros((count_r, size))
    starts[:, n:] = np.eye(count_r)
    starts[0, :n] = start
    trajectories = propagate_many(step_map, starts, count)
    applied = np.zeros((m, size))
    applied[:, :n] = -K
    applied[:, n:] = np.array([law for _, _, law, _, _, _, _ in plans]).T
    energies = _Energies(ctx, generator, applied)

    results = {}
    for r, (kind, first_state, law, outside, targets, reasons, description) in enumerate(plans):
        results[kind] = _simulate_one(ctx, kind, trajectories[:, r, :], energies, first_state, law, outside,
                                      forcings[r], equilibria[r], targets, reasons, description)
    initial, step_response, disturbance = results["initial"], results.get("step"), results["disturbance"]

    return ResponseSet(
        initial=initial,
        step=step_response,
        disturbance=disturbance,
        step_unavailable_reason=step_reason,
        horizon=float(horizon_used),
        time_step=float(step),
        prefilter=None if prefilter is None else _read_only(prefilter),
        prefilter_condition_number=condition,
        reference=_read_only(reference_values),
        initial_state=_read_only(start),
        poles=poles.copy(),
        diverging=diverging,
        diverging_reason=diverging_reason,
        sample_time=sample_time,
        settling_band=float(settling_band),
        notes=tuple(notes),
    )
