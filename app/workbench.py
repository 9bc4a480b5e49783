"""Assembling one workbench session: state, views, layout and the refresh cycle.

The layout fits a 1366×768 laptop screen: gains, plant and LQR on the left, the
pole map in the middle, responses, checks and the pole table on the right, with
the safety caution and the message bar always visible above.

Refresh cycle: a control sets state → the state evaluates once (core) → every
view refreshes from the new evaluation inside one held document update, so the
browser receives one batch of data-source changes per evaluation.
"""

from __future__ import annotations

import logging
from html import escape

import panel as pn

from .scheduling import LatestOnly
from .state import DesignState
from .theme import PAGE_CSS, PALETTE, SAFETY_CAUTION
from .views.design_bar import DesignBar
from .views.gain_sliders import GainSliders
from .views.html_box import HtmlBox
from .views.keyboard import TabKeys
from .views.lqr_panel import LqrPanel
from .views.plant_panel import PlantPanel
from .views.pole_map import PoleMap, entry_symbol
from .views.responses import ResponsePlots
from .views.tables import TABLE_CSS, ChecksTable, PoleTable

__all__ = ["Workbench", "build_workbench", "configure_panel"]

log = logging.getLogger(__name__)

HEADER_CSS = f"""
.gb-header {{ display: flex; align-items: baseline; gap: 14px; white-space: nowrap; overflow: hidden; }}
.gb-title {{ font-size: 19px; font-weight: 700; letter-spacing: 0.02em; color: {PALETTE['ink']}; }}
.gb-plant-name {{ font-size: 15px; font-weight: 600; color: {PALETTE['accent']}; }}
.gb-plant-summary {{ font-size: 12.5px; color: {PALETTE['muted']}; overflow: hidden; text-overflow: ellipsis; }}
.gb-status {{ font-size: 12.5px; margin-left: auto; }}
.gb-pass {{ color: {PALETTE['pass']}; font-weight: 700; }}
.gb-fail {{ color: {PALETTE['fail']}; font-weight: 700; }}
.gb-caution {{ border-left: 5px solid #c98a1b; background: #fbf3e2; padding: 3px 10px; font-size: 12px;
  line-height: 1.35; color: #4a3b1c; border-radius: 3px; }}
.gb-caution b {{ color: #6b4a0d; }}
.gb-message {{ padding: 2px 10px; font-size: 12.5px; border-radius: 3px; line-height: 1.3; height: 30px;
  overflow-y: auto; box-sizing: border-box; display: flex; align-items: center; }}
.gb-message-none {{ border-left: 5px solid transparent; color: {PALETTE['muted']}; font-size: 12px; }}
.gb-message-error {{ background: #fbe4e1; border-left: 5px solid {PALETTE['fail']}; color: #5c1510; }}
.gb-message-note {{ background: #e6f0f5; border-left: 5px solid {PALETTE['accent']}; color: #173847; }}
"""

PAGE_WIDTH = 1340
#: Height of the scrolling tab contents, so that the page fits a 768-pixel-high screen.
TAB_HEIGHT = 590
#: Height of the K readout and history buttons above the gain entries.
GAIN_BAR_HEIGHT = 150
#: Shown in the message slot when there is no message.
HINT = ("Move a slider or type a value to change one gain; drag a teal × on the pole map to place poles; "
        "every change can be undone.")
MESSAGE_HEIGHT = 34


def _log_callback_error(error: BaseException) -> None:
    log.error("a workbench callback failed", exc_info=error)


def configure_panel() -> None:
    """Process-wide Panel settings for serving the workbench (called once by the server)."""
    pn.config.raw_css = [*pn.config.raw_css, PAGE_CSS]
    pn.config.sizing_mode = "fixed"
    # Any callback error that escapes the views' own guards is logged; the session stays up.
    pn.config.exception_handler = _log_callback_error


