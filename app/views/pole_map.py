"""The pole map: s-plane or z-plane, with drag-to-target closed-loop poles.

Layers, bottom to top: the unstable region (blush), the spec region (mint),
the selected entry's locus graded from sand (low gain) to plum (high gain), the
sensitivity arrows (which way each pole moves as the entry grows), open-loop
poles (small grey ×), pinned and LQR comparison poles (violet and ochre ×),
frames around poles no gain can move, the closed-loop poles (large teal ×)
and, with an estimator, its error poles (red ◆). Editing K, the closed-loop poles
are dragged; editing the estimator gain L, the estimator poles are, and the locus
is that of the selected entry of L.

Dragging: the point-drag tool moves the marker in the browser and reports the
final position on release; pan events stream the pointer to the server while
the mouse is down, and the newest one is turned into a gain (latest-only
scheduling), so every other plot follows the drag live.
"""

from __future__ import annotations

import math

import numpy as np
import panel as pn
from bokeh.events import Pan, PanEnd, PanStart
from bokeh.models import (
    Arrow,
    BoxAnnotation,
    BoxZoomTool,
    ColumnDataSource,
    HoverTool,
    LinearColorMapper,
    PanTool,
    PointDrawTool,
    Range1d,
    Span,
    VeeHead,
    WheelZoomTool,
)
from bokeh.plotting import figure

from ..scheduling import guarded
from ..theme import (
    LOCUS_RAMP,
    MARKERS,
    PALETTE,
    entry_symbol,
    estimator_entry_symbol,
    format_complex,
    format_number,
    pole_time_text,
)
from .data_sources import update_source
from .html_box import HtmlBox

__all__ = ["PoleMap"]

FRAME_WIDTH = 395
FRAME_HEIGHT = 355
#: A press within this many pixels of a closed-loop pole starts dragging it.
PICK_RADIUS_PX = 16
#: Drops this many pixels from the real axis land on it.
SNAP_PX = 5
#: Poles closer than this fraction of the view to its frame trigger a new fit.
EDGE_FRACTION = 0.05
#: A fitted frame this much smaller than the view (both ways) means the content shrank: fit again.
SHRUNK_FRACTION = 0.3


def _xy(poles) -> tuple[list[float], list[float]]:
    values = np.asarray(poles, dtype=complex).ravel()
    return values.real.tolist(), values.imag.tolist()


