"""One workbench session: its design state, its views laid out on the page, and its refresh cycle.

The layout fits a 1366×768 laptop screen: gains, plant and LQR on the left, the
pole map in the middle, responses, checks and the pole table on the right, with
the safety caution and the message bar always visible above.

Refresh cycle, in one direction: a control sets state → the state has its design
evaluated at the level of detail the refresh policy gives the change (see
:mod:`gainboard.app.refresh_policy`) → each delivered evaluation refreshes the views
that level redraws, inside one held document update, so the browser receives one
batch of changes per evaluation. A design shown at STEP detail is brought to PAUSE
detail by a timer once its gesture pauses.

Each accepted design change (``DesignState.committed``) is autosaved to the user's
data folder and, in a live room (:mod:`gainboard.app.room_link`), published to the
other members. :func:`open_session` builds the page for one browser tab from its
address (``?room=NAME``, ``?design=SNAPSHOT``, ``?name=NICKNAME``).
"""

from __future__ import annotations

import logging
import secrets
import threading
import time

import panel as pn

from gainboard import core

from .autosave import AutosaveStore
from .evaluation_pool import PooledRunner, shared_pool
from .refresh_policy import PLOT_VIEWS, Detail, RefreshPolicy, detail_options
from .robustness_state import SAMPLING_CAUTION, RobustnessState
from .room_link import RoomLink
from .rooms import ROOM_PARAMETER
from .scheduling import LatestOnly
from .snapshot import SNAPSHOT_PARAMETER, snapshot_url
from .state import DesignState
from .theme import PAGE_CSS, PALETTE, TABLE_CSS, format_gain_text
from .views.compensator_checks import CompensatorChecks
from .views.design_bar import DesignBar
from .views.edit_mode import EditMode
from .views.entry_choice import EntryChoice
from .views.estimator_panel import EstimatorPanel
from .views.estimator_responses import EstimatorResponses
from .views.estimator_sliders import EstimatorSliders
from .views.file_panel import FilePanel
from .views.gain_matrix import GainEntries
from .views.keyboard import HistoryKeys, NudgeKeys, TabKeys
from .views.loop_response import LoopResponse
from .views.lqr_panel import LqrPanel
from .views.page_header import PageHeader
from .views.plant_panel import PlantPanel
from .views.pole_map import PoleMap
from .views.responses import ResponsePlots
from .views.robustness_panel import RobustnessPanel
from .views.share_panel import SharePanel
from .views.tables import ChecksTable, PoleTable

__all__ = ["Workbench", "build_workbench", "open_session", "configure_panel", "NAME_PARAMETER",
           "served_refresh_policy"]

#: Query parameter giving the name shown to others in a live room.
NAME_PARAMETER = "name"
#: Longest query-parameter value read (a snapshot has its own, smaller limit).
_MAX_ARGUMENT_CHARACTERS = 20_000
#: Autosave ids of the sessions open in this process: their files are not offered for restore.
_LIVE_AUTOSAVES: set[str] = set()
_LIVE_LOCK = threading.Lock()
#: Smallest height of the scrolling tab contents: the page fits a 768-pixel-high screen; a taller
#: window gives the tabs its extra height (see Workbench._layout).
TAB_HEIGHT = 590
#: Pixels above the tab contents (header, caution, message bar, tab headers), measured at 1440×900.
HEADER_ALLOWANCE = 150
#: Height of the K readout, history buttons and "gain entries" heading above the gain entries (measured).
GAIN_BAR_HEIGHT = 162
#: An evaluation still running after this many seconds is reported to the user.
EVALUATION_BUDGET_SECONDS = 10.0

log = logging.getLogger(__name__)


