"""Checking a design against its specifications, and the pole region the specs imply.

:func:`check_specs` compares the closed-loop poles, responses and stability margins
of a design with a :class:`~gainboard.core.DesignSpecs` and says, spec by spec, what
was required, what was achieved and whether it passed.

:func:`pole_region` turns settling-time, overshoot and damping specs into the region
of the s-plane (or z-plane) where the closed-loop poles should lie, for the app to
shade behind its pole plot. The region comes from second-order rules of thumb: it
guides pole placement, it does not guarantee the specs (higher-order poles and
zeros move the responses), so the response checks remain the judge.

Passing these checks on a linear model is not a safety argument: validate any design
on the real system with safe limits and emergency stops, under local codes,
functional-safety standards and licensed engineering practice.
"""

from __future__ import annotations

import cmath
import math
from dataclasses import dataclass

import numpy as np

from . import _stability
from ._errors import AnalysisError
from ._metrics import settling_time
from ._specs import DesignSpecs

__all__ = [
    "SpecCheck",
    "SpecReport",
    "check_specs",
    "PoleRegion",
    "pole_region",
    "region_boundary",
    "pole_in_region",
    "damping_ratio_of_pole",
    "damping_ratio_for_overshoot",
]

INF = float("inf")
NAN = float("nan")
#: Relative slack when comparing with a spec or a region boundary, so that a pole
#: placed exactly on the boundary (up to rounding) counts as meeting it.
BOUNDARY_SLACK = 1e-9


def _pole_note(variable: str, pole: complex, verdict: str) -> str:
    note = f"pole {variable} = {pole:.4g}"
    return note + " is on the boundary (within rounding)" if verdict == _stability.ON_THE_BOUNDARY else note


@dataclass(frozen=True)
class SpecCheck:
    """One comparison of a design with one specification.

    Attributes
    ----------
    name : str
        The spec's field name in :class:`DesignSpecs` ("max_settling_time", …), or
        "stable" for the stability check that is always made.
    description : str
        What was compared, in plain words with units.
    required : float
        The limit from the spec.
    achieved : float
        What the design reaches (``inf`` for a response that never settles or
        blows up, ``nan`` when it could not be evaluated).
    passed : bool or None
        None when the check could not be evaluated (``detail`` says why).
    detail : str
        Which output/input/pole decided it, or why it was not evaluated.
    subject : str
        The input the check is about (per-input specs), else "".
    """

    name: str
    description: str
    required: float
    achieved: float
    passed: bool | None
    detail: str = ""
    subject: str = ""


@dataclass(frozen=True)
class SpecReport:
    """All spec checks of a design.

    Attributes
    ----------
    checks : tuple of SpecCheck
        The stability check first, then one check per given spec (one per input for
        ``max_input_magnitude``).
    all_passed : bool
        True only when every check passed; a check that could not be evaluated
        counts as not passed.
    """

    checks: tuple[SpecCheck, ...]
    all_passed: bool

    @property
    def failed(self) -> tuple[SpecCheck, ...]:
        """Checks that were evaluated and failed."""
        return tuple(c for c in self.checks if c.passed is False)

    @property
    def not_evaluated(self) -> tuple[SpecCheck, ...]:
        """Checks that could not be evaluated."""
        return tuple(c for c in self.checks if c.passed is None)


# -- damping and decay of a pole -------------------------------------------------------------
def _equivalent_s(pole: complex, sample_time: float | None) -> complex:
    """The s-plane pole: s itself, or s = ln(z)/T (principal branch) for a sampled pole."""
    pole = complex(pole)
    if sample_time is None:
        return pole
    if pole == 0:
        return complex(-INF, 0.0)
    return cmath.log(pole) / sample_time


