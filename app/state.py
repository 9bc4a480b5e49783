"""The design state behind one workbench session.

One :class:`DesignState` holds what the engineer chose — the plant, the gain K,
the selected entry, the specs — plus the undo/redo history, a pinned design to
compare against, the LQR comparison and the last message. Everything derived
(poles, loci, intervals, responses, margins, spec checks, view ranges) comes from one
call of :func:`gainboard.core.evaluate_design` per change, made in one place,
:meth:`DesignState._request_evaluation`; the app itself does no numerics.

Each change carries an explicit level of detail (:class:`~gainboard.app.refresh_policy.Detail`),
chosen by the session's :class:`~gainboard.app.refresh_policy.RefreshPolicy`: a gesture
step is quick, its release complete. The evaluation itself runs wherever the state's
runner puts it: at once (the default, for tests and scripts) or off the event loop
(the served workbench), and a newer result always wins over an older one.

The class knows nothing about Panel or Bokeh: the same object serves the
browser views, the tests and a Python session. Every public method reports
problems through :attr:`message` and leaves the design as it was; none raises.
Replacing the whole design (plants, design files, a room's design) lives in
:mod:`gainboard.app.state_loading`, the LQR comparison in :mod:`gainboard.app.state_lqr`,
the estimator (L, its form, what is edited, estimator-pole drags) in
:mod:`gainboard.app.state_estimator`. With an estimator the one evaluation call also
evaluates the compensator (``estimator_evaluation``).

Every accepted change of the design itself (plant, K, specs, notes — not the live
steps of a drag) counts up :attr:`DesignState.committed` and is recorded in the gain
history; autosave and live rooms follow that counter.
"""

from __future__ import annotations

import contextlib
import json
import logging

import numpy as np
import param

from gainboard import core

from .design_file import now_timestamp
from .evaluation_runner import EvaluationRequest, InlineRunner, Placed
from .gain_history import GainLog, UndoHistory
from .plant_catalogue import bundled_plant_catalogue, plant_from_reference  # noqa: F401 - their old home
from .pole_drag import targets_after_drag
from .refresh_policy import Detail, RefreshPolicy, detail_options
from .state_loading import MAX_NOTES_CHARACTERS, LoadingMixin
from .state_estimator import EDITING_MODES, EstimatorMixin, same_point
from .state_lqr import LqrMixin

__all__ = ["DesignState", "MAX_NOTES_CHARACTERS", "MAX_PINS", "plant_from_reference", "bundled_plant_catalogue"]

log = logging.getLogger(__name__)

#: Most designs kept pinned at once, and the longest pin name kept.
MAX_PINS = 5
MAX_PIN_NAME_CHARACTERS = 40

#: The inputs an evaluation describes, with the labels that go with the plant.
_INPUTS = ("plant", "plant_label", "plant_text", "continuous_origin", "gain", "selected_entry", "specs",
           "estimator", "editing", "estimator_selected_entry", "emulation_sample_time")


