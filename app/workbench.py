"""Assembling one workbench session: state, views, layout and the refresh cycle.

The layout fits a 1366×768 laptop screen: gains, plant and LQR on the left, the
pole map in the middle, responses, checks and the pole table on the right, with
the safety caution and the message bar always visible above.

Refresh cycle: a control sets state → the state evaluates once (core) → every
view refreshes from the new evaluation inside one held document update, so the
browser receives one batch of data-source changes per evaluation.

Each accepted design change (``DesignState.committed``) is autosaved to the user's
data folder and, in a live room, published to the other members; a change that
arrives from the room is applied inside this session's own document callback.
:func:`open_session` builds the page for one browser tab from its address
(``?room=NAME``, ``?design=SNAPSHOT``, ``?name=NICKNAME``).
"""

from __future__ import annotations

import logging
import math
import secrets
import threading
import time
from html import escape

import panel as pn

from gainboard import core

from .autosave import AutosaveStore
from .robustness_state import RobustnessState
from .rooms import ROOM_PARAMETER, ROOMS, RoomMember, check_room_name
from .scheduling import LatestOnly
from .snapshot import SNAPSHOT_PARAMETER, design_from_snapshot, snapshot_url
from .state import DesignState
from .theme import PAGE_CSS, PALETTE, SAFETY_CAUTION, format_gain_text
from .views.design_bar import DesignBar
from .views.file_panel import FilePanel
from .views.gain_sliders import GainSliders
from .views.html_box import HtmlBox
from .views.keyboard import TabKeys
from .views.lqr_panel import LqrPanel
from .views.plant_panel import PlantPanel
from .views.pole_map import PoleMap, entry_symbol
from .views.responses import ResponsePlots
from .views.robustness_panel import RobustnessPanel
from .views.share_panel import SharePanel
from .views.tables import TABLE_CSS, ChecksTable, PoleTable

__all__ = ["Workbench", "build_workbench", "open_session", "configure_panel", "NAME_PARAMETER"]