def damping_ratio_of_pole(pole, sample_time: float | None = None) -> float:
    """Damping ratio ζ = −Re s / |s| of a pole (s, or z mapped by s = ln(z)/T).

    Parameters
    ----------
    pole : complex
        s-plane pole, or z-plane pole when ``sample_time`` is given.
    sample_time : float, optional
        Sample time T in seconds of a sampled loop.

    Returns
    -------
    float
        ζ in [−1, 1]: 1 for a stable real pole (and for z = 0), negative for an
        unstable pole, 0 for a pole on the stability boundary (including s = 0).

    Examples
    --------
    >>> round(damping_ratio_of_pole(complex(-0.5, 3 ** 0.5 / 2)), 12)
    0.5
    """
    s = _equivalent_s(pole, sample_time)
    if math.isinf(s.real):
        return 1.0
    size = abs(s)
    return 0.0 if size == 0.0 else -s.real / size


def damping_ratio_for_overshoot(overshoot_percent: float) -> float:
    """ζ of a second-order pole pair whose step overshoot is ``overshoot_percent``.

    Inverts overshoot = exp(−πζ/√(1−ζ²)): ζ = −ln(OS)/√(π² + ln²(OS)) with OS as a
    fraction (0 % gives ζ = 1; 100 % or more gives ζ = 0).

    Examples
    --------
    >>> round(damping_ratio_for_overshoot(16.303), 4)
    0.5
    """
    fraction = overshoot_percent / 100.0
    if fraction <= 0.0:
        return 1.0
    if fraction >= 1.0:
        return 0.0
    log = math.log(fraction)
    return -log / math.sqrt(math.pi**2 + log**2)


# -- the checks --------------------------------------------------------------------------------------
def _worst(entries):
    """(value, label) with the largest value; nan entries lose to finite ones, inf wins."""
    finite = [(v, label) for v, label in entries if not math.isnan(v)]
    if not finite:
        return NAN, ""
    return max(finite, key=lambda item: item[0])


def _settling_entries(responses, band: float):
    """(settling time, label, reason) of the tracked step outputs and the moving initial outputs."""
    entries = []
    same_band = math.isclose(band, responses.settling_band, rel_tol=1e-12)
    candidates = []
    if responses.step is not None:
        tracked = [i for i, target in enumerate(responses.step.targets) if math.isfinite(target)]
        candidates.append((responses.step, tracked, "reference step"))
    candidates.append((responses.initial, range(len(responses.initial.output_metrics)), "initial-condition response"))
    for response, indices, label in candidates:
        for i in indices:
            metrics = response.output_metrics[i]
            where = f"{metrics.output_name} in the {label}"
            if response.diverged_at is not None or responses.diverging:
                entries.append((INF, where, "the closed loop is unstable"))
                continue
            if not math.isfinite(metrics.final_value):
                entries.append((INF, where, metrics.reason("final_value") or metrics.reason("settling_time")))
                continue
            if "does not move" in metrics.reason("settling_time"):
                continue
            if same_band:
                value = metrics.settling_time
            else:
                value = _recomputed_settling(response, i, metrics, band, responses.sample_time is not None)
            if math.isnan(value):
                entries.append((INF, where, f"still outside the band at the end of the horizon "
                                            f"({response.time[-1]:.4g} s)"))
            else:
                entries.append((value, where, ""))
    return entries


def _recomputed_settling(response, i, metrics, band, at_samples):
    """Settling time of output i with another band (straight-line interpolation between grid points)."""
    values = response.outputs[:, i]
    final = metrics.final_value
    change = final - metrics.start_value
    deviation = max(float(np.max(np.abs(values - final))), abs(metrics.start_value - final))
    moves = abs(change) > 1e-8 * deviation
    scale = abs(change) if (moves and response.kind == "step") else deviation
    return settling_time(response.time, values, None, final, band * scale, at_samples=at_samples)


