"""Ranges and outlines a view of a design draws with: slider ranges, the pole-map frame, axis ranges.

These are numbers about how to *show* an evaluation, not about the design itself,
but they are numbers all the same, so they are computed here with the rest of
the evaluation and views only read them. Every range rounds outward to whole
steps of a 1-2-5 sequence and is kept from the previous evaluation while it still
fits, so it changes rarely while a design is dragged: a range that moves on every
slider step makes the browser measure and lay out the plot again, and the curves
jitter against a moving axis (measured with Chromium CPU profiles of a slider drag).

Rules (one place for all of them):

- **Sliders.** The range of an entry comes from :func:`default_entry_range`,
  rounded out to whole slider steps (about 400 per range). It is kept while the
  value stays inside it; outside a gesture (a release, a typed value) it is also
  renewed when the value comes within 4 % of an end, so the next drag has room.
  Ranges are given for every entry when K has at most
  :data:`ONE_SLIDER_PER_ENTRY_UP_TO` entries, else for the selected entry only
  (the workbench then shows K as a matrix with one large slider).
- **Pole map.** The frame fits the open-loop, closed-loop and reference poles
  (and the stability boundary) with equal scales on both axes; the spec region is
  outlined over a square twice the frame (kept at least as large as before during
  a gesture). Sensitivity arrows have a fixed on-screen length, a fraction of the
  frame's height: they show direction only (their size would mix units).
- **Stable margins.** For each entry whose exact stable intervals are known, how far
  its value may move (either way, others fixed) before the loop loses stability,
  relative to the value's own size: ``EntryMargin.relative`` (∞ when no finite end
  bounds the interval; None when the value is unstable or moves no pole).
- **Responses.** Each response's time axis ends at a whole step past its last
  sample, value axes cover every trace padded by 4 %; during a gesture they only
  grow, and the next evaluation outside a gesture fits them to the data again.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Mapping

import numpy as np

from ._single_entry import default_entry_range

__all__ = [
    "SliderRange",
    "PoleFrame",
    "ResponseAxes",
    "ViewRanges",
    "EntryMargin",
    "entry_margins",
    "with_entry_margins",
    "ONE_SLIDER_PER_ENTRY_UP_TO",
    "round_up_to_nice",
    "slider_step",
    "nudged_value",
    "FINE_NUDGE",
    "COARSE_NUDGE",
    "view_ranges",
]

#: Up to this many entries of K every entry gets a slider (and so a range).
ONE_SLIDER_PER_ENTRY_UP_TO = 6
#: Slider steps across a range (about; the step is rounded to 1-2-5).
STEPS_PER_RANGE = 400
#: An arrow key moves an entry by this fraction of its own value (common practice, no source) ...
FINE_NUDGE = 1e-3
#: ... and by this fraction with the coarse modifier (Shift, or Page Up / Page Down).
COARSE_NUDGE = 1e-2
#: Outside a gesture, a slider range is renewed when the value is this close (fraction) to an end.
EDGE_FRACTION = 0.04
#: Width : height of the pole map's frame (its pixel size in the workbench: 395 × 375).
POLE_FRAME_ASPECT = 395.0 / 375.0
#: Length of a sensitivity arrow as a fraction of the frame's height.
ARROW_FRACTION = 0.09
#: Fraction of the data's span kept free above and below the response curves.
VALUE_PADDING = 0.04
#: Steps an axis range is divided into, at least: few steps leave much of the plot empty,
#: many make the range change often while a slider moves.
AXIS_STEPS = 8
#: The responses of a ResponseSet, by attribute name.
RESPONSE_KINDS = ("initial", "step", "disturbance")


@dataclass(frozen=True)
class SliderRange:
    """Range and step of one entry's slider: ``low < high``, both whole multiples of ``step``."""

    low: float
    high: float
    step: float

    def holds(self, value: float) -> bool:
        """Whether ``value`` lies inside the range (ends included)."""
        return self.low <= value <= self.high

    def near_an_end(self, value: float) -> bool:
        """Whether ``value`` lies within EDGE_FRACTION of the span from an end (or outside)."""
        margin = EDGE_FRACTION * (self.high - self.low)
        return not (self.low + margin < value < self.high - margin)


