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
        self._set_inputs(self.refresh.release(), plant_label=label, plant_text=text,
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