def check_specs(specs, closed_loop_poles, responses=None, margins=None, sample_time=None,
                boundary_tolerance=None) -> SpecReport:
    """Compare a design with its specifications.

    Parameters
    ----------
    specs : DesignSpecs or None
        The targets; None checks stability only.
    closed_loop_poles : array_like of complex, shape (n,)
        Eigenvalues of A − BK (z-plane when the loop is sampled).
    responses : ResponseSet, optional
        From :func:`simulate_responses`; without it the response-based checks
        (settling, overshoot, input magnitude) are "not evaluated".
    margins : LoopMargins, optional
        Single input: ``gain_margin_db_min`` and ``phase_margin_deg`` are checked.
        Several inputs: the disk margin's guaranteed gain range and phase
        (``disk_gain_range``, ``disk_phase_margin_deg``), which hold with every
        input changed at once. Without margins the margin checks are "not evaluated".
    sample_time : float, optional
        Sample time of a sampled loop (taken from ``responses`` when omitted there).
    boundary_tolerance : float, optional
        The loop's rounding band around the stability boundary
        (``ClosedLoopReport.boundary_tolerance``); by default the band of the smallest
        matrix norm the poles allow, (Σ|p|²)^½ (Schur's inequality).

    Returns
    -------
    SpecReport

    Notes
    -----
    - **stable** (always): the one stability decision (:func:`gainboard.core.decide_stability`):
      every pole has Re s < 0 (|z| < 1 when sampled) by more than the rounding band; a pole
      within the band is "on the boundary" and fails.
    - **max_settling_time**: the slowest settling time, with ``specs.settling_band``,
      of the tracked outputs in the reference step and of every output that moves
      in the initial-condition response. A response still outside the band at the
      end of the horizon fails when the horizon is at least the spec, and is not
      evaluated otherwise.
    - **max_overshoot_percent**: the largest overshoot of the tracked outputs in the
      reference step.
    - **min_damping_ratio**: the smallest ζ = −Re s/|s| over the poles (s = ln z / T
      when sampled).
    - **max_input_magnitude**: per input, the largest |u| the linear loop demands in
      any of the responses.
    - **min_gain_margin_db**, **min_phase_margin_deg**: read from ``margins``.

    A design that passes every check on its linear model still has to be validated
    on the real system with safe limits and emergency stops, under local codes,
    functional-safety standards and licensed engineering practice.

    Examples
    --------
    >>> report = check_specs(DesignSpecs(min_damping_ratio=0.5), [complex(-1, 1), complex(-1, -1)])
    >>> [(c.name, c.passed) for c in report.checks], report.all_passed
    ([('stable', True), ('min_damping_ratio', True)], True)
    """
    specs = DesignSpecs() if specs is None else specs
    if not isinstance(specs, DesignSpecs):
        raise AnalysisError(f"specs must be a DesignSpecs, got {type(specs).__name__}")
    poles = np.atleast_1d(np.asarray(closed_loop_poles, dtype=complex))
    if poles.ndim != 1 or poles.size == 0 or not np.all(np.isfinite(poles)):
        raise AnalysisError("the closed-loop poles must be a non-empty list of finite (complex) numbers")
    if sample_time is None and responses is not None:
        sample_time = responses.sample_time
    sampled = sample_time is not None
    checks: list[SpecCheck] = []

    # stability -----------------------------------------------------------------------------------
    if boundary_tolerance is None:
        boundary_tolerance = _stability.boundary_tolerance(float(np.linalg.norm(poles)), poles.size)
    if sampled:
        radii = np.abs(poles)
        worst = int(np.argmax(radii))
        verdict = _stability.decide_pole_stability(complex(poles[worst]), boundary_tolerance, sample_time)
        checks.append(SpecCheck(
            "stable", "largest pole magnitude |z| (must be below 1 for a stable sampled loop)",
            1.0, float(radii[worst]), verdict == _stability.STABLE, _pole_note("z", poles[worst], verdict),
        ))
    else:
        worst = int(np.argmax(poles.real))
        verdict = _stability.decide_pole_stability(complex(poles[worst]), boundary_tolerance, None)
        checks.append(SpecCheck(
            "stable", "largest real part of the poles, 1/s (must be below 0 for a stable loop)",
            0.0, float(poles.real[worst]), verdict == _stability.STABLE, _pole_note("s", poles[worst], verdict),
        ))

    # settling time ----------------------------------------------------------------------------------
    if specs.max_settling_time is not None:
        required = specs.max_settling_time
        description = (f"slowest settling time into a ±{specs.settling_band * 100:g} % band of the reference "
                       "step and initial-condition responses, s")
        if responses is None:
            checks.append(SpecCheck("max_settling_time", description, required, NAN, None,
                                    "not evaluated: no responses were simulated"))
        else:
            entries = _settling_entries(responses, specs.settling_band)
            if not entries:
                checks.append(SpecCheck("max_settling_time", description, required, NAN, None,
                                        "not evaluated: no output moves in these responses"))
            else:
                value, where, why = max(entries, key=lambda e: e[0])
                if math.isinf(value) and "horizon" in why and responses.horizon < required:
                    checks.append(SpecCheck("max_settling_time", description, required, NAN, None,
                                            f"not evaluated: {where} has not settled by the end of the horizon "
                                            f"({responses.horizon:.4g} s), which is shorter than the spec; "
                                            "simulate longer"))
                else:
                    passed = value <= required * (1.0 + BOUNDARY_SLACK)
                    detail = f"slowest: {where}" + (f" ({why})" if why else "")
                    checks.append(SpecCheck("max_settling_time", description, required, value, passed, detail))

    # overshoot -----------------------------------------------------------------------------------------
    if specs.max_overshoot_percent is not None:
        required = specs.max_overshoot_percent
        description = "largest overshoot of the tracked outputs in the reference step, % of the step"
        if responses is None:
            checks.append(SpecCheck("max_overshoot_percent", description, required, NAN, None,
                                    "not evaluated: no responses were simulated"))
        elif responses.step is None:
            checks.append(SpecCheck("max_overshoot_percent", description, required, NAN, None,
                                    f"not evaluated: no reference step ({responses.step_unavailable_reason})"))
        elif responses.diverging or responses.step.diverged_at is not None:
            checks.append(SpecCheck("max_overshoot_percent", description, required, INF, False,
                                    "the closed loop is unstable"))
        else:
            entries = [
                (m.overshoot_percent, m.output_name)
                for m, target in zip(responses.step.output_metrics, responses.step.targets)
                if math.isfinite(target)
            ]
            value, name = _worst(entries)
            if math.isnan(value):
                reasons = "; ".join(m.reason("overshoot_percent") for m in responses.step.output_metrics if
                                    m.reason("overshoot_percent"))
                checks.append(SpecCheck("max_overshoot_percent", description, required, NAN, None,
                                        f"not evaluated: {reasons or 'overshoot undefined'}"))
            else:
                passed = value <= required * (1.0 + BOUNDARY_SLACK) + BOUNDARY_SLACK
                checks.append(SpecCheck("max_overshoot_percent", description, required, value, passed,
                                        f"largest on {name}"))

    # damping ----------------------------------------------------------------------------------------------
    if specs.min_damping_ratio is not None:
        required = specs.min_damping_ratio
        ratios = [damping_ratio_of_pole(p, sample_time) for p in poles]
        worst = int(np.argmin(ratios))
        variable = "z" if sampled else "s"
        checks.append(SpecCheck(
            "min_damping_ratio", "smallest damping ratio ζ of the closed-loop poles",
            required, ratios[worst], ratios[worst] >= required - BOUNDARY_SLACK,
            f"least damped pole {variable} = {poles[worst]:.4g}",
        ))

    # input magnitude -------------------------------------------------------------------------------------
    if specs.max_input_magnitude is not None:
        limits = specs.max_input_magnitude
        if responses is None:
            for i, required in enumerate(limits):
                checks.append(SpecCheck("max_input_magnitude", f"largest |u| of input {i + 1}", required, NAN,
                                        None, "not evaluated: no responses were simulated", f"input {i + 1}"))
        else:
            metrics_by_response = [(r.kind, r.input_metrics) for r in responses.responses]
            count = len(metrics_by_response[0][1])
            if len(limits) != count:
                raise AnalysisError(
                    f"specs: max_input_magnitude gives {len(limits)} number(s) but the plant has {count} input(s); "
                    "give one largest |u| per input"
                )
            for i, required in enumerate(limits):
                name = metrics_by_response[0][1][i].input_name
                entries = []
                for kind, metrics in metrics_by_response:
                    value = metrics[i].peak_magnitude
                    entries.append((INF if math.isnan(value) else value, f"{kind} response"))
                value, where = _worst(entries)
                passed = value <= required * (1.0 + BOUNDARY_SLACK)
                checks.append(SpecCheck(
                    "max_input_magnitude", f"largest |{name}| demanded by the linear loop over the responses",
                    required, value, passed, f"largest in the {where}", name,
                ))

    # margins ------------------------------------------------------------------------------------------------
    for spec_name, description, (value, source) in (
        ("min_gain_margin_db", "smallest gain margin (gain increase or decrease) at the plant input, dB",
         _gain_margin_db(margins)),
        ("min_phase_margin_deg", "phase margin at the plant input, degrees", _phase_margin_deg(margins)),
    ):
        required = getattr(specs, spec_name)
        if required is None:
            continue
        if value is None or math.isnan(value):
            why = "no margins were computed" if margins is None else source
            checks.append(SpecCheck(spec_name, description, required, NAN, None, f"not evaluated: {why}"))
        else:
            checks.append(SpecCheck(spec_name, description, required, value,
                                    value >= required * (1.0 - BOUNDARY_SLACK) - BOUNDARY_SLACK, source))

    checks_tuple = tuple(checks)
    return SpecReport(checks_tuple, all(c.passed is True for c in checks_tuple))


