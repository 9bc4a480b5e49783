"""One slider per entry of K, with typed entry and the entry's exact stable interval.

Each entry k_ij shows: its name (input ← state) and units, a number box for exact
values, a slider whose range comes from the core's ``default_entry_range`` and is
renewed when the value nears an end, a strip drawing the stable interval (others
fixed) across the slider's range, and a button that shows the entry's locus.
"""

from __future__ import annotations

import math
from html import escape

import numpy as np
import panel as pn

from gainboard import core

from ..scheduling import guarded
from ..theme import PALETTE, format_relative
from .html_box import HtmlBox
from .pole_map import entry_symbol

__all__ = ["GainSliders", "PromptSlider", "entry_units", "nice_step"]

SLIDER_WIDTH = 320
STRIP_HEIGHT = 10
#: Renew the slider range when the value comes this close (fraction of the range) to an end.
EDGE_FRACTION = 0.04
#: Number of slider steps across the range.
STEPS_PER_RANGE = 400


class PromptSlider(pn.widgets.FloatSlider):
    """A slider whose moves reach the server at once.

    Panel waits 50 ms before handling a widget change from the browser, to merge
    bursts; the workbench merges bursts itself (latest-only scheduling), so the
    wait would only add to the slider-to-plot latency.
    """

    _debounce = 0


def entry_units(plant, row: int, col: int) -> str:
    """Units of k_ij: input units per state unit (u = −Kx)."""
    input_unit, state_unit = plant.input_units[row], plant.state_units[col]
    if input_unit and state_unit:
        return f"{input_unit}/{state_unit}"
    if input_unit:
        return f"{input_unit} per unit of {plant.state_names[col]}"
    if state_unit:
        return f"1/{state_unit}"
    return ""


def nice_step(span: float) -> float:
    """A 1-2-5 step near span / STEPS_PER_RANGE, so slider values read well.

    Examples
    --------
    >>> nice_step(800.0)
    2.0
    >>> nice_step(1000.0)
    5.0
    >>> nice_step(0.3)
    0.001
    """
    raw = span / STEPS_PER_RANGE
    if not (math.isfinite(raw) and raw > 0):
        return 1.0
    exponent = math.floor(math.log10(raw))
    base = 10.0 ** exponent
    for factor in (1.0, 2.0, 5.0, 10.0):
        if raw <= factor * base * (1 + 1e-9):
            return float(round(factor * base, 12 - exponent if exponent < 12 else 0))
    return 10.0 * base


def _interval_text(symbol: str, intervals, scale: float = 0.0) -> str:
    if intervals is None:
        return ""

    def format_number(value):
        return format_relative(value, scale)

    if not intervals.entry_has_effect:
        return f"{symbol} moves no pole"
    if not intervals.intervals:
        reason = intervals.never_stable_reason or "no value is stable with the other entries fixed"
        return f"never stable: {reason}"
    parts = []
    for low, high in intervals.intervals:
        if math.isinf(low) and math.isinf(high):
            parts.append("any value")
        elif math.isinf(low):
            parts.append(f"{symbol} &lt; {format_number(high)}")
        elif math.isinf(high):
            parts.append(f"{symbol} &gt; {format_number(low)}")
        else:
            parts.append(f"{format_number(low)} &lt; {symbol} &lt; {format_number(high)}")
    return "stable for " + " or ".join(parts)


