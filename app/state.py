"""The design state behind one workbench session.

One :class:`DesignState` holds what the engineer chose — the plant, the gain K,
the selected entry, the specs — plus the undo/redo history, a pinned design to
compare against, the LQR comparison and the last message. Everything derived
(poles, loci, intervals, responses, margins, spec checks) is computed in exactly
one place, :meth:`DesignState._recompute`, by one call to
:func:`gainboard.core.evaluate_design`; the app itself does no numerics.

The class knows nothing about Panel or Bokeh: the same object serves the
browser views, the tests and a Python session. Every public method reports
problems through :attr:`message` and leaves the design as it was; none raises.

Every accepted change of the design itself (plant, K, specs, notes — not the live
steps of a drag) counts up :attr:`DesignState.committed` and is recorded in the gain
history; autosave and live rooms follow that counter. :meth:`DesignState.design`
gives the whole design as a :class:`~gainboard.app.design_file.Design` for saving
and export, and :meth:`DesignState.load_design` opens one.
"""

from __future__ import annotations

import contextlib
import functools
import logging
import math
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import param

from gainboard import core

from .design_file import (
    MAX_DESIGN_FILE_BYTES,
    MAX_GAIN_HISTORY,
    Design,
    DesignFileError,
    design_from_json,
    now_timestamp,
)
from .pole_drag import targets_after_drag

__all__ = ["DesignState", "BundledPlant", "bundled_plants", "bundled_plant_catalogue", "plant_from_reference",
           "MAX_NOTES_CHARACTERS"]

#: Longest design notes accepted (a design file must stay far below its size limit).
MAX_NOTES_CHARACTERS = 100_000

log = logging.getLogger(__name__)

#: Inputs whose change triggers a new evaluation.
_EVALUATION_INPUTS = ("plant", "gain", "selected_entry", "specs")


def bundled_plants() -> dict[str, Path]:
    """Bundled sample plant files by stem name (from :mod:`gainboard.sample_plants`)."""
    from gainboard.sample_plants import bundled_plant_files

    return dict(sorted(bundled_plant_files().items()))


@dataclass(frozen=True)
class BundledPlant:
    """A bundled sample plant as the plant chooser lists it.

    Attributes
    ----------
    stem : str
        Short name (the file name without ``.toml``), as ``gainboard serve`` accepts it.
    name : str
        The plant's name from its file.
    summary : str
        Its one-line summary.
    path : pathlib.Path
        The plant file.
    """

    stem: str
    name: str
    summary: str
    path: Path


@functools.lru_cache(maxsize=4)
def _catalogue(signature: tuple) -> tuple[BundledPlant, ...]:
    entries = []
    for stem, path, _ in signature:
        try:
            plant = core.load_plant_file(path)
        except core.GainboardError as error:  # a broken bundled file must not hide the others
            log.warning("bundled plant %s cannot be read: %s", stem, error)
            continue
        entries.append(BundledPlant(stem=stem, name=plant.name, summary=plant.summary, path=Path(path)))
    return tuple(entries)


def bundled_plant_catalogue() -> tuple[BundledPlant, ...]:
    """Every readable bundled plant with its name and one-line summary, sorted by stem.

    The files are read once and again only when one of them changes.
    """
    signature = []
    for stem, path in bundled_plants().items():
        try:
            stamp = path.stat().st_mtime_ns
        except OSError:
            continue
        signature.append((stem, str(path), stamp))
    return _catalogue(tuple(signature))


def plant_from_reference(reference: str | None) -> tuple[core.Plant, str, str]:
    """Resolve a plant file path or a bundled plant name.

    Parameters
    ----------
    reference : str or None
        A path to a TOML plant file, the stem of a bundled plant, or None for the
        first bundled plant.

    Returns
    -------
    (Plant, label, text)
        The checked plant, a short label for the screen and the TOML source text.

    Raises
    ------
    PlantError
        If the file is broken or no bundled plant has that name.
    """
    from gainboard.sample_plants import resolve_plant_reference

    path, label = resolve_plant_reference(reference)
    plant = core.load_plant_file(path)
    return plant, label, path.read_text(encoding="utf-8")