@dataclass(frozen=True)
class PoleFrame:
    """The pole map's fitted frame (map units: s or z) and what is drawn to its scale."""

    x_start: float
    x_end: float
    y_start: float
    y_end: float
    #: Half-size of the square over which the spec region is outlined.
    region_extent: float = 1.0

    @property
    def height(self) -> float:
        return self.y_end - self.y_start


@dataclass(frozen=True)
class ResponseAxes:
    """Axis ranges of one response: time (0 to ``time_end``), outputs and inputs (low, high)."""

    time_end: float
    outputs: tuple[float, float]
    inputs: tuple[float, float]

    def joined(self, other: "ResponseAxes | None") -> "ResponseAxes":
        """The smallest axes showing both (e.g. the design and a pinned one)."""
        if other is None:
            return self
        return ResponseAxes(
            time_end=max(self.time_end, other.time_end),
            outputs=(min(self.outputs[0], other.outputs[0]), max(self.outputs[1], other.outputs[1])),
            inputs=(min(self.inputs[0], other.inputs[0]), max(self.inputs[1], other.inputs[1])),
        )


@dataclass(frozen=True)
class EntryMargin:
    """How far one entry may move before the loop loses stability (the others fixed).

    Attributes
    ----------
    stable : bool
        Whether the current K gives a stable loop.
    has_effect : bool
        False when the entry moves no pole.
    distance : float
        Distance from the value to the nearer end of its stable interval (∞ if unbounded; 0 when unstable).
    relative : float or None
        ``distance`` over the larger of |value| and the entry's natural scale; None when
        unstable or without effect.
    """

    stable: bool
    has_effect: bool
    distance: float
    relative: float | None


@dataclass(frozen=True, eq=False)
class ViewRanges:
    """Everything a view of an evaluation needs to scale its drawing.

    Attributes
    ----------
    sliders : mapping of (row, col) to SliderRange
        Slider ranges of the entries that get a slider (see the module's rules).
    pole_frame : PoleFrame
        The fitted pole-map frame.
    region_outline : tuple of (numpy.ndarray, numpy.ndarray)
        Closed outlines (x, y) of the spec region over ``pole_frame.region_extent``; empty without specs.
    arrows : (numpy.ndarray, numpy.ndarray)
        Start and end points (complex) of the selected entry's sensitivity arrows.
    responses : mapping of str to ResponseAxes
        Axes per response kind present ("initial", "step", "disturbance").
    margins : mapping of (row, col) to EntryMargin
        Stable margins of the entries whose exact intervals were computed (see :func:`entry_margins`).
    """

    sliders: Mapping[tuple[int, int], SliderRange]
    pole_frame: PoleFrame
    region_outline: tuple = ()
    arrows: tuple = field(default_factory=lambda: (np.zeros(0, complex), np.zeros(0, complex)))
    responses: Mapping[str, ResponseAxes] = field(default_factory=dict)
    margins: Mapping[tuple[int, int], EntryMargin] = field(default_factory=dict)