def _finite_or_none(value):
    return None if value is None or (isinstance(value, float) and math.isnan(value)) else float(value)


def _gain_margin_db(margins) -> tuple[float | None, str]:
    """Gain margin in dB for the spec check, and where it comes from.

    One input: the exact loop gain margin. Several inputs: the disk margin's guaranteed gain range
    (every input's gain changed at once; conservative, Seiler, Packard & Gahinet 2020 — from memory),
    as the smaller of its two directions in |dB|.
    """
    if margins is None:
        return None, ""
    single = _finite_or_none(getattr(margins, "gain_margin_db_min", None))
    if single is not None:
        return single, "loop gain margin at the plant input"
    disk_range = getattr(margins, "disk_gain_range", None)
    if disk_range is not None:
        low, high = disk_range
        down = math.inf if low <= 0 else -20.0 * math.log10(low)
        up = math.inf if not math.isfinite(high) else 20.0 * math.log10(high)
        return min(down, up), "disk margin: all inputs' gains changed at once (conservative)"
    return None, "the margins give no gain margin (is the nominal loop stable?)"


def _phase_margin_deg(margins) -> tuple[float | None, str]:
    """Phase margin in degrees for the spec check (disk margin's phase for several inputs)."""
    if margins is None:
        return None, ""
    single = _finite_or_none(getattr(margins, "phase_margin_deg", None))
    if single is not None:
        return single, "loop phase margin at the plant input"
    disk_phase = _finite_or_none(getattr(margins, "disk_phase_margin_deg", None))
    if disk_phase is not None:
        return disk_phase, "disk margin: all inputs' phases changed at once (conservative)"
    return None, "the margins give no phase margin (is the nominal loop stable?)"