class PoleMap:
    """The interactive pole map of one session.

    Parameters
    ----------
    state : DesignState
    scheduler : LatestOnly
        Runs live drag requests (newest first, stale ones dropped).
    """

    def __init__(self, state, scheduler):
        self.state = state
        self.scheduler = scheduler
        self._setting_poles = False
        self._drag = None
        self._view = None  # (x0, x1, y0, y1) as last fitted
        self.locked = False  # True: the ranges stay until "Fit view" or a change of plant
        self._plant = None
        self._shown_poles: list[complex] = []

        self.unstable_box = BoxAnnotation(left=0, fill_color=PALETTE["unstable_region"], fill_alpha=0.7,
                                          line_alpha=0, level="underlay")
        self.region_source = ColumnDataSource({"xs": [], "ys": []})
        self.unit_disk_source = ColumnDataSource({"x": [], "y": []})
        self.locus_source = ColumnDataSource({"x0": [], "y0": [], "x1": [], "y1": [], "gain": []})
        self.arrow_source = ColumnDataSource({"x_start": [], "y_start": [], "x_end": [], "y_end": []})
        self.open_source = ColumnDataSource({"x": [], "y": []})
        self.pinned_source = ColumnDataSource({"x": [], "y": []}, name="pinned_poles")
        self.lqr_source = ColumnDataSource({"x": [], "y": []}, name="lqr_poles")
        self.fixed_source = ColumnDataSource({"x": [], "y": []})
        #: ln(z)/T of the emulation check's sampled loop, on the s-plane beside the designed poles.
        self.sampled_equivalent_source = ColumnDataSource({"x": [], "y": []}, name="sampled_equivalent_poles")
        self.closed_source = ColumnDataSource(
            {"x": [], "y": [], "label": [], "zeta": [], "wn": [], "tau": [], "movable": []}, name="closed_loop_poles"
        )
        self.estimator_source = ColumnDataSource(
            {"x": [], "y": [], "label": [], "zeta": [], "wn": [], "tau": [], "movable": []}, name="estimator_poles"
        )
        self.color_mapper = LinearColorMapper(palette=list(LOCUS_RAMP), low=0.0, high=1.0)

        self.figure = self._build_figure()
        guard = guarded(lambda text: state.show_message(text, "error"))
        self.figure.on_event(PanStart, guard(self._on_pan_start))
        self.figure.on_event(Pan, guard(self._on_pan))
        self.figure.on_event(PanEnd, guard(self._on_pan_end))
        self.closed_source.on_change("data", guard(self._on_pole_data))
        self.estimator_source.on_change("data", guard(self._on_pole_data))

        self.legend = HtmlBox(css=_legend_css(), width=FRAME_WIDTH + 60)
        self.panel = pn.Column(
            pn.pane.Bokeh(self.figure, margin=(0, 5)),
            self.legend.panel,
            margin=0,
        )

    # -- building -----------------------------------------------------------------------------

    def _build_figure(self):
        fig = figure(
            frame_width=FRAME_WIDTH,
            frame_height=FRAME_HEIGHT,
            x_range=Range1d(-1, 1),
            y_range=Range1d(-1, 1),
            tools="",
            toolbar_location="above",
            name="pole_map",
            background_fill_color="#fdfcf9",
            border_fill_color=PALETTE["paper"],
            outline_line_color=PALETTE["rule"],
        )
        fig.title.text = ""
        fig.grid.grid_line_color = "#ece8de"
        fig.axis.axis_line_color = PALETTE["rule"]
        fig.axis.major_label_text_color = PALETTE["muted"]
        fig.axis.axis_label_text_color = PALETTE["muted"]
        fig.axis.axis_label_text_font_style = "normal"
        fig.toolbar.logo = None
        fig.add_layout(self.unstable_box)

        self.unit_disk = fig.annulus(
            x="x", y="y", inner_radius=1.0, outer_radius=1.0e4, source=self.unit_disk_source,
            fill_color=PALETTE["unstable_region"], fill_alpha=0.7, line_alpha=0, level="underlay",
        )
        fig.patches("xs", "ys", source=self.region_source, fill_color=PALETTE["spec_region"], fill_alpha=0.75,
                    line_color="#8fc4a3", line_width=1, level="underlay")
        self.unit_circle = fig.circle(x="x", y="y", radius=1.0, source=self.unit_disk_source, fill_alpha=0,
                                      line_color=PALETTE["boundary"], line_width=1.2)
        self.vertical_axis = Span(location=0, dimension="height", line_color=PALETTE["boundary"], line_width=1)
        fig.add_layout(self.vertical_axis)
        fig.add_layout(Span(location=0, dimension="width", line_color=PALETTE["boundary"], line_width=1))

        fig.segment("x0", "y0", "x1", "y1", source=self.locus_source, line_width=3.2, line_cap="round",
                    line_color={"field": "gain", "transform": self.color_mapper})
        fig.add_layout(Arrow(end=VeeHead(size=9, fill_color=PALETTE["arrow"], line_color=PALETTE["arrow"]),
                             source=self.arrow_source, x_start="x_start", y_start="y_start",
                             x_end="x_end", y_end="y_end", line_color=PALETTE["arrow"], line_width=2))

        fig.scatter("x", "y", source=self.open_source, color=PALETTE["open_loop"], **MARKERS["open_loop"])
        fig.scatter("x", "y", source=self.pinned_source, color=PALETTE["pinned"], alpha=0.75, **MARKERS["pinned"])
        fig.scatter("x", "y", source=self.lqr_source, color=PALETTE["lqr"], **MARKERS["lqr"])
        fig.scatter("x", "y", source=self.fixed_source, fill_alpha=0, line_color=PALETTE["fixed_frame"],
                    **MARKERS["fixed_frame"])
        fig.scatter("x", "y", source=self.sampled_equivalent_source, fill_alpha=0,
                    line_color=PALETTE["sampled_equivalent"], **MARKERS["sampled_equivalent"])
        self.closed_renderer = fig.scatter("x", "y", source=self.closed_source, color=PALETTE["closed_loop"],
                                           **MARKERS["closed_loop"])
        self.closed_renderer.selection_glyph = None
        self.closed_renderer.nonselection_glyph = None
        self.estimator_renderer = fig.scatter("x", "y", source=self.estimator_source, fill_alpha=0.25,
                                              fill_color=PALETTE["estimator"], line_color=PALETTE["estimator"],
                                              **MARKERS["estimator"])
        self.estimator_renderer.selection_glyph = None
        self.estimator_renderer.nonselection_glyph = None

        draw = PointDrawTool(renderers=[self.closed_renderer], add=False, drag=True,
                             description="Drag a closed-loop pole to a target")
        self.draw_tool = draw
        hover = HoverTool(
            renderers=[self.closed_renderer, self.estimator_renderer],
            tooltips=[("pole", "@label"), ("damping ratio", "@zeta"), ("natural frequency", "@wn"),
                      ("time constant (unstable: growth time)", "@tau"), ("", "@movable")],
            description="Pole details",
        )
        wheel = WheelZoomTool(description="Zoom with the mouse wheel")
        fig.add_tools(draw, PanTool(description="Move the view"), wheel,
                      BoxZoomTool(description="Zoom to a box"), hover)
        fig.toolbar.active_drag = draw
        fig.toolbar.active_scroll = None
        return fig

    # -- refreshing ---------------------------------------------------------------------------

    def refresh(self, evaluation) -> None:
        """Update every layer from ``evaluation`` (and the state's comparisons)."""
        plant = evaluation.plant
        sampled = plant.is_sampled
        if plant is not self._plant:
            self._plant = plant
            self._configure_plane(sampled)
            self._fit(evaluation)
        elif not self.locked and not self.state.gesture_active and self._view_needs_fit(evaluation):
            self._fit(evaluation)

        x, y = _xy(evaluation.open_loop.poles)
        update_source(self.open_source, {"x": x, "y": y})
        x, y = _xy(_sampled_equivalents(evaluation))
        update_source(self.sampled_equivalent_source, {"x": x, "y": y})
        self._refresh_region(evaluation)
        self._refresh_locus(evaluation)
        self._refresh_arrows(evaluation)
        self._refresh_ghosts()
        editing_estimator = self.state.editing == "estimator" and self.state.estimator_evaluation is not None
        renderer = self.estimator_renderer if editing_estimator else self.closed_renderer
        if self.draw_tool.renderers != [renderer]:
            self.draw_tool.renderers = [renderer]
        if self.state.dragging:
            self._preview_partner()
        else:
            self._set_closed_poles(evaluation)
            self._set_estimator_poles()
        self._refresh_legend(evaluation)

    def refresh_comparisons(self, evaluation) -> None:
        """The pinned design and the LQR design changed: their ghost poles and the legend."""
        self._refresh_ghosts()
        self._refresh_legend(evaluation)

    def _refresh_ghosts(self) -> None:
        """Ghost poles of the pinned design and the LQR design."""
        pinned = self.state.pinned
        x, y = _xy(pinned.closed_loop.poles) if pinned is not None and pinned.plant is self._plant else ([], [])
        update_source(self.pinned_source, {"x": x, "y": y})
        lqr = self.state.lqr_poles
        x, y = _xy(lqr) if lqr is not None else ([], [])
        update_source(self.lqr_source, {"x": x, "y": y})

    def _configure_plane(self, sampled: bool) -> None:
        self.unstable_box.visible = not sampled
        self.vertical_axis.visible = not sampled
        update_source(self.unit_disk_source, {"x": [0.0], "y": [0.0]} if sampled else {"x": [], "y": []})
        if sampled:
            self.figure.xaxis.axis_label = "real part of z"
            self.figure.yaxis.axis_label = "imaginary part of z"
        else:
            self.figure.xaxis.axis_label = "real part of s (1/s)"
            self.figure.yaxis.axis_label = "imaginary part of s (rad/s)"

    def _set_closed_poles(self, evaluation) -> None:
        report = evaluation.closed_loop
        movable = self.state.closed_loop_movable()
        rows = _hover_rows(report.descriptions, movable, "", "drag to move", "cannot move: uncontrollable")
        x, y = _xy(report.poles)
        if self.state.editing != "estimator" or self.state.estimator_evaluation is None:
            self._shown_poles = [complex(a, b) for a, b in zip(x, y)]
        self._setting_poles = True
        try:
            update_source(self.closed_source, {"x": x, "y": y, **rows})
            self.closed_source.selected.indices = []
        finally:
            self._setting_poles = False
        fx = [a for a, can_move in zip(x, movable) if not can_move]
        fy = [b for b, can_move in zip(y, movable) if not can_move]
        update_source(self.fixed_source, {"x": fx, "y": fy})

    def _set_estimator_poles(self) -> None:
        """The estimator's error poles (◆); while L is edited they are the ones dragged."""
        compensator = self.state.estimator_evaluation
        if compensator is None:
            self._setting_poles = True
            try:
                update_source(self.estimator_source, {key: [] for key in self.estimator_source.data})
            finally:
                self._setting_poles = False
            return
        report = compensator.estimator_poles
        rows = _hover_rows(report.descriptions, compensator.estimator_pole_movable, "estimator ",
                           "drag to move (editing L)", "cannot move: unobservable")
        x, y = _xy(report.poles)
        if self.state.editing == "estimator":
            self._shown_poles = [complex(a, b) for a, b in zip(x, y)]
        self._setting_poles = True
        try:
            update_source(self.estimator_source, {"x": x, "y": y, **rows})
            self.estimator_source.selected.indices = []
        finally:
            self._setting_poles = False

    def _preview_partner(self) -> None:
        """While dragging, move the conjugate partner's marker; the dragged one is the tool's."""
        preview = self.state.drag_preview
        if preview is None:
            return
        index, request = preview
        source = self._drag_source()
        patches_x, patches_y = [], []
        for moved in request.moved:
            if moved != index and moved < len(source.data["x"]):
                patches_x.append((moved, request.targets[moved].real))
                patches_y.append((moved, request.targets[moved].imag))
        if patches_x:
            self._setting_poles = True
            try:
                source.patch({"x": patches_x, "y": patches_y})
            finally:
                self._setting_poles = False

    def _refresh_region(self, evaluation) -> None:
        outlines = evaluation.view_ranges.region_outline
        update_source(self.region_source, {"xs": [x for x, _ in outlines], "ys": [y for _, y in outlines]})

    def _drag_source(self):
        """The markers a drag moves: the estimator poles while L is edited, else the closed-loop poles."""
        if self.state.editing == "estimator" and self.state.estimator_evaluation is not None:
            return self.estimator_source
        return self.closed_source

    def _shown_locus(self, evaluation):
        """The locus drawn: of the selected entry of L while L is edited, else of the selected entry of K."""
        if self.state.editing == "estimator" and self.state.estimator_evaluation is not None:
            return self.state.estimator_evaluation.selected_locus
        return evaluation.selected_locus

    def _refresh_locus(self, evaluation) -> None:
        locus = self._shown_locus(evaluation)
        if locus is None or len(locus.gains) < 2:
            update_source(self.locus_source, {"x0": [], "y0": [], "x1": [], "y1": [], "gain": []})
            return
        poles = np.asarray(locus.poles, dtype=complex)
        gains = np.asarray(locus.gains, dtype=float)
        # The core adds the current value's sample to the locus; it is left out of the drawing
        # (the closed-loop markers show it), so the drawn locus stays the same while only the
        # selected entry moves and update_source does not send it again on every slider step.
        inside = np.flatnonzero(gains[1:-1] == locus.current_value) + 1
        if inside.size == 1:
            poles, gains = np.delete(poles, inside, axis=0), np.delete(gains, inside)
        start, end = poles[:-1, :], poles[1:, :]
        # one segment per branch and step, coloured by the gain at its start
        segment_gain = np.repeat(gains[:-1, None], poles.shape[1], axis=1)
        finite = np.isfinite(start) & np.isfinite(end)
        self.color_mapper.update(low=float(gains[0]), high=float(gains[-1]))
        update_source(self.locus_source, {
            # numpy arrays travel to the browser as binary buffers (lists are encoded number by number)
            "x0": start.real[finite], "y0": start.imag[finite],
            "x1": end.real[finite], "y1": end.imag[finite],
            "gain": segment_gain[finite],
        })

    def _refresh_arrows(self, evaluation) -> None:
        if self.state.editing == "estimator":  # the arrows belong to an entry of K
            update_source(self.arrow_source, {"x_start": [], "y_start": [], "x_end": [], "y_end": []})
            return
        starts, tips = evaluation.view_ranges.arrows
        update_source(self.arrow_source, {"x_start": starts.real.tolist(), "y_start": starts.imag.tolist(),
                                          "x_end": tips.real.tolist(), "y_end": tips.imag.tolist()})

    def _refresh_legend(self, evaluation) -> None:
        editing_estimator = self.state.editing == "estimator" and self.state.estimator_evaluation is not None
        locus = self._shown_locus(evaluation)
        rows = []
        if locus is not None and len(locus.gains) >= 2:
            if editing_estimator:
                symbol = estimator_entry_symbol(*locus.entry)
                rows.append(f'<span class="ramp"></span> estimator poles as {symbol} goes from '
                            f"{format_number(locus.gains[0])} (light) to {format_number(locus.gains[-1])} (dark)")
            else:
                symbol = entry_symbol(*locus.entry)
                rows.append(
                    f'<span class="ramp"></span> locus of {symbol} from {format_number(locus.gains[0])} (light) '
                    f"to {format_number(locus.gains[-1])} (dark); arrows: where poles move as {symbol} grows"
                )
        keys = [
            (PALETTE["closed_loop"], "×", "controller poles" + ("" if editing_estimator else " (drag)")),
            (PALETTE["open_loop"], "×", "open loop"),
        ]
        if self.state.estimator_evaluation is not None:
            keys.insert(1, (PALETTE["estimator"], "◆", "estimator poles" + (" (drag)" if editing_estimator else "")))
        pinned = self.state.pinned
        if pinned is not None:
            # a pin made on the other time domain is kept, but its poles live on the other plane
            keys.append((PALETTE["pinned"], "×", "pinned" if pinned.plant is evaluation.plant
                         else "pinned (on another plant: not drawn here)"))
        if self.state.lqr_poles is not None:
            keys.append((PALETTE["lqr"], "×", "LQR"))
        if evaluation.emulation is not None:
            keys.append((PALETTE["sampled_equivalent"], "⊗",
                         f"sampled at T = {format_number(evaluation.emulation.sample_time)} s, as ln(z)/T"))
        if any(not m for m in self.state.closed_loop_movable()):
            keys.append((PALETTE["fixed_frame"], "□", "cannot move"))
        keys.append((PALETTE["spec_region"], "■", "spec region"))
        keys.append((PALETTE["unstable_region"], "■", "unstable"))
        key_html = " ".join(f'<span class="key" style="color:{colour}">{mark}</span>{text}' for colour, mark, text in keys)
        rows.append(key_html)
        rows.append('<span class="gb-view-rule">' + (
            "view locked: only “Fit view” or another plant reframes it" if self.locked else
            f"view follows the poles: refits if one nears an edge ({EDGE_FRACTION:.0%}) or all fill under "
            f"{SHRUNK_FRACTION:.0%}") + "</span>")
        self.legend.object = "<div class='gb-map-legend'>" + "<br>".join(rows) + "</div>"

    # -- view extent --------------------------------------------------------------------------

    def _fit(self, evaluation) -> None:
        """Show the frame the core fitted to the poles (equal scales on both axes)."""
        frame = evaluation.view_ranges.pole_frame
        self._set_view(frame.x_start, frame.x_end, frame.y_start, frame.y_end)

    def _set_view(self, x0, x1, y0, y1) -> None:
        self._view = (x0, x1, y0, y1)
        self.figure.x_range.update(start=x0, end=x1, reset_start=x0, reset_end=x1)
        self.figure.y_range.update(start=y0, end=y1, reset_start=y0, reset_end=y1)

    def lock_view(self, locked: bool) -> None:
        """Keep the ranges where they are (``locked``) or let them follow the content again (fitting now)."""
        self.locked = bool(locked)
        if not self.locked and self.state.evaluation is not None and self._view_needs_fit(self.state.evaluation):
            self.fit_view()
        if self.state.evaluation is not None:
            self._refresh_legend(self.state.evaluation)

    def fit_view(self) -> None:
        """Frame the current design again (the "Fit view" button)."""
        if self.state.evaluation is not None:
            self._fit(self.state.evaluation)
            self._refresh_region(self.state.evaluation)
            self._refresh_arrows(self.state.evaluation)

    def _view_needs_fit(self, evaluation) -> bool:
        """A closed-loop pole left the view, or everything of interest shrank to a corner of it."""
        if self._view is None:
            return True
        x0, x1, y0, y1 = self._current_view()
        poles = np.asarray(evaluation.closed_loop.poles, complex)
        compensator = self.state.estimator_evaluation
        if compensator is not None:  # the estimator poles must stay in view too
            poles = np.concatenate([poles, np.asarray(compensator.estimator_poles.poles, complex)])
        poles = poles[np.isfinite(poles)]
        # A pole hugging the frame is hard to see and to grab: treat the outer 5 % as outside.
        mx, my = EDGE_FRACTION * (x1 - x0), EDGE_FRACTION * (y1 - y0)
        if np.any((poles.real < x0 + mx) | (poles.real > x1 - mx) | (poles.imag < y0 + my) | (poles.imag > y1 - my)):
            return True
        if (x0, x1, y0, y1) != self._view:
            return False  # the user zoomed or panned: leave the view alone
        frame = evaluation.view_ranges.pole_frame
        return (frame.x_end - frame.x_start < SHRUNK_FRACTION * (x1 - x0)
                and frame.y_end - frame.y_start < SHRUNK_FRACTION * (y1 - y0))

    def _current_view(self):
        xr, yr = self.figure.x_range, self.figure.y_range
        return xr.start, xr.end, yr.start, yr.end

    # -- dragging -----------------------------------------------------------------------------

    def _pixels_per_unit(self) -> tuple[float, float]:
        x0, x1, y0, y1 = self._current_view()
        return FRAME_WIDTH / max(x1 - x0, 1e-300), FRAME_HEIGHT / max(y1 - y0, 1e-300)

    def _nearest_pole(self, x: float, y: float) -> int | None:
        if not self._shown_poles:
            return None
        px, py = self._pixels_per_unit()
        distances = [math.hypot((p.real - x) * px, (p.imag - y) * py) for p in self._shown_poles]
        index = int(np.argmin(distances))
        return index if distances[index] <= PICK_RADIUS_PX else None

    def _snap_distance(self) -> float:
        return SNAP_PX / self._pixels_per_unit()[1]

    def _on_pan_start(self, event) -> None:
        index = self._nearest_pole(event.x, event.y)
        if index is None or self.state.evaluation is None:
            return
        if not self.state.begin_drag(index):
            return
        self._drag = {"index": index, "x": event.x, "y": event.y, "pole": self._shown_poles[index]}
        movable = (self.state.estimator_evaluation.estimator_pole_movable
                   if self._drag_source() is self.estimator_source else self.state.closed_loop_movable())
        if not movable[index]:
            self.state.drag_pole(self._shown_poles[index], live=False)
            self._drag = None

    def _pointer_target(self, event) -> complex:
        drag = self._drag
        return complex(drag["pole"].real + event.x - drag["x"], drag["pole"].imag + event.y - drag["y"])

    def _on_pan(self, event) -> None:
        if self._drag is None:
            return
        target = self._pointer_target(event)
        snap = self._snap_distance()
        self.scheduler.submit("drag", lambda: self._live(target, snap))

    def _live(self, target: complex, snap: float) -> None:
        if self._drag is not None and self.state.dragging:
            self.state.drag_pole(target, live=True, snap_distance=snap)

    def _finish(self, target: complex) -> None:
        self.scheduler.discard("drag")
        self._drag = None
        self.state.drag_pole(target, live=False, snap_distance=self._snap_distance())
        if not self.state.evaluating:  # else the evaluation of the drop, or its refusal, redraws them
            self._set_closed_poles(self.state.evaluation)  # also restores the marker if the drop was refused
        self._set_estimator_poles()

    def _on_pole_data(self, attr, old, new) -> None:
        if self._setting_poles:
            return
        if self._drag is None:
            # A change not made by a drag (e.g. a deleted point): show the design again.
            if self.state.evaluation is not None:
                self._set_closed_poles(self.state.evaluation)
                self._set_estimator_poles()
            return
        index = self._drag["index"]
        xs, ys = list(new.get("x", [])), list(new.get("y", []))
        if index < len(xs):
            self._finish(complex(xs[index], ys[index]))
        else:
            self.state.cancel_drag()
            self._drag = None
            self._set_closed_poles(self.state.evaluation)
            self._set_estimator_poles()

    def _on_pan_end(self, event) -> None:
        if self._drag is not None:
            self._finish(self._pointer_target(event))