def entry_margins(entry_intervals: Mapping) -> dict:
    """The stable margin of every entry in ``entry_intervals`` (``(row, col) -> StableIntervals``).

    The size a distance is measured against is the larger of |value| and the entry's
    natural scale (the change at which its feedback term is as large as the plant; a
    billion times its crossing tolerance, see :class:`StableIntervals`), so an entry at
    zero is not "infinitely far" from a nearby edge.

    Examples
    --------
    >>> from gainboard.core import Plant, entry_stable_intervals
    >>> plant = Plant(A=[[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [-1.0, -5.0, -6.0]], B=[[0.0], [0.0], [1.0]])
    >>> margin = entry_margins({(0, 0): entry_stable_intervals(plant, [[199.0, 55.0, 8.0]], 0, 0)})[(0, 0)]
    >>> margin.stable, round(margin.distance, 6), round(margin.relative, 4)
    (True, 200.0, 0.9557)
    """
    margins = {}
    for entry, intervals in entry_intervals.items():
        value = float(intervals.current_value)
        if not intervals.entry_has_effect or not intervals.current_is_stable:
            margins[entry] = EntryMargin(stable=bool(intervals.current_is_stable),
                                         has_effect=bool(intervals.entry_has_effect), distance=0.0, relative=None)
            continue
        distance = math.inf
        for low, high in intervals.intervals:
            if low < value < high or (low <= value <= high):
                distance = min(value - low, high - value)
                break
        size = max(abs(value), 1e9 * float(intervals.gain_tolerance), 1e-300)
        margins[entry] = EntryMargin(stable=True, has_effect=True, distance=float(distance),
                                     relative=float(distance / size))
    return margins


def with_entry_margins(ranges: ViewRanges | None, entry_intervals: Mapping) -> ViewRanges | None:
    """``ranges`` with the stable margins of ``entry_intervals`` (after they were completed)."""
    if ranges is None:
        return None
    return replace(ranges, margins=entry_margins(entry_intervals))


def round_up_to_nice(value: float, factors=(1.0, 2.0, 2.5, 5.0)) -> float:
    """The smallest number ``f × 10^k`` ≥ ``value`` (> 0) with ``f`` one of ``factors`` (1-2-2.5-5 by default).

    Examples
    --------
    >>> [round_up_to_nice(v) for v in (0.7, 1.0, 2.2, 3.0, 7.3, 9.44)]
    [1.0, 1.0, 2.5, 5.0, 10.0, 10.0]
    >>> round_up_to_nice(2.2, factors=(1.0, 2.0, 5.0))
    5.0
    """
    if not (math.isfinite(value) and value > 0.0):
        return 1.0
    exponent = math.floor(math.log10(value))
    base = 10.0 ** exponent
    for factor in (*factors, 10.0):
        if value <= factor * base * (1.0 + 1e-9):
            # 12 significant digits: 0.001, not 0.0010000000000000002
            return float(f"{factor * base:.12g}")
    return 10.0 * base


def slider_step(span: float) -> float:
    """A 1-2-5 step near ``span / STEPS_PER_RANGE``, so slider values read well.

    Examples
    --------
    >>> slider_step(800.0), slider_step(1000.0), slider_step(0.3)
    (2.0, 5.0, 0.001)
    """
    return round_up_to_nice(span / STEPS_PER_RANGE, factors=(1.0, 2.0, 5.0))


def nudged_value(value: float, slider_range: SliderRange | None, steps: int, coarse: bool = False) -> float:
    """The value after ``steps`` arrow-key presses (negative: down): a relative step from the value itself.

    A press moves the value by FINE_NUDGE (coarse: COARSE_NUDGE) of its own size, never
    to the slider's grid, so a value typed to many digits keeps them. A value within
    round-off of zero (a millionth of the slider's span), which a relative step would
    never move, moves by a tenth of a slider step instead (coarse: one step).

    Examples
    --------
    >>> nudged_value(-248.949, None, 1)
    -248.700051
    >>> nudged_value(-248.949, SliderRange(-6000.0, 5000.0, 50.0), -1, coarse=True)
    -251.43849
    >>> nudged_value(0.0, SliderRange(-5.0, 5.0, 0.05), 1)
    0.005
    """
    if slider_range is not None and abs(value) <= 1e-6 * (slider_range.high - slider_range.low):
        step = slider_range.step * (1.0 if coarse else 0.1)
    else:
        size = abs(value) if value != 0.0 else 1.0
        step = (COARSE_NUDGE if coarse else FINE_NUDGE) * size
    # 12 significant digits of the step: −248.949 + 0.248949 is −248.700051, not …0510000001
    return float(f"{value + steps * float(f'{step:.12g}'):.15g}")


