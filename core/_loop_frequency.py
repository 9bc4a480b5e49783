"""The loop's frequency response, broken at the plant input: the data behind the loop views.

For u = −Kx the loop seen at input i, with the other inputs' loops closed, is

    L_i(s) = k_i (sI − A + B_{≠i} K_{≠i})⁻¹ b_i        (sampled plants: s → z = e^{jωT}),

the same loop :func:`loop_margins` reads its loop-at-a-time margins from. This module
samples each L_i on a logarithmic frequency grid that spans the loop's poles and its
crossovers (sampled plants: up to the Nyquist frequency π/T), and the largest singular
value of the input sensitivity S = (I + L)⁻¹, whose peak ‖S‖∞ gives the disk margin
1/‖S‖∞ at the input. The points where the margins are read (gain and phase crossovers,
the sensitivity peak) are taken from the :class:`LoopMargins` given, and L is evaluated
exactly there, so a view marks them on its curves where the core found them.

Margins describe the linear model only: validate the design on the real system with safe
limits and emergency stops, under local codes, functional-safety standards and licensed practice.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ._errors import AnalysisError
from ._margins import frequency_response
from ._plant import Plant

__all__ = ["LoopFrequencyResponse", "LoopCrossings", "loop_frequency_response"]

#: Points of the frequency grid (log-spaced).
_GRID_POINTS = 500
#: The grid reaches this factor below the slowest and above the fastest characteristic frequency.
_GRID_REACH = 30.0


@dataclass(frozen=True, eq=False)
class LoopCrossings:
    """Where one loop's margins are read, with L evaluated exactly there.

    Attributes
    ----------
    gain_crossover_frequencies : numpy.ndarray, shape (G,)
        |L(jω)| = 1, rad/s (from the margins).
    gain_crossover_values : numpy.ndarray, complex, shape (G,)
        L at those frequencies.
    phase_crossover_frequencies : numpy.ndarray, shape (P,)
        L(jω) real and negative, rad/s (from the margins).
    phase_crossover_values : numpy.ndarray, complex, shape (P,)
        L at those frequencies.
    phase_margin_frequency : float or None
        The gain crossover where the phase margin is read.
    """

    gain_crossover_frequencies: np.ndarray
    gain_crossover_values: np.ndarray
    phase_crossover_frequencies: np.ndarray
    phase_crossover_values: np.ndarray
    phase_margin_frequency: float | None


@dataclass(frozen=True, eq=False)
class LoopFrequencyResponse:
    """Each input's loop L_i(jω) and the input sensitivity over frequency; see :func:`loop_frequency_response`.

    Attributes
    ----------
    frequencies : numpy.ndarray, shape (F,)
        Grid in rad/s, ascending (sampled plants: up to π/T).
    loops : numpy.ndarray, complex, shape (m, F)
        L_i(jω) for each input i (loop i broken, the others closed).
    sensitivity_gain : numpy.ndarray, shape (F,)
        σ_max(S(jω)), S = (I + L)⁻¹ the input sensitivity (for one input |1/(1 + L)|).
    nyquist_frequency : float or None
        π/T for a sampled plant, None for a continuous one.
    crossings : tuple of LoopCrossings or None
        Per input, where its margins are read (None when the margins were not given or the
        loop is unstable, where margins mean nothing).
    peak_sensitivity, peak_sensitivity_frequency : float or None
        ‖S‖∞ and its frequency, from the margins (None as above).
    """

    frequencies: np.ndarray
    loops: np.ndarray
    sensitivity_gain: np.ndarray
    nyquist_frequency: float | None
    crossings: tuple | None
    peak_sensitivity: float | None
    peak_sensitivity_frequency: float | None


def _characteristic_frequencies(plant: Plant, K: np.ndarray) -> np.ndarray:
    """|s| of the open- and closed-loop poles (ln(z)/T for sampled plants), nonzero and finite."""
    poles = np.concatenate([np.linalg.eigvals(plant.A), np.linalg.eigvals(plant.A - plant.B @ K)])
    if plant.is_sampled:
        with np.errstate(divide="ignore", invalid="ignore"):  # z = 0 (deadbeat) maps to −∞, dropped below
            poles = np.log(poles.astype(complex)) / plant.sample_time
    speeds = np.abs(poles)
    scale = max(float(np.max(speeds[np.isfinite(speeds)], initial=0.0)), 1.0)
    return speeds[np.isfinite(speeds) & (speeds > 1e-9 * scale)]


def _grid(plant: Plant, K: np.ndarray, margins) -> np.ndarray:
    speeds = list(_characteristic_frequencies(plant, K))
    if margins is not None:
        for loop in margins.loop_at_a_time:
            speeds.extend(f for f in (*loop.gain_crossover_frequencies, *loop.phase_crossover_frequencies)
                          if f is not None and 0 < f < math.inf)
    low = min(speeds) / _GRID_REACH if speeds else 1e-2
    high = max(speeds) * _GRID_REACH if speeds else 1e2
    if plant.is_sampled:
        high = math.pi / plant.sample_time
        low = min(low, high / 1e4)
    return np.logspace(math.log10(low), math.log10(high), _GRID_POINTS)


def _evaluate(plant: Plant, K: np.ndarray, frequencies: np.ndarray) -> np.ndarray:
    """L at the frequencies; a grid point on a boundary pole of the plant is moved off it by a hair."""
    try:
        return frequency_response(plant, K, frequencies)
    except AnalysisError:
        return frequency_response(plant, K, frequencies * (1 + 1e-6))


def _loop_plants(plant: Plant, K: np.ndarray) -> list[tuple[Plant, np.ndarray]]:
    """(plant with the other loops closed, its gain row) for each input: the loops of loop_margins."""
    A, B = np.array(plant.A), np.array(plant.B)
    closed = A - B @ K
    loops = []
    for i in range(plant.input_count):
        others = closed + np.outer(B[:, i], K[i])
        loops.append((Plant(A=others, B=B[:, i:i + 1], sample_time=plant.sample_time), K[i:i + 1]))
    return loops


def loop_frequency_response(plant: Plant, K, margins=None) -> LoopFrequencyResponse:
    """Sample each input's loop L_i(jω) and the input sensitivity over a grid that shows them whole.

    Parameters
    ----------
    plant : Plant
        Continuous or sampled plant.
    K : array_like, shape (m, n)
        Feedback gain of u = −Kx.
    margins : LoopMargins, optional
        The margins of (plant, K) from :func:`loop_margins`: where they are read is marked
        (and the grid reaches those frequencies).

    Returns
    -------
    LoopFrequencyResponse

    Examples
    --------
    >>> integrator = Plant(A=[[0.0]], B=[[1.0]])
    >>> response = loop_frequency_response(integrator, [[2.0]])
    >>> bool(np.allclose(response.loops[0], 2.0 / (1j * response.frequencies)))
    True
    """
    gain = plant.check_gain(K)
    frequencies = _grid(plant, gain, margins)
    loop_plants = _loop_plants(plant, gain)
    loops = np.array([_evaluate(loop_plant, row, frequencies)[:, 0, 0] for loop_plant, row in loop_plants])
    whole = _evaluate(plant, gain, frequencies)
    identity = np.eye(plant.input_count)[None, :, :]
    smallest = np.linalg.svd(identity + whole, compute_uv=False)[:, -1]
    with np.errstate(divide="ignore"):
        sensitivity = 1.0 / smallest
    crossings = peak = peak_frequency = None
    if margins is not None and margins.stable_nominal:
        crossings = []
        for (loop_plant, row), loop in zip(loop_plants, margins.loop_at_a_time):
            gains = np.array([f for f in loop.gain_crossover_frequencies if 0 <= f < math.inf], dtype=float)
            phases = np.array([f for f in loop.phase_crossover_frequencies if 0 <= f < math.inf], dtype=float)
            crossings.append(LoopCrossings(
                gain_crossover_frequencies=gains,
                gain_crossover_values=_evaluate(loop_plant, row, gains)[:, 0, 0] if gains.size else np.zeros(0, complex),
                phase_crossover_frequencies=phases,
                phase_crossover_values=(_evaluate(loop_plant, row, phases)[:, 0, 0] if phases.size
                                        else np.zeros(0, complex)),
                phase_margin_frequency=loop.crossover_frequency,
            ))
        crossings = tuple(crossings)
        peak, peak_frequency = margins.peak_sensitivity, margins.peak_sensitivity_frequency
    return LoopFrequencyResponse(
        frequencies=frequencies, loops=loops, sensitivity_gain=sensitivity,
        nyquist_frequency=math.pi / plant.sample_time if plant.is_sampled else None,
        crossings=crossings, peak_sensitivity=peak, peak_sensitivity_frequency=peak_frequency,
    )