# -- the pole region -------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class PoleRegion:
    """Where the closed-loop poles should lie to meet settling and damping specs.

    In the s-plane: Re s ≤ −σ (every pole decays at least at rate σ) and
    ζ = −Re s/|s| ≥ ζ_min (inside the sector of half-angle arccos ζ_min about the
    negative real axis). For a sampled loop the same region mapped by z = e^{sT}:
    inside the circle |z| = e^{−σT} and inside the log-spiral of constant ζ_min.
    With no specs it is the stability region (σ = 0, ζ_min = 0: the open left
    half-plane or the open unit disk).

    Attributes
    ----------
    min_decay_rate : float
        σ in 1/s.
    min_damping_ratio : float
        ζ_min in [0, 1].
    sample_time : float or None
        T of a sampled loop (the region is then in the z-plane).
    decay_rate_source, damping_source : str
        Where σ and ζ_min came from, in plain words.
    """

    min_decay_rate: float
    min_damping_ratio: float
    sample_time: float | None
    decay_rate_source: str
    damping_source: str

    @property
    def radius(self) -> float:
        """Radius e^{−σT} of the decay circle in the z-plane (sampled regions only)."""
        if self.sample_time is None:
            raise AnalysisError("a continuous pole region has no z-plane radius")
        return math.exp(-self.min_decay_rate * self.sample_time)


