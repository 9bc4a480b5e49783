"""The estimator side of a design state: L, its form, what is being edited, and estimator-pole drags.

A mixin of :class:`gainboard.app.state.DesignState` (its parameters ``estimator``,
``editing``, ``estimator_selected_entry``, ``estimator_evaluation`` and
``kalman_result`` are declared there). The estimator is one
:class:`~gainboard.app.estimator_settings.EstimatorDesign` (form, L and how it was
made), so undo/redo, design files and live rooms carry it as one value. Every
number comes from the core (:func:`gainboard.core.evaluate_compensator` through the
state's one evaluation call); these methods only decide what to ask for.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
import param

from gainboard import core

from .estimator_settings import EstimatorDesign
from .pole_drag import targets_after_drag
from .refresh_policy import Detail, detail_options

__all__ = ["EstimatorMixin", "DesignPoint", "PLACE_INPUTS", "same_point", "EDITING_MODES", "ESTIMATOR_SPEED_FACTOR"]

#: What the sliders, the pole drags and the typed targets change.
EDITING_MODES = ("controller", "estimator")
#: A first estimator's poles are this many times faster than the controller's (common practice, no
#: source: "two to six times faster" is the usual advice; the estimate then settles well before the loop).
ESTIMATOR_SPEED_FACTOR = 3.0


@dataclass(frozen=True, eq=False)
class DesignPoint:
    """What one undo step restores: K, the estimator (None without one) and the plant with its labels.

    The plant is part of a step because moving a continuous design to the z-plane (and back)
    is undone like any change of K; ``place`` holds the plant's inputs of the state by name.
    """

    gain: np.ndarray
    estimator: EstimatorDesign | None
    place: dict | None = None


#: The state's inputs that say which plant a design point belongs to (see DesignPoint.place).
PLACE_INPUTS = ("plant", "plant_label", "plant_text", "continuous_origin", "emulation_sample_time")


def same_point(first: DesignPoint, second: DesignPoint) -> bool:
    """Bit-for-bit the same K on the same plant object, and the same estimator object (or the same L and form)."""
    if first.gain.shape != second.gain.shape or first.gain.tobytes() != second.gain.tobytes():
        return False
    if (first.place or {}).get("plant") is not (second.place or {}).get("plant"):
        return False
    a, b = first.estimator, second.estimator
    if a is None or b is None:
        return a is b
    return a is b or (a.form == b.form and a.gain.shape == b.gain.shape and a.gain.tobytes() == b.gain.tobytes())


class EstimatorMixin:
    """Estimator methods of DesignState."""

    # -- what the evaluation is asked for ----------------------------------------------------------

    def _point(self) -> DesignPoint:
        return DesignPoint(np.array(self.gain, copy=True), self.estimator,
                           {name: getattr(self, name) for name in PLACE_INPUTS})

    def _estimator_options(self, detail: Detail, previous) -> core.EstimatorOptions | None:
        settings = self.estimator
        if settings is None:
            return None
        wanted = detail_options(detail)
        same = previous is not None and previous.plant is self.plant and previous.form == settings.form
        return core.EstimatorOptions(
            form=settings.form, initial_estimate=settings.initial_estimate,
            selected_entry=self.estimator_selected_entry if self.editing == "estimator" else None,
            include_margins=wanted.include_margins, include_all_entry_intervals=wanted.include_all_entry_intervals,
            previous_slider_ranges=previous.slider_ranges if same else None, gesture=wanted.gesture,
        )

    @property
    def estimator_enabled(self) -> bool:
        return self.estimator is not None

    # -- switching what is edited --------------------------------------------------------------

    def set_editing(self, mode: str) -> bool:
        """Edit the controller K or the estimator L ("controller" / "estimator")."""
        with self._reporting("switch what is edited"):
            if mode not in EDITING_MODES:
                raise core.EstimatorError(f"choose what to edit: {' or '.join(EDITING_MODES)}, not {mode!r}")
            if mode == self.editing:
                return True
            self._drag = None
            if mode == "estimator" and self.estimator is None:
                # one change, so every view sees the estimator and the mode together
                settings, note = self._first_estimator(None)
                self._change_design({"estimator": settings, "editing": mode}, live=False, note=note)
            else:
                self._set_inputs(self.refresh.release(), editing=mode)
            return True
        return False

    # -- the estimator itself ---------------------------------------------------------------------

    def _first_estimator(self, form: str | None) -> tuple[EstimatorDesign, str]:
        """A first L: Kalman from the plant's noise, else poles faster than the controller's."""
        form = core.check_estimator_form(self.plant, form)
        if self.plant.noise is not None and form != "reduced-order":
            result = core.design_kalman_estimator(self.plant, form=form)
            with param.edit_constant(self):
                self.kalman_result = result
            return EstimatorDesign.from_result(result), "A first estimator: the Kalman filter of the plant's noise."
        targets = self._faster_than_controller(form)
        try:
            result = core.assign_estimator_poles(self.plant, targets, form=form)
            return (EstimatorDesign.from_result(result, poles=targets),
                    f"A first estimator with poles {ESTIMATOR_SPEED_FACTOR:g}× faster than the controller's.")
        except core.GainboardError as placement_problem:
            if form == "reduced-order":
                raise
            try:
                result = core.design_kalman_estimator(self.plant, form=form)
            except core.GainboardError:
                raise placement_problem from None
            with param.edit_constant(self):
                self.kalman_result = result
            return (EstimatorDesign.from_result(result),
                    f"A first estimator: the Kalman filter with unit noise ({placement_problem}).")

    def _faster_than_controller(self, form: str) -> list[complex]:
        """Target poles: the controller's poles sped up (s → 3s, z → z³); n − p real ones for reduced order."""
        poles = np.asarray(self.evaluation.closed_loop.poles, dtype=complex)
        sampled = self.plant.is_sampled
        if form == "reduced-order":
            count = self.plant.state_count - self.plant.output_count
            if sampled:
                speed = float(np.max(-np.log(np.maximum(np.abs(poles), 1e-12))))
            else:
                speed = float(np.max(np.abs(poles)))
            speed = ESTIMATOR_SPEED_FACTOR * max(speed, 1e-3)
            continuous = [-speed * (1.0 + 0.2 * i) for i in range(count)]
            return [np.exp(s * self.plant.sample_time) if sampled else s for s in continuous]
        if sampled:
            return list(poles ** ESTIMATOR_SPEED_FACTOR)
        return list(poles * ESTIMATOR_SPEED_FACTOR)

    def _enable_estimator(self, form: str | None) -> None:
        settings, note = self._first_estimator(form)
        self._change_design({"estimator": settings}, live=False, note=note)

    def enable_estimator(self, form: str | None = None) -> bool:
        """Give the design an estimator (a first L; see :meth:`_first_estimator`)."""
        with self._reporting("add an estimator"):
            self._enable_estimator(form)
            return True
        return False

    def disable_estimator(self) -> bool:
        """Back to full-state feedback (one undo step)."""
        with self._reporting("remove the estimator"):
            self._drag = None
            changes = {"estimator": None}
            if self.editing != "controller":
                changes["editing"] = "controller"
            self._change_design(changes, live=False, note="The design is full-state feedback again.")
            return True
        return False

    def set_estimator_form(self, form: str) -> bool:
        """Change the estimator form; L is designed again for it (a first estimator of that form)."""
        with self._reporting(f"use the {form} estimator"):
            settings, note = self._first_estimator(form)
            self._change_design({"estimator": settings}, live=False, note=note)
            return True
        return False

    def set_estimator_gain(self, gain, *, live: bool = False, method: str = "by hand", poles=None,
                           note: str = "") -> bool:
        """Make ``gain`` the current L (the form stays)."""
        with self._reporting("use this estimator gain"):
            settings = self.estimator
            if settings is None:
                raise core.EstimatorError("the design has no estimator yet; switch to editing the estimator first")
            checked = core.check_estimator_gain(self.plant, gain, settings.form)
            new = replace(settings, gain=checked, method=method, poles=None if poles is None else tuple(poles),
                          process_noise=None if method != "steady-state Kalman filter" else settings.process_noise,
                          measurement_noise=None if method != "steady-state Kalman filter"
                          else settings.measurement_noise)
            self._change_design({"estimator": new}, live=live, note=note)
            return True
        return False

    def set_estimator_entry(self, row: int, col: int, value: float, *, live: bool = False) -> bool:
        """Set one entry l[row, col] (zero-based) of L and keep the others."""
        with self._reporting(f"set entry l{row + 1}{col + 1}"):
            self._check_estimator_entry(row, col)
            gain = np.array(self.estimator.gain, dtype=float, copy=True)
            gain[row, col] = float(value)
            return self.set_estimator_gain(gain, live=live)
        return False

    def _check_estimator_entry(self, row: int, col: int) -> None:
        if self.estimator is None:
            raise core.EstimatorError("the design has no estimator")
        rows, cols = self.estimator.gain.shape
        if not (0 <= row < rows and 0 <= col < cols):
            raise core.EstimatorError(f"L is {rows}×{cols}; there is no entry ({row + 1}, {col + 1})")

    def select_estimator_entry(self, row: int, col: int) -> None:
        """Show the locus of entry l[row, col] of L (editing the estimator)."""
        with self._reporting(f"show entry l{row + 1}{col + 1}"):
            self._check_estimator_entry(row, col)
            self._set_inputs(self.refresh.release(), estimator_selected_entry=(int(row), int(col)),
                             editing="estimator")

    def set_estimator_text(self, text: str) -> bool:
        """Set L from text such as ``[[120.6], [20]]`` (JSON rows)."""
        import json

        with self._reporting("read the estimator gain"):
            try:
                rows = json.loads(text)
            except json.JSONDecodeError:
                raise core.EstimatorError(f"write L as rows of numbers such as [[1], [2]]; could not read "
                                          f"{text.strip()[:60]!r}") from None
            return self.set_estimator_gain(rows)
        return False

    def place_estimator_poles(self, targets) -> bool:
        """L by pole assignment for a full list of estimator poles (typed in)."""
        with self._reporting("place the estimator poles there"):
            if self.estimator is None:
                self._enable_estimator(None)
            result = core.assign_estimator_poles(self.plant, list(targets), form=self.estimator.form)
            return self._apply_estimator_placement(result, targets, live=False, note="")
        return False

    def _apply_estimator_placement(self, result, targets, *, live: bool, note: str) -> bool:
        if not result.accurate:
            note = " ".join(n for n in (note, "The estimator poles could only be placed approximately:", result.note)
                            if n)
        accepted = self.set_estimator_gain(result.gain, live=live, method="pole assignment", poles=targets, note=note)
        if accepted:
            self.placement_summary = f"Estimator: {result.method}. {result.note}".strip()
        return accepted

    def default_kalman_weights(self) -> core.NoiseIntensities:
        """The noise a Kalman design starts from: the plant's ``[noise]``, else unit intensities (from the core)."""
        return core.estimator_noise(self.plant)

    def design_kalman(self, process_noise=None, measurement_noise=None) -> bool:
        """L as the steady-state Kalman filter for these noise intensities (default: the plant's, else unit)."""
        with self._reporting("design the Kalman filter"):
            form = self.estimator.form if self.estimator is not None else None
            if form == "reduced-order":
                form = None
            result = core.design_kalman_estimator(self.plant, process_noise, measurement_noise, form=form)
            with param.edit_constant(self):
                self.kalman_result = result
            self._change_design({"estimator": EstimatorDesign.from_result(result)}, live=False,
                                note="Adopted the Kalman filter gain as L.")
            return True
        return False

    # -- dragging estimator poles -------------------------------------------------------------

    def _begin_estimator_drag(self, index: int) -> bool:
        shown = self.estimator_evaluation
        if shown is None:
            return False
        poles = tuple(shown.estimator_poles.poles)
        if not 0 <= index < len(poles):
            return False
        self._drag = {"index": int(index), "poles": poles, "movable": shown.estimator_pole_movable,
                      "kind": "estimator"}
        return True

    def _drag_estimator_pole(self, drag: dict, target: complex, *, live: bool, snap_distance: float) -> bool:
        request = targets_after_drag(drag["poles"], drag["index"], target, snap_distance=snap_distance,
                                     movable=drag["movable"])
        drag["request"] = request
        result = core.assign_estimator_poles(self.plant, request.targets, form=self.estimator.form)
        return self._apply_estimator_placement(result, request.targets, live=live, note=request.note)
