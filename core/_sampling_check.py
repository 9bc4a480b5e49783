"""Does a continuous-time gain survive being run by a sampled controller?

A gain K designed on the continuous model x' = Ax + Bu is implemented by a
computer that measures x every T seconds and holds u = −Kx[k] constant until the
next sample (zero-order hold). The loop then evolves as

    x[k+1] = (Φ − ΓK) x[k],   Φ = e^{AT},  Γ = ∫₀ᵀ e^{Aτ} dτ B,

and it is stable when every eigenvalue z of Φ − ΓK has |z| < 1. Each z has an
equivalent continuous pole s = ln(z)/T (principal logarithm), which tends to the
designed pole as T → 0; comparing the two shows how much damping the sampling
costs. The hold adds roughly T/2 of delay, so damping falls as T grows until the
loop becomes unstable.

A loop that survives on the model must still be validated on the real system with
safe limits and emergency stops, under local codes, functional-safety standards
and licensed engineering practice.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.linalg
import scipy.optimize

from ._arrays import read_only
from ._errors import AnalysisError
from ._plant import Plant

__all__ = ["SamplingCheck", "check_sampled_implementation"]

_EPS = np.finfo(float).eps
#: Each step of the sample-time scan multiplies T by this factor.
_SCAN_FACTOR = 1.05


@dataclass(frozen=True, eq=False)
class SamplingCheck:
    """Outcome of :func:`check_sampled_implementation`.

    Attributes
    ----------
    sample_time : float
        The sample time T checked, in seconds.
    continuous_poles : numpy.ndarray, shape (n,)
        Eigenvalues of A − BK (the continuous design), sorted.
    sampled_poles : numpy.ndarray, shape (n,)
        Eigenvalues z of Φ − ΓK, the loop run by a sampled controller with a
        zero-order hold; same order as ``equivalent_continuous_poles``.
    equivalent_continuous_poles : numpy.ndarray, shape (n,)
        ln(z)/T for each sampled pole (−inf for z = 0; a negative real z gives
        imaginary part π/T), sorted by real part.
    survives : bool
        True when every |z| < 1 (the sampled loop is stable).
    worst_damping_change : float
        Largest loss of damping ratio, ζ(designed pole) − ζ(equivalent pole), over
        the poles matched one-to-one (by assignment on |e^{sT} − z|); positive
        means the sampled loop is less damped. ζ(s) = −Re s/|s| (0 for s = 0).
    closed_loop_bandwidth : float
        Largest natural frequency |s| of the designed closed-loop poles, rad/s: a
        proxy for the closed-loop bandwidth.
    sampling_ratio : float
        Sampling frequency 2π/T divided by that bandwidth.
    largest_stable_sample_time : float or None
        The smallest T at which the sampled loop loses stability as T grows from
        near zero (seconds): a geometric scan (steps of ×1.05) from T = 0.01/(fastest
        dynamics), then a bracketed root search on the spectral radius to 1e-10
        relative accuracy. A loss and recovery of stability inside one scan step
        would be missed. ``math.inf``
        if no loss was found up to the scan limit named in the note; ``None`` when
        the continuous design itself is unstable.
    note : str
        Plain-language verdict, the common-practice sampling advice and the
        validation caution.
    searched_up_to : float or None
        The largest sample time the search for a loss of stability looked at, in
        seconds (the bound behind ``largest_stable_sample_time = inf``); None when
        the continuous design is unstable and nothing was searched.
    """

    sample_time: float
    continuous_poles: np.ndarray
    sampled_poles: np.ndarray
    equivalent_continuous_poles: np.ndarray
    survives: bool
    worst_damping_change: float
    closed_loop_bandwidth: float
    sampling_ratio: float
    largest_stable_sample_time: float | None
    note: str
    searched_up_to: float | None = None


def _sort_key(poles: np.ndarray) -> np.ndarray:
    return np.lexsort((poles.imag, np.abs(poles.imag), poles.real))


def _damping(poles: np.ndarray) -> np.ndarray:
    """ζ = −Re s/|s|, with 0 for s = 0 and 1 for s = −inf (a sampled pole at z = 0)."""
    poles = np.asarray(poles, dtype=complex)
    out = np.zeros(poles.size)
    for i, s in enumerate(poles):
        if np.isinf(s.real) and s.real < 0:
            out[i] = 1.0
        elif s != 0:
            out[i] = -s.real / abs(s)
    return out


def _sampled_matrices(A: np.ndarray, B: np.ndarray, T) -> tuple[np.ndarray, np.ndarray]:
    """Zero-order-hold Φ, Γ via exp([[A, B], [0, 0]] T) = [[Φ, Γ], [0, I]]; T may be an array of times."""
    n, m = B.shape
    block = np.zeros((n + m, n + m))
    block[:n, :n] = A
    block[:n, n:] = B
    times = np.asarray(T, dtype=float)
    exponential = scipy.linalg.expm(block * times[..., None, None])
    return exponential[..., :n, :n], exponential[..., :n, n:]


def _spectral_radius(A, B, K, T) -> np.ndarray:
    """Largest |z| of Φ − ΓK for each sample time in T (vectorised over T)."""
    Phi, Gamma = _sampled_matrices(A, B, T)
    return np.max(np.abs(np.linalg.eigvals(Phi - Gamma @ K)), axis=-1)


def _first_loss_of_stability(A, B, K, fastest: float, slowest: float):
    """Scan T upward geometrically (×1.05 per step), then find the first stable→unstable step by root search.

    The scan starts where T·(fastest dynamics) = 0.01, stepping further down if the
    sampled loop is not yet stable there, and ends at 1000/(slowest closed-loop
    pole), or earlier for an unstable plant so that e^{AT} stays representable.
    Returns (largest stable T or inf, scan limit).
    """
    n = A.shape[0]
    threshold = 1.0 - 1e3 * n * _EPS
    plant_speed = np.abs(np.linalg.eigvals(A))
    start = 0.01 / max(fastest, float(np.max(plant_speed)) if plant_speed.size else 0.0)
    for _ in range(40):
        if _spectral_radius(A, B, K, start) < threshold:
            break
        start /= 4.0
    else:
        return start, start
    limit = 1e3 / slowest
    growth = float(np.max(np.linalg.eigvals(A).real))
    if growth > 0:
        # e^{AT} overflows long before this; an open-loop mode growing by e^{300}
        # per sample is far beyond anything a sampled loop can hold.
        limit = min(limit, 300.0 / growth)
    limit = max(limit, start * _SCAN_FACTOR)
    steps = int(math.ceil(math.log(limit / start) / math.log(_SCAN_FACTOR)))
    times = np.minimum(start * _SCAN_FACTOR ** np.arange(steps + 1), limit)
    for chunk in range(0, times.size, 64):  # in chunks, so an early loss stops the scan early
        window = times[chunk:chunk + 64]
        unstable = np.nonzero(_spectral_radius(A, B, K, window) >= threshold)[0]
        if unstable.size:
            index = max(chunk + int(unstable[0]), 1)  # times[0] was checked stable above
            root = scipy.optimize.brentq(
                lambda t: float(_spectral_radius(A, B, K, t)) - threshold, times[index - 1], times[index],
                rtol=1e-10, xtol=1e-300,
            )
            return root, limit
    return math.inf, limit


def check_sampled_implementation(plant: Plant, K, sample_time: float) -> SamplingCheck:
    """Check a continuous-time gain run by a sampled controller with a zero-order hold.

    Parameters
    ----------
    plant : Plant
        The continuous-time plant the gain was designed for.
    K : array_like, shape (m, n)
        The continuous design's gain (u = −Kx).
    sample_time : float
        Controller sample time T in seconds (> 0).

    Returns
    -------
    SamplingCheck
        Designed and sampled poles, their equivalents, whether the loop survives,
        the damping lost, and the largest sample time that keeps it stable.

    Raises
    ------
    AnalysisError
        If the plant is already sampled or the sample time is not a positive number.
    GainError
        If K has the wrong shape or non-finite entries.

    Examples
    --------
    >>> integrator = Plant(A=[[0.0]], B=[[1.0]])
    >>> check = check_sampled_implementation(integrator, [[4.0]], 0.1)
    >>> bool(check.survives), round(float(check.sampled_poles[0].real), 12), round(check.largest_stable_sample_time, 6)
    (True, 0.6, 0.5)
    """
    if plant.is_sampled:
        raise AnalysisError(
            f"'{plant.name}' is already sampled (T = {plant.sample_time} s); the sampling check takes the continuous "
            "plant the gain was designed for"
        )
    if isinstance(sample_time, bool) or not isinstance(sample_time, (int, float)) or not (
        math.isfinite(sample_time) and sample_time > 0
    ):
        raise AnalysisError(f"the sample time must be a positive number of seconds, got {sample_time!r}")
    T = float(sample_time)
    gain = plant.check_gain(K)
    A, B = np.array(plant.A), np.array(plant.B)
    n = plant.state_count

    continuous = np.linalg.eigvals(A - B @ gain)
    continuous = continuous[_sort_key(continuous)]
    Phi, Gamma = _sampled_matrices(A, B, T)
    sampled = np.linalg.eigvals(Phi - Gamma @ gain)
    with np.errstate(divide="ignore"):
        equivalent = np.log(sampled.astype(complex)) / T
    order = _sort_key(np.where(np.isfinite(equivalent), equivalent, -np.inf))
    sampled, equivalent = sampled[order], equivalent[order]
    survives = bool(np.max(np.abs(sampled)) < 1.0 - 1e3 * n * _EPS)

    # Match each designed pole with the sampled pole it became (z ≈ e^{sT}).
    predicted = np.exp(continuous * T)
    distances = np.abs(predicted[:, None] - sampled[None, :])
    rows, cols = scipy.optimize.linear_sum_assignment(distances)
    damping_loss = _damping(continuous[rows]) - _damping(equivalent[cols])
    worst = float(np.max(damping_loss))

    magnitudes = np.abs(continuous)
    bandwidth = float(np.max(magnitudes))
    ratio = (2.0 * math.pi / T) / bandwidth if bandwidth > 0 else math.inf
    continuous_stable = bool(np.max(continuous.real) < -1e3 * n * _EPS * max(np.linalg.norm(A - B @ gain, 2), 1e-300))

    notes = []
    if continuous_stable:
        largest, limit = _first_loss_of_stability(A, B, gain, bandwidth, float(np.min(magnitudes)))
    else:
        largest, limit = None, None
        notes.append("The continuous design itself is unstable; fix it before choosing a sample time.")
    if survives:
        notes.append(f"The sampled loop at T = {T:g} s is stable; it loses {max(worst, 0.0):.3g} of damping ratio at worst.")
    else:
        notes.append(f"The sampled loop at T = {T:g} s is UNSTABLE (largest |z| = {np.max(np.abs(sampled)):.4g}).")
    if largest is not None:
        if math.isinf(largest):
            notes.append(f"No loss of stability was found for sample times up to {limit:.3g} s.")
        else:
            notes.append(f"Stability is lost from T ≈ {largest:.4g} s.")
    if bandwidth > 0:
        notes.append(
            f"Sampling runs at {ratio:.3g}× the closed-loop bandwidth estimate ({bandwidth:.3g} rad/s, the fastest "
            f"designed pole); common practice (no single source) is 10–30×, i.e. T between "
            f"{2 * math.pi / (30 * bandwidth):.3g} s and {2 * math.pi / (10 * bandwidth):.3g} s, or redesign on the "
            "sampled plant."
        )
    notes.append(
        "Validate on the real system with safe limits and emergency stops, under local codes, functional-safety "
        "standards and licensed practice."
    )
    return SamplingCheck(
        sample_time=T,
        continuous_poles=read_only(continuous),
        sampled_poles=read_only(sampled),
        equivalent_continuous_poles=read_only(equivalent),
        survives=survives,
        worst_damping_change=worst,
        closed_loop_bandwidth=bandwidth,
        sampling_ratio=float(ratio),
        largest_stable_sample_time=None if largest is None else float(largest),
        note=" ".join(notes),
        searched_up_to=None if limit is None else float(limit),
    )