def pole_region(specs, sample_time: float | None = None) -> PoleRegion:
    """The pole region implied by settling-time, overshoot and damping specs.

    σ = −ln(band)/T_s: the envelope e^{−σt} of the slowest pole has fallen to the
    settling band at the settling time (a rule of thumb for a dominant pole; for
    the 2 % band σ ≈ 3.9/T_s). ζ_min is the larger of the damping spec and the ζ
    whose second-order step overshoot equals the overshoot spec.

    Parameters
    ----------
    specs : DesignSpecs or None
    sample_time : float, optional
        Gives a z-plane region for a sampled loop.

    Returns
    -------
    PoleRegion

    Raises
    ------
    AnalysisError
        If the settling time is 0 (no finite pole meets it) or the sample time is
        not positive.

    Examples
    --------
    >>> region = pole_region(DesignSpecs(max_settling_time=4.0, max_overshoot_percent=16.303))
    >>> round(region.min_decay_rate, 4), round(region.min_damping_ratio, 4)
    (0.978, 0.5)
    """
    specs = DesignSpecs() if specs is None else specs
    if sample_time is not None and not (isinstance(sample_time, (int, float)) and sample_time > 0
                                        and math.isfinite(sample_time)):
        raise AnalysisError(f"the sample time must be a positive number of seconds, got {sample_time!r}")
    decay, decay_source = 0.0, "stability only (no settling-time spec)"
    if specs.max_settling_time is not None:
        if specs.max_settling_time <= 0.0:
            raise AnalysisError("a settling time of 0 s cannot be met by any pole; give a positive settling time")
        decay = -math.log(specs.settling_band) / specs.max_settling_time
        decay_source = (f"settling within {specs.max_settling_time:g} s to a ±{specs.settling_band * 100:g} % band: "
                        f"σ = −ln({specs.settling_band:g})/{specs.max_settling_time:g} s (rule of thumb for the "
                        "slowest pole)")
    damping, damping_source = 0.0, "stability only (no damping or overshoot spec)"
    if specs.max_overshoot_percent is not None:
        damping = damping_ratio_for_overshoot(specs.max_overshoot_percent)
        damping_source = (f"overshoot at most {specs.max_overshoot_percent:g} %: ζ = {damping:.4g} "
                          "(second-order step formula)")
    if specs.min_damping_ratio is not None and specs.min_damping_ratio >= damping:
        damping = specs.min_damping_ratio
        damping_source = f"damping ratio spec ζ ≥ {damping:g}"
    return PoleRegion(decay, damping, None if sample_time is None else float(sample_time), decay_source,
                      damping_source)


def pole_in_region(region: PoleRegion, pole) -> bool:
    """Whether a closed-loop pole lies in the region (boundary included, up to rounding).

    Parameters
    ----------
    region : PoleRegion
    pole : complex
        s-plane pole, or z-plane pole when ``region.sample_time`` is set.

    Examples
    --------
    >>> region = pole_region(DesignSpecs(min_damping_ratio=0.5))
    >>> pole_in_region(region, complex(-1, 1)), pole_in_region(region, complex(-1, 2))
    (True, False)
    """
    s = _equivalent_s(pole, region.sample_time)
    if math.isinf(s.real):  # z = 0: infinitely fast, no oscillation
        return True
    decay = -s.real
    if decay <= 0.0:
        return False
    if decay < region.min_decay_rate * (1.0 - BOUNDARY_SLACK):
        return False
    return decay / abs(s) >= region.min_damping_ratio - BOUNDARY_SLACK


