"""One slider per entry of K, with typed entry and the entry's exact stable interval.

Each entry k_ij shows: its name (input ← state) and units, a number box for exact
values, a slider whose range and step come with the evaluation (the core keeps a
range while the value fits and renews it after a release near an end), a strip
drawing the stable interval (others fixed) across the slider's range, and a button
that shows the entry's locus.
"""

from __future__ import annotations

import math
from html import escape

import numpy as np
import panel as pn

from ..refresh_policy import detail_options
from ..scheduling import guarded
from ..theme import PALETTE, entry_symbol, format_number
from .html_box import HtmlBox

__all__ = ["GainSliders", "EntryControls", "PromptSlider", "EntryActions", "entry_units"]

SLIDER_WIDTH = 320
STRIP_HEIGHT = 10


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


def _interval_text(symbol: str, intervals, scale: float = 0.0) -> str:
    if intervals is None:
        return "exact stable range: computing…"

    def number(value):
        return format_number(value, scale=scale)

    if not intervals.entry_has_effect:
        return f"{symbol} moves no pole"
    if not intervals.intervals:
        return f"never stable: {_never_stable_text(symbol, intervals, number)}"
    parts = []
    for low, high in intervals.intervals:
        if math.isinf(low) and math.isinf(high):
            parts.append("any value")
        elif math.isinf(low):
            parts.append(f"{symbol} &lt; {number(high)}")
        elif math.isinf(high):
            parts.append(f"{symbol} &gt; {number(low)}")
        else:
            parts.append(f"{number(low)} &lt; {symbol} &lt; {number(high)}")
    return "stable for " + " or ".join(parts)


def _never_stable_text(symbol: str, intervals, number) -> str:
    """Why no value of the entry is stable, named as on screen (k₁₁, counted from 1), round-off printed as 0.

    Built from the core's pieces of the real line (each with its count of poles on or past the
    boundary) rather than from the core's sentence, which names entries from 0.
    """
    if not hasattr(intervals, "pieces"):  # the range common to every model of a family has no pieces of its own
        return escape(intervals.never_stable_reason or "no value is stable for every model")
    pieces = [piece for piece in intervals.pieces if piece[2] > 0]
    if intervals.fixed_poles and not pieces:
        return escape(intervals.never_stable_reason or "a pole this entry cannot move is unstable")
    if not pieces:
        return "no value is stable with the other entries fixed; change another entry first"
    fewest = min(count for _, _, count in pieces)
    low, high = next((a, b) for a, b, count in pieces if count == fewest)
    where = "on or outside the unit circle" if intervals.sampled else "on or right of the imaginary axis"
    if math.isinf(low) and math.isinf(high):
        span = "for every value"
    elif math.isinf(low):
        span = f"fewest for {symbol} &lt; {number(high)}"
    elif math.isinf(high):
        span = f"fewest for {symbol} &gt; {number(low)}"
    else:
        span = f"fewest for {number(low)} &lt; {symbol} &lt; {number(high)}"
    return (f"no value of {symbol} makes every pole stable: at least {fewest} pole(s) stay {where} ({span}); "
            "change another entry first")


def interval_strip_svg(low: float, high: float, value: float, intervals, width: int = SLIDER_WIDTH) -> str:
    """SVG strip over [low, high]: stable stretches green, unstable blush, a tick at ``value``."""
    span = high - low

    def position(v: float) -> float:
        return min(max((v - low) / span * width, 0.0), float(width))

    # Without the exact intervals (a quick evaluation) the strip is neutral: never coloured by a guess.
    base = PALETTE["interval_unstable"] if intervals is not None else PALETTE["rule"]
    shapes = [f'<rect x="0" y="1" width="{width}" height="{STRIP_HEIGHT - 2}" fill="{base}"/>']
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
    shapes.append(f'<text x="0" y="{STRIP_HEIGHT + 10}" {label_style}>{format_number(low, scale=span)}</text>')
    shapes.append(f'<text x="{width}" y="{STRIP_HEIGHT + 10}" text-anchor="end" {label_style}>'
                  f'{format_number(high, scale=span)}</text>')
    return (
        f'<svg width="{width}" height="{STRIP_HEIGHT + 12}" role="img" '
        f'aria-label="slider range and stable values of this entry">' + "".join(shapes) + "</svg>"
    )