def _whole_steps(low: float, high: float, step: float) -> tuple[float, float]:
    return float(f"{math.floor(low / step) * step:.12g}"), float(f"{math.ceil(high / step) * step:.12g}")


def _fresh_slider_range(plant, gain, row: int, col: int) -> SliderRange:
    low, high = default_entry_range(plant, gain, row, col)
    step = slider_step(high - low)
    low, high = _whole_steps(low, high, step)
    return SliderRange(low, high, step)


def _slider_ranges(plant, gain, selected, previous, gesture: bool) -> dict:
    m, n = gain.shape
    if m * n <= ONE_SLIDER_PER_ENTRY_UP_TO:
        entries = [(i, j) for i in range(m) for j in range(n)]
    else:
        entries = [selected] if selected is not None else []
    known = previous.sliders if previous is not None else {}
    ranges = {}
    for i, j in entries:
        value = float(gain[i, j])
        kept = known.get((i, j))
        if kept is not None and kept.holds(value) and (gesture or not kept.near_an_end(value)):
            ranges[(i, j)] = kept
        else:
            ranges[(i, j)] = _fresh_slider_range(plant, gain, i, j)
    return ranges


def _pole_frame(points: np.ndarray, sampled: bool) -> PoleFrame:
    """Frame the points (and the stability boundary) with equal scales on both axes."""
    points = points[np.isfinite(points)]
    boundary = [1.05, -1.05, 1.05j, -1.05j] if sampled else [0.0]
    points = np.concatenate([points, np.asarray(boundary, dtype=complex)])
    left, right = float(points.real.min()), float(points.real.max())
    half_height = float(np.abs(points.imag).max())
    half_width = (right - left) / 2.0
    scale = max(half_width, half_height, 1e-3 * max(abs(left), abs(right)), 1e-6)
    half_width = max(half_width, 0.05 * scale) * 1.3
    half_height = max(half_height, 0.05 * scale) * 1.3
    if half_width / half_height < POLE_FRAME_ASPECT:
        half_width = half_height * POLE_FRAME_ASPECT
    else:
        half_height = half_width / POLE_FRAME_ASPECT
    centre = (left + right) / 2.0
    x0, x1 = centre - half_width, centre + half_width
    extent = 2.0 * max(abs(x0), abs(x1), half_height, 1e-9)
    return PoleFrame(x0, x1, -half_height, half_height, region_extent=extent)


def _arrows(sensitivity, frame: PoleFrame) -> tuple[np.ndarray, np.ndarray]:
    if sensitivity is None:
        return np.zeros(0, complex), np.zeros(0, complex)
    poles = np.asarray(sensitivity.poles, dtype=complex)
    slopes = np.asarray(sensitivity.derivatives, dtype=complex)
    size = np.abs(slopes)
    drawn = np.isfinite(size) & (size > 0.0) & np.isfinite(poles)
    tips = poles[drawn] + slopes[drawn] / size[drawn] * (ARROW_FRACTION * frame.height)
    return poles[drawn], tips


def _value_range(traces) -> tuple[float, float]:
    """(low, high) covering every finite value of ``traces``, padded and rounded out to whole steps."""
    low, high = math.inf, -math.inf
    for trace in traces:
        if trace is None:
            continue
        values = np.asarray(trace, dtype=float)
        finite = values[np.isfinite(values)]
        if finite.size:
            low, high = min(low, float(finite.min())), max(high, float(finite.max()))
    if not math.isfinite(low):
        return (-1.0, 1.0)
    span = high - low
    if span <= 1e-12 * max(abs(low), abs(high), 1e-300):  # a flat line: show it mid-plot
        span = abs(high) if high != 0.0 else 1.0
    low, high = low - VALUE_PADDING * span, high + VALUE_PADDING * span
    return _whole_steps(low, high, round_up_to_nice((high - low) / AXIS_STEPS))


