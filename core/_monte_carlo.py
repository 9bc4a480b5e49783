"""Monte Carlo sampling of a plant family under one K: batched, chunked, reproducible.

The samples are split into chunks of a fixed size. Chunk i draws its random numbers from the
i-th child of ``numpy.random.SeedSequence(seed)``, builds the stacks of its models' matrices
with one vectorised evaluation per expression, and judges all its closed loops with one
batched eigenvalue call. A chunk returns a small summary (counts, the worst sample of each
figure, a few samples that could not be evaluated), never the samples themselves; summaries
are combined in chunk order. So the figures are bit-for-bit the same for one seed whatever
runs the chunks — this process, or any number of Dask workers in any order — and memory
stays bounded by one chunk.

A Monte Carlo fraction estimates a probability under the stated parameter distribution; its
confidence interval (Wilson's score interval) says how well. It is never a proof of
robustness: an unsampled combination can still be unstable, and the model itself can be wrong.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import scipy.special

from ._batched_loops import single_input_margins, stability_verdicts
from ._errors import AnalysisError, GainboardError
from ._plant_family import PlantFamily
from ._robustness import parameter_boundaries
from ._spec_checks import BOUNDARY_SLACK
from ._specs import DesignSpecs

__all__ = [
    "SAMPLING_CAUTION",
    "MAX_SAMPLES",
    "SamplingCancelled",
    "FractionEstimate",
    "wilson_interval",
    "WorstSample",
    "MonteCarloPlan",
    "ChunkSummary",
    "MonteCarloResult",
    "plan_monte_carlo",
    "margins_needed",
    "evaluate_chunk",
    "combine_chunks",
    "run_monte_carlo",
]

SAMPLING_CAUTION = (
    "A Monte Carlo fraction estimates how often the design holds under the stated parameter distribution; "
    "it is never a proof of robustness: an unsampled combination can still fail, and the model itself can "
    "be wrong. Validate on the real system with safe limits and emergency stops, under local codes, "
    "functional-safety standards and licensed practice."
)

#: Samples per chunk: large enough that numpy, not Python, dominates; small enough to bound memory.
DEFAULT_CHUNK_SIZE = 5000
MAX_SAMPLES = 100_000_000
#: Samples that could not be evaluated kept as examples, per chunk and in the result.
_FAILED_EXAMPLES = 5
#: Specs judged per sample from the poles (and margins when asked).
_SAMPLED_SPECS = ("min_damping_ratio", "min_gain_margin_db", "min_phase_margin_deg")
#: Specs that need simulated responses: judged exactly at the operating points, not per sample.
_RESPONSE_SPECS = ("max_settling_time", "max_overshoot_percent", "max_input_magnitude")


class SamplingCancelled(GainboardError):
    """A Monte Carlo run was cancelled before it finished."""


@dataclass(frozen=True)
class FractionEstimate:
    """A fraction k/N of samples with its confidence interval.

    Attributes
    ----------
    successes, trials : int
    fraction : float
        successes / trials (nan when trials is 0).
    interval : (float, float)
        Wilson score interval at ``confidence``.
    confidence : float
    """

    successes: int
    trials: int
    fraction: float
    interval: tuple[float, float]
    confidence: float


def wilson_interval(successes: int, trials: int, confidence: float = 0.95) -> FractionEstimate:
    """Wilson's score interval for a binomial fraction.

    (p̂ + z²/2N ± z·sqrt(p̂(1 − p̂)/N + z²/4N²)) / (1 + z²/N), z the two-sided normal quantile
    (E. B. Wilson, J. American Statistical Association 22, 1927).

    Examples
    --------
    >>> estimate = wilson_interval(81, 263)
    >>> round(estimate.fraction, 4), [round(v, 4) for v in estimate.interval]
    (0.308, [0.2553, 0.3662])
    """
    if not 0 < confidence < 1:
        raise AnalysisError(f"the confidence level must lie between 0 and 1 (0.95 for 95 %), got {confidence}")
    if trials <= 0:
        return FractionEstimate(successes, trials, math.nan, (0.0, 1.0), confidence)
    z = float(scipy.special.ndtri(0.5 + confidence / 2.0))
    p = successes / trials
    denominator = 1.0 + z * z / trials
    centre = (p + z * z / (2 * trials)) / denominator
    half = z * math.sqrt(p * (1.0 - p) / trials + z * z / (4.0 * trials * trials)) / denominator
    return FractionEstimate(successes, trials, p, (max(0.0, centre - half), min(1.0, centre + half)), confidence)


@dataclass(frozen=True)
class WorstSample:
    """The sample with the smallest value of one figure.

    Attributes
    ----------
    figure : str
        ``"stability_margin"`` (−max Re s, or 1 − max|z|), ``"damping_ratio"``,
        ``"gain_margin_db"`` or ``"phase_margin_deg"``.
    value : float
    index : int
        Zero-based index of the sample in the run (ties: the lowest index).
    parameters : dict
        The sample's value of every parameter.
    """

    figure: str
    value: float
    index: int
    parameters: dict


@dataclass(frozen=True, eq=False)
class MonteCarloPlan:
    """What to sample; built by :func:`plan_monte_carlo`, sent unchanged to whatever runs the chunks."""

    family: PlantFamily
    gain: np.ndarray
    samples: int
    seed: int
    chunk_size: int
    specs: DesignSpecs | None
    include_margins: bool
    keep_poles: int
    confidence: float

    @property
    def chunk_count(self) -> int:
        return -(-self.samples // self.chunk_size)

    def chunk_bounds(self, index: int) -> tuple[int, int]:
        start = index * self.chunk_size
        return start, min(self.samples, start + self.chunk_size)

    @property
    def sampled_specs(self) -> tuple[str, ...]:
        """The given specs judged per sample (margins only when asked and with one input)."""
        if self.specs is None:
            return ()
        names = []
        for name in _SAMPLED_SPECS:
            if getattr(self.specs, name) is None:
                continue
            if name != "min_damping_ratio" and not (self.include_margins and self.family.nominal.input_count == 1):
                continue
            names.append(name)
        return tuple(names)

    @property
    def specs_not_sampled(self) -> dict:
        """Given specs that sampling does not judge, with the reason."""
        if self.specs is None:
            return {}
        reasons = {}
        for name in _RESPONSE_SPECS:
            if getattr(self.specs, name) is not None:
                reasons[name] = "needs simulated responses: judged at the operating points, not per sample"
        for name in ("min_gain_margin_db", "min_phase_margin_deg"):
            if getattr(self.specs, name) is not None and name not in self.sampled_specs:
                reasons[name] = ("margins per sample were not asked for" if not self.include_margins else
                                 "margins per sample are computed for single-input plants only")
        return reasons


def margins_needed(specs: DesignSpecs | None) -> bool:
    """Whether sampling needs margins per sample: only when a margin spec is given (they cost the most)."""
    return specs is not None and (specs.min_gain_margin_db is not None or specs.min_phase_margin_deg is not None)


def plan_monte_carlo(family: PlantFamily, gain, samples: int, seed: int, specs: DesignSpecs | None = None,
                     include_margins: bool = False, chunk_size: int = DEFAULT_CHUNK_SIZE, keep_poles: int = 0,
                     confidence: float = 0.95) -> MonteCarloPlan:
    """Check and fix what a Monte Carlo run samples.

    Parameters
    ----------
    family : PlantFamily
    gain : array_like, shape (m, n)
    samples : int
        Number of parameter samples N (1 … 10⁸).
    seed : int
        Seed of ``numpy.random.SeedSequence``; the same seed gives the same figures bit for bit.
    specs : DesignSpecs, optional
        The plant's suggested specs when None.
    include_margins : bool
        Gain and phase margins per sample (single-input plants).
    chunk_size : int
        Samples per chunk. Part of the plan: changing it changes which random numbers a sample gets.
    keep_poles : int
        Return the closed-loop poles of the first ``keep_poles`` samples (for a pole cloud).
    confidence : float
        Level of the confidence intervals.
    """
    K = family.nominal.check_gain(gain)
    for value, what, low, high in ((samples, "the number of samples", 1, MAX_SAMPLES),
                                   (chunk_size, "the chunk size", 1, 10_000_000),
                                   (keep_poles, "the number of samples whose poles are kept", 0, 1_000_000)):
        if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or not low <= value <= high:
            raise AnalysisError(f"{what} must be a whole number from {low} to {high}, got {value!r}")
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise AnalysisError(f"the seed must be a whole number ≥ 0, got {seed!r}")
    if not family.varying_parameters:
        raise AnalysisError("this plant has no parameter with a range or a spread, so there is nothing to sample; "
                            "add low/high or std under [parameters]")
    if not 0 < confidence < 1:
        raise AnalysisError(f"the confidence level must lie between 0 and 1, got {confidence}")
    specs = specs if specs is not None else family.nominal.specs
    return MonteCarloPlan(family, K, int(samples), int(seed), int(chunk_size), specs, bool(include_margins),
                          int(keep_poles), float(confidence))


@dataclass(frozen=True, eq=False)
class ChunkSummary:
    """What one chunk found (small: counts and a few samples, never every sample)."""

    index: int
    count: int
    evaluated: int
    stable: int
    on_boundary: int
    spec_passed: dict
    all_passed: int
    worst: dict
    failed_examples: tuple
    poles: np.ndarray = field(repr=False)


def _chunk_parameters(plan: MonteCarloPlan, index: int) -> dict:
    """The chunk's parameter samples: one uniform number per sample and varying parameter."""
    start, stop = plan.chunk_bounds(index)
    child = np.random.SeedSequence(plan.seed).spawn(plan.chunk_count)[index]
    varying = plan.family.varying_parameters
    # random() gives multiples of 2⁻⁵³ in [0, 1); shifting by half a step keeps u inside (0, 1)
    u = np.random.default_rng(child).random((stop - start, len(varying))) + 2.0 ** -54
    values = {p.name: np.full(stop - start, p.nominal) for p in plan.family.parameters}
    for column, parameter in enumerate(varying):
        values[parameter.name] = parameter.from_unit_interval(u[:, column])
    return values


