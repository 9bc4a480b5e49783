"""Replacing the whole design of a state: plants, sampling, design files, notes and a live room's design.

A mixin of :class:`gainboard.app.state.DesignState`. Every method reports problems
through the state's message and leaves the design as it was.
"""

from __future__ import annotations

import logging

import numpy as np
import param

from gainboard import core

from .design_file import MAX_DESIGN_FILE_BYTES, Design, DesignFileError, design_from_json
from .plant_catalogue import plant_from_reference

__all__ = ["LoadingMixin", "MAX_NOTES_CHARACTERS", "MAX_SHARED_STATES", "state_from_snapshot", "check_shared_size"]

log = logging.getLogger(__name__)

#: Longest design notes accepted (a design file must stay far below its size limit).
MAX_NOTES_CHARACTERS = 100_000
#: Most states of a plant opened from a snapshot link or an uploaded or typed file in the workbench.
#: A link costs its sender nothing, but evaluating a 200-state design takes the server's cores for
#: tens of seconds; 60 states evaluate in well under the 10 s budget here. The command line has no
#: such limit (its user pays for their own computation).
MAX_SHARED_STATES = 60


def check_shared_size(plant: core.Plant, source: str) -> None:
    """Refuse a plant from a link or a file opened in the workbench above :data:`MAX_SHARED_STATES` states.

    Raises
    ------
    PlantError
        Saying the limit and that the command line takes larger plants.
    """
    if plant.state_count > MAX_SHARED_STATES:
        raise core.PlantError(
            f"{source} has {plant.state_count} states; the workbench opens plants of at most "
            f"{MAX_SHARED_STATES} states from links and files (use the gainboard command line for larger ones)"
        )


def state_from_snapshot(code: str):
    """(state, problem) for a snapshot link: a DesignState showing it, or (None, a message saying why not).

    Every failure is caught here (any exception type: a snapshot can carry numbers that break
    the numerics, such as ``A = [[1e308]]``), so a link can never keep a page from opening;
    the size limit is checked before anything is evaluated.
    """
    from .snapshot import design_from_snapshot
    from .state import DesignState

    try:
        design = design_from_snapshot(code)
        check_shared_size(design.plant, "the plant of this link")
        return DesignState.from_design(design, "snapshot link"), ""
    except core.GainboardError as error:
        return None, f"Could not open the snapshot link: {error}"
    except Exception as error:
        log.exception("a snapshot link could not be opened")
        return None, (f"Could not open the snapshot link: its design could not be evaluated "
                      f"({type(error).__name__}: {error}); the server's plant is shown instead.")


def _reference_gains(design: Design):
    """(prefilter, integral gain, the K they belong to) of a design file, or None."""
    if design.prefilter is None and design.integral_gain is None:
        return None
    return design.prefilter, design.integral_gain, np.array(design.gain, dtype=float)