class EntryActions:
    """What the slider and the number box of one entry do: set state, nothing else.

    Subclasses give ``owner`` (with ``state``, ``scheduler`` and ``syncing``), ``symbol``,
    ``key`` (the latest-only scheduling key) and ``apply(value, live)``.
    """

    def _connect(self, select) -> None:
        """Watch the slider and the number box; the locus button calls ``select()``."""
        guard = guarded(lambda text: self.owner.state.show_message(text, "error"))
        self.slider.param.watch(guard(self._slider_moved), "value")
        self.slider.param.watch(guard(self._slider_released), "value_throttled")
        self.number.param.watch(guard(self._typed), "value")
        self.locus_button.on_click(lambda event: select())

    def show_number(self, value: float) -> None:
        """Only the number box (during a gesture, see :meth:`_show_value`)."""
        if self.number.value is None or float(self.number.value) != value:
            self.number.value = value

    def _show_value(self, value: float, slider_range, selected: bool) -> None:
        """The number box, the slider (range and position) and the locus button for ``value``."""
        self.show_number(value)
        low, high = slider_range.low, slider_range.high
        if self.slider.start != low or self.slider.end != high:
            self.slider.param.update(start=low, end=high, step=slider_range.step)
        # Shown during a gesture, the handle stays where the user holds it: the design shown may be a
        # step behind, and setting it would pull the handle back under the mouse (found with the
        # browser benchmark: a drag stalled at its first reversal). It follows on release (complete).
        if not detail_options(self.owner.state.detail).gesture and float(self.slider.value) != value:
            self.slider.value = min(max(value, low), high)
        self.locus_button.color = "primary" if selected else "light"

    def _slider_moved(self, event) -> None:
        if self.owner.syncing:
            return
        value = float(event.new)
        self.owner.scheduler.submit(self.key, lambda: self.apply(value, live=True))

    def _slider_released(self, event) -> None:
        if self.owner.syncing or event.new is None:
            return
        self.owner.scheduler.discard(self.key)
        self.apply(float(event.new))

    def _typed(self, event) -> None:
        if self.owner.syncing or event.new is None:
            return
        value = float(event.new)
        if not math.isfinite(value):
            self.owner.state.show_message(f"{self.symbol} must be a finite number.", "error")
            return
        self.apply(value)