def served_refresh_policy() -> RefreshPolicy:
    """The refresh policy of a page in a browser: tables catch up on a pause, or at least every second."""
    return RefreshPolicy(pause_after=0.15, texts_at_least_every=1.0)


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
        self.autosave = autosave
        self._autosave_failed = False
        self._offered = None
        self._closed = False
        self._catch_up_scheduled = False
        if autosave is not None:
            with _LIVE_LOCK:
                _LIVE_AUTOSAVES.add(autosave.session_id)
        self.room_link = RoomLink(state, nickname=nickname or f"guest-{secrets.token_hex(2)}",
                                  run_in_session=self.run_in_session, on_update=self._on_room_update,
                                  report_error=self._report_unexpected)

        self.page_header = PageHeader(state, on_restore=self.restore_offered, on_discard=self.discard_offered)
        self.pole_map = PoleMap(state, self.scheduler)
        self.entry_choice = EntryChoice(state, on_fit=self.pole_map.fit_view, on_lock=self.pole_map.lock_view)
        self.gains = GainEntries(state, self.scheduler)
        self.sliders = self.gains.sliders  # one slider per entry (small K); the matrix is self.gains.matrix
        self.design_bar = DesignBar(state)
        self.responses = ResponsePlots(state)
        self.pole_table = PoleTable(state)
        self.checks = ChecksTable(state)
        self.loop_response = LoopResponse(state)
        self.plant_panel = PlantPanel(state)
        self.lqr_panel = LqrPanel(state)
        self.edit_mode = EditMode(state)
        self.estimator_panel = EstimatorPanel(state, EstimatorSliders(state, self.scheduler))
        self.estimator_responses = EstimatorResponses(state)
        self.compensator_checks = CompensatorChecks(state)
        self.file_panel = FilePanel(state, report_error=lambda text: state.show_message(text, "error"))
        self.share_panel = SharePanel(on_join=self.join_room, on_leave=self.leave_room,
                                      on_rename=self.room_link.rename, make_snapshot_link=self.make_snapshot_link)
        self.share_panel.show_nickname(self.room_link.nickname)
        #: Each view by the name the refresh policy knows it by, with how it redraws from an evaluation.
        self._views = {
            "pole_map": self.pole_map.refresh,
            "response_plots": lambda evaluation: self.responses.refresh(evaluation, texts=False),
            "response_texts": self.responses.refresh_texts,
            "entry_choice": self.entry_choice.refresh,
            "sliders": self.gains.refresh,
            "slider_values": self.gains.refresh_values,
            "design_bar": self.design_bar.refresh,
            "pole_table": self.pole_table.refresh,
            "checks": self.checks.refresh,
            "loop_response": self.loop_response.refresh,
            "plant_panel": self.plant_panel.refresh,
            "lqr_panel": self.lqr_panel.refresh,
            "edit_mode": self.edit_mode.refresh,
            "estimator_panel": self.estimator_panel.refresh,
            "estimator_responses": self.estimator_responses.refresh,
            "compensator_checks": self.compensator_checks.refresh,
            "file_panel": self.file_panel.refresh,
            "header": lambda evaluation: self.page_header.refresh(evaluation, self.room_link.header_html()),
        }
        # Operating points and sampling follow the state on their own; a sampling runs in a
        # background thread and reports back through this session's event loop.
        self.robust = RobustnessState(state, deliver=self.run_in_session, background=document is not None)
        self.robust_panel = RobustnessPanel(self.robust, self.pole_map.figure, self.responses.output_figure)
        self.responses.kind.param.watch(lambda event: self.robust_panel.show_response_band(self.responses.kind_name),
                                        "value")
        self.robust_panel.show_response_band(self.responses.kind_name)
        self.robust.param.watch(self._on_robustness, ["revision", "result", "result_is_current"])
        if document is not None:
            # Served: the tables wait for a pause, and every evaluation runs off the event loop.
            state.refresh = served_refresh_policy()
            state.runner = PooledRunner(shared_pool(), self.run_in_session, on_overdue=self._evaluation_overdue,
                                        budget=EVALUATION_BUDGET_SECONDS, call_later=self._call_later)

        state.param.watch(self._on_evaluation, "evaluation")
        state.param.watch(self._on_comparison, ["pinned", "lqr_poles"])
        state.param.watch(self._on_message, ["message", "message_kind"])
        state.param.watch(self._on_committed, "committed")
        self.panel = self._layout()
        self._on_evaluation(every_view=True)
        self._on_message()
        self._show_autosave_note("Your design is saved here after every change you make.")
        if document is not None:
            document.on_session_destroyed(lambda context: self.close())
            # A page may open with a quick first evaluation (see open_session): the complete one
            # runs off the event loop once the page is shown.
            pn.state.onload(lambda: self._guarded(self.state.complete))

    @property
    def nickname(self) -> str:
        return self.room_link.nickname

    @property
    def header(self):
        """The title and status line (tests read its text)."""
        return self.page_header.header

    # -- layout -------------------------------------------------------------------------------

    def _layout(self):
        label = lambda text: pn.pane.HTML(f'<div class="gb-heading">{text}</div>',  # noqa: E731
                                          stylesheets=[TABLE_CSS], margin=(2, 5, 0, 5))
        # Each tab scrolls on its own, so long content never pushes the page past the screen: its
        # height follows the window (the header above takes HEADER_ALLOWANCE pixels), never below
        # the 768-pixel laptop layout's.
        def scrolling(content, width, below_header: int = 0):
            return pn.Column(content, width=width, scroll=True, margin=0,
                             styles={"height": f"max({TAB_HEIGHT - below_header}px, "
                                               f"calc(100vh - {HEADER_ALLOWANCE + below_header}px))"})

        # K, undo/redo and pinning stay in view while the list of entries scrolls.
        gains = pn.Column(
            self.design_bar.panel,
            label("gain entries"),
            scrolling(self.gains.panel, 370, GAIN_BAR_HEIGHT),
            margin=0, width=370,
        )
        left = pn.Tabs(
            ("Gains", gains),
            ("Plant", scrolling(self.plant_panel.panel, 370)),
            ("LQR", scrolling(self.lqr_panel.panel, 370)),
            ("Estimator", scrolling(self.estimator_panel.panel, 370)),
            ("File", scrolling(self.file_panel.panel, 370)),
            ("Share", scrolling(self.share_panel.panel, 370)),
            width=375, margin=(0, 5), dynamic=False,
        )
        centre = pn.Column(
            self.edit_mode.panel,
            self.entry_choice.panel,
            self.pole_map.panel,
            self.design_bar.target_row,
            margin=(0, 5), width=470,
        )
        right = pn.Tabs(
            ("Responses", scrolling(pn.Column(self.responses.panel, self.estimator_responses.panel, margin=0), 478)),
            ("Checks", scrolling(pn.Column(self.compensator_checks.panel, self.checks.panel, margin=0), 478)),
            ("Poles", scrolling(self.pole_table.panel, 478)),
            ("Loop", scrolling(self.loop_response.panel, 478)),
            ("Robust", scrolling(self.robust_panel.panel, 478)),
            width=480, margin=(0, 5), dynamic=False,
        )
        nudges = NudgeKeys(on_nudge=self._nudge, on_end=self.state.end_gesture, width=0, height=0, margin=0)
        history_keys = HistoryKeys(on_undo=lambda: self._guarded(self.state.undo),
                                   on_redo=lambda: self._guarded(self.state.redo), width=0, height=0, margin=0)
        return pn.Column(
            TabKeys(width=0, height=0, margin=0),
            nudges,
            history_keys,
            *self.page_header.panels,
            # a window narrower than the three columns (≤ 800 px, say) stacks them instead of shrinking them
            pn.FlexBox(left, centre, right, flex_wrap="wrap", align_items="flex-start", margin=0,
                       css_classes=["gb-columns"], sizing_mode="stretch_width"),
            margin=0, sizing_mode="stretch_width",
            styles={"background": PALETTE["paper"]},
        )

    def _on_robustness(self, *events) -> None:
        """A plant family's operating points or sampling changed: the sliders and checks show them too."""
        robust = self.robust
        with pn.io.hold():
            self.sliders.show_common(robust.common)
            self.checks.show_family(robust.spec_over_points, robust.result, robust.result_is_current,
                                    SAMPLING_CAUTION)

    # -- refresh cycle ------------------------------------------------------------------------

    def _report_unexpected(self, error: BaseException) -> None:
        self.state.show_message(
            f"Something went wrong ({type(error).__name__}: {error}); the design was kept as it was.", "error"
        )

    def _on_evaluation(self, *events, every_view: bool = False) -> None:
        """Redraw what the level of detail of the evaluation shown redraws (see refresh_policy).

        ``every_view``: the page is being built, so every view draws what it has.
        """
        evaluation = self.state.evaluation
        # Without a browser there is no layout work to spare: every view follows every evaluation.
        plots_only = detail_options(self.state.detail).plots_only and self.document is not None and not every_view
        names = PLOT_VIEWS if plots_only else self._views.keys()
        with pn.io.hold():
            for name in names:
                try:
                    self._views[name](evaluation)
                except Exception as error:  # one broken view must not blank the others
                    log.exception("refreshing %s failed", name)
                    self._report_unexpected(error)
                    # The action that caused this evaluation may clear the message when it ends;
                    # show the failure again once it has.
                    self.run_in_session(lambda error=error: self._report_unexpected(error))
        if self.state.refresh.behind:
            self._schedule_catch_up()

    def _schedule_catch_up(self) -> None:
        """Look again when the gesture may have paused; then the state brings the design to PAUSE detail."""
        due = self.state.refresh.pause_check_in()
        if self._catch_up_scheduled or due is None or self.document is None:
            return
        self._catch_up_scheduled = True

        def catch_up():
            self._catch_up_scheduled = False
            if self._closed:
                return
            self.run_in_session(self.state.catch_up, at_once=True)
            if self.state.refresh.behind:  # the gesture went on: look again when it may have paused
                self._schedule_catch_up()

        self.document.add_timeout_callback(catch_up, max(1, int(1000 * due)))

    def _nudge(self, row: int, col: int, steps: int, coarse: bool) -> None:
        # Not through the latest-only scheduler: each press counts, from the value the last one left.
        self._guarded(lambda: self.state.nudge_entry(row, col, steps, coarse=coarse))

    def _on_comparison(self, *events) -> None:
        evaluation = self.state.evaluation
        with pn.io.hold():
            self.pole_map.refresh_comparisons(evaluation)
            self.responses.refresh(evaluation)

    def _on_message(self, *events) -> None:
        self.page_header.show_message(self.state.message, self.state.message_kind)

    # -- running code in this session --------------------------------------------------------

    def run_in_session(self, function, *, at_once: bool = False) -> None:
        """Run ``function`` on this session's own document, guarded: on its next tick (``at_once``: now,
        from a callback of this document); at once without a server."""
        if self.document is None:
            self._guarded(function)
            return
        document = self.document

        def in_own_document():
            from panel.io.state import set_curdoc

            with set_curdoc(document), pn.io.hold(document):
                self._guarded(function)

        if at_once:
            in_own_document()
        else:
            document.add_next_tick_callback(in_own_document)

    def _call_later(self, seconds: float, function) -> None:
        """Run ``function`` in this session after ``seconds`` (from this session's own loop)."""
        self.document.add_timeout_callback(lambda: self.run_in_session(function, at_once=True),
                                           max(1, int(1000 * seconds)))

    def _evaluation_overdue(self, request) -> None:
        self.state.show_message(
            f"This design has taken more than {EVALUATION_BUDGET_SECONDS:g} s to evaluate (a large plant?); "
            "the page shows the last design evaluated and follows as soon as the evaluation ends.", "note")

    def _guarded(self, function) -> None:
        try:
            function()
        except Exception as error:  # a failure here must stay in this session
            log.exception("a scheduled update of this session failed")
            self._report_unexpected(error)

    # -- autosave -----------------------------------------------------------------------------

    def _show_autosave_note(self, text: str) -> None:
        from html import escape

        if self.autosave is None:
            self.file_panel.show_autosave("Autosave is off in this session.")
            return
        folder = escape(str(self.autosave.folder))
        self.file_panel.show_autosave(f"{escape(text)}<br>Folder: <code>{folder}</code>")

    def _on_committed(self, *events) -> None:
        if self.room_link.adopting:
            return  # a change from the room: its author's session saves and publishes it
        self._autosave_now()
        self.room_link.publish()

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
            entry = self.autosave.first_offerable(live)  # lazily: stops at the first usable file
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
        self.page_header.offer_restore(
            f"An autosaved design from {when} was found: {design.plant.name}, K = {gain}. Restore it here?")
        return True

    def restore_offered(self) -> bool:
        """Open the offered autosave (it becomes this session's design, and its file this session's autosave)."""
        entry, self._offered = self._offered, None
        self.page_header.offer_restore("")
        if entry is None:
            return False
        when = time.strftime("%H:%M", time.localtime(entry.saved_at))
        if not self.state.load_design(entry.design, f"autosaved design ({when})"):
            return False
        try:
            self.autosave.claim(entry)  # the file becomes this session's; no other file is touched
        except core.GainboardError as error:
            log.warning("could not take over the restored autosave: %s", error)
        return True

    def discard_offered(self) -> None:
        """Delete the offered autosave file."""
        entry, self._offered = self._offered, None
        self.page_header.offer_restore("")
        if entry is not None:
            try:
                self.autosave.discard(entry.session_id)
            except core.GainboardError as error:
                self.state.show_message(f"Could not remove the autosaved design: {error}", "error")

    # -- live rooms and links -----------------------------------------------------------------

    def join_room(self, name: str, *, from_address: bool = False) -> bool:
        """Join (or start) the live room ``name`` (``from_address``: the address already says so)."""
        joined = self.room_link.join(name)
        if joined and not from_address:
            self._set_room_query(self.room_link.name)
        return joined

    def leave_room(self) -> None:
        """Leave the live room; the design stays here as your own."""
        was_in_room = self.room_link.room is not None
        self.room_link.leave()
        if was_in_room:
            self._set_room_query(None)

    def _on_room_update(self) -> None:
        name = self.room_link.name
        self.share_panel.show_room(name, self.room_link.members, self._room_address(name))
        self.page_header.refresh(self.state.evaluation, self.room_link.header_html())

    def page_address(self) -> str:
        """The address this page was opened with, without query (for links), e.g. ``http://host:5006/``."""
        location = self.location
        if location is not None and location.hostname:
            port = f":{location.port}" if location.port else ""
            return f"{location.protocol or 'http:'}//{location.hostname}{port}{location.pathname or '/'}"
        host = (pn.state.headers or {}).get("Host", "") if self.document is not None else ""
        return f"http://{host}/" if host else "/"

    def _room_address(self, name: str | None) -> str:
        from urllib.parse import urlencode

        return f"{self.page_address()}?{urlencode({ROOM_PARAMETER: name})}" if name else ""

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
        self.room_link.leave(quietly=True)
        self.state.runner.close()
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
                 autosave: bool = True, autosave_key: tuple[str, str] | None = None):
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
    autosave_key : (server, person), optional
        Keep autosaves in that server's and person's own folder (a served page always gives one).
    """
    from .access import clean_display_name
    from .state_loading import state_from_snapshot

    code = _argument(arguments, SNAPSHOT_PARAMETER)
    state, problem = state_from_snapshot(code) if code else (None, "")
    # Quick at first (poles, locus, responses: no margins, no all-entry intervals) so that the
    # page is built fast inside the HTTP request; the workbench completes it off the loop on load.
    served = pn.state.curdoc is not None and pn.state.curdoc.session_context is not None
    first_detail = Detail.STEP if served else Detail.COMPLETE
    if state is None:
        state = DesignState(plant, plant_label=plant_label, plant_text=plant_text, first_detail=first_detail)
    nickname = clean_display_name(user or "") if user and user != "guest" else ""
    nickname = nickname or clean_display_name(_argument(arguments, NAME_PARAMETER))
    store = None
    if autosave:
        store = AutosaveStore.for_person(*autosave_key) if autosave_key else AutosaveStore()
    try:
        workbench = Workbench(state, autosave=store, nickname=nickname)
    except Exception as error:  # a design that breaks a view: open the server's plant and say why
        if not code:
            raise
        log.exception("the design of a snapshot link could not be shown")
        problem = f"Could not open the snapshot link: showing it failed ({type(error).__name__}: {error})."
        state = DesignState(plant, plant_label=plant_label, plant_text=plant_text, first_detail=first_detail)
        workbench = Workbench(state, autosave=store, nickname=nickname)
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