def interval_strip_svg(low: float, high: float, value: float, intervals, width: int = SLIDER_WIDTH) -> str:
    """SVG strip over [low, high]: stable stretches green, unstable blush, a tick at ``value``."""
    span = high - low

    def position(v: float) -> float:
        return min(max((v - low) / span * width, 0.0), float(width))

    shapes = [f'<rect x="0" y="1" width="{width}" height="{STRIP_HEIGHT - 2}" fill="{PALETTE["interval_unstable"]}"/>']
    if intervals is not None:
        for a, b in intervals.intervals:
            if b <= low or a >= high:
                continue
            x0, x1 = position(a), position(b)
            shapes.append(
                f'<rect x="{x0:.1f}" y="1" width="{max(x1 - x0, 1.0):.1f}" height="{STRIP_HEIGHT - 2}" '
                f'fill="{PALETTE["interval_stable"]}"/>'
            )
    x = position(value)
    shapes.append(f'<rect x="{max(x - 1.5, 0):.1f}" y="0" width="3" height="{STRIP_HEIGHT}" fill="{PALETTE["ink"]}"/>')
    label_style = f'font-size="10" fill="{PALETTE["muted"]}" font-family="sans-serif"'
    shapes.append(f'<text x="0" y="{STRIP_HEIGHT + 10}" {label_style}>{format_relative(low, span)}</text>')
    shapes.append(f'<text x="{width}" y="{STRIP_HEIGHT + 10}" text-anchor="end" {label_style}>'
                  f'{format_relative(high, span)}</text>')
    return (
        f'<svg width="{width}" height="{STRIP_HEIGHT + 12}" role="img" '
        f'aria-label="slider range and stable values of this entry">' + "".join(shapes) + "</svg>"
    )


class _EntryControls:
    """Widgets of one gain entry."""

    def __init__(self, owner: "GainSliders", row: int, col: int):
        self.owner, self.row, self.col = owner, row, col
        symbol = entry_symbol(row, col)
        self.symbol = symbol
        self.label = pn.pane.HTML("", width=160, margin=(2, 4, 0, 4), stylesheets=[owner.css])
        self.number = pn.widgets.FloatInput(
            value=0.0, width=122, margin=(2, 4), label="", css_classes=[f"gb-number-{row + 1}-{col + 1}"],
            stylesheets=[":host input { font-family: ui-monospace, monospace; }"],
        )
        self.locus_button = pn.widgets.Button(label="locus", color="light", width=56, margin=(2, 0),
                                              description=f"Show the locus of {symbol} on the pole map")
        self.slider = PromptSlider(
            start=-1.0, end=1.0, value=0.0, step=0.01, show_value=False, label="", width=SLIDER_WIDTH,
            margin=(0, 4, 0, 8), css_classes=[f"gb-slider-{row + 1}-{col + 1}"], bar_color=PALETTE["closed_loop"],
        )
        self.strip = HtmlBox(css=owner.css, width=SLIDER_WIDTH + 10, margin=(0, 4, 0, 8),
                             css_classes=[f"gb-strip-{row + 1}-{col + 1}"])
        self.range = None  # (low, high) of the slider
        self.panel = pn.Column(
            pn.Row(self.label, self.number, self.locus_button, margin=0),
            self.slider,
            self.strip.panel,
            margin=(2, 0, 6, 0),
            css_classes=["gb-entry"],
        )
        guard = guarded(lambda text: owner.state.show_message(text, "error"))
        self.slider.param.watch(guard(self._slider_moved), "value")
        self.slider.param.watch(guard(self._slider_released), "value_throttled")
        self.number.param.watch(guard(self._typed), "value")
        self.locus_button.on_click(lambda event: owner.state.select_entry(row, col))

    # user actions: only ever set state

    def _slider_moved(self, event) -> None:
        if self.owner.syncing:
            return
        value = float(event.new)
        self.owner.scheduler.submit(("entry", self.row, self.col),
                                    lambda: self.owner.state.set_entry(self.row, self.col, value, live=True))

    def _slider_released(self, event) -> None:
        if self.owner.syncing or event.new is None:
            return
        self.owner.scheduler.discard(("entry", self.row, self.col))
        self.owner.state.set_entry(self.row, self.col, float(event.new))
        self.owner.renew_range_if_near_edge(self)

    def _typed(self, event) -> None:
        if self.owner.syncing or event.new is None:
            return
        value = float(event.new)
        if not math.isfinite(value):
            self.owner.state.show_message(f"{self.symbol} must be a finite number.", "error")
            return
        self.owner.state.set_entry(self.row, self.col, value)
        self.owner.renew_range_if_near_edge(self)

    # refreshing from an evaluation

    def show(self, evaluation, value: float, selected: bool) -> None:
        plant = evaluation.plant
        intervals = (evaluation.entry_intervals or {}).get((self.row, self.col))
        units = entry_units(plant, self.row, self.col)
        name = f"{escape(plant.input_names[self.row])} ← {escape(plant.state_names[self.col])}"
        self.label.object = (
            f'<div class="gb-entry-label"><span class="gb-k">{self.symbol}</span> {name}'
            + (f'<br><span class="gb-units">{escape(units)}</span>' if units else "")
            + "</div>"
        )
        if self.number.value is None or float(self.number.value) != value:
            self.number.value = value
        low, high = self.range
        if self.slider.start != low or self.slider.end != high:
            step = nice_step(high - low)
            self.slider.param.update(start=low, end=high, step=step)
        if float(self.slider.value) != value:
            self.slider.value = min(max(value, low), high)
        self.locus_button.color = "primary" if selected else "light"
        text = _interval_text(self.symbol, intervals, high - low)
        badge = ""
        if intervals is not None:
            badge = ('<span class="gb-pass">✓ stable now</span> · ' if intervals.current_is_stable
                     else '<span class="gb-fail">✗ unstable now</span> · ')
        self.strip.object = (
            f'<div>{interval_strip_svg(low, high, value, intervals)}</div>'
            f'<div class="gb-interval-text">{badge}{text}</div>'
        )