class DesignState(LoadingMixin, LqrMixin, EstimatorMixin, param.Parameterized):
    """Everything one workbench session knows about the design being edited.

    Set the inputs through the methods (``set_gain``, ``set_entry``, ``drag_pole``,
    ``load_plant_text`` ...): they keep the undo history and report errors in
    :attr:`message`. ``evaluation`` describes the plant and gain of the newest
    evaluation delivered (with the inline runner: always the current ones).

    Parameters
    ----------
    plant : gainboard.core.Plant
    plant_label, plant_text : str
        Where the plant came from and its plant-file text.
    gain : array_like, optional
        The starting K (default: LQR with Bryson's weights when it exists, else 0).
    refresh : RefreshPolicy, optional
        The levels of detail of gesture steps (default: every step with all stable
        intervals, none left for a pause: a state without a page to keep fluid).
    runner : optional
        Where evaluations run (default: at once, :class:`~gainboard.app.evaluation_runner.InlineRunner`).
    first_detail : Detail
        Level of detail of the first evaluation, made at once (a served page opens with a
        STEP evaluation and asks for the complete one off the event loop: :meth:`complete`).
    """

    plant = param.ClassSelector(class_=core.Plant, doc="The checked plant the gain is designed for.")
    plant_label = param.String(default="", doc="Where the plant came from: a bundled name or a file name.")
    plant_text = param.String(default="", doc="TOML text of the plant, shown in the plant editor.")
    continuous_origin = param.ClassSelector(
        class_=core.Plant, default=None, allow_None=True,
        doc="The continuous plant a sampled plant was made from (ZOH), kept to go back to it.",
    )
    emulation_sample_time = param.Number(
        default=None, allow_None=True, bounds=(0, None), inclusive_bounds=(False, True),
        doc="Sample time T (s) of the emulation check shown beside a continuous design: its K run through "
            "a ZOH at T (the design itself is unchanged); None: no check.",
    )
    gain = param.Array(doc="Feedback gain K, inputs × states (u = −Kx), in input units per state unit.")
    selected_entry = param.Tuple(
        default=(0, 0), length=2, allow_None=True,
        doc="Zero-based (row, column) of the gain entry whose locus and sensitivity are shown.",
    )
    specs = param.ClassSelector(class_=core.DesignSpecs, default=None, allow_None=True,
                                doc="Design specifications checked and shaded on the pole map.")
    estimator = param.Parameter(default=None, doc="The estimator (EstimatorDesign: form, L, how it was made), "
                                                  "or None for full-state feedback.")
    editing = param.Selector(default="controller", objects=list(EDITING_MODES),
                             doc="What sliders, pole drags and typed targets change: K or the estimator's L.")
    estimator_selected_entry = param.Tuple(default=(0, 0), length=2,
                                           doc="Zero-based (row, column) of the entry of L whose locus is shown.")
    estimator_evaluation = param.Parameter(default=None, constant=True,
                                           doc="The core's evaluation of the compensator shown, or None.")
    kalman_result = param.Parameter(default=None, constant=True,
                                    doc="The last Kalman design (error covariance, noise used), or None.")
    evaluation = param.Parameter(default=None, constant=True,
                                 doc="The core's evaluation of the design shown (read only).")
    detail = param.Selector(default=Detail.COMPLETE, objects=list(Detail), constant=True,
                            doc="Level of detail of the evaluation shown (see refresh_policy).")
    pinned = param.Parameter(default=None, constant=True,
                             doc="Evaluation of the pinned design shown as ghost poles and traces, or None.")
    pins = param.Parameter(default=(), constant=True,
                       doc="Named pinned designs, (name, evaluation) oldest first, at most MAX_PINS; "
                           "``pinned`` is one of them.")
    lqr_weights = param.Parameter(default=None, constant=True,
                                  doc="(Q, R) weights of the LQR comparison, or None when it cannot be formed.")
    lqr_result = param.Parameter(default=None, constant=True,
                                 doc="The LQR design for the current weights, or None before it is computed.")
    lqr_poles = param.Parameter(default=None, constant=True,
                                doc="Closed-loop poles of the LQR design (from the core), or None.")
    placement_summary = param.String(default="", doc="How the last pole assignment was computed, in words.")
    notes = param.String(default="", doc="Free-text notes saved with the design (set through set_notes).")
    committed = param.Integer(default=0, constant=True,
                              doc="Counts accepted changes of the design (plant, K, specs, notes); live drag "
                                  "steps are not counted. Autosave and live rooms follow it.")
    message = param.String(default="", doc="The last error or note for the user; empty when all is well.")
    message_kind = param.Selector(default="none", objects=["none", "note", "error"], doc="Kind of the message.")
    undo_depth = param.Integer(default=0, constant=True, doc="How many gain changes can be undone.")
    redo_depth = param.Integer(default=0, constant=True, doc="How many undone gain changes can be redone.")
    revision = param.Integer(default=0, constant=True,
                             doc="Counts evaluations shown; views and tests use it to know an update happened.")

    def __init__(self, plant: core.Plant, *, plant_label: str = "", plant_text: str = "", gain=None,
                 refresh: RefreshPolicy | None = None, runner=None, first_detail: Detail = Detail.COMPLETE,
                 **params):
        self.history = UndoHistory(same=same_point, copy=lambda point: point)  # points hold copies already
        self.gain_log = GainLog()
        self.refresh = refresh if refresh is not None else RefreshPolicy(texts_at_least_every=0.0)
        self.runner = runner if runner is not None else InlineRunner()
        self._drag = None
        self._failure: BaseException | None = None
        self._sequence = 0  # requests made
        self._shown_sequence = 0  # the request whose evaluation is shown
        self._shown_inputs: dict = {}
        self._on_placed: dict = {}  # request sequence -> what takes a pole assignment's K over
        #: An object with get/put (see gainboard.app.rooms.SharedEvaluations) shared by the sessions
        #: of a live room, so that a design shown in several sessions is evaluated once; None: no sharing.
        self.evaluation_cache = None
        self._created = now_timestamp()
        self._reference_gains = None  # (prefilter, integral gain, the K they belong to) from a design file
        starting_gain, note = (plant.check_gain(gain), "") if gain is not None else self._starting_gain(plant)
        super().__init__(
            plant=plant, plant_label=plant_label or plant.name, plant_text=plant_text,
            gain=starting_gain, specs=plant.specs, **params,
        )
        # a broken plant at start-up is the caller's error: the first evaluation runs here and raises
        self._shown_inputs = self._inputs()
        evaluation = core.evaluate_design(plant, starting_gain, self._options(first_detail, previous=None))
        with param.edit_constant(self):
            self.param.update(evaluation=evaluation, detail=first_detail, revision=1)
        self._reset_lqr_weights()
        self.gain_log.record(self.plant, self.gain)
        if note:
            self._say(note, "note")

    # -- the one place where evaluations are asked for and shown ---------------------------

    def _inputs(self) -> dict:
        return {name: getattr(self, name) for name in _INPUTS}

    def _options(self, detail: Detail, previous) -> core.EvaluationOptions:
        wanted = detail_options(detail)
        reference = []
        if self.pinned is not None and self.pinned.plant is self.plant:
            reference.extend(self.pinned.closed_loop.poles)
        if self.lqr_poles is not None:
            reference.extend(self.lqr_poles)
        return core.EvaluationOptions(
            selected_entry=self.selected_entry, specs=self.specs, include_margins=wanted.include_margins,
            include_all_entry_intervals=wanted.include_all_entry_intervals, gesture=wanted.gesture,
            previous_view=previous, reference_poles=tuple(reference),
            emulation_sample_time=None if self.plant.is_sampled else self.emulation_sample_time,
        )

    def _set_inputs(self, detail: Detail = Detail.COMPLETE, **changes) -> None:
        """Set inputs together and evaluate them once at ``detail``; raise the evaluation's error if it failed.

        With a runner that evaluates later (served), a failure is reported when it is
        delivered and the inputs go back to those of the design shown.
        """
        self._failure = None
        self.param.update(**changes)
        self._request_evaluation(detail)
        if self._failure is not None:
            failure, self._failure = self._failure, None
            raise failure

    def _request_evaluation(self, detail: Detail, refine=None, targets=None, on_placed=None) -> None:
        """Ask the runner for one evaluation of the current inputs at ``detail`` (see EvaluationRequest).

        ``targets``: compute K by pole assignment first; ``on_placed(placement)`` then takes
        the new K over (inputs, history) just before its evaluation is shown.
        """
        self._sequence += 1
        shown = self.evaluation
        same_plant = shown is not None and shown.plant is self.plant
        options = self._options(detail, previous=shown.view_ranges if same_plant else None)
        settings = self.estimator
        shown_estimator = self.estimator_evaluation if same_plant else None
        request = EvaluationRequest(sequence=self._sequence, plant=self.plant, gain=np.array(self.gain, copy=True),
                                    options=options, detail=detail, inputs=self._inputs(), refine=refine,
                                    targets=None if targets is None else tuple(complex(t) for t in targets),
                                    estimator_gain=None if settings is None else np.array(settings.gain, copy=True),
                                    estimator_options=self._estimator_options(detail, shown_estimator))
        if targets is not None:
            self._on_placed[request.sequence] = on_placed
        cache, key = self.evaluation_cache, None
        if cache is not None and refine is None and targets is None:
            key = (id(self.plant), id(self.specs), self.gain.shape, self.gain.tobytes(), self.selected_entry, detail,
                   self.emulation_sample_time,
                   id(settings), self.editing, self.estimator_selected_entry)
            found = cache.get(key, self.plant, self.specs)
            if found is not None:
                self._deliver(request, found, None)
                return
        deliver = self._deliver
        if key is not None:
            def deliver(request, evaluation, error, key=key):
                if evaluation is not None:
                    cache.put(key, request.plant, request.options.specs, evaluation)
                self._deliver(request, evaluation, error)
        self.runner.submit(request, deliver)

    def _deliver(self, request: EvaluationRequest, evaluation, error) -> None:
        """Show a delivered evaluation, unless a newer one is shown already."""
        on_placed = self._on_placed.pop(request.sequence, None)
        for older in [sequence for sequence in self._on_placed if sequence < request.sequence]:
            del self._on_placed[older]  # superseded while waiting: never delivered
        if request.sequence < self._shown_sequence:
            return  # superseded: a newer request's result is on screen
        if request.refine is not None and request.sequence < self._sequence:
            return  # the details of a design a newer change has replaced already
        if error is not None:
            self._failure = error
            if request.sequence == self._sequence:
                # the newest request failed: go back to the inputs of the design shown
                with param.discard_events(self):
                    self.param.update(**self._shown_inputs)
                if not getattr(self.runner, "synchronous", False):
                    self._report_failure(error, "place the poles there" if request.targets is not None else "")
                    if request.targets is not None:
                        if request.detail is Detail.COMPLETE:
                            self.end_gesture()  # a refused drop: the drag so far is one undo step
                        self.param.trigger("evaluation")  # the pole map puts the dragged marker back
            return
        inputs = request.inputs
        if isinstance(evaluation, Placed):
            placed, evaluation = evaluation, evaluation.evaluation
            design = evaluation.design if isinstance(evaluation, core.ObserverDesignEvaluation) else evaluation
            inputs = dict(inputs, gain=design.gain)
            if request.sequence == self._sequence:  # a newer change would be overwritten
                with param.discard_events(self):
                    self.gain = np.array(design.gain, copy=True)
            if on_placed is not None:
                on_placed(placed.placement)
        self._shown_sequence = request.sequence
        self._shown_inputs = inputs
        compensator = None
        if isinstance(evaluation, core.ObserverDesignEvaluation):
            evaluation, compensator = evaluation.design, evaluation.compensator
        with param.edit_constant(self):
            # the compensator first: views redrawn on a new evaluation find the matching one
            self.param.update(estimator_evaluation=compensator)
            self.param.update(evaluation=evaluation, detail=request.detail, revision=self.revision + 1)

    def _report_failure(self, error: BaseException, action: str = "") -> None:
        action = action or "evaluate this design"
        if isinstance(error, core.GainboardError):
            self._say(f"Could not {action}: {error}", "error")
        else:
            log.error("an evaluation failed", exc_info=error)
            self._say(f"Could not {action}: unexpected {type(error).__name__}: {error}. "
                      "The design shown was kept.", "error")

    def catch_up(self) -> bool:
        """Bring a design shown at STEP detail to PAUSE once its gesture has paused (True when it did).

        Nothing happens while a newer evaluation is on its way: its delivery asks again.
        """
        if self.evaluating or self.detail >= Detail.PAUSE or not self.refresh.paused():
            return False
        self._request_evaluation(Detail.PAUSE, refine=self.evaluation)
        return True

    def complete(self) -> None:
        """Evaluate the design shown at COMPLETE detail (nothing to do when it is complete already)."""
        if self.detail < Detail.COMPLETE:
            self._request_evaluation(self.refresh.release())

    @property
    def evaluating(self) -> bool:
        """True while a newer evaluation than the one shown has been asked for."""
        return self._shown_sequence < self._sequence

    # -- messages -----------------------------------------------------------------------------

    def _say(self, text: str, kind: str = "note") -> None:
        self.param.update(message=text, message_kind=kind if text else "none")

    def show_message(self, text: str, kind: str = "note") -> None:
        """Show ``text`` to the user; ``kind`` is "note" or "error"."""
        self._say(text, kind)

    def clear_message(self) -> None:
        """Dismiss the current message."""
        if self.message or self.message_kind != "none":  # every drag step clears: keep that free
            self._say("", "none")

    @contextlib.contextmanager
    def _reporting(self, action: str):
        """Turn any failure inside into a message; the design stays as it was."""
        try:
            yield
        except core.GainboardError as error:
            self._say(f"Could not {action}: {error}", "error")
        except Exception as error:  # an unexpected failure must never kill the session
            log.exception("unexpected failure while trying to %s", action)
            self._say(
                f"Could not {action}: unexpected {type(error).__name__}: {error}. The design was kept as it was.",
                "error",
            )

    # -- gain changes and history ----------------------------------------------------------

    def _sync_history_depths(self) -> None:
        with param.edit_constant(self):
            self.param.update(undo_depth=self.history.undo_depth, redo_depth=self.history.redo_depth)

    def set_gain(self, gain, *, live: bool = False, note: str = "") -> bool:
        """Make ``gain`` the current K.

        Parameters
        ----------
        gain : array_like, shape (m, n)
            The new K.
        live : bool
            True for a step of a gesture (slider or pole drag, arrow nudges): evaluated at
            the detail the refresh policy gives a step, and recorded as one undo step with
            the rest of the gesture when a call with ``live=False`` ends it.
        note : str
            A note to show on success (else the message is cleared).

        Returns
        -------
        bool
            Whether the gain was accepted.
        """
        accepted = False
        with self._reporting("use this gain"):
            checked = self.plant.check_gain(gain)
            self._change_design({"gain": checked}, live=live, note=note)
            accepted = True
        return accepted

    def _change_design(self, changes: dict, *, live: bool, note: str = "") -> None:
        """Apply changes of K and/or the estimator as one step of the undo history (raises on failure)."""
        before = self._point()
        self._set_inputs(self.refresh.step() if live else self.refresh.release(), **changes)
        if live:
            self.history.live_step(before)
        else:
            self.history.accepted(before, self._point())
            self._sync_history_depths()
        self._after_gain_change(note, live)

    def _after_gain_change(self, note: str, live: bool) -> None:
        """Show ``note`` (or clear the message) and, outside a gesture, commit the change."""
        if note:
            self._say(note, "note")
        else:
            self.clear_message()
        if not live:
            self._commit()

    def set_entry(self, row: int, col: int, value: float, *, live: bool = False) -> bool:
        """Set one entry k[row, col] (zero-based) and keep the others."""
        gain = self.gain.copy()
        with self._reporting(f"set entry k{row + 1}{col + 1}"):
            self._check_entry(row, col)
            gain[row, col] = float(value)
            return self.set_gain(gain, live=live)
        return False

    def nudge_entry(self, row: int, col: int, steps: int, *, coarse: bool = False) -> bool:
        """Move k[row, col] by ``steps`` arrow-key presses: a fine step relative to its value (``coarse``: 10×).

        A step of a gesture (arrow presses in a burst make one undo step, closed by
        :meth:`end_gesture`); the rule is the core's :func:`~gainboard.core.nudged_value`.
        """
        with self._reporting(f"nudge entry k{row + 1}{col + 1}"):
            self._check_entry(row, col)
            ranges = self.evaluation.view_ranges.sliders if self.evaluation.view_ranges is not None else {}
            value = core.nudged_value(float(self.gain[row, col]), ranges.get((row, col)), steps, coarse)
            return self.set_entry(row, col, value, live=True)
        return False

    def _check_entry(self, row: int, col: int) -> None:
        m, n = self.gain.shape
        if not (0 <= row < m and 0 <= col < n):
            raise core.GainError(f"K is {m}×{n}; there is no entry ({row + 1}, {col + 1})")

    def end_gesture(self) -> None:
        """Close a live gesture (slider or drag release) so it becomes one undo step."""
        if self.history.in_gesture:
            with self._reporting("finish the change"):
                self._change_design({}, live=False)

    def set_gain_text(self, text: str) -> bool:
        """Set K from text such as ``[[199, 55, 8]]`` (JSON rows, as the K readout shows)."""
        with self._reporting("read the gain"):
            try:
                rows = json.loads(text)
            except json.JSONDecodeError:
                raise core.GainError(
                    f"write K as rows of numbers such as [[1, 2, 3]]; could not read {text.strip()[:60]!r}"
                ) from None
            if not isinstance(rows, list) or any(isinstance(v, (str, bool, dict)) or v is None
                                                 for v in np.ravel(np.array(rows, dtype=object))):
                raise core.GainError(f"write K as rows of numbers such as [[1, 2, 3]]; got {text.strip()[:60]!r}")
            return self.set_gain(rows)
        return False

    def _history_step(self, *, back: bool) -> bool:
        """One undo (``back``) or redo step; False when there is none."""
        target = self.history.step(self._point(), back=back)
        if target is None:
            return False
        with self._reporting("undo" if back else "redo"):
            try:
                changes = {"gain": target.gain, "estimator": target.estimator}
                if target.place is not None and target.place["plant"] is not self.plant:
                    changes.update(target.place)  # a step between time domains: the plant goes back too
                if target.estimator is None and self.editing == "estimator":
                    changes["editing"] = "controller"
                self._set_inputs(self.refresh.release(), **changes)
            except BaseException:
                self.history.revert_step(back=back)
                raise
            self._sync_history_depths()
            if "plant" in changes:
                self._after_time_domain_change()
            self._commit()
            return True
        return False

    def undo(self) -> bool:
        """Go back to the gain before the last change; False when there is nothing to undo."""
        return self._history_step(back=True)

    def redo(self) -> bool:
        """Reapply the last undone gain change; False when there is nothing to redo."""
        return self._history_step(back=False)

    def select_entry(self, row: int, col: int) -> None:
        """Show the locus and sensitivity of entry k[row, col] (zero-based)."""
        with self._reporting(f"show entry k{row + 1}{col + 1}"):
            self._check_entry(row, col)
            self._set_inputs(self.refresh.release(), selected_entry=(int(row), int(col)))

    # -- comparison --------------------------------------------------------------------------

    def pin(self, name: str | None = None) -> None:
        """Keep the current design as a named pin to compare against (at most MAX_PINS; the oldest goes).

        The newest pin is the one drawn as ghost poles and traces (:attr:`pinned`); the checks
        table shows every pin's values beside the current ones. ``name`` defaults to "pin N";
        pinning under a name already used replaces that pin.
        """
        name = " ".join(str(name or "").split())[:MAX_PIN_NAME_CHARACTERS] or self._next_pin_name()
        kept = [(n, e) for n, e in self.pins if n != name]
        dropped = ""
        if len(kept) >= MAX_PINS:
            dropped = f" The oldest pin, “{kept[0][0]}”, was dropped (at most {MAX_PINS} are kept)."
            kept = kept[1:]
        kept.append((name, self.evaluation))
        with param.edit_constant(self):
            self.param.update(pins=tuple(kept), pinned=self.evaluation)
        self._say(f"Pinned this design as “{name}”; its poles and traces stay as ghosts while you change K, and the "
                  f"Checks tab shows its values beside the current ones.{dropped}", "note")

    def _next_pin_name(self) -> str:
        used = {n for n, _ in self.pins}
        number = 1
        while f"pin {number}" in used:
            number += 1
        return f"pin {number}"

    @property
    def pinned_name(self) -> str | None:
        """Name of the pin drawn as the ghost, or None."""
        return next((n for n, e in self.pins if e is self.pinned), None)

    def show_pin(self, name: str) -> bool:
        """Draw the pin called ``name`` as the ghost (False when there is none of that name)."""
        found = next((e for n, e in self.pins if n == name), None)
        if found is None:
            return False
        with param.edit_constant(self):
            self.pinned = found
        return True

    def unpin(self) -> None:
        """Drop the pin drawn as the ghost (the newest remaining one is drawn next)."""
        kept = tuple((n, e) for n, e in self.pins if e is not self.pinned)
        with param.edit_constant(self):
            self.param.update(pins=kept, pinned=kept[-1][1] if kept else None)

    def _clear_pins(self) -> None:
        with param.edit_constant(self):
            self.param.update(pins=(), pinned=None)

    def adopt_pinned(self) -> bool:
        """Make the pinned design's gain current again."""
        if self.pinned is None:
            return False
        return self.set_gain(self.pinned.gain, note="The pinned design's gain is current again.")

    # -- pole dragging -----------------------------------------------------------------------

    def begin_drag(self, index: int) -> bool:
        """Start dragging closed-loop pole ``index`` (as ordered in ``evaluation.closed_loop.poles``);
        editing the estimator, estimator pole ``index`` (in ``estimator_evaluation.estimator_poles.poles``)."""
        if self.editing == "estimator":
            return self._begin_estimator_drag(index)
        poles = tuple(self.evaluation.closed_loop.poles)
        if not 0 <= index < len(poles):
            return False
        self._drag = {"index": int(index), "poles": poles, "movable": self.evaluation.closed_loop_movable}
        return True

    @property
    def gesture_active(self) -> bool:
        """True while a slider or pole is being dragged (live changes not yet closed)."""
        return self.history.in_gesture or self._drag is not None

    @property
    def dragging(self) -> bool:
        """True between :meth:`begin_drag` and the release."""
        return self._drag is not None

    def drag_pole(self, target: complex, *, live: bool = False, snap_distance: float = 0.0) -> bool:
        """Move the dragged pole (and its conjugate) to ``target`` by pole assignment.

        Parameters
        ----------
        target : complex
            Where the pole should go (s for continuous plants, z for sampled ones).
        live : bool
            True while the mouse is still down: K and every view follow, and the
            release makes it one undo step.
        snap_distance : float
            Drops this close to the real axis land on it (map units).

        Returns
        -------
        bool
            Whether a gain was found and applied. On failure the message says why and
            the design (as of the last accepted position) stays.
        """
        if self._drag is None:
            return False
        drag = self._drag
        if not live:
            self._drag = None  # the release ends the drag whatever happens next
        if drag.get("kind") == "estimator":
            accepted = False
            with self._reporting("place the estimator poles there"):
                accepted = self._drag_estimator_pole(drag, target, live=live, snap_distance=snap_distance)
            if not live:
                self.end_gesture()
            return accepted
        with self._reporting("place the poles there"):
            request = targets_after_drag(
                drag["poles"], drag["index"], target, snap_distance=snap_distance, movable=drag["movable"]
            )
            drag["request"] = request
            return self._place(request.targets, live=live, note=request.note)
        if not live:
            self.end_gesture()
        return False

    @property
    def drag_preview(self):
        """(dragged index, last DragRequest) while dragging, else None."""
        if self._drag is None or "request" not in self._drag:
            return None
        return self._drag["index"], self._drag["request"]

    def cancel_drag(self) -> None:
        """Forget the drag in progress (the last accepted position stays)."""
        self._drag = None
        self.end_gesture()

    def closed_loop_movable(self) -> tuple[bool, ...]:
        """For each closed-loop pole (in ``evaluation.closed_loop.poles`` order), whether a gain can move it."""
        return self.evaluation.closed_loop_movable

    def place_poles(self, targets) -> bool:
        """Compute K by pole assignment for a full list of target poles (typed in); L when editing the estimator."""
        if self.editing == "estimator":
            return self.place_estimator_poles(targets)
        with self._reporting("place the poles there"):
            return self._place(list(targets), live=False, note="")
        return False

    def _place(self, targets, *, live: bool, note: str) -> bool:
        """Ask for K by pole assignment (off the event loop when served) and take it over when it arrives.

        Returns whether the assignment was accepted (always True when it runs later: a failure
        is then shown when it arrives, and the design stays).
        """
        before = self._point()
        placed = []

        def take_over(placement) -> None:
            placed.append(placement)
            if live:
                self.history.live_step(before)
            else:
                self.history.accepted(before, self._point())
                self._sync_history_depths()
            self.placement_summary = f"{placement.method}. {placement.note}".strip()
            words = note
            if not placement.accurate:
                words = " ".join(n for n in (note, "The poles could only be placed approximately:", placement.note) if n)
            self._after_gain_change(words, live)

        self._failure = None
        self._request_evaluation(self.refresh.step() if live else self.refresh.release(), targets=targets,
                                 on_placed=take_over)
        if self._failure is not None:  # delivered at once, and refused
            failure, self._failure = self._failure, None
            raise failure
        return bool(placed) or not getattr(self.runner, "synchronous", False)

    # -- accepted changes ----------------------------------------------------------------------

    def _commit(self) -> None:
        """An accepted design change: record it and count it (autosave and rooms follow the count)."""
        self.gain_log.record(self.plant, self.gain)
        references = self._reference_gains
        if references is not None and references[2].tobytes() != np.asarray(self.gain, dtype=float).tobytes():
            self._reference_gains = None
            self._say("The design file's prefilter N and integral gain Ki were made for its K, so they were "
                      "dropped when K changed; design them again for the new K.", "note")
        with param.edit_constant(self):
            self.committed += 1