class LoadingMixin:
    """Methods of DesignState that replace the plant or the whole design."""

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
        changes = {}
        if design.effective_specs is not state.specs:
            changes["specs"] = design.effective_specs
        if design.estimator is not None:
            changes["estimator"] = design.estimator
        if changes:
            state._set_inputs(**changes)  # complete, as every change outside a gesture
        state.notes = design.notes
        state._created = design.created
        if design.gain_history:
            state.gain_log.restart(state.plant, design.gain_history)
        state.gain_log.record(state.plant, state.gain)
        state.gain_log.modified = design.modified
        state._reference_gains = _reference_gains(design)
        return state

    def _replace_plant(self, plant: core.Plant, label: str, text: str, *,
                       continuous_origin: core.Plant | None = None, note: str = "", gain=None,
                       specs="plant", notes: str | None = None, history: tuple | None = None,
                       created: str | None = None, reference_gains=None, estimator=None) -> None:
        """Make ``plant`` current with ``gain`` (default: the starting gain) and ``specs`` (default: the plant's)."""
        if gain is None:
            gain, start_note = self._starting_gain(plant)
        else:
            gain, start_note = plant.check_gain(gain), ""
        specs = plant.specs if isinstance(specs, str) else specs
        # the labels change with the plant (and go back with it if its evaluation fails)
        # a new plant starts without an estimator unless the design brings one (an L fits one plant only)
        self._set_inputs(self.refresh.release(), plant_label=label, plant_text=text, emulation_sample_time=None,
                         continuous_origin=continuous_origin, plant=plant, gain=gain, selected_entry=(0, 0),
                         specs=specs, estimator=estimator, estimator_selected_entry=(0, 0),
                         editing="controller" if estimator is None else self.editing)
        if notes is not None:
            self.notes = notes
        if created is not None:
            self._created = created
        self.gain_log.restart(plant, history or ())
        self._reference_gains = reference_gains
        self.history.clear()
        self._drag = None
        self._sync_history_depths()
        self._clear_pins()
        self._reset_lqr_weights()
        self.placement_summary = ""
        self._say(" ".join(n for n in (note, start_note) if n), "note")
        self._commit()

    def load_plant_text(self, text: str, label: str = "edited plant") -> bool:
        """Replace the plant by one parsed from TOML text (the editor or an uploaded file)."""
        with self._reporting(f"load {label}"):
            plant = core.parse_plant_text(text, label)
            check_shared_size(plant, f"the plant in {label}")
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

    # -- time domains: the emulation check, the z-plane and back ---------------------------------

    def check_sampling(self, sample_time) -> bool:
        """Show what the current continuous K does when run through a ZOH at ``sample_time`` (seconds).

        The design is not changed (K, undo/redo, pins and history stay): the evaluation gains
        the emulation check (z-plane poles, margins, responses of the sampled loop, the largest
        stable sample time); moving to the z-plane is a separate choice (:meth:`sample_plant`).
        """
        with self._reporting("check the sampled loop"):
            if self.plant.is_sampled:
                raise core.PlantError(
                    f"the plant is already sampled (T = {self.plant.sample_time:g} s); the emulation check runs a "
                    "continuous design through a hold, so go back to the continuous plant first"
                )
            T = core.check_sample_time_value(sample_time)
            self._set_inputs(self.refresh.release(), emulation_sample_time=T)
            self._say(f"Checking this K run by a sampled controller (ZOH, T = {T:g} s); the design is unchanged.",
                      "note")
            return True
        return False

    def stop_sampling_check(self) -> None:
        """Hide the emulation check."""
        if self.emulation_sample_time is not None:
            with self._reporting("close the sampling check"):
                self._set_inputs(self.refresh.release(), emulation_sample_time=None)

    def sample_plant(self, sample_time: float | None = None, *, redesign: bool = False) -> bool:
        """Continue the design on the z-plane: make the ZOH-sampled plant current (one undo step).

        Parameters
        ----------
        sample_time : float, optional
            T in seconds; default: the sample time of the emulation check shown.
        redesign : bool
            False: start from the sampled equivalent of K — for state feedback through a ZOH
            that is the same K, so the loop is exactly the one the emulation check showed.
            True: start over with the sampled plant's own starting gain (its LQR with Bryson's
            weights).

        Undo (or :meth:`restore_continuous`) goes back to the continuous design; the
        pins, the gain history and the undo history are kept.
        """
        with self._reporting("sample the plant"):
            if self.plant.is_sampled:
                raise core.PlantError(
                    f"the plant is already sampled (T = {self.plant.sample_time:g} s); go back to continuous first"
                )
            T = self.emulation_sample_time if sample_time is None else sample_time
            if T is None:
                raise core.AnalysisError("give a sample time T in seconds (or check the sampled loop first)")
            T = core.check_sample_time_value(T)
            shown = self.evaluation.emulation if self.evaluation is not None else None
            sampled = (shown.sampled_plant if shown is not None and shown.sample_time == T
                       and self.evaluation.plant is self.plant else core.discretize_zero_order_hold(self.plant, T))
            if redesign:
                gain, start_note = self._starting_gain(sampled)
                words = f"Redesign on the z-plane (ZOH, T = {T:g} s), from the sampled plant's starting gain."
            else:
                gain, start_note = np.array(self.gain, copy=True), ""
                words = (f"Continuing on the z-plane (ZOH, T = {T:g} s) from the sampled equivalent of K (the same "
                         "K, held between samples).")
            self._move_to_time_domain(
                sampled, f"{self.plant_label} (ZOH, T = {T:g} s)", continuous_origin=self.plant, gain=gain,
                note=" ".join(n for n in (words, "Undo goes back to the continuous design.", start_note) if n))
            return True
        return False

    def restore_continuous(self) -> bool:
        """Go back to the continuous plant a sampled one was made from, with the current K (one undo step)."""
        origin = self.continuous_origin
        if origin is None:
            self._say("This plant was not sampled here, so there is no continuous version to go back to.", "error")
            return False
        with self._reporting("go back to the continuous plant"):
            label = self.plant_label.split(" (ZOH")[0]
            self._move_to_time_domain(origin, label, continuous_origin=None, gain=np.array(self.gain, copy=True),
                                      note="Back to the continuous plant with the current K (undo: back to the "
                                           "z-plane).")
            return True
        return False

    def _move_to_time_domain(self, plant: core.Plant, label: str, *, continuous_origin, gain, note: str) -> None:
        """The same design on another plant (sampled or continuous), as one undo step; the rest is kept."""
        self._drag = None
        self.history.cancel_gesture()
        before = self._point()
        changes = dict(plant=plant, plant_label=label, continuous_origin=continuous_origin, gain=plant.check_gain(gain),
                       emulation_sample_time=None)
        if self.estimator is not None:
            changes.update(estimator=None, editing="controller")  # an L fits one plant only; undo brings it back
            note += " The estimator was set aside (it was designed for the other plant)."
        self._set_inputs(self.refresh.release(), **changes)
        self.history.accepted(before, self._point())
        self._sync_history_depths()
        self._after_time_domain_change()
        self._say(note, "note")
        self._commit()

    def _after_time_domain_change(self) -> None:
        """The plant changed its time domain with the design kept: what belongs to one plant starts anew."""
        self._drag = None
        self.gain_log.follow(self.plant)
        self._reset_lqr_weights()
        self.placement_summary = ""

    # -- the design as a whole: history, saving, loading ----------------------------------------

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
            plant=self.plant, gain=self.gain, prefilter=prefilter, integral_gain=integral, estimator=self.estimator,
            specs=None if specs is self.plant.specs else specs, notes=self.notes,
            gain_history=self.gain_log.entries, created=self._created, modified=self.gain_log.modified,
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
            check_shared_size(design.plant, f"the plant in {label}")
            if len(design.notes) > MAX_NOTES_CHARACTERS:
                raise DesignFileError(f"{label}: the notes have {len(design.notes)} characters; at most "
                                      f"{MAX_NOTES_CHARACTERS} are kept (shorten them in the file)")
            self._replace_plant(
                design.plant, label, plant_to_toml(design.plant), gain=design.gain, specs=design.effective_specs,
                notes=design.notes, history=design.gain_history, created=design.created,
                reference_gains=_reference_gains(design), estimator=design.estimator,
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
                            notes=self.notes, estimator=self.estimator)

    def adopt_shared(self, shared, note: str = "") -> bool:
        """Show a design another member of a live room published (one undo step when only K changed).

        A different plant replaces the plant as opening one does (the undo history starts
        anew); a different K, specs or notes are taken over in one evaluation.
        """
        with self._reporting("take over the room's design"):
            if shared.plant is not self.plant:
                self._replace_plant(
                    shared.plant, shared.plant_label, shared.plant_text, continuous_origin=shared.continuous_origin,
                    gain=shared.gain, specs=shared.specs, notes=shared.notes, note=note, estimator=shared.estimator,
                )
                return True
            changes = {}
            before = self.gain.copy()
            if before.shape != shared.gain.shape or before.tobytes() != shared.gain.tobytes():
                changes["gain"] = np.array(shared.gain, dtype=float, copy=True)
            if shared.specs is not self.specs:
                changes["specs"] = shared.specs
            before_point = self._point()
            if shared.estimator is not self.estimator:
                changes["estimator"] = shared.estimator
                if shared.estimator is None and self.editing == "estimator":
                    changes["editing"] = "controller"
            if changes:
                self._drag = None
                self.history.cancel_gesture()
                self._set_inputs(self.refresh.release(), **changes)
                if "gain" in changes or "estimator" in changes:
                    self.history.accepted(before_point, self._point())
                    self._sync_history_depths()
            notes_changed = shared.notes != self.notes
            if notes_changed:
                self.notes = shared.notes
            if changes or notes_changed:
                self._commit()
            return True
        return False