def _time_end(time) -> float:
    end = float(time[-1]) if len(time) else 1.0
    if not (math.isfinite(end) and end > 0.0):
        return 1.0
    step = round_up_to_nice(end / AXIS_STEPS)
    return float(f"{math.ceil(end / step * (1.0 - 1e-12)) * step:.12g}")


def _response_axes(response) -> ResponseAxes:
    return ResponseAxes(
        time_end=_time_end(response.time),
        outputs=_value_range([response.outputs, response.saturated_outputs]),
        inputs=_value_range([response.inputs, response.saturated_inputs]),
    )


def view_ranges(plant, gain, *, open_loop_poles, closed_loop_poles, selected_entry=None, sensitivity=None,
                pole_region=None, responses=None, reference_poles=(), previous: ViewRanges | None = None,
                gesture: bool = False, entry_intervals: Mapping | None = None) -> ViewRanges:
    """Slider ranges, the pole-map frame with the spec region and arrows, and the response axes.

    Parameters
    ----------
    plant : Plant
    gain : numpy.ndarray, shape (m, n)
        The checked K.
    open_loop_poles, closed_loop_poles : array_like of complex
    selected_entry : (int, int) or None
        The entry whose locus is shown (it gets a slider range when K is large).
    sensitivity : PoleSensitivity or None
        Of the selected entry; its arrows are scaled to the frame.
    pole_region : PoleRegion or None
        The spec region to outline.
    responses : ResponseSet or None
    reference_poles : array_like of complex
        More poles the frame must show (a pinned design, an LQR comparison).
    previous : ViewRanges or None
        The ranges shown before, for the same plant (None after a plant change).
    gesture : bool
        True during a drag: ranges are kept (sliders) or only grow (responses).
    entry_intervals : mapping, optional
        ``(row, col) -> StableIntervals`` known for this K (their stable margins are given).

    Returns
    -------
    ViewRanges

    Examples
    --------
    >>> from gainboard.core import Plant
    >>> plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]])
    >>> ranges = view_ranges(plant, np.array([[4.0, 4.0]]), open_loop_poles=[0j, 0j],
    ...                      closed_loop_poles=[-2 + 0j, -2 + 0j])
    >>> sorted(ranges.sliders), ranges.pole_frame.x_start < -2.0 < 0.0 < ranges.pole_frame.x_end
    ([(0, 0), (0, 1)], True)
    """
    from ._spec_checks import region_boundary

    if previous is not None and any(i >= gain.shape[0] or j >= gain.shape[1] for i, j in previous.sliders):
        previous = None  # ranges of another K shape: nothing to keep
    points = np.concatenate([np.asarray(open_loop_poles, complex).ravel(),
                             np.asarray(closed_loop_poles, complex).ravel(),
                             np.asarray(reference_poles, complex).ravel()])
    frame = _pole_frame(points, plant.is_sampled)
    if gesture and previous is not None and previous.pole_frame.region_extent > frame.region_extent:
        frame = PoleFrame(frame.x_start, frame.x_end, frame.y_start, frame.y_end,
                          region_extent=previous.pole_frame.region_extent)
    outline = ()
    if pole_region is not None:
        outline = tuple((np.asarray(x, dtype=float), np.asarray(y, dtype=float))
                        for x, y in region_boundary(pole_region, frame.region_extent))
    axes = {}
    if responses is not None:
        for kind in RESPONSE_KINDS:
            response = getattr(responses, kind, None)
            if response is None:
                continue
            fitted = _response_axes(response)
            before = previous.responses.get(kind) if (gesture and previous is not None) else None
            axes[kind] = fitted.joined(before)  # during a gesture: only grow
    return ViewRanges(
        sliders=_slider_ranges(plant, gain, selected_entry, previous, gesture),
        pole_frame=frame,
        region_outline=outline,
        arrows=_arrows(sensitivity, frame),
        responses=axes,
        margins=entry_margins(entry_intervals or {}),
    )