def _damping_ratios(poles: np.ndarray, sample_time: float | None) -> np.ndarray:
    """Smallest ζ = −Re s/|s| per sample (s = ln z / T when sampled), as damping_ratio_of_pole."""
    with np.errstate(divide="ignore", invalid="ignore"):
        s = poles if sample_time is None else np.log(poles) / sample_time
        size = np.abs(s)
        ratio = np.where(size == 0, 0.0, -s.real / size)
        ratio = np.where(np.isinf(s.real), 1.0, ratio)  # z = 0: infinitely fast, ζ = 1
    return ratio.min(axis=1)


def _worst_of(figure: str, values: np.ndarray, mask: np.ndarray, start: int, parameters: dict):
    if not mask.any():
        return None
    candidates = np.where(mask, values, np.inf)
    position = int(np.argmin(candidates))  # the first of equal minima: the lowest index
    return WorstSample(figure, float(candidates[position]), start + position,
                       {name: float(v[position]) for name, v in parameters.items()})


def evaluate_chunk(plan: MonteCarloPlan, index: int) -> ChunkSummary:
    """Sample and judge chunk ``index`` of the plan (a pure function of the plan and the index)."""
    if not 0 <= index < plan.chunk_count:
        raise AnalysisError(f"chunk {index} does not exist; the plan has {plan.chunk_count}")
    start, stop = plan.chunk_bounds(index)
    family, K, T = plan.family, plan.gain, plan.family.nominal.sample_time
    parameters = _chunk_parameters(plan, index)
    stacks = family.matrix_stacks(parameters)
    evaluable = stacks.evaluable.copy()
    closed = stacks.A - stacks.B @ K
    try:
        poles, margin, verdict = stability_verdicts(closed, T)
    except np.linalg.LinAlgError:  # one matrix the eigenvalue solver cannot handle: find it, keep the rest
        poles = np.full(closed.shape[:2], np.nan, dtype=complex)
        margin = np.full(len(closed), -np.inf)
        verdict = np.full(len(closed), -1, dtype=np.int8)
        for i in range(len(closed)):
            try:
                p, g, v = stability_verdicts(closed[i : i + 1], T)
                poles[i], margin[i], verdict[i] = p[0], g[0], v[0]
            except np.linalg.LinAlgError:
                evaluable[i] = False
    evaluable &= np.isfinite(margin)
    stable = evaluable & (verdict == 1)
    figures = {"stability_margin": margin}
    passed = {}
    sampled = plan.sampled_specs
    if plan.specs is not None and "min_damping_ratio" in sampled:
        damping = _damping_ratios(poles, T)
        figures["damping_ratio"] = damping
        passed["min_damping_ratio"] = evaluable & (damping >= plan.specs.min_damping_ratio - BOUNDARY_SLACK)
    if plan.include_margins and family.nominal.input_count == 1:
        gain_db = np.full(len(closed), np.nan)
        phase = np.full(len(closed), np.nan)
        rows = np.flatnonzero(stable)
        if rows.size:
            gain_db[rows], phase[rows] = single_input_margins(stacks.A[rows], stacks.B[rows], K, poles[rows], T)
        figures["gain_margin_db"], figures["phase_margin_deg"] = gain_db, phase
        for name, values in (("min_gain_margin_db", gain_db), ("min_phase_margin_deg", phase)):
            if name in sampled:
                required = getattr(plan.specs, name)
                passed[name] = stable & (values >= required * (1.0 - BOUNDARY_SLACK) - BOUNDARY_SLACK)
    every = stable.copy()
    for mask in passed.values():
        every &= mask
    worst = {}
    for figure, values in figures.items():
        mask = evaluable if figure in ("stability_margin", "damping_ratio") else stable
        found = _worst_of(figure, values, mask, start, parameters)
        if found is not None:
            worst[figure] = found
    failed = [(start + int(i), {name: float(v[i]) for name, v in parameters.items()},
               stacks.first_bad_entry[i] or "the eigenvalue solver did not converge")
              for i in np.flatnonzero(~evaluable)[:_FAILED_EXAMPLES]]
    kept = max(0, min(stop, plan.keep_poles) - start)
    return ChunkSummary(
        index=index, count=stop - start, evaluated=int(evaluable.sum()), stable=int(stable.sum()),
        on_boundary=int((evaluable & (verdict == 0)).sum()),
        spec_passed={name: int(mask.sum()) for name, mask in passed.items()}, all_passed=int(every.sum()),
        worst=worst, failed_examples=tuple(failed), poles=poles[:kept].copy())