class GainSliders:
    """All entries of K.

    Parameters
    ----------
    state : DesignState
    scheduler : LatestOnly
    """

    css = """
.gb-entry-label { font-size: 13px; line-height: 1.25; }
.gb-k { font-weight: 700; font-family: ui-monospace, monospace; font-size: 14px; }
.gb-units { color: #5d6b78; font-size: 11.5px; }
.gb-interval-text { font-size: 11.5px; color: #5d6b78; margin-top: 1px; }
.gb-pass { color: #2d7d46; font-weight: 700; }
.gb-fail { color: #b3261e; font-weight: 700; }
"""

    def __init__(self, state, scheduler):
        self.state = state
        self.scheduler = scheduler
        self.syncing = False
        self._controls: dict[tuple[int, int], _EntryControls] = {}
        self._shape = None
        self._plant = None
        self.panel = pn.Column(margin=0, sizing_mode="stretch_width")

    def _build(self, shape) -> None:
        m, n = shape
        self._controls = {(i, j): _EntryControls(self, i, j) for i in range(m) for j in range(n)}
        self.panel.objects = [c.panel for c in self._controls.values()]
        self._shape = shape

    def _renew_range(self, controls: _EntryControls, evaluation) -> None:
        low, high = core.default_entry_range(evaluation.plant, evaluation.gain, controls.row, controls.col)
        step = nice_step(high - low)
        controls.range = (math.floor(low / step) * step, math.ceil(high / step) * step)

    def renew_range_if_near_edge(self, controls: _EntryControls) -> None:
        """After a release or a typed value: re-centre the range when the value sits near an end."""
        evaluation = self.state.evaluation
        value = float(evaluation.gain[controls.row, controls.col])
        low, high = controls.range
        margin = EDGE_FRACTION * (high - low)
        if low + margin < value < high - margin:
            return
        self._renew_range(controls, evaluation)
        self.syncing = True
        try:
            controls.show(evaluation, value, self.state.selected_entry == (controls.row, controls.col))
        finally:
            self.syncing = False

    def refresh(self, evaluation) -> None:
        """Show K, the ranges and the stable intervals of ``evaluation``."""
        gain = np.asarray(evaluation.gain, dtype=float)
        plant_changed = evaluation.plant is not self._plant
        if gain.shape != self._shape:
            self._build(gain.shape)
        self.syncing = True
        try:
            for (i, j), controls in self._controls.items():
                value = float(gain[i, j])
                if plant_changed or controls.range is None or not (controls.range[0] <= value <= controls.range[1]):
                    self._renew_range(controls, evaluation)
                controls.show(evaluation, value, self.state.selected_entry == (i, j))
        finally:
            self.syncing = False
        self._plant = evaluation.plant