class DesignState(param.Parameterized):
    """Everything one workbench session knows about the design being edited.

    Set the inputs through the methods (``set_gain``, ``set_entry``, ``drag_pole``,
    ``load_plant_text`` ...): they keep the undo history and report errors in
    :attr:`message`. ``evaluation`` always describes the current plant and gain.
    """

    plant = param.ClassSelector(class_=core.Plant, doc="The checked plant the gain is designed for.")
    plant_label = param.String(default="", doc="Where the plant came from: a bundled name or a file name.")
    plant_text = param.String(default="", doc="TOML text of the plant, shown in the plant editor.")
    continuous_origin = param.ClassSelector(
        class_=core.Plant, default=None, allow_None=True,
        doc="The continuous plant a sampled plant was made from (ZOH), kept to go back to it.",
    )
    gain = param.Array(doc="Feedback gain K, inputs × states (u = −Kx), in input units per state unit.")
    selected_entry = param.Tuple(
        default=(0, 0), length=2, allow_None=True,
        doc="Zero-based (row, column) of the gain entry whose locus and sensitivity are shown.",
    )
    specs = param.ClassSelector(class_=core.DesignSpecs, default=None, allow_None=True,
                                doc="Design specifications checked and shaded on the pole map.")
    evaluation = param.Parameter(default=None, constant=True,
                                 doc="The core's evaluation of the current plant and gain (read only).")
    pinned = param.Parameter(default=None, constant=True,
                             doc="Evaluation of the pinned design shown as ghost poles and traces, or None.")
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
                             doc="Counts evaluations; views and tests use it to know an update happened.")
    details_pending = param.Boolean(
        default=False, constant=True,
        doc="True while the evaluation shown is a quick one taken during a drag: the stable intervals of the "
            "entries are left out until complete_details() or the release computes them.",
    )

    def __init__(self, plant: core.Plant, *, plant_label: str = "", plant_text: str = "", gain=None, **params):
        self._undo: list[np.ndarray] = []
        self._redo: list[np.ndarray] = []
        self._gesture_start: np.ndarray | None = None
        self._drag = None
        self._failure: BaseException | None = None
        self._live = False
        #: While dragging, evaluations within this many seconds of the last complete one leave out
        #: the stable intervals of all entries (the slowest part for larger K); 0 keeps every
        #: evaluation complete. A served workbench sets it (and completes earlier when a drag pauses).
        self.live_detail_interval = 0.0
        self._details_at = -math.inf
        #: An object with get/put (see gainboard.app.rooms.SharedEvaluations) shared by the sessions
        #: of a live room, so that a design shown in several sessions is evaluated once; None: no sharing.
        self.evaluation_cache = None
        self._created = now_timestamp()
        self._modified = self._created
        self._history: tuple = ()
        self._history_plant = None
        self._reference_gains = None  # (prefilter, integral gain, the K they belong to) from a design file
        starting_gain, note = (plant.check_gain(gain), "") if gain is not None else self._starting_gain(plant)
        super().__init__(
            plant=plant, plant_label=plant_label or plant.name, plant_text=plant_text,
            gain=starting_gain, specs=plant.specs, **params,
        )
        evaluation, _ = self._evaluate()  # a broken plant at start-up is the caller's error: let it raise
        with param.edit_constant(self):
            self.param.update(evaluation=evaluation, revision=1)
        self._reset_lqr_weights()
        self._record_history()
        if note:
            self._say(note, "note")
        self.param.watch(self._recompute, list(_EVALUATION_INPUTS))

    @classmethod
    def from_design(cls, design: Design, label: str = "design file") -> "DesignState":
        """A state showing ``design`` (plant, K, specs, notes and gain history) from the start.

        Raises
        ------
        GainboardError
            If the design cannot be shown (the caller decides how to report it).
        """
        from .plant_text import plant_to_toml

        state = cls(design.plant, plant_label=label, plant_text=plant_to_toml(design.plant), gain=design.gain)
        if design.effective_specs is not state.specs:
            state._set_inputs(specs=design.effective_specs)
        state.notes = design.notes
        state._created, state._modified = design.created, design.modified
        if design.gain_history:
            state._history = tuple(design.gain_history)
        state._record_history()
        if design.prefilter is not None or design.integral_gain is not None:
            state._reference_gains = (design.prefilter, design.integral_gain, np.array(design.gain, dtype=float))
        return state

    # -- the one place where derived results are computed -----------------------------------

    def _evaluate(self):
        """(evaluation, quick): quick evaluations leave out the stable intervals of the entries."""
        # While a slider or pole is being dragged the margins are left out (they are not
        # drawn live and are the slowest part); the release evaluates everything.
        now = time.monotonic()
        quick = self._live and now - self._details_at < self.live_detail_interval
        if not quick:
            self._details_at = now
        cache, key = self.evaluation_cache, None
        if cache is not None:
            key = (id(self.plant), id(self.specs), self.gain.shape, self.gain.tobytes(), self.selected_entry,
                   not self._live, quick)
            found = cache.get(key, self.plant, self.specs)
            if found is not None:
                return found, quick
        options = core.EvaluationOptions(
            selected_entry=self.selected_entry, specs=self.specs, include_margins=not self._live,
            include_all_entry_intervals=not quick,
        )
        evaluation = core.evaluate_design(self.plant, self.gain, options)
        if cache is not None:
            cache.put(key, self.plant, self.specs, evaluation)
        return evaluation, quick

    def _recompute(self, *events):
        """Re-evaluate after any input changed; on failure restore the inputs and report."""
        try:
            evaluation, quick = self._evaluate()
        except Exception as error:  # any failure must leave the previous, consistent design
            with param.discard_events(self):
                for event in events:
                    setattr(self, event.name, event.old)
            self._failure = error
            return
        self._failure = None
        with param.edit_constant(self):
            self.param.update(evaluation=evaluation, details_pending=quick, revision=self.revision + 1)

    def complete_details(self) -> None:
        """Fill in what a quick drag-time evaluation left out (nothing to do when none is pending)."""
        if not self.details_pending:
            return
        evaluation = core.with_all_entry_intervals(self.evaluation)
        self._details_at = time.monotonic()
        with param.edit_constant(self):
            self.param.update(evaluation=evaluation, details_pending=False, revision=self.revision + 1)

    def _set_inputs(self, **changes) -> None:
        """Set inputs together (one evaluation) and raise the evaluation's error if it failed."""
        self._failure = None
        self.param.update(**changes)
        if self._failure is not None:
            failure, self._failure = self._failure, None
            raise failure

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
            self.param.update(undo_depth=len(self._undo), redo_depth=len(self._redo))

    def set_gain(self, gain, *, live: bool = False, note: str = "") -> bool:
        """Make ``gain`` the current K.

        Parameters
        ----------
        gain : array_like, shape (m, n)
            The new K.
        live : bool
            True while a slider or pole is being dragged: the history records one
            step per gesture, taken when a call with ``live=False`` ends it.
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
            before = self.gain.copy()
            self._live = live
            try:
                self._set_inputs(gain=checked)
            finally:
                self._live = False
            if live:
                if self._gesture_start is None:
                    self._gesture_start = before
            else:
                start = self._gesture_start if self._gesture_start is not None else before
                self._gesture_start = None
                if not np.array_equal(start, checked):
                    self._undo.append(start)
                    self._redo.clear()
                self._sync_history_depths()
            accepted = True
            if note:
                self._say(note, "note")
            else:
                self.clear_message()
            if not live:
                self._commit()
        return accepted

    def set_entry(self, row: int, col: int, value: float, *, live: bool = False) -> bool:
        """Set one entry k[row, col] (zero-based) and keep the others."""
        gain = self.gain.copy()
        with self._reporting(f"set entry k{row + 1}{col + 1}"):
            if not (0 <= row < gain.shape[0] and 0 <= col < gain.shape[1]):
                raise core.GainError(f"K is {gain.shape[0]}×{gain.shape[1]}; there is no entry ({row + 1}, {col + 1})")
            gain[row, col] = float(value)
            return self.set_gain(gain, live=live)
        return False

    def end_gesture(self) -> None:
        """Close a live gesture (slider or drag release) so it becomes one undo step."""
        if self._gesture_start is not None:
            self.set_gain(self.gain)

    def set_gain_text(self, text: str) -> bool:
        """Set K from text such as ``[[199, 55, 8]]`` (JSON rows, as the K readout shows)."""
        import json

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

    def undo(self) -> bool:
        """Go back to the gain before the last change; False when there is nothing to undo."""
        if not self._undo:
            return False
        with self._reporting("undo"):
            previous = self._undo.pop()
            current = self.gain.copy()
            try:
                self._set_inputs(gain=previous)
            except BaseException:
                self._undo.append(previous)
                raise
            self._redo.append(current)
            self._gesture_start = None
            self._sync_history_depths()
            self._commit()
            return True
        return False

    def redo(self) -> bool:
        """Reapply the last undone gain change; False when there is nothing to redo."""
        if not self._redo:
            return False
        with self._reporting("redo"):
            following = self._redo.pop()
            current = self.gain.copy()
            try:
                self._set_inputs(gain=following)
            except BaseException:
                self._redo.append(following)
                raise
            self._undo.append(current)
            self._gesture_start = None
            self._sync_history_depths()
            self._commit()
            return True
        return False

    def select_entry(self, row: int, col: int) -> None:
        """Show the locus and sensitivity of entry k[row, col] (zero-based)."""
        with self._reporting(f"show entry k{row + 1}{col + 1}"):
            m, n = self.gain.shape
            if not (0 <= row < m and 0 <= col < n):
                raise core.GainError(f"K is {m}×{n}; there is no entry ({row + 1}, {col + 1})")
            self._set_inputs(selected_entry=(int(row), int(col)))

    def set_specs(self, specs: core.DesignSpecs | None) -> None:
        """Check the design against other specs (None: none)."""
        with self._reporting("use these specs"):
            self._set_inputs(specs=specs)
            self._commit()

    # -- comparison --------------------------------------------------------------------------

    def pin(self) -> None:
        """Keep the current design as a ghost to compare against."""
        with param.edit_constant(self):
            self.pinned = self.evaluation
        self._say("Pinned this design; its poles and traces stay as ghosts while you change K.", "note")

    def unpin(self) -> None:
        """Drop the pinned comparison."""
        with param.edit_constant(self):
            self.pinned = None

    def adopt_pinned(self) -> bool:
        """Make the pinned design's gain current again."""
        if self.pinned is None:
            return False
        return self.set_gain(self.pinned.gain, note="The pinned design's gain is current again.")

    # -- pole dragging -----------------------------------------------------------------------

    def begin_drag(self, index: int) -> bool:
        """Start dragging closed-loop pole ``index`` (as ordered in ``evaluation.closed_loop.poles``)."""
        poles = tuple(self.evaluation.closed_loop.poles)
        if not 0 <= index < len(poles):
            return False
        self._drag = {"index": int(index), "poles": poles, "movable": self.closed_loop_movable()}
        return True

    @property
    def evaluating_live(self) -> bool:
        """True while the evaluation being shown comes from a live drag step (not its release)."""
        return self._live

    @property
    def gesture_active(self) -> bool:
        """True while a slider or pole is being dragged (live changes not yet closed)."""
        return self._gesture_start is not None or self._drag is not None

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
        accepted = False
        with self._reporting("place the poles there"):
            request = targets_after_drag(
                drag["poles"], drag["index"], target, snap_distance=snap_distance, movable=drag["movable"]
            )
            drag["request"] = request
            placement = core.assign_poles(self.plant, request.targets)
            accepted = self._apply_placement(placement, live=live, note=request.note)
        if not live:
            self.end_gesture()
        return accepted

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
        """Compute K by pole assignment for a full list of target poles (typed in)."""
        with self._reporting("place the poles there"):
            placement = core.assign_poles(self.plant, list(targets))
            return self._apply_placement(placement, live=False, note="")
        return False

    def _apply_placement(self, placement, *, live: bool, note: str) -> bool:
        """Use a pole assignment's gain; its method goes to ``placement_summary``, warnings to the message."""
        if not placement.accurate:
            note = " ".join(n for n in (note, "The poles could only be placed approximately:", placement.note) if n)
        accepted = self.set_gain(placement.gain, live=live, note=note)
        if accepted:
            self.placement_summary = f"{placement.method}. {placement.note}".strip()
        return accepted

    # -- LQR comparison -----------------------------------------------------------------------

    def _reset_lqr_weights(self) -> None:
        weights = None
        try:
            Q, R = core.bryson_weights(self.plant)
            weights = (np.array(Q, dtype=float), np.array(R, dtype=float))
        except core.GainboardError as error:
            log.info("no Bryson weights for %s: %s", self.plant.name, error)
        with param.edit_constant(self):
            self.param.update(lqr_weights=weights, lqr_result=None, lqr_poles=None)

    def compute_lqr(self, Q=None, R=None) -> bool:
        """Design the LQR comparison for weights Q (n×n) and R (m×m); default: the current weights."""
        with self._reporting("compute the LQR design"):
            if Q is None or R is None:
                if self.lqr_weights is None:
                    raise core.AnalysisError("give LQR weights Q and R; no default weights could be formed")
                Q, R = self.lqr_weights
            Q = np.array(Q, dtype=float)
            R = np.array(R, dtype=float)
            result = core.design_lqr(self.plant, Q, R)
            poles = getattr(result, "closed_loop_poles", None)
            if poles is None:
                poles = core.evaluate_design(
                    self.plant, result.gain,
                    core.EvaluationOptions(selected_entry=None, include_margins=False,
                                           include_all_entry_intervals=False),
                ).closed_loop.poles
            with param.edit_constant(self):
                self.param.update(lqr_weights=(Q, R), lqr_result=result, lqr_poles=tuple(poles))
            self.clear_message()
            return True
        return False

    def reset_lqr_weights(self) -> None:
        """Go back to Bryson's weights (from the core) and drop the LQR result."""
        self._reset_lqr_weights()

    def adopt_lqr(self) -> bool:
        """Make the LQR gain the current K (one undo step)."""
        if self.lqr_result is None:
            self._say("Compute the LQR design first, then adopt it.", "error")
            return False
        return self.set_gain(self.lqr_result.gain, note="Adopted the LQR gain.")

    # -- plant changes ------------------------------------------------------------------------

    @staticmethod
    def _starting_gain(plant: core.Plant) -> tuple[np.ndarray, str]:
        """LQR with Bryson's weights when it exists (a stabilising start), else K = 0."""
        try:
            Q, R = core.bryson_weights(plant)
            gain = core.design_lqr(plant, Q, R).gain
            return plant.check_gain(gain), ""
        except core.GainboardError as error:
            zeros = np.zeros((plant.input_count, plant.state_count))
            return zeros, f"Starting from K = 0: no LQR starting design ({error})."

    def _replace_plant(self, plant: core.Plant, label: str, text: str, *,
                       continuous_origin: core.Plant | None = None, note: str = "", gain=None,
                       specs="plant", notes: str | None = None, history: tuple | None = None,
                       created: str | None = None, reference_gains=None) -> None:
        """Make ``plant`` current with ``gain`` (default: the starting gain) and ``specs`` (default: the plant's)."""
        if gain is None:
            gain, start_note = self._starting_gain(plant)
        else:
            gain, start_note = plant.check_gain(gain), ""
        specs = plant.specs if isinstance(specs, str) else specs
        previous = {"plant_label": self.plant_label, "plant_text": self.plant_text,
                    "continuous_origin": self.continuous_origin}
        # The labels go first so that views refreshed by the new evaluation show them.
        self.param.update(plant_label=label, plant_text=text, continuous_origin=continuous_origin)
        try:
            self._set_inputs(plant=plant, gain=gain, selected_entry=(0, 0), specs=specs)
        except BaseException:
            self.param.update(previous)
            raise
        if notes is not None:
            self.notes = notes
        if created is not None:
            self._created = created
        self._history = tuple(history) if history else ()
        self._history_plant = plant
        self._reference_gains = reference_gains
        self._undo.clear()
        self._redo.clear()
        self._gesture_start = None
        self._drag = None
        self._sync_history_depths()
        with param.edit_constant(self):
            self.pinned = None
        self._reset_lqr_weights()
        self.placement_summary = ""
        self._say(" ".join(n for n in (note, start_note) if n), "note")
        self._commit()

    def load_plant_text(self, text: str, label: str = "edited plant") -> bool:
        """Replace the plant by one parsed from TOML text (the editor or an uploaded file)."""
        with self._reporting(f"load {label}"):
            plant = core.parse_plant_text(text, label)
            self._replace_plant(plant, label, text, note=f"Loaded {label}.")
            return True
        return False

    def load_plant_bytes(self, data: bytes, filename: str) -> bool:
        """Replace the plant by an uploaded file's bytes (UTF-8 TOML)."""
        with self._reporting(f"load {filename}"):
            try:
                text = data.decode("utf-8")
            except UnicodeDecodeError:
                raise core.PlantError(f"{filename}: not a UTF-8 text file; a plant file is TOML text") from None
            return self.load_plant_text(text, filename)
        return False

    def load_plant_reference(self, reference: str) -> bool:
        """Replace the plant by a plant file path or a bundled plant name."""
        with self._reporting(f"open {reference}"):
            plant, label, text = plant_from_reference(reference)
            self._replace_plant(plant, label, text, note=f"Opened {label}.")
            return True
        return False

    def sample_plant(self, sample_time: float) -> bool:
        """Replace a continuous plant by its ZOH-sampled version (the continuous one is kept)."""
        with self._reporting("sample the plant"):
            if self.plant.is_sampled:
                raise core.PlantError(
                    f"the plant is already sampled (T = {self.plant.sample_time:g} s); go back to continuous first"
                )
            sampled = core.discretize_zero_order_hold(self.plant, sample_time)
            self._replace_plant(
                sampled, f"{self.plant_label} (ZOH, T = {sample_time:g} s)", self.plant_text,
                continuous_origin=self.plant, note=f"Sampled the plant with a zero-order hold, T = {sample_time:g} s.",
            )
            return True
        return False

    def restore_continuous(self) -> bool:
        """Go back to the continuous plant a sampled one was made from."""
        origin = self.continuous_origin
        if origin is None:
            self._say("This plant was not sampled here, so there is no continuous version to go back to.", "error")
            return False
        with self._reporting("go back to the continuous plant"):
            label = self.plant_label.split(" (ZOH")[0]
            self._replace_plant(origin, label, self.plant_text, note="Back to the continuous plant.")
            return True
        return False

    # -- the design as a whole: history, saving, loading ----------------------------------------

    def _record_history(self) -> None:
        """Add the current K to the gain history (if it differs from the last entry) and stamp the time."""
        when = now_timestamp()
        gain = np.array(self.gain, dtype=float, copy=True)
        if self._history_plant is not self.plant:
            self._history, self._history_plant = (), self.plant
        last = self._history[-1][1] if self._history else None
        if last is None or last.shape != gain.shape or last.tobytes() != gain.tobytes():
            self._history = (self._history + ((when, gain),))[-MAX_GAIN_HISTORY:]
        self._modified = when

    def _commit(self) -> None:
        """An accepted design change: record it and count it (autosave and rooms follow the count)."""
        self._record_history()
        references = self._reference_gains
        if references is not None and references[2].tobytes() != np.asarray(self.gain, dtype=float).tobytes():
            self._reference_gains = None
            self._say("The design file's prefilter N and integral gain Ki were made for its K, so they were "
                      "dropped when K changed; design them again for the new K.", "note")
        with param.edit_constant(self):
            self.committed += 1

    def design(self) -> Design:
        """The current design (plant, K, specs, notes, gain history) for saving, export and autosave.

        Raises
        ------
        DesignFileError
            If the state cannot be expressed as a design (not expected for a checked plant).
        """
        specs = self.specs
        if specs is not None and not isinstance(specs, core.DesignSpecs):
            raise DesignFileError(f"the specs must be DesignSpecs to be saved, got {type(specs).__name__}")
        prefilter = integral = None
        if self._reference_gains is not None:
            prefilter, integral, _ = self._reference_gains
        return Design(
            plant=self.plant, gain=self.gain, prefilter=prefilter, integral_gain=integral,
            specs=None if specs is self.plant.specs else specs, notes=self.notes,
            gain_history=self._history, created=self._created, modified=self._modified,
        )

    def set_notes(self, text: str) -> bool:
        """Replace the design notes (saved with the design and shared in a live room)."""
        with self._reporting("keep the notes"):
            text = str(text or "")
            if len(text) > MAX_NOTES_CHARACTERS:
                raise DesignFileError(f"the notes have {len(text)} characters; at most {MAX_NOTES_CHARACTERS} are kept")
            if text == self.notes:
                return True
            self.notes = text
            self._commit()
            self._say("Notes saved with the design.", "note")
            return True
        return False

    def load_design(self, design: Design, label: str = "design file") -> bool:
        """Open a whole design: its plant, K, specs, notes and gain history (the undo history starts anew)."""
        from .plant_text import plant_to_toml

        with self._reporting(f"open {label}"):
            if not isinstance(design, Design):
                raise DesignFileError(f"{label}: not a design ({type(design).__name__})")
            text = plant_to_toml(design.plant)
            references = None
            if design.prefilter is not None or design.integral_gain is not None:
                references = (design.prefilter, design.integral_gain, np.array(design.gain, dtype=float))
            self._replace_plant(
                design.plant, label, text, gain=design.gain, specs=design.effective_specs, notes=design.notes,
                history=design.gain_history, created=design.created, reference_gains=references,
                note=f"Opened {label}.",
            )
            return True
        return False

    def load_design_bytes(self, data: bytes, filename: str) -> bool:
        """Open an uploaded design file (JSON, at most MAX_DESIGN_FILE_BYTES); reading it never runs code."""
        with self._reporting(f"open {filename}"):
            if len(data) > MAX_DESIGN_FILE_BYTES:
                raise DesignFileError(
                    f"{filename}: {len(data)} bytes, larger than the {MAX_DESIGN_FILE_BYTES // 1_000_000} MB a "
                    "design file may have"
                )
            try:
                text = bytes(data).decode("utf-8")
            except UnicodeDecodeError:
                raise DesignFileError(f"{filename}: not UTF-8 text; a design file is JSON text") from None
            design = design_from_json(text, filename)
            return self.load_design(design, filename)
        return False

    # -- live rooms ---------------------------------------------------------------------------

    def shared_design(self):
        """The part of the design a live room shares (see :class:`gainboard.app.rooms.SharedDesign`)."""
        from .rooms import SharedDesign

        return SharedDesign(plant=self.plant, plant_label=self.plant_label, plant_text=self.plant_text,
                            continuous_origin=self.continuous_origin, gain=self.gain, specs=self.specs,
                            notes=self.notes)

    def adopt_shared(self, shared, note: str = "") -> bool:
        """Show a design another member of a live room published (one undo step when only K changed).

        A different plant replaces the plant as opening one does (the undo history starts
        anew); a different K, specs or notes are taken over in one evaluation.
        """
        with self._reporting("take over the room's design"):
            if shared.plant is not self.plant:
                self._replace_plant(
                    shared.plant, shared.plant_label, shared.plant_text, continuous_origin=shared.continuous_origin,
                    gain=shared.gain, specs=shared.specs, notes=shared.notes, note=note,
                )
                return True
            changes = {}
            before = self.gain.copy()
            if before.shape != shared.gain.shape or before.tobytes() != shared.gain.tobytes():
                changes["gain"] = np.array(shared.gain, dtype=float, copy=True)
            if shared.specs is not self.specs:
                changes["specs"] = shared.specs
            if changes:
                self._drag = None
                self._gesture_start = None
                self._set_inputs(**changes)
                if "gain" in changes:
                    self._undo.append(before)
                    self._redo.clear()
                    self._sync_history_depths()
            notes_changed = shared.notes != self.notes
            if notes_changed:
                self.notes = shared.notes
            if changes or notes_changed:
                self._commit()
            return True
        return False
