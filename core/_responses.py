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
transition matrices of the closed loop (one matrix exponential serves all three
responses, no ODE solver); sampled plants are propagated sample by sample with their
own matrices. The responses share their grid, so their inputs, outputs, slopes and
metrics are computed together, a few numpy calls for all of them (this runs on every
slider move).

These are predictions of a linear model. A design must be validated on the real
system with safe limits and emergency stops, following local codes,
functional-safety standards and licensed engineering practice.
"""

from __future__ import annotations

from functools import partial
import cmath
import math
from dataclasses import dataclass, field
from typing import NamedTuple

import numpy as np

from ._arrays import read_only
from ._errors import AnalysisError
from ._metrics import (
    InputMetrics,
    LimitViolation,
    OutputMetrics,
    _measure_input_rows,
    _measure_output_rows,
    find_limit_violation,
)
from ._plant import Plant
from ._propagation import (
    SwitchingLoop,
    energy_projections,
    matrix_exponential,
    projected_energies,
    propagate_many,
    step_energies,
)
from ._stability import boundary_tolerance

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
_EPS = float(np.finfo(float).eps)

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


#: Response(*fields in order), built without the per-field cost of a frozen __init__.


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
    """Rounding level of the closed-loop eigenvalues (in 1/s, or in |z| when sampled): the one band.

    :func:`gainboard.core.boundary_tolerance` (100 · n · eps · ‖loop‖_F), so that what the
    responses call diverging or on the boundary is what the pole report calls so.
    """
    if loop.shape[0] == 0:
        return 0.0
    return boundary_tolerance(float(np.linalg.norm(loop)), loop.shape[0])


def _classify_poles(poles, loop, sampled, tolerance=None):
    """(unstable poles, poles on the stability boundary) of the closed loop."""
    if tolerance is None:
        tolerance = _stability_tolerance(loop, sampled)
    if sampled:
        distance = np.abs(poles) - 1.0
    else:
        distance = poles.real
    if poles.size and distance.max() < -tolerance:  # the usual case, strictly stable: nothing to pick
        return poles[:0], poles[:0]
    unstable = poles[distance > tolerance]
    boundary = poles[np.abs(distance) <= tolerance]
    return unstable, boundary


def _equivalent_continuous(poles, sample_time):
    """s = ln(z)/T for sampled poles (z = 0 maps to −∞ and is left out)."""
    nonzero = poles[poles != 0]
    return np.array([cmath.log(complex(z)) / sample_time for z in nonzero], dtype=complex)


def _choose_grid(poles, loop, sampled, sample_time, horizon, time_step, tolerance=None):
    """Horizon (s), time step (s) and number of grid points (``tolerance``: the stability tolerance)."""
    if tolerance is None:
        tolerance = _stability_tolerance(loop, sampled)
    if sampled:
        if time_step is not None and not math.isclose(time_step, sample_time, rel_tol=1e-9):
            raise AnalysisError(
                f"a sampled plant is simulated at its sample time T = {sample_time:g} s; "
                f"the time step {time_step:g} s cannot be used (leave it unset)"
            )
        rates = _equivalent_continuous(poles, sample_time)
        tolerance = tolerance / sample_time
    else:
        rates = np.asarray(poles, dtype=complex)

    if horizon is None:
        real, imaginary = rates.real.tolist(), rates.imag.tolist()
        decay_rates = [abs(value) for value in real if abs(value) > tolerance]
        length = 0.0
        if decay_rates:
            length = HORIZON_TIME_CONSTANTS / min(decay_rates)
        ringing = [abs(w) for value, w in zip(real, imaginary) if abs(value) <= tolerance and abs(w) > tolerance]
        if ringing:  # undamped oscillation: show three periods of the slowest
            length = max(length, 3.0 * 2.0 * math.pi / min(ringing))
        if length == 0.0:
            length = 20.0 * sample_time if sampled else 10.0
        growth = [value for value in real if value > tolerance]
        if growth:  # enough to watch an unstable loop blow up, no more
            length = min(length, 2.0 * math.log(BLOW_UP_FACTOR) / max(growth))
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
        fastest = float(np.abs(rates).max()) if rates.size else 0.0
        step = length / 400.0
        if fastest > 0.0:
            step = min(step, 0.1 / fastest)
        step = max(step, length / (AUTOMATIC_POINT_LIMIT - 1))
        growth_rate = max([value for value in rates.real.tolist() if value > tolerance], default=0.0)
        if not automatic_horizon and time_step is None and growth_rate * step > 1.0:
            # an unstable loop grows by more than e per step over this horizon: the first steps
            # would pass the largest double before the blow-up could be seen. Simulate until it
            # has blown up (as the automatic horizon does), finely enough to follow it.
            length = min(length, 2.0 * math.log(BLOW_UP_FACTOR) / growth_rate)
            step = max(min(length / 400.0, 0.1 / fastest), length / (AUTOMATIC_POINT_LIMIT - 1))

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


def _condition_number(matrix: np.ndarray) -> float:
    """2-norm condition number σ_max/σ_min (inf when singular), as numpy.linalg.cond."""
    singular_values = np.linalg.svd(matrix, compute_uv=False)
    largest, smallest = float(singular_values[0]), float(singular_values[-1])
    return largest / smallest if smallest != 0.0 else math.inf


def _frobenius(matrix: np.ndarray) -> float:
    """‖M‖_F (one dot product of the entries)."""
    return math.sqrt(float(np.vdot(matrix, matrix)))


def _steady_state_gain(plant: Plant, K: np.ndarray, loop: np.ndarray | None = None, extra=None):
    """Steady-state gain from a constant u₀ (added to −Kx) to the tracked outputs, and its pieces.

    Returns (gain, (C − DK)_t, M⁻¹B, condition number or ``nan``, M⁻¹·``extra``) with M the
    equilibrium matrix; ``extra`` (n, k) are further forcings solved with the same LU (None: none).
    """
    A, B, C, D = plant.A, plant.B, plant.C, plant.D
    n = plant.state_count
    if loop is None:
        loop = A - B @ K
    sampled = plant.is_sampled
    # equilibrium: 0 = loop x + B u0 (continuous) or x = loop x + B u0 (sampled)
    system = (np.eye(n) - loop) if sampled else -loop
    # The loop is refused when cond₂(M)·n·eps·100 ≥ 1. cond₂(M) ≤ ‖M‖_F ‖M⁻¹‖_F, and the inverse
    # comes with the solve for (M⁻¹B) at little extra cost (one LU, more right-hand sides),
    # while the singular values cost a decomposition of their own; so a bound below half the
    # limit settles it (the half covers the rounding of the computed inverse, whose relative
    # error is about cond₂·eps below the limit), and the exact condition number is only
    # needed near the limit.
    condition = NAN
    bound = math.inf
    to_state = None
    m = B.shape[1]
    try:
        with np.errstate(all="ignore"):
            solved = np.linalg.solve(system, np.hstack([B, np.eye(n)] if extra is None else [B, np.eye(n), extra]))
        to_state = solved[:, :m]
        bound = _frobenius(system) * _frobenius(solved[:, m : m + n]) * (1.0 + 1e-12)
    except np.linalg.LinAlgError:
        pass
    if not bound * n * _EPS * 100.0 < 0.5:  # also when the bound is not finite
        condition = _condition_number(system)
    if condition * n * _EPS * 100.0 >= 1.0 or math.isinf(condition):
        poles = np.linalg.eigvals(loop)
        target = 1.0 if sampled else 0.0
        closest = complex(poles[np.argmin(np.abs(poles - target))])
        where = "z = 1" if sampled else "s = 0"
        raise AnalysisError(
            f"the closed loop has a pole at {where} (closest pole {_pole_text(closest, sampled)}), so the "
            "outputs have no steady state for a constant reference; move that pole before asking for a "
            "reference step"
        )
    if to_state is None:  # the LU met an exact zero pivot the singular values did not confirm
        solved = np.linalg.solve(system, B if extra is None else np.hstack([B, extra]))
        to_state = solved[:, :m]
        solved = np.hstack([to_state, np.eye(n), solved[:, m:]])
    tracked = list(plant.tracked_outputs)
    tracked_feedthrough = D[tracked]
    output_of_state = C[tracked] - tracked_feedthrough @ K
    gain = output_of_state @ to_state + tracked_feedthrough
    return gain, output_of_state, to_state, condition, None if extra is None else solved[:, m + n :]


def _spectral_norm(matrix: np.ndarray) -> float:
    """‖M‖₂; for a single row or column that is its Euclidean length (no SVD needed)."""
    if min(matrix.shape) <= 1:
        return float(np.sqrt(np.sum(matrix * matrix)))
    return float(np.linalg.svd(matrix, compute_uv=False)[0])


def _prefilter_with_condition(plant: Plant, K: np.ndarray, loop: np.ndarray | None = None, extra=None):
    """(N, condition number of the steady-state gain, M⁻¹B, M⁻¹·``extra``), M = I − A + BK or −(A − BK)."""
    gain, output_of_state, to_state, _, extra_solved = _steady_state_gain(plant, K, loop, extra)
    q, m = gain.shape
    if q == m == 1:  # one input, one tracked output: σ = |M| (what the SVD returns for 1×1)
        singular_values = np.abs(gain[0])
    else:
        singular_values = np.linalg.svd(gain, compute_uv=False)
    feedthrough = plant.D[list(plant.tracked_outputs)]
    # ‖·‖_F ≥ ‖·‖₂ (with a margin for their rounding), so a gain clear of the tolerance built
    # from Frobenius norms is clear of the exact one too; the spectral norms (an SVD each)
    # are only needed near the boundary.
    frobenius = [_frobenius(matrix) for matrix in (output_of_state, to_state, feedthrough)]
    bound = (frobenius[0] * frobenius[1] + frobenius[2]) * (1.0 + 1e-12)
    clear = singular_values[-1] > 1e3 * max(q, m) * _EPS * bound
    natural_size = NAN
    if not clear:
        natural_size = _spectral_norm(output_of_state) * _spectral_norm(to_state) + _spectral_norm(feedthrough)
    if not clear and singular_values[-1] <= 1e3 * max(q, m) * _EPS * natural_size:
        names = ", ".join(plant.output_names[i] for i in plant.tracked_outputs)
        where = "z = 1" if plant.is_sampled else "s = 0"
        raise AnalysisError(
            f"the steady-state gain from the inputs to the tracked output(s) {names} is singular "
            f"(smallest singular value {singular_values[-1]:.3g} against a natural size of {natural_size:.3g}): "
            f"the loop has a zero at {where} on that path, or the tracked outputs cannot be set independently, "
            "so no constant prefilter reaches the reference; track other outputs or add integral action"
        )
    if q == m == 1:
        prefilter = 1.0 / gain  # the LU solve of a 1×1 system is this one division
    elif q == m:
        prefilter = np.linalg.inv(gain)
    else:
        # fewer tracked outputs than inputs: the smallest prefilter (minimum norm) that
        # gives gain @ N = I, i.e. the pseudo-inverse of a full-row-rank gain
        prefilter = np.linalg.pinv(gain)
    return prefilter, float(singular_values[0] / singular_values[-1]), to_state, extra_solved


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
    prefilter, _, _, _ = _prefilter_with_condition(plant, K)
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

    #: (Φ, Ψ) per pattern of pinned inputs, shared by the clipped loops of the responses
    transitions: dict = field(default_factory=dict)

    def switching_loop(self, law_offset, outside_forcing, low, high) -> SwitchingLoop:
        """The clipped loop of one response (u₀ and the outside forcing are the response's own)."""
        plant = self.plant
        return SwitchingLoop(plant.A, plant.B, self.K, law_offset, outside_forcing, low, high, self.time_step,
                             self.sampled, self.transitions)


def _blow_up_index(states: np.ndarray, threshold: float):
    """First row whose largest |entry| passes ``threshold`` (or is not finite); None if none."""
    if threshold <= 0.0:
        return None
    with np.errstate(invalid="ignore"):
        # the usual case, nothing to cut, read from the extremes (no |states| temporary)
        if states.size == 0 or (states.max() <= threshold and states.min() >= -threshold):
            return None
        size = np.max(np.abs(states), axis=1)
    bad = ~(size <= threshold)
    if not bad.any():
        return None
    return int(np.argmax(bad))


def _natural_sizes(ctx: _Context, plans, forcings: np.ndarray, equilibria: np.ndarray) -> list[float]:
    """Size each response should stay well within: its start, its equilibrium, its forcing."""
    responses = len(plans)
    # largest |entry| of every start, forcing and equilibrium in one pass (nan where the state ramps)
    with np.errstate(invalid="ignore"):
        largest = np.abs(np.vstack([[plan.start for plan in plans], forcings, equilibria])).max(axis=1).tolist()
    start_sizes = largest[:responses]
    forcing_sizes = largest[responses : 2 * responses]
    equilibrium_sizes = largest[2 * responses :]
    steps = ctx.count - 1
    span = steps if ctx.sampled else steps * ctx.time_step
    sizes = []
    for start_size, forcing_size, equilibrium_size in zip(start_sizes, forcing_sizes, equilibrium_sizes):
        size = start_size
        if forcing_size != 0.0:
            if math.isfinite(equilibrium_size):
                size = max(size, equilibrium_size)
            size = max(size, forcing_size * span)
        sizes.append(size)
    return sizes


def _equilibria(ctx: _Context, forcings: np.ndarray) -> np.ndarray:
    """Equilibrium of each forcing (rows of ``forcings``): 0 = loop x + f, or x = loop x + f.

    One solve for all of them; rows of ``nan`` where the loop has a pole exactly at
    s = 0 (z = 1), so that the state ramps instead of settling. A zero forcing has
    the zero equilibrium.
    """
    equilibria = np.zeros_like(forcings)
    forced = [r for r, row in enumerate(forcings.tolist()) if any(value != 0.0 for value in row)]
    if forced:
        n = ctx.loop.shape[0]
        system = (np.eye(n) - ctx.loop) if ctx.sampled else -ctx.loop
        try:
            with np.errstate(all="ignore"):
                equilibria[forced] = np.linalg.solve(system, forcings[forced].T).T
        except np.linalg.LinAlgError:  # pole exactly at s = 0 / z = 1: the state ramps
            equilibria[forced] = np.nan
    return equilibria


class _Plan(NamedTuple):
    """What one response simulates: its start, its constant forcing and what it is measured against."""

    kind: str
    start: np.ndarray  # x0, shape (n,)
    law_offset: np.ndarray  # u₀ of u = −Kx + u₀, shape (m,)
    outside_forcing: np.ndarray  # forcing outside the inputs (E d), shape (n,)
    targets: np.ndarray  # shape (p,)
    target_reasons: tuple[str, ...]
    description: str


@dataclass(eq=False)
class _Piece:
    """The linear part of one response while it is being assembled (metrics filled in later)."""

    plan: _Plan
    index: int  # which of the responses sharing the trajectories
    diverged_at: float | None
    threshold: float  # blow-up threshold of the state
    projections: np.ndarray | None  # energy projections of the shared loop (continuous)
    time: np.ndarray
    states: np.ndarray
    inputs: np.ndarray  # (N, m)
    outputs: np.ndarray  # (N, p)
    input_rows: np.ndarray  # (m, N), the same values as signal rows
    input_slopes: np.ndarray | None  # (m, N), continuous loops
    starts: np.ndarray
    finals: np.ndarray
    final_reason: str
    output_metrics: tuple = ()
    input_metrics: tuple = ()


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


def _frozen_columns(rows: np.ndarray) -> np.ndarray:
    """A read-only (N, c) view of signal rows (c, N) (no copy: the rows are never written again)."""
    columns = rows.T
    columns.flags.writeable = False
    return columns


def _noise_floor(outputs: np.ndarray, finals: np.ndarray) -> float:
    """Excursions at or below this size count as "the output does not move" (10⁻¹⁰ of the largest value).

    ``outputs`` is (N, p), one row per grid point; only grid points where every
    output is finite count.
    """
    if np.isfinite(outputs).all():
        largest = float(np.abs(outputs).max()) if outputs.size else 0.0
    else:
        finite_outputs = outputs[np.all(np.isfinite(outputs), axis=1)]
        largest = float(np.max(np.abs(finite_outputs))) if finite_outputs.size else 0.0
    if np.any(np.isfinite(finals)):
        largest = max(largest, float(np.nanmax(np.abs(finals))))
    return 1e-10 * largest


def _measure_outputs(ctx: _Context, time, rows: np.ndarray, slopes, batch) -> list[tuple[OutputMetrics, ...]]:
    """Output metrics of several responses at once.

    ``rows`` (p·R, N) holds output i of response r in row i·R + r (R = len(batch)),
    ``slopes`` the same layout or None; ``batch`` has one tuple per response: (kind,
    starts, finals, targets, final reason, final note, target reasons). The grid passes
    run once for all rows.
    """
    plant = ctx.plant
    p, responses = plant.output_count, len(batch)
    if not batch:
        return []
    # noise floor of each response from the largest |y| of its rows (all finite here)
    highest, lowest = rows.max(axis=1).tolist(), rows.min(axis=1).tolist()
    # per response, its entries as lists of Python floats (read once, not element by element)
    starts = [np.asarray(entry[1], dtype=float).tolist() for entry in batch]
    finals = [np.asarray(entry[2], dtype=float).tolist() for entry in batch]
    targets = [np.asarray(entry[3], dtype=float).tolist() for entry in batch]
    floors = []
    for r, entry in enumerate(batch):
        members = range(r, p * responses, responses)
        largest = max((max(highest[j], -lowest[j]) for j in members), default=0.0)
        if not math.isfinite(largest):  # not expected: fall back on the grid-point rule
            floors.append(_noise_floor(rows[r::responses].T, np.asarray(finals[r])))
            continue
        finite_finals = [abs(value) for value in finals[r] if math.isfinite(value)]
        if finite_finals:
            largest = max(largest, max(finite_finals))
        floors.append(1e-10 * largest)
    order = [(i, r) for i in range(p) for r in range(responses)]
    metrics = _measure_output_rows(
        time, rows, slopes,
        regulation=[batch[r][0] != "step" for i, r in order],
        starts=[starts[r][i] for i, r in order],
        finals=[finals[r][i] for i, r in order],
        targets=[targets[r][i] for i, r in order],
        band=ctx.band,
        noise_floors=[floors[r] for i, r in order],
        indices=[i for i, r in order],
        names=[plant.output_names[i] for i, r in order],
        final_reasons=[batch[r][4] for i, r in order],
        final_notes=[batch[r][5] for i, r in order],
        target_reasons=[batch[r][6][i] for i, r in order],
        at_samples=ctx.sampled,
        extremes=(highest, lowest),
    )
    return [tuple(metrics[i * responses + r] for i in range(p)) for r in range(responses)]


def _measure_inputs(ctx: _Context, time, rows: np.ndarray, slopes, energies) -> list[tuple[InputMetrics, ...]]:
    """Input metrics (peak |u| and the given energies (R, m)) of R responses; rows as in :func:`_measure_outputs`."""
    plant = ctx.plant
    m, responses = plant.input_count, len(energies)
    if not responses:
        return []
    order = [(i, r) for i in range(m) for r in range(responses)]
    metrics = _measure_input_rows(time, rows, slopes, energies=[float(energies[r][i]) for i, r in order],
                                  indices=[i for i, r in order], names=[plant.input_names[i] for i, r in order],
                                  energy_reasons=[""] * len(order), at_samples=ctx.sampled)
    return [tuple(metrics[i * responses + r] for i in range(m)) for r in range(responses)]


def _linear_responses(ctx: _Context, plans: list[_Plan], trajectories: np.ndarray, forcings: np.ndarray,
                      equilibria: np.ndarray, applied: np.ndarray) -> list[_Piece]:
    """The linear part of every response: arrays cut at a blow-up, metrics, energies.

    ``trajectories`` (N, R, d) holds the augmented state z = [x; e] of every response.
    All responses share the grid and the maps from z, so one product per response gives
    every input, output and their exact slopes (continuous loops), and the squares of
    the energy projections (:func:`energy_projections`) sum to every input energy; the
    passes of the metrics then run once for all responses. Signals are handled as rows
    (signal, time), the layout in which numpy reduces along the grid fastest.
    """
    plant, K = ctx.plant, ctx.K
    C, D = plant.C, plant.D
    n, m, p = plant.state_count, plant.input_count, plant.output_count
    count = ctx.count
    _, responses, d = trajectories.shape

    # maps from z: u = G z (G = [−K, u₀₁ … u₀_R]), y = C x + D u, and for a continuous loop
    # y' = (C − DK) x', u' = −K x' with x' = [loop, f₁ … f_R] z
    output_map = D @ applied
    output_map[:, :n] += C
    maps = [applied, output_map]
    projections = None
    if not ctx.sampled:
        slope_maps = np.vstack([C - D @ K, -K])
        maps.append(slope_maps @ np.hstack([ctx.loop, forcings.T]))
        projections = energy_projections(ctx.loop, forcings.T, applied, ctx.time_step)
    # A short trajectory takes the energy projections along in the same product; a long one
    # projects block by block (projected_energies), so no large scratch array is needed.
    fused = projections is not None and count * responses * (sum(map(len, maps)) + projections[0].size) <= 1 << 16
    if fused:
        maps.append(projections.reshape(d, -1).T)
    stacked = np.vstack(maps)
    products = np.empty((stacked.shape[0], responses, count))
    with np.errstate(over="ignore", invalid="ignore"):
        # one batched product over the responses, written straight into rows (signal, time)
        np.matmul(stacked, trajectories.transpose(1, 2, 0), out=products.transpose(1, 0, 2))
    inputs_rows, outputs_rows = products[:m], products[m : m + p]
    slopes_rows = None if ctx.sampled else products[m + p : m + 2 * p + m]
    trajectories.flags.writeable = False
    time_full = ctx.time_step * np.arange(count)
    time_full.flags.writeable = False

    thresholds = [BLOW_UP_FACTOR * size for size in _natural_sizes(ctx, plans, forcings, equilibria)]
    # The usual case, no response near its blow-up threshold, read from the extremes of all the
    # (contiguous) trajectories at once; their constant states are 0 or 1, so thresholds of at
    # least 1 are not disturbed by them. Otherwise each response's states are searched.
    lowest_threshold = min(thresholds)
    with np.errstate(invalid="ignore"):
        all_clear = (lowest_threshold >= 1.0 and float(trajectories.max()) <= lowest_threshold
                     and float(trajectories.min()) >= -lowest_threshold)
    pieces = []
    forced = (forcings != 0.0).any(axis=1).tolist()
    steady_outputs = None
    if ctx.stable and any(forced):
        # exact steady state of every response at once: y = C x̄ + D (u₀ − K x̄)
        law_offsets = applied[:, n:].T
        steady_outputs = equilibria @ C.T + (law_offsets - equilibria @ K.T) @ D.T
    for r, plan in enumerate(plans):
        states = trajectories[:, r, :n]
        threshold = thresholds[r]
        cut = None if all_clear else _blow_up_index(states, threshold)
        diverged_at = None
        keep = count
        if cut is not None:
            keep = cut + 1 if np.all(np.isfinite(states[cut])) else max(cut, 2)
            diverged_at = float(cut * ctx.time_step)
        outputs = _frozen_columns(outputs_rows[:, r, :keep])
        # exact steady state of the linear loop
        final_reason = ""
        if not ctx.stable:
            finals = np.full(p, NAN)
            final_reason = ctx.no_steady_state_reason
        elif forced[r]:
            finals = steady_outputs[r]
        else:
            finals = np.zeros(p)
        pieces.append(_Piece(
            plan=plan, index=r, diverged_at=diverged_at, threshold=threshold, projections=projections,
            time=time_full if keep == count else time_full[:keep],
            states=states if keep == count else states[:keep],
            inputs=_frozen_columns(inputs_rows[:, r, :keep]),
            outputs=outputs,
            input_rows=inputs_rows[:, r, :keep],
            input_slopes=None if slopes_rows is None else slopes_rows[p:, r, :keep],
            starts=outputs[0] if plan.kind == "initial" else np.zeros(p),
            finals=finals, final_reason=final_reason,
        ))

    measured = [r for r, piece in enumerate(pieces) if piece.diverged_at is None]
    if measured:
        every = len(measured) == responses
        chosen = products if every else products[:, measured]
        used = len(measured)
        output_slopes = input_slopes = None
        if slopes_rows is not None:
            output_slopes = chosen[m + p : m + 2 * p].reshape(p * used, count)
            input_slopes = chosen[m + 2 * p : 2 * m + 2 * p].reshape(m * used, count)
        output_metrics = _measure_outputs(ctx, time_full, chosen[m : m + p].reshape(p * used, count),
                                          output_slopes, [
            (plans[r].kind, pieces[r].starts, pieces[r].finals, plans[r].targets, pieces[r].final_reason,
             "", plans[r].target_reasons)
            for r in measured
        ])
        # ∫u² dt over the whole grid: exact for a continuous loop (sum over the steps of the
        # squared projections); a sampled loop holds u over each period: T Σ u[k]²
        if count < 2:
            energies = np.zeros((used, m))
        elif ctx.sampled:
            held = chosen[:m, :, : count - 1]
            energies = ctx.time_step * np.vecdot(held, held).T
        else:
            if fused:
                projected = chosen[2 * m + 2 * p :, :, : count - 1]
                energies = np.vecdot(projected, projected).T.reshape(used, m, -1).sum(axis=2)
            elif projections is not None:
                energies = projected_energies(trajectories if every else trajectories[:, measured], projections,
                                              count - 1)
            else:
                energies = np.array([step_energies(ctx.loop, forcings.T, applied, ctx.time_step,
                                                   trajectories[: count - 1, r]) for r in measured])
        input_metrics = _measure_inputs(ctx, time_full, chosen[:m].reshape(m * used, count), input_slopes,
                                        energies)
        for j, r in enumerate(measured):
            pieces[r].output_metrics, pieces[r].input_metrics = output_metrics[j], input_metrics[j]
    for piece in pieces:
        if piece.diverged_at is not None:
            piece.output_metrics, piece.input_metrics = _nan_metrics(
                plant, ctx.diverging_reason or "the response blows up")
    return pieces


def _response(ctx: _Context, piece: _Piece, violations: tuple, saturated: dict | None) -> Response:
    """The Response of one linear piece, with its saturated counterpart when the plant has limits."""
    plan = piece.plan
    if saturated is None:
        saturated = dict(
            saturated_states=None,
            saturated_outputs=None,
            saturated_inputs=None,
            saturated_output_metrics=None,
            saturated_input_metrics=None,
            saturated_diverged_at=None,
        )
    return Response(
        plan.kind, piece.time, piece.states, piece.outputs, piece.inputs,
        saturated["saturated_states"], saturated["saturated_outputs"], saturated["saturated_inputs"],
        violations, piece.output_metrics, piece.input_metrics,
        saturated["saturated_output_metrics"], saturated["saturated_input_metrics"],
        _read_only(plan.targets), piece.diverged_at, saturated["saturated_diverged_at"], plan.description,
    )


def _limit_violations(ctx: _Context, piece: _Piece, low, high) -> tuple[LimitViolation, ...]:
    time, input_rows, input_slopes = piece.time, piece.input_rows, piece.input_slopes
    return tuple(
        find_limit_violation(time, input_rows[i], None if input_slopes is None else input_slopes[i],
                             low=low[i], high=high[i], index=i, name=name, at_samples=ctx.sampled)
        for i, name in enumerate(ctx.plant.input_names)
    )


def _saturated_energies(ctx: _Context, piece: _Piece, switching: SwitchingLoop, sat_states, sat_inputs, patterns,
                        valid: int, low, high) -> np.ndarray:
    """∫u² dt of the clipped inputs: exact per run of one pattern of pinned inputs (continuous).

    A pinned input is held at its limit v over the step: v² h. The free inputs follow the
    law of their pattern exactly (:func:`step_energies` of the pattern's loop); where every
    input is free the loop is the linear one, whose projections are already at hand.
    Sampled loops hold each clipped input over the period: T Σ u[k]².
    """
    m = sat_inputs.shape[1]
    if ctx.sampled:
        return ctx.time_step * np.sum(sat_inputs[: max(valid - 1, 0)] ** 2, axis=0)
    energies = np.zeros(m)
    if valid < 2:
        return energies
    n = ctx.plant.state_count
    used = patterns[: valid - 1]
    # one whole number per pattern (digits −1/0/+1 in base 3), to group the steps by pattern
    codes = used[:, 0] + 1 if m == 1 else (used + 1) @ (3 ** np.arange(m))
    for code in np.flatnonzero(np.bincount(codes)).tolist():
        rows = np.flatnonzero(codes == code)
        pattern = used[rows[0]]
        pinned = pattern != 0
        if pinned.any():
            held = np.where(pattern > 0, high, low)[pinned]
            energies[pinned] += held * held * (ctx.time_step * rows.size)
        free = ~pinned
        if not free.any():
            continue
        projections = piece.projections
        if free.all() and projections is not None:
            # z = [x; e] of the linear loop with e the unit vector of this response
            mixed = projections.reshape(projections.shape[0], -1)
            projected = sat_states[rows] @ mixed[:n] + mixed[n + piece.index]
            energies += np.einsum("kj,kj->j", projected, projected).reshape(m, -1).sum(axis=1)
        else:
            generator, applied = switching.mode_generator(pattern)
            augmented = np.hstack([sat_states[rows], np.ones((rows.size, 1))])
            energies[free] += step_energies(generator[:n, :n], generator[:n, n:], applied[free], ctx.time_step,
                                            augmented)
    return energies


def _saturated_trajectory(ctx: _Context, piece: _Piece, low, high) -> dict:
    """The clipped loop of one response: arrays, energies, blow-up; metrics are added by the caller."""
    plant, plan = ctx.plant, piece.plan
    C, D = plant.C, plant.D
    m = plant.input_count
    states, inputs, input_rows = piece.states, piece.inputs, piece.input_rows
    count = states.shape[0]
    beyond = ((input_rows < low[:, None]) | (input_rows > high[:, None])).any(axis=0)
    first = int(beyond.argmax())
    if not beyond[first]:
        # The demand never leaves the actuator range at a grid point, so the clipped
        # loop never switches away from the linear law: it is the same trajectory.
        return dict(
            saturated_states=states,
            saturated_outputs=piece.outputs,
            saturated_inputs=inputs,
            saturated_output_metrics=piece.output_metrics,
            saturated_input_metrics=piece.input_metrics,
            saturated_diverged_at=None,
        )
    switching = ctx.switching_loop(plan.law_offset, plan.outside_forcing, low, high)
    tail_states, tail_law, tail_patterns = switching.run(states[first], count - first)
    sat_states = np.vstack([states[:first], tail_states])
    law = np.vstack([inputs[:first], tail_law])
    patterns = np.vstack([np.zeros((first, m), dtype=int), tail_patterns])
    sat_inputs = np.clip(law, low, high)

    diverged_at = None
    cut = _blow_up_index(sat_states, piece.threshold)
    valid = count
    if cut is not None:
        valid = cut + 1 if np.all(np.isfinite(sat_states[cut])) else cut
        sat_states[valid:] = np.nan
        sat_inputs[valid:] = np.nan
        diverged_at = float(cut * ctx.time_step)
    output_rows = C @ sat_states.T + D @ sat_inputs.T
    input_rows = np.ascontiguousarray(sat_inputs.T)
    energies = _saturated_energies(ctx, piece, switching, sat_states, sat_inputs, patterns, valid, low, high)
    for array in (sat_states, output_rows, sat_inputs):
        array.flags.writeable = False
    result = dict(
        saturated_states=sat_states,
        saturated_outputs=output_rows.T,
        saturated_inputs=sat_inputs,
        saturated_output_metrics=None,
        saturated_input_metrics=None,
        saturated_diverged_at=diverged_at,
    )
    if diverged_at is not None:
        result["saturated_output_metrics"], result["saturated_input_metrics"] = _nan_metrics(
            plant, "the loop with clipped inputs blows up")
        return result
    finals = piece.finals
    ends_free = not np.any((law[valid - 1] < low) | (law[valid - 1] > high))
    note = ""
    sat_finals = finals
    if not (ends_free and np.all(np.isfinite(finals))):
        sat_finals = output_rows[:, valid - 1].copy()
        note = ("taken from the last grid point: the input is still at a limit at the end of the horizon"
                if not ends_free else "taken from the last grid point")
    result["_measure"] = (output_rows, input_rows, energies,
                          (plan.kind, piece.starts, sat_finals, plan.targets, piece.final_reason, note,
                           plan.target_reasons))
    return result


def _saturated_responses(ctx: _Context, pieces: list[_Piece], low, high) -> list[dict]:
    """The clipped loops of every response; their metrics are measured together where they share the grid."""
    results = [_saturated_trajectory(ctx, piece, low, high) for piece in pieces]
    waiting = [j for j, result in enumerate(results) if "_measure" in result]
    # responses on the same grid (all of them unless a linear response was cut short) in one batch
    groups: dict[int, list[int]] = {}
    for j in waiting:
        groups.setdefault(pieces[j].time.size, []).append(j)
    p, m = ctx.plant.output_count, ctx.plant.input_count
    for members in groups.values():
        count = pieces[members[0]].time.size
        entries = [results[j].pop("_measure") for j in members]
        outputs = np.stack([entry[0] for entry in entries], axis=1).reshape(p * len(members), count)
        inputs = np.stack([entry[1] for entry in entries], axis=1).reshape(m * len(members), count)
        time = pieces[members[0]].time
        output_metrics = _measure_outputs(ctx, time, outputs, None, [entry[3] for entry in entries])
        input_metrics = _measure_inputs(ctx, time, inputs, None, [entry[2] for entry in entries])
        for j, out_metrics, in_metrics in zip(members, output_metrics, input_metrics):
            results[j]["saturated_output_metrics"] = out_metrics
            results[j]["saturated_input_metrics"] = in_metrics
    return results


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
    # An unstable loop's trajectory may pass the largest double inside the matrix exponential,
    # the propagation or the energy integrals: that is expected, and handled where the
    # responses are cut at their blow-up (each Response's ``diverged_at``, and ``diverging``),
    # so numpy's overflow warnings would only repeat on stderr what the result reports.
    with np.errstate(over="ignore", invalid="ignore"):
        return _simulate(plant, K, initial_state, reference, horizon, time_step, settling_band)


def _simulate(plant: Plant, K, initial_state, reference, horizon, time_step, settling_band) -> ResponseSet:
    """The body of :func:`simulate_responses` (numpy's overflow warnings switched off there)."""
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
        start = plant.initial_state if plant.initial_state is not None else np.eye(1, n).ravel()
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
    tolerance = _stability_tolerance(loop, sampled)
    unstable, boundary = _classify_poles(poles, loop, sampled, tolerance)
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
    horizon_used, step, count = _choose_grid(poles, loop, sampled, sample_time, horizon, time_step, tolerance)
    if horizon is not None and horizon_used < (1.0 - 1e-9) * float(horizon) - step:
        notes.append(f"the loop is unstable: simulated for {horizon_used:.4g} s, until it has blown up, "
                     f"instead of the {float(horizon):.4g} s asked for")
    ctx = _Context(plant, K, loop, sampled, step, count, stable, no_steady, diverging_reason, float(settling_band))

    zeros_m, zeros_n = np.zeros(m), np.zeros(n)
    rest_targets = np.zeros(p)
    no_reasons = ("",) * p

    prefilter = None
    condition = NAN
    step_reason = ""
    disturbance_forcing = plant.disturbance_matrix @ np.asarray(plant.disturbance_step)
    to_state = disturbance_equilibrium = None
    try:
        # the disturbance's equilibrium comes from the same LU as the prefilter
        prefilter, condition, to_state, disturbance_equilibrium = _prefilter_with_condition(
            plant, K, loop, disturbance_forcing[:, None])
    except AnalysisError as error:
        step_reason = str(error)

    plans = [_Plan("initial", start, zeros_m, zeros_n, rest_targets, no_reasons,
                   "regulation from the initial state with u = −Kx")]
    if prefilter is not None:
        step_targets = np.full(p, NAN)
        step_targets[list(tracked)] = reference_values
        target_reasons = tuple(
            "" if i in tracked else "this output is not tracked, so it has no reference" for i in range(p)
        )
        plans.append(_Plan("step", zeros_n, prefilter @ reference_values, zeros_n, step_targets, target_reasons,
                           "reference step on the tracked outputs with u = −Kx + N r"))
    plans.append(_Plan("disturbance", zeros_n, zeros_m, disturbance_forcing, rest_targets, no_reasons,
                       "disturbance step while regulating with u = −Kx"))

    # All responses share the loop: response r is z = [x; e_r] of one augmented system
    # whose extra states carry the constant forcings, so one matrix exponential and one
    # doubling chain give every trajectory exactly at the grid points.
    count_r = len(plans)
    forcings = np.array([plant.B @ plan.law_offset + plan.outside_forcing for plan in plans])
    if to_state is None:
        equilibria = _equilibria(ctx, forcings)
    else:
        # x̄ = M⁻¹(B u₀ + f): M⁻¹B and M⁻¹f are at hand from the prefilter's solve
        equilibria = np.zeros_like(forcings)
        for r, row in enumerate((forcings != 0.0).any(axis=1).tolist()):
            if row:
                equilibrium = equilibria[r]
                if plans[r].law_offset.any():
                    equilibrium += to_state @ plans[r].law_offset
                if plans[r].outside_forcing is disturbance_forcing:
                    equilibrium += disturbance_equilibrium[:, 0]
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
    applied[:, n:] = np.array([plan.law_offset for plan in plans]).T

    pieces = _linear_responses(ctx, plans, trajectories, forcings, equilibria, applied)
    violations = [()] * len(pieces)
    saturated = [None] * len(pieces)
    if plant.input_limits is not None:
        low = np.array([pair[0] for pair in plant.input_limits], dtype=float)
        high = np.array([pair[1] for pair in plant.input_limits], dtype=float)
        violations = [_limit_violations(ctx, piece, low, high) for piece in pieces]
        saturated = _saturated_responses(ctx, pieces, low, high)
    results = {piece.plan.kind: _response(ctx, piece, violations[j], saturated[j])
               for j, piece in enumerate(pieces)}
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