@dataclass(frozen=True, eq=False)
class MonteCarloResult:
    """The statement a Monte Carlo run supports, with its uncertainty.

    Attributes
    ----------
    samples, seed : int
    evaluated : int
        Samples whose model could be evaluated.
    failed_samples : int
        Samples whose model could not be evaluated (an entry not finite at the sampled
        values); they count as *not* stable and as failing every spec.
    failed_examples : tuple of (int, dict, str)
        A few of them: index, parameter values, the entry at fault.
    stable : FractionEstimate
        Stable samples out of all samples, with its confidence interval.
    on_boundary : int
        Samples with a pole within rounding of the boundary (counted as not stable).
    spec_pass : dict
        Spec name → FractionEstimate out of all samples, for the specs judged per sample;
        ``"all"`` for passing every one of them and being stable.
    specs_not_sampled : dict
        Given specs not judged per sample, with the reason.
    worst : dict
        Figure name → WorstSample.
    parameter_boundaries : dict
        Parameter name → ParameterBoundary (others at nominal).
    poles : ndarray, shape (min(keep_poles, samples), n)
        Closed-loop poles of the first samples, for a pole cloud.
    caution : str
        :data:`SAMPLING_CAUTION`.
    """

    samples: int
    seed: int
    evaluated: int
    failed_samples: int
    failed_examples: tuple
    stable: FractionEstimate
    on_boundary: int
    spec_pass: dict
    specs_not_sampled: dict
    worst: dict
    parameter_boundaries: dict
    poles: np.ndarray = field(repr=False)
    caution: str = SAMPLING_CAUTION