def _sampled_equivalents(evaluation) -> np.ndarray:
    """The emulation check's sampled poles as s = ln(z)/T (finite ones; none without a check)."""
    emulation = evaluation.emulation
    if emulation is None or evaluation.plant.is_sampled:
        return np.zeros(0, complex)
    poles = np.asarray(emulation.check.equivalent_continuous_poles, complex)
    return poles[np.isfinite(poles)]


def _hover_rows(descriptions, movable, prefix: str, can_move: str, cannot_move: str) -> dict:
    """The hover texts of a set of pole markers (label, damping, frequency, time constant, whether it moves)."""
    rows = {"label": [], "zeta": [], "wn": [], "tau": [], "movable": []}
    for description, moves in zip(descriptions, movable):
        rows["label"].append(prefix + format_complex(description.value))
        rows["zeta"].append(format_number(description.damping_ratio, 3))
        rows["wn"].append(format_number(description.natural_frequency, 4) + " rad/s")
        rows["tau"].append(pole_time_text(description) + " s")
        rows["movable"].append(can_move if moves else cannot_move)
    return rows


def _legend_css() -> str:
    ramp = ", ".join(LOCUS_RAMP)
    return f"""
.gb-map-legend {{ font-size: 11.5px; color: {PALETTE['muted']}; line-height: 1.55; }}
.gb-map-legend .key {{ font-weight: 700; font-size: 14px; margin: 0 3px 0 9px; }}
.gb-map-legend .key:first-child {{ margin-left: 0; }}
.gb-map-legend .ramp {{ display: inline-block; width: 46px; height: 9px; border-radius: 2px;
  vertical-align: middle; background: linear-gradient(to right, {ramp}); }}
"""