class Workbench:
    """Everything one browser tab shows, around one :class:`DesignState`."""

    def __init__(self, state: DesignState):
        self.state = state
        document = pn.state.curdoc if pn.state.curdoc is not None and pn.state.curdoc.session_context else None
        self.scheduler = LatestOnly(document, on_error=self._report_unexpected)

        self.pole_map = PoleMap(state, self.scheduler)
        self.sliders = GainSliders(state, self.scheduler)
        self.design_bar = DesignBar(state)
        self.responses = ResponsePlots(state)
        self.pole_table = PoleTable(state)
        self.checks = ChecksTable(state)
        self.plant_panel = PlantPanel(state)
        self.lqr_panel = LqrPanel(state)
        self.views = [self.pole_map, self.sliders, self.design_bar, self.responses, self.pole_table,
                      self.checks, self.plant_panel, self.lqr_panel]

        self.header = HtmlBox(css=HEADER_CSS, width=PAGE_WIDTH, height=30, margin=(6, 10, 0, 10), name="header")
        self.caution = pn.pane.HTML(
            f'<div class="gb-caution" role="note"><b>Caution:</b> {escape(SAFETY_CAUTION)}</div>',
            width=PAGE_WIDTH, margin=(2, 10), stylesheets=[HEADER_CSS], name="caution",
        )
        # The message slot keeps its height when empty so nothing moves under a dragging mouse.
        self.message = HtmlBox(css=HEADER_CSS, width=PAGE_WIDTH - 90, height=MESSAGE_HEIGHT, margin=(2, 0, 2, 10),
                               name="message")
        self.dismiss = pn.widgets.Button(label="Dismiss", width=75, margin=(2, 5), color="light", visible=False)
        self.dismiss.on_click(lambda event: state.clear_message())
        self.message_row = pn.Row(self.message.panel, self.dismiss, margin=0, height=MESSAGE_HEIGHT + 4)

        self.entry_choice = pn.widgets.Select(label="", options={}, width=290, margin=(2, 5),
                                              description="Entry whose locus and arrows are drawn")
        self.entry_choice.param.watch(self._entry_chosen, "value")
        self.fit_button = pn.widgets.Button(label="Fit view", width=80, margin=(2, 5))
        self.fit_button.on_click(lambda event: self.pole_map.fit_view())
        self._entry_syncing = False

        state.param.watch(self._on_evaluation, "evaluation")
        state.param.watch(self._on_comparison, ["pinned", "lqr_poles"])
        state.param.watch(self._on_message, ["message", "message_kind"])
        self.panel = self._layout()
        self._on_evaluation()
        self._on_message()

    # -- layout -------------------------------------------------------------------------------

    def _layout(self):
        label = lambda text: pn.pane.HTML(f'<div class="gb-heading">{text}</div>',  # noqa: E731
                                          stylesheets=[TABLE_CSS], margin=(2, 5, 0, 5))
        # Each tab scrolls on its own, so long content never pushes the page past the screen.
        scrolling = lambda content, width, height=TAB_HEIGHT: pn.Column(  # noqa: E731
            content, height=height, width=width, scroll=True, margin=0)
        # K, undo/redo and pinning stay in view while the list of entries scrolls.
        gains = pn.Column(
            self.design_bar.panel,
            label("gain entries"),
            scrolling(self.sliders.panel, 370, TAB_HEIGHT - GAIN_BAR_HEIGHT),
            margin=0, width=370,
        )
        left = pn.Tabs(
            ("Gains", gains),
            ("Plant", scrolling(self.plant_panel.panel, 370)),
            ("LQR", scrolling(self.lqr_panel.panel, 370)),
            width=375, margin=(0, 5), dynamic=False,
        )
        centre = pn.Column(
            pn.Row(pn.pane.HTML('<div class="gb-small" style="padding-top:6px">locus of</div>',
                                stylesheets=[TABLE_CSS], margin=(2, 0, 2, 5)),
                   self.entry_choice, self.fit_button, margin=0),
            self.pole_map.panel,
            self.design_bar.target_row,
            margin=(0, 5), width=470,
        )
        right = pn.Tabs(
            ("Responses", scrolling(self.responses.panel, 478)),
            ("Checks", scrolling(self.checks.panel, 478)),
            ("Poles", scrolling(self.pole_table.panel, 478)),
            width=480, margin=(0, 5), dynamic=False,
        )
        return pn.Column(
            TabKeys(width=0, height=0, margin=0),
            self.header.panel,
            self.caution,
            self.message_row,
            pn.Row(left, centre, right, margin=0),
            margin=0,
            styles={"background": PALETTE["paper"]},
        )

    # -- refresh cycle ------------------------------------------------------------------------

    def _report_unexpected(self, error: BaseException) -> None:
        self.state.show_message(
            f"Something went wrong ({type(error).__name__}: {error}); the design was kept as it was.", "error"
        )

    def _on_evaluation(self, *events) -> None:
        evaluation = self.state.evaluation
        with pn.io.hold():
            for view in self.views:
                try:
                    view.refresh(evaluation)
                except Exception as error:  # one broken view must not blank the others
                    log.exception("refreshing %s failed", type(view).__name__)
                    self._report_unexpected(error)
            self._refresh_header(evaluation)
            self._refresh_entry_choice(evaluation)

    def _on_comparison(self, *events) -> None:
        evaluation = self.state.evaluation
        with pn.io.hold():
            self.pole_map.refresh_comparisons()
            self.pole_map._refresh_legend(evaluation)
            self.responses.refresh(evaluation)

    def _on_message(self, *events) -> None:
        text, kind = self.state.message, self.state.message_kind
        if not text or kind == "none":
            self.message.object = f'<div class="gb-message gb-message-none" role="status">{escape(HINT)}</div>'
            self.dismiss.visible = False
            return
        role = "alert" if kind == "error" else "status"
        self.message.object = f'<div class="gb-message gb-message-{kind}" role="{role}">{escape(text)}</div>'
        self.dismiss.visible = True

    def _refresh_header(self, evaluation) -> None:
        plant = evaluation.plant
        closed = evaluation.closed_loop
        status = ['<span class="gb-pass">stable</span>' if closed.stable else '<span class="gb-fail">unstable</span>']
        report = evaluation.spec_report
        if report is not None and report.checks:
            status.append('<span class="gb-pass">specs met</span>' if report.all_passed
                          else '<span class="gb-fail">specs not met</span>')
        summary = escape(plant.summary or "")
        self.header.object = (
            f'<div class="gb-header"><span class="gb-title">gainboard</span>'
            f'<span class="gb-plant-name">{escape(plant.name)}</span>'
            f'<span class="gb-plant-summary">{escape(self.state.plant_label)}</span>'
            f'<span class="gb-plant-summary">{summary}</span>'
            f'<span class="gb-status" data-revision="{self.state.revision}">design {self.state.revision}: '
            f'{" · ".join(status)}</span></div>'
        )

    def _refresh_entry_choice(self, evaluation) -> None:
        plant = evaluation.plant
        options = {}
        for i in range(plant.input_count):
            for j in range(plant.state_count):
                options[f"{entry_symbol(i, j)}: {plant.input_names[i]} ← {plant.state_names[j]}"] = f"{i},{j}"
        selected = self.state.selected_entry
        self._entry_syncing = True
        try:
            if self.entry_choice.options != options:
                self.entry_choice.options = options
            value = f"{selected[0]},{selected[1]}" if selected is not None else None
            if self.entry_choice.value != value:
                self.entry_choice.value = value
        finally:
            self._entry_syncing = False

    def _entry_chosen(self, event) -> None:
        if self._entry_syncing or not event.new:
            return
        row, col = (int(v) for v in event.new.split(","))
        self.state.select_entry(row, col)


def build_workbench(plant, *, plant_label: str = "", plant_text: str = ""):
    """The Panel object of one session for ``plant`` (a new state per call)."""
    state = DesignState(plant, plant_label=plant_label, plant_text=plant_text)
    workbench = Workbench(state)
    page = workbench.panel
    page.workbench = workbench  # keeps the views alive as long as the page, and lets tests reach them
    return page