def combine_chunks(plan: MonteCarloPlan, summaries, boundaries: dict | None = None) -> MonteCarloResult:
    """Combine every chunk's summary, in chunk order, into the run's result."""
    ordered = sorted(summaries, key=lambda s: s.index)
    if [s.index for s in ordered] != list(range(plan.chunk_count)):
        raise AnalysisError(f"the run has {len(ordered)} chunk results but the plan has {plan.chunk_count} chunks")
    total = plan.samples
    evaluated = sum(s.evaluated for s in ordered)
    worst: dict = {}
    for summary in ordered:  # chunk order and strict < keep the lowest index among equal values
        for figure, sample in summary.worst.items():
            if figure not in worst or sample.value < worst[figure].value:
                worst[figure] = sample
    spec_pass = {name: wilson_interval(sum(s.spec_passed[name] for s in ordered), total, plan.confidence)
                 for name in plan.sampled_specs}
    if plan.sampled_specs:
        spec_pass["all"] = wilson_interval(sum(s.all_passed for s in ordered), total, plan.confidence)
    failed = [example for s in ordered for example in s.failed_examples][:_FAILED_EXAMPLES]
    n = plan.family.nominal.state_count
    poles = np.concatenate([s.poles for s in ordered]) if ordered else np.empty((0, n), dtype=complex)
    return MonteCarloResult(
        samples=total, seed=plan.seed, evaluated=evaluated, failed_samples=total - evaluated,
        failed_examples=tuple(failed), stable=wilson_interval(sum(s.stable for s in ordered), total, plan.confidence),
        on_boundary=sum(s.on_boundary for s in ordered), spec_pass=spec_pass,
        specs_not_sampled=plan.specs_not_sampled, worst=worst,
        parameter_boundaries=boundaries if boundaries is not None else parameter_boundaries(plan.family, plan.gain),
        poles=poles)


