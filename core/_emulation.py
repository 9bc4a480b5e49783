"""What a continuous design does once a computer runs it: the emulation check at one sample time.

A gain K designed on x' = Ax + Bu is usually implemented by a controller that
samples x every T seconds and holds u = −Kx[k] through a zero-order hold. The
loop the machine then has is exactly the sampled plant (Φ, Γ) of
:func:`discretize_zero_order_hold` closed by the same K: x[k+1] = (Φ − ΓK)x[k].
:func:`evaluate_emulation` evaluates that loop like any sampled design (z-plane
poles, responses and, when asked, loop margins through :func:`evaluate_design`)
and adds the largest sample time that keeps it stable
(:func:`check_sampled_implementation`). It never changes the design: the
workbench shows it beside the continuous design until the engineer chooses to
continue on the z-plane.

A loop that survives on the model must still be validated on the real system with
safe limits and emergency stops, under local codes, functional-safety standards and
licensed engineering practice.
"""

from __future__ import annotations

import math
import threading
import weakref
from dataclasses import dataclass

from ._errors import AnalysisError
from ._plant import Plant, discretize_zero_order_hold
from ._sampling_check import SamplingCheck, check_sampled_implementation

__all__ = ["EmulationCheck", "evaluate_emulation", "check_sample_time_value"]

#: Sampled plants by continuous plant and T: a slider step changes K, never the plant, so the
#: sampled plant (and the structure analysis evaluate_design caches per plant object) is reused.
_SAMPLED_PLANTS: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()
_SAMPLED_LOCK = threading.Lock()


def _sampled_plant(plant: Plant, T: float) -> Plant:
    with _SAMPLED_LOCK:
        known = _SAMPLED_PLANTS.get(plant)
        if known is not None and known[0] == T:
            return known[1]
    sampled = discretize_zero_order_hold(plant, T)
    with _SAMPLED_LOCK:
        _SAMPLED_PLANTS[plant] = (T, sampled)
    return sampled


@dataclass(frozen=True, eq=False)
class EmulationCheck:
    """The continuous K run through a ZOH at one sample time; see :func:`evaluate_emulation`.

    Attributes
    ----------
    sample_time : float
        T in seconds.
    sampled_plant : Plant
        The ZOH-sampled plant (Φ, Γ, C, D; ``sample_time`` set).
    sampled : DesignEvaluation
        The same K on the sampled plant: z-plane poles (``sampled.closed_loop``), responses
        and, if requested, loop margins; no locus and no entry intervals.
    check : SamplingCheck
        Equivalent s-plane poles, damping lost, the largest stable sample time and the
        bound it was searched up to.
    """

    sample_time: float
    sampled_plant: Plant
    sampled: object
    check: SamplingCheck

    @property
    def stable(self) -> bool:
        """Whether the sampled loop is stable (every |z| < 1, with the core's margin for round-off)."""
        return bool(self.check.survives)

    @property
    def largest_stable_sample_time(self) -> float | None:
        """Largest T keeping the sampled loop stable, s; ``inf`` if none lost up to ``searched_up_to``,
        ``None`` when the continuous design itself is unstable."""
        return self.check.largest_stable_sample_time


def check_sample_time_value(sample_time) -> float:
    """``sample_time`` as a float, or an AnalysisError telling what a sample time must be.

    Examples
    --------
    >>> check_sample_time_value(0.01)
    0.01
    """
    if isinstance(sample_time, bool) or not isinstance(sample_time, (int, float)) or not (
        math.isfinite(sample_time) and sample_time > 0
    ):
        raise AnalysisError(f"the sample time must be a positive, finite number of seconds, got {sample_time!r}")
    return float(sample_time)


def evaluate_emulation(plant: Plant, gain, sample_time: float, *, include_margins: bool = True,
                       specs=None, horizon: float | None = None, initial_state=None) -> EmulationCheck:
    """Evaluate the continuous gain ``gain`` run by a sampled controller with a ZOH at ``sample_time``.

    Parameters
    ----------
    plant : Plant
        The continuous plant K was designed for.
    gain : array_like, shape (m, n)
        The continuous design's K (u = −Kx).
    sample_time : float
        Controller period T in seconds (> 0, finite).
    include_margins : bool
        Also compute the sampled loop's margins at the plant input.
    specs : DesignSpecs, optional
        Specs to check the sampled loop against (default: the plant's).
    horizon, initial_state : optional
        Length and start of the sampled loop's responses (to lie over the continuous ones).

    Returns
    -------
    EmulationCheck

    Raises
    ------
    AnalysisError
        If the plant is already sampled or the sample time is not a positive finite number.
    GainError
        If K does not fit the plant.

    Examples
    --------
    >>> integrator = Plant(A=[[0.0]], B=[[1.0]])
    >>> emulation = evaluate_emulation(integrator, [[4.0]], 0.1, include_margins=False)
    >>> emulation.stable, round(float(emulation.sampled.closed_loop.poles[0].real), 12)
    (True, 0.6)
    """
    from ._design_evaluation import EvaluationOptions, evaluate_design  # evaluate_design calls this module

    T = check_sample_time_value(sample_time)
    if plant.is_sampled:
        raise AnalysisError(f"'{plant.name}' is already sampled (T = {plant.sample_time} s); the emulation check "
                            "takes the continuous plant the gain was designed for")
    check = check_sampled_implementation(plant, gain, T)
    sampled_plant = _sampled_plant(plant, T)
    options = EvaluationOptions(selected_entry=None, include_all_entry_intervals=False,
                                include_margins=include_margins, specs=specs, horizon=horizon,
                                initial_state=initial_state)
    sampled = evaluate_design(sampled_plant, gain, options)
    return EmulationCheck(sample_time=T, sampled_plant=sampled_plant, sampled=sampled, check=check)