#: While a design is dragged the plots follow every step; the tables and texts catch up
#: when the drag pauses this long (s) ...
DETAILS_AFTER_PAUSE = 0.15
#: ... and at least this often (s) while it goes on.
DETAILS_AT_LEAST_EVERY = 1.0
#: Query parameter giving the name shown to others in a live room.
NAME_PARAMETER = "name"
#: Longest query-parameter value read (a snapshot has its own, smaller limit).
_MAX_ARGUMENT_CHARACTERS = 20_000
#: Autosave ids of the sessions open in this process: their files are not offered for restore.
_LIVE_AUTOSAVES: set[str] = set()
_LIVE_LOCK = threading.Lock()

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
.gb-message-offer {{ background: #eef3e6; border-left: 5px solid {PALETTE['pass']}; color: #1f3a1a; }}
.gb-room {{ font-size: 12.5px; color: {PALETTE['ink']}; background: #e6f0f5; border-radius: 3px; padding: 1px 8px;
  overflow: hidden; text-overflow: ellipsis; }}
.gb-room b {{ color: {PALETTE['accent']}; }}
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
    if isinstance(error, core.GainboardError):  # already shown to the user by the view that raised it
        log.warning("a workbench callback was refused: %s", error)
        return
    log.error("a workbench callback failed", exc_info=error)


def configure_panel() -> None:
    """Process-wide Panel settings for serving the workbench (called once by the server)."""
    pn.config.raw_css = [*pn.config.raw_css, PAGE_CSS]
    pn.config.sizing_mode = "fixed"
    # Any callback error that escapes the views' own guards is logged; the session stays up.
    pn.config.exception_handler = _log_callback_error


class Workbench:
    """Everything one browser tab shows, around one :class:`DesignState`."""

    def __init__(self, state: DesignState, *, autosave: AutosaveStore | None = None, nickname: str = ""):
        self.state = state
        document = pn.state.curdoc if pn.state.curdoc is not None and pn.state.curdoc.session_context else None
        self.document = document
        self.location = pn.state.location if document is not None else None
        self.scheduler = LatestOnly(document, on_error=self._report_unexpected)
        self.nickname = nickname or f"guest-{secrets.token_hex(2)}"
        self.autosave = autosave
        self._autosave_failed = False
        self._offered = None
        self.room = None
        self.member = None
        self._room_change = None
        self._room_members: list[str] = []
        self._adopting = False
        self._published = None
        self._closed = False
        if autosave is not None:
            with _LIVE_LOCK:
                _LIVE_AUTOSAVES.add(autosave.session_id)

        self.pole_map = PoleMap(state, self.scheduler)
        self.sliders = GainSliders(state, self.scheduler)
        self.design_bar = DesignBar(state)
        self.responses = ResponsePlots(state)
        self.pole_table = PoleTable(state)
        self.checks = ChecksTable(state)
        self.plant_panel = PlantPanel(state)
        self.lqr_panel = LqrPanel(state)
        self.file_panel = FilePanel(state, report_error=lambda text: state.show_message(text, "error"))
        self.share_panel = SharePanel(self)
        self.share_panel.show_nickname(self.nickname)
        self.views = [self.pole_map, self.sliders, self.design_bar, self.responses, self.pole_table,
                      self.checks, self.plant_panel, self.lqr_panel, self.file_panel]
        # Operating points and sampling follow the state on their own; a sampling runs in a
        # background thread and reports back through this session's event loop.
        self.robust = RobustnessState(state, deliver=self.run_in_session, background=document is not None)
        self.robust_panel = RobustnessPanel(self.robust, self.pole_map.figure, self._slider_range)

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
        # The offer to restore an autosaved design: shown at start only, above everything that moves.
        self.offer = HtmlBox(css=HEADER_CSS, width=PAGE_WIDTH - 260, height=MESSAGE_HEIGHT, margin=(2, 0, 2, 10),
                             name="restore_offer")
        self.restore_button = pn.widgets.Button(label="Restore it", color="success", width=95, margin=(2, 5))
        self.discard_button = pn.widgets.Button(label="Discard it", width=90, margin=(2, 5))
        self.restore_button.on_click(lambda event: self.restore_offered())
        self.discard_button.on_click(lambda event: self.discard_offered())
        self.offer_row = pn.Row(self.offer.panel, self.restore_button, self.discard_button, margin=0,
                                height=MESSAGE_HEIGHT + 4, visible=False)

        self.entry_choice = pn.widgets.Select(label="", options={}, width=290, margin=(2, 5),
                                              description="Entry whose locus and arrows are drawn")
        self.entry_choice.param.watch(self._entry_chosen, "value")
        self.fit_button = pn.widgets.Button(label="Fit view", width=80, margin=(2, 5))
        self.fit_button.on_click(lambda event: self.pole_map.fit_view())
        self._entry_syncing = False
        self._texts_shown_at = -math.inf  # when the tables and texts were last refreshed (monotonic s)
        self._quick_shown_at = -math.inf  # when the last quick (plots-only) step was shown
        self._details_scheduled = False
        if document is not None:
            state.live_detail_interval = DETAILS_AT_LEAST_EVERY

        state.param.watch(self._on_evaluation, "evaluation")
        state.param.watch(self._on_comparison, ["pinned", "lqr_poles"])
        state.param.watch(self._on_message, ["message", "message_kind"])
        state.param.watch(self._on_committed, "committed")
        self.panel = self._layout()
        self._on_evaluation()
        self._on_message()
        self._show_autosave_note("Your design is saved here after every change you make.")
        if document is not None:
            document.on_session_destroyed(lambda context: self.close())

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
            ("File", scrolling(self.file_panel.panel, 370)),
            ("Share", scrolling(self.share_panel.panel, 370)),
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
            ("Robust", scrolling(self.robust_panel.panel, 478)),
            width=480, margin=(0, 5), dynamic=False,
        )
        return pn.Column(
            TabKeys(width=0, height=0, margin=0),
            self.header.panel,
            self.caution,
            self.offer_row,
            self.message_row,
            pn.Row(left, centre, right, margin=0),
            margin=0,
            styles={"background": PALETTE["paper"]},
        )

    def _slider_range(self, row: int, col: int) -> tuple[float, float]:
        """The range the gain slider of k[row, col] shows (the robustness strips line up with it)."""
        controls = getattr(self.sliders, "_controls", {}).get((row, col))
        if controls is not None and controls.range is not None:
            return controls.range
        return core.default_entry_range(self.state.plant, self.state.gain, row, col)

    # -- refresh cycle ------------------------------------------------------------------------

    def _report_unexpected(self, error: BaseException) -> None:
        self.state.show_message(
            f"Something went wrong ({type(error).__name__}: {error}); the design was kept as it was.", "error"
        )

    def _on_evaluation(self, *events) -> None:
        # While a slider or pole is dragged the plots follow every step, but the tables and
        # texts (a fifth of the server's time per step and most of the browser's page-layout
        # work) and the stable intervals of all entries behind them (the slowest part for a
        # larger K) wait: the state's quick evaluations leave the intervals out, and a timer
        # asks it to complete them when the drag pauses, or after DETAILS_AT_LEAST_EVERY.
        # Completing in the middle of a fast drag would delay the next step's redraw.
        evaluation = self.state.evaluation
        with pn.io.hold():
            if self.state.details_pending and self.document is not None:
                self._refresh_views(evaluation, plots_only=True)
                self._quick_shown_at = time.monotonic()
                self._schedule_details(DETAILS_AFTER_PAUSE)
            else:
                self._refresh_views(evaluation, plots_only=False)

    def _refresh_views(self, evaluation, *, plots_only: bool) -> None:
        if plots_only:
            refreshes = [(self.pole_map, self.pole_map.refresh),
                         (self.responses, lambda evaluation: self.responses.refresh(evaluation, texts=False))]
        else:
            refreshes = [(view, view.refresh) for view in self.views]
        for view, refresh in refreshes:
            try:
                refresh(evaluation)
            except Exception as error:  # one broken view must not blank the others
                log.exception("refreshing %s failed", type(view).__name__)
                self._report_unexpected(error)
                # The action that caused this evaluation may clear the message when it ends;
                # show the failure again once it has.
                self.run_in_session(lambda error=error: self._report_unexpected(error))
        if plots_only:
            return
        self._refresh_header(evaluation)
        self._refresh_entry_choice(evaluation)
        self._texts_shown_at = time.monotonic()

    def _details_due_in(self) -> float:
        """Seconds until the tables should catch up: a pause in the drag, or the longest wait."""
        due = min(self._quick_shown_at + DETAILS_AFTER_PAUSE, self._texts_shown_at + DETAILS_AT_LEAST_EVERY)
        return due - time.monotonic()

    def _schedule_details(self, delay: float) -> None:
        if self._details_scheduled:
            return
        self._details_scheduled = True
        document = self.document

        def catch_up():
            from panel.io.state import set_curdoc

            self._details_scheduled = False
            if not self.state.details_pending or self._closed:
                return
            remaining = self._details_due_in()
            if remaining > 0.0:  # the drag went on: look again when it may have paused
                self._schedule_details(remaining)
                return
            with set_curdoc(document), pn.io.hold(document):
                self._guarded(self.state.complete_details)

        document.add_timeout_callback(catch_up, max(1, int(1000 * delay)))

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
        if self.room is not None:
            middle = self._room_header()
        else:
            middle = (f'<span class="gb-plant-summary">{escape(self.state.plant_label)}</span>'
                      f'<span class="gb-plant-summary">{summary}</span>')
        self.header.object = (
            f'<div class="gb-header"><span class="gb-title">gainboard</span>'
            f'<span class="gb-plant-name">{escape(plant.name)}</span>{middle}'
            f'<span class="gb-status" data-revision="{self.state.revision}">design {self.state.revision}: '
            f'{" · ".join(status)}</span></div>'
        )

    def _room_header(self) -> str:
        change = self._room_change
        others = len(self._room_members)
        last = ""
        if change is not None:
            who = "you" if self.member is not None and change.author_key == self.member.key else change.author
            when = time.strftime("%H:%M:%S", time.localtime(change.when))
            last = f" · last change: {escape(who)} {escape(change.what)} at {when}"
        version = change.version if change is not None else 0
        return (f'<span class="gb-room" data-room-version="{version}" title="{escape(self.room.name)}">'
                f'room <b>{escape(self.room.name)}</b> · {others} here{last}</span>')

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


    # -- running code in this session --------------------------------------------------------

    def run_in_session(self, function) -> None:
        """Run ``function`` on this session's own document (next tick), guarded; at once without a server."""
        if self.document is None:
            self._guarded(function)
            return
        document = self.document

        def in_own_document():
            from panel.io.state import set_curdoc

            with set_curdoc(document), pn.io.hold(document):
                self._guarded(function)

        document.add_next_tick_callback(in_own_document)

    def _guarded(self, function) -> None:
        try:
            function()
        except Exception as error:  # a failure here must stay in this session
            log.exception("a scheduled update of this session failed")
            self._report_unexpected(error)

    # -- autosave -----------------------------------------------------------------------------

    def _show_autosave_note(self, text: str) -> None:
        folder = escape(str(self.autosave.folder)) if self.autosave is not None else ""
        if self.autosave is None:
            self.file_panel.show_autosave("Autosave is off in this session.")
            return
        self.file_panel.show_autosave(f"{escape(text)}<br>Folder: <code>{folder}</code>")

    def _on_committed(self, *events) -> None:
        if self._adopting:
            return  # a change from the room: its author's session saves and publishes it
        self._autosave_now()
        if self.room is not None and self.member is not None:
            shared = self.state.shared_design()
            self._published = shared
            try:
                self.room.publish(self.member, shared)
            except Exception as error:
                log.exception("publishing to room %r failed", self.room.name)
                self._report_unexpected(error)

    def _autosave_now(self) -> None:
        if self.autosave is None:
            return
        try:
            self.autosave.save(self.state.design())
        except core.GainboardError as error:
            if not self._autosave_failed:
                self.state.show_message(f"Autosave failed: {error}", "error")
            self._autosave_failed = True
            self._show_autosave_note(f"Autosave failed: {error}")
            return
        self._autosave_failed = False
        self._show_autosave_note(f"Saved at {time.strftime('%H:%M:%S')} after your last change.")

    def offer_restore(self) -> bool:
        """Offer the newest autosave of a session that is no longer open (True when one is offered)."""
        if self.autosave is None:
            return False
        try:
            self.autosave.prune(keep=20)
            with _LIVE_LOCK:
                live = set(_LIVE_AUTOSAVES)
            entry = next((e for e in self.autosave.entries() if e.session_id not in live), None)
        except Exception:  # an unreadable folder must not stop the page
            log.exception("looking for autosaved designs failed")
            return False
        if entry is None:
            return False
        self._offered = entry
        design = entry.design
        when = time.strftime("%Y-%m-%d %H:%M", time.localtime(entry.saved_at))
        gain = format_gain_text(design.gain)
        if len(gain) > 70:
            gain = gain[:67] + "…"
        self.offer.object = (
            f'<div class="gb-message gb-message-offer" role="status">An autosaved design from {escape(when)} was found: '
            f'{escape(design.plant.name)}, K = {escape(gain)}. Restore it here?</div>'
        )
        self.offer_row.visible = True
        return True

    def restore_offered(self) -> bool:
        """Open the offered autosave (it becomes this session's design; the old file is removed)."""
        entry, self._offered = self._offered, None
        self.offer_row.visible = False
        if entry is None:
            return False
        when = time.strftime("%H:%M", time.localtime(entry.saved_at))
        if not self.state.load_design(entry.design, f"autosaved design ({when})"):
            return False
        try:
            self.autosave.discard(entry.session_id)
        except core.GainboardError as error:
            log.warning("could not remove the restored autosave: %s", error)
        return True

    def discard_offered(self) -> None:
        """Delete the offered autosave file."""
        entry, self._offered = self._offered, None
        self.offer_row.visible = False
        if entry is not None:
            try:
                self.autosave.discard(entry.session_id)
            except core.GainboardError as error:
                self.state.show_message(f"Could not remove the autosaved design: {error}", "error")

    # -- live rooms ---------------------------------------------------------------------------

    def page_address(self) -> str:
        """The address this page was opened with, without query (for links), e.g. ``http://host:5006/``."""
        location = self.location
        if location is not None and location.hostname:
            port = f":{location.port}" if location.port else ""
            return f"{location.protocol or 'http:'}//{location.hostname}{port}{location.pathname or '/'}"
        host = (pn.state.headers or {}).get("Host", "") if self.document is not None else ""
        return f"http://{host}/" if host else "/"

    def room_link(self) -> str:
        from urllib.parse import urlencode

        if self.room is None:
            return ""
        return f"{self.page_address()}?{urlencode({ROOM_PARAMETER: self.room.name})}"

    def _set_room_query(self, name: str | None) -> None:
        """Show the room in the address bar, so the address itself can be shared."""
        from urllib.parse import parse_qsl, urlencode

        if self.location is None:
            return
        pairs = [(key, value) for key, value in parse_qsl((self.location.search or "").lstrip("?"), keep_blank_values=True)
                 if key not in (ROOM_PARAMETER, SNAPSHOT_PARAMETER)]
        if name:
            pairs.append((ROOM_PARAMETER, name))
        self.location.search = ("?" + urlencode(pairs)) if pairs else ""

    def join_room(self, name: str, *, from_address: bool = False) -> bool:
        """Join (or start) the live room ``name``; a room that exists already brings its design here.

        ``from_address``: the page was opened with ``?room=NAME`` (the address already says so).
        """
        name = (name or "").strip()
        try:
            check_room_name(name)
            if self.room is not None:
                if self.room.name == name:
                    return True
                self.leave_room()
            room = ROOMS.room(name)
            member = RoomMember(self.nickname, self.run_in_session, self._on_room_change, self._on_room_members,
                                on_error=self._report_unexpected)
            seed = self.state.shared_design()
            latest = room.join(member, seed)
        except core.GainboardError as error:
            self.state.show_message(f"Could not join the room: {error}", "error")
            return False
        self.room, self.member, self._room_change = room, member, latest
        self._room_members = room.member_names()
        self.state.evaluation_cache = room.evaluations
        if latest.design is not seed:
            self._adopt(latest.design, f"Joined room {name}: its design is shown here.")
        else:
            self.state.show_message(f"Started room {name}; share its link from the Share tab.", "note")
        if not from_address:
            self._set_room_query(name)
        self._refresh_room()
        return True

    def leave_room(self) -> None:
        """Leave the live room; the design stays here as your own."""
        room, member = self.room, self.member
        self.room = self.member = self._room_change = None
        self._room_members = []
        self.state.evaluation_cache = None
        if room is not None and member is not None:
            room.leave(member)
            self.state.show_message(f"Left room {room.name}; this design is now yours alone.", "note")
        if room is not None:
            self._set_room_query(None)
        self._refresh_room()

    def set_nickname(self, name: str) -> None:
        """Change the name shown to others."""
        from .access import clean_display_name

        cleaned = clean_display_name(name)
        if not cleaned or cleaned == self.nickname:
            return
        self.nickname = cleaned
        if self.room is not None and self.member is not None:
            self.room.rename(self.member, cleaned)

    def _adopt(self, shared, note: str = "") -> None:
        self._adopting = True
        try:
            self.state.adopt_shared(shared, note=note)
        finally:
            self._adopting = False
        if note:
            self.state.show_message(note, "note")

    def _on_room_change(self, change) -> None:
        """Runs in this session: show the room's newest version and who made it."""
        if self.room is None:
            return
        self._room_change = change
        if change.design is not self._published:
            try:
                self._adopt(change.design)
            except Exception as error:  # stays in this session: the room and the other pages carry on
                log.exception("showing the room's change in this session failed")
                self.state.show_message(
                    f"Could not show the room's latest change ({type(error).__name__}: {error}); "
                    "reload the page to see it.", "error")
        self._refresh_header(self.state.evaluation)

    def _on_room_members(self, names) -> None:
        if self.room is None:
            return
        self._room_members = list(names)
        self._refresh_room()

    def _refresh_room(self) -> None:
        name = self.room.name if self.room is not None else None
        self.share_panel.show_room(name, self._room_members, self.room_link())
        self._refresh_header(self.state.evaluation)

    # -- snapshot links -----------------------------------------------------------------------

    def make_snapshot_link(self) -> str:
        """A link that reopens the current design in a fresh session ("" and a message if it cannot be made)."""
        try:
            return snapshot_url(self.page_address(), self.state.design())
        except core.GainboardError as error:
            self.state.show_message(f"Could not make a snapshot link: {error}", "error")
            return ""

    # -- end of the session -------------------------------------------------------------------

    def close(self) -> None:
        """The page is gone: leave the room; its autosave becomes available for restore."""
        if self._closed:
            return
        self._closed = True
        self.robust.cancel_sampling()  # a sampling for a closed page would only take CPU from others
        if self.room is not None and self.member is not None:
            self.room.leave(self.member)
        self.room = self.member = None
        if self.autosave is not None:
            with _LIVE_LOCK:
                _LIVE_AUTOSAVES.discard(self.autosave.session_id)


def _argument(arguments, key: str) -> str:
    """The last value of query parameter ``key`` as text ("" when absent or too long)."""
    values = (arguments or {}).get(key) or []
    if not values:
        return ""
    value = values[-1]
    text = value.decode("utf-8", errors="replace") if isinstance(value, bytes) else str(value)
    return text.strip() if len(text) <= _MAX_ARGUMENT_CHARACTERS else ""


def open_session(plant, *, plant_label: str = "", plant_text: str = "", arguments=None, user: str | None = None,
                 autosave: bool = True):
    """The page of one browser tab, set up from its address.

    Parameters
    ----------
    plant : gainboard.core.Plant
        The plant the server was started with (used unless a snapshot brings another).
    plant_label, plant_text : str
        Its label and plant-file text.
    arguments : dict of str to list of bytes, optional
        The query parameters (``pn.state.session_args``): ``design`` (a snapshot),
        ``room`` (a live room to join), ``name`` (the name shown to others).
    user : str, optional
        The signed-in name, if the server asks for a login (preferred over ``name``).
    autosave : bool
        Autosave to the user's data folder and offer the newest earlier autosave for restore.
    """
    from .access import clean_display_name

    code = _argument(arguments, SNAPSHOT_PARAMETER)
    state, problem = None, ""
    if code:
        try:
            state = DesignState.from_design(design_from_snapshot(code), "snapshot link")
        except core.GainboardError as error:
            problem = f"Could not open the snapshot link: {error}"
    if state is None:
        state = DesignState(plant, plant_label=plant_label, plant_text=plant_text)
    nickname = clean_display_name(user or "") if user and user != "guest" else ""
    nickname = nickname or clean_display_name(_argument(arguments, NAME_PARAMETER))
    workbench = Workbench(state, autosave=AutosaveStore() if autosave else None, nickname=nickname)
    if problem:
        state.show_message(problem, "error")
    elif code:
        state.show_message("Opened the design of a snapshot link.", "note")
    room = _argument(arguments, ROOM_PARAMETER)
    if room:
        workbench.join_room(room, from_address=True)
    if not code:
        workbench.offer_restore()
    page = workbench.panel
    page.workbench = workbench
    return page


def build_workbench(plant, *, plant_label: str = "", plant_text: str = ""):
    """The Panel object of one session for ``plant`` (a new state per call)."""
    state = DesignState(plant, plant_label=plant_label, plant_text=plant_text)
    workbench = Workbench(state)
    page = workbench.panel
    page.workbench = workbench  # keeps the views alive as long as the page, and lets tests reach them
    return page