def run_monte_carlo(plan: MonteCarloPlan, progress=None, cancelled=None) -> MonteCarloResult:
    """Run every chunk of the plan in this process.

    Parameters
    ----------
    plan : MonteCarloPlan
    progress : callable, optional
        ``progress(done_samples, total_samples)`` after each chunk.
    cancelled : callable, optional
        Checked before each chunk; when it returns True the run stops with :class:`SamplingCancelled`.

    Returns
    -------
    MonteCarloResult

    Examples
    --------
    s³ + 3s² + 2s + g with g uniform on [−1, 10] (Routh–Hurwitz: stable for 0 < g < 6, probability 6/11):

    >>> from gainboard.core import parse_plant_family_text
    >>> family = parse_plant_family_text('''
    ... [parameters.g]
    ... nominal = 1.0
    ... low = -1.0
    ... high = 10.0
    ... [model]
    ... A = [[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [0.0, -2.0, -3.0]]
    ... B = [[0.0], [0.0], ["g"]]
    ... ''')
    >>> result = run_monte_carlo(plan_monte_carlo(family, [[1.0, 0.0, 0.0]], samples=20_000, seed=7))
    >>> low, high = result.stable.interval
    >>> bool(low < 6 / 11 < high)
    True
    """
    summaries = []
    for index in range(plan.chunk_count):
        if cancelled is not None and cancelled():
            raise SamplingCancelled(f"the sampling was cancelled after {index} of {plan.chunk_count} chunks")
        summaries.append(evaluate_chunk(plan, index))
        if progress is not None:
            progress(plan.chunk_bounds(index)[1], plan.samples)
    return combine_chunks(plan, summaries)