class EntryControls(EntryActions):
    """Widgets of one gain entry: name and units, number box, locus button, slider and stable strip.

    ``owner`` gives ``state``, ``scheduler``, ``css`` and the ``syncing`` flag (set while the
    owner shows an evaluation, so that the widgets' own echoes are not taken as input).
    The large slider of the matrix view is one of these, moved between entries by
    :meth:`retarget`.
    """

    def __init__(self, owner, row: int, col: int, *, slider_width: int = SLIDER_WIDTH):
        self.owner, self.row, self.col = owner, row, col
        symbol = entry_symbol(row, col)
        self.symbol = symbol
        self.slider_width = slider_width
        self.label = pn.pane.HTML("", width=160, margin=(2, 4, 0, 4), stylesheets=[owner.css])
        self.number = pn.widgets.FloatInput(
            value=0.0, width=122, margin=(2, 4), label="", css_classes=[f"gb-number-{row + 1}-{col + 1}"],
            stylesheets=[":host input { font-family: ui-monospace, monospace; }"],
        )
        self.locus_button = pn.widgets.Button(label="locus", color="light", width=56, margin=(2, 0),
                                              description=f"Show the locus of {symbol} on the pole map")
        self.slider = PromptSlider(
            start=-1.0, end=1.0, value=0.0, step=0.01, show_value=False, label="", width=slider_width,
            margin=(0, 4, 0, 8), css_classes=[f"gb-slider-{row + 1}-{col + 1}"], bar_color=PALETTE["closed_loop"],
        )
        self.strip = HtmlBox(css=owner.css, width=slider_width + 10, margin=(0, 4, 0, 8),
                             css_classes=[f"gb-strip-{row + 1}-{col + 1}"])
        # for a plant family: the values stable at every operating point (empty otherwise)
        self.common_strip = HtmlBox(css=owner.css, width=slider_width + 10, margin=(0, 4, 0, 8),
                                    css_classes=[f"gb-common-strip-{row + 1}-{col + 1}"])
        self.panel = pn.Column(
            pn.Row(self.label, self.number, self.locus_button, margin=0),
            self.slider,
            self.strip.panel,
            self.common_strip.panel,
            margin=(2, 0, 6, 0),
            css_classes=["gb-entry"],
        )
        self._connect(lambda: owner.state.select_entry(self.row, self.col))

    def retarget(self, row: int, col: int) -> None:
        """Show entry (row, col) from now on (the tests and the key listener find it by its classes)."""
        if (row, col) == (self.row, self.col):
            return
        self.owner.scheduler.discard(self.key)
        self.row, self.col, self.symbol = row, col, entry_symbol(row, col)
        self.number.css_classes = [f"gb-number-{row + 1}-{col + 1}"]
        self.slider.css_classes = [f"gb-slider-{row + 1}-{col + 1}"]
        self.strip.panel.css_classes = [f"gb-strip-{row + 1}-{col + 1}"]
        self.locus_button.description = f"Show the locus of {self.symbol} on the pole map"

    # user actions: only ever set state (see EntryActions)

    @property
    def key(self):
        return ("entry", self.row, self.col)

    def apply(self, value: float, live: bool = False) -> None:
        self.owner.state.set_entry(self.row, self.col, value, live=live)

    # refreshing from an evaluation

    def show(self, evaluation, value: float, selected: bool) -> None:
        plant = evaluation.plant
        slider_range = evaluation.view_ranges.sliders[(self.row, self.col)]
        intervals = (evaluation.entry_intervals or {}).get((self.row, self.col))
        units = entry_units(plant, self.row, self.col)
        name = f"{escape(plant.input_names[self.row])} ← {escape(plant.state_names[self.col])}"
        self.label.object = (
            f'<div class="gb-entry-label"><span class="gb-k">{self.symbol}</span> {name}'
            + (f'<br><span class="gb-units">{escape(units)}</span>' if units else "")
            + "</div>"
        )
        self._show_value(value, slider_range, selected)
        low, high = slider_range.low, slider_range.high
        text = _interval_text(self.symbol, intervals, high - low)
        badge = ""
        if intervals is not None:
            badge = ('<span class="gb-pass">✓ stable now</span> · ' if intervals.current_is_stable
                     else f'<span class="gb-fail">✗ {intervals.current_verdict} now</span> · ')
        self.strip.object = (
            f'<div>{interval_strip_svg(low, high, value, intervals, self.slider_width)}</div>'
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
        self._controls: dict[tuple[int, int], EntryControls] = {}
        self._shape = None
        self.panel = pn.Column(margin=0, sizing_mode="stretch_width")

    def _build(self, shape) -> None:
        m, n = shape
        self._controls = {(i, j): EntryControls(self, i, j) for i in range(m) for j in range(n)}
        self.panel.objects = [c.panel for c in self._controls.values()]
        self._shape = shape

    def refresh_values(self, evaluation) -> None:
        """Only the values of K in the number boxes, during a gesture (the handles and strips follow on a pause).

        A handle is not moved here: during a drag the evaluation shown may lag the mouse, and
        setting the slider would pull the handle back under it.
        """
        if evaluation.gain.shape != self._shape:
            return
        self.syncing = True
        try:
            for (i, j), controls in self._controls.items():
                controls.show_number(float(evaluation.gain[i, j]))
        finally:
            self.syncing = False

    def show_common(self, common) -> None:
        """Under each slider, the values stable at every operating point of a plant family (None: none)."""
        for (i, j), controls in self._controls.items():
            found = (common or {}).get((i, j))
            if found is None:
                controls.common_strip.object = ""
                continue
            low, high = float(controls.slider.start), float(controls.slider.end)
            value = float(controls.number.value if controls.number.value is not None else controls.slider.value)
            inside = any(a < value < b for a, b in found.intervals)
            badge = ('<span class="gb-pass">✓ at every operating point</span> · ' if inside
                     else '<span class="gb-fail">✗ not at every operating point</span> · ')
            controls.common_strip.object = (
                f'<div>{interval_strip_svg(low, high, value, found)}</div>'
                f'<div class="gb-interval-text">{badge}'
                f'{_interval_text(controls.symbol, found, high - low).replace("stable for", "all points for", 1)}'
                "</div>")

    def refresh(self, evaluation) -> None:
        """Show K, the ranges and the stable intervals of ``evaluation``."""
        gain = np.asarray(evaluation.gain, dtype=float)
        if gain.shape != self._shape:
            self._build(gain.shape)
        self.syncing = True
        try:
            for (i, j), controls in self._controls.items():
                controls.show(evaluation, float(gain[i, j]), evaluation.selected_entry == (i, j))
        finally:
            self.syncing = False