def _clip_polygon(points, a: float, b: float, c: float):
    """Part of a convex polygon with a·x + b·y ≤ c (Sutherland–Hodgman, one edge)."""
    kept = []
    count = len(points)
    for i in range(count):
        current, following = points[i], points[(i + 1) % count]
        f_current = a * current[0] + b * current[1] - c
        f_following = a * following[0] + b * following[1] - c
        if f_current <= 0.0:
            kept.append(current)
        if (f_current < 0.0 < f_following) or (f_following < 0.0 < f_current):
            s = f_current / (f_current - f_following)
            kept.append((current[0] + s * (following[0] - current[0]), current[1] + s * (following[1] - current[1])))
    return kept


def region_boundary(region: PoleRegion, extent: float = 1.0) -> list[tuple[np.ndarray, np.ndarray]]:
    """Outline of the pole region for shading, as closed polylines (x, y).

    Parameters
    ----------
    region : PoleRegion
    extent : float
        s-plane: half-size of the view square [−extent, extent]² that clips the
        (unbounded) region. Ignored in the z-plane, where the region lies inside
        the unit circle.

    Returns
    -------
    list of (numpy.ndarray, numpy.ndarray)
        Each entry is the x (real part) and y (imaginary part) coordinates of one
        closed outline (first point repeated at the end). Empty when the region
        lies outside the view. When ζ_min = 1 the region is a segment of the real
        axis, returned as a two-point outline traversed there and back.

    Examples
    --------
    >>> [(x, y)] = region_boundary(pole_region(DesignSpecs(max_settling_time=3.912)), 2.0)
    >>> sorted(set(zip(np.round(x, 3).tolist(), np.round(y, 3).tolist())))
    [(-2.0, -2.0), (-2.0, 2.0), (-1.0, -2.0), (-1.0, 2.0)]
    """
    sigma, zeta = region.min_decay_rate, region.min_damping_ratio
    if region.sample_time is not None:
        radius = region.radius
        if zeta >= 1.0 - 1e-12:
            x = np.array([0.0, radius, 0.0])
            return [(x, np.zeros(3))]
        slope = zeta / math.sqrt(1.0 - zeta**2)  # cot of the sector half-angle
        angles = np.linspace(-math.pi, math.pi, 721)
        if slope > 0.0:
            switch = -math.log(radius) / slope if radius < 1.0 else 0.0
            if 0.0 < switch < math.pi:
                angles = np.unique(np.concatenate([angles, [-switch, switch]]))
        rho = np.minimum(radius, np.exp(-np.abs(angles) * slope))
        x, y = rho * np.cos(angles), rho * np.sin(angles)
        x[-1], y[-1] = x[0], y[0]
        return [(x, y)]

    if not (isinstance(extent, (int, float)) and math.isfinite(extent) and extent > 0):
        raise AnalysisError(f"the view extent must be a positive number, got {extent!r}")
    if sigma >= extent:
        return []
    if zeta >= 1.0 - 1e-12:
        x = np.array([-extent, -sigma, -extent])
        return [(x, np.zeros(3))]
    polygon = [(-extent, -extent), (0.0, -extent), (0.0, extent), (-extent, extent)]
    polygon = _clip_polygon(polygon, 1.0, 0.0, -sigma)
    if zeta > 0.0:
        angle = math.acos(zeta)  # half-angle of the sector about the negative real axis
        # |y| ≤ −x·tan(angle) as two half-planes, in sine/cosine form
        polygon = _clip_polygon(polygon, math.sin(angle), math.cos(angle), 0.0)
        polygon = _clip_polygon(polygon, math.sin(angle), -math.cos(angle), 0.0)
    if len(polygon) < 3:
        return []
    x = np.array([p[0] for p in polygon] + [polygon[0][0]])
    y = np.array([p[1] for p in polygon] + [polygon[0][1]])
    return [(x, y)]
