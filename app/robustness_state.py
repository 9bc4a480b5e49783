"""The robustness side of one workbench session: the plant family, its operating points, sampling.

:class:`RobustnessState` follows a :class:`~gainboard.app.state.DesignState`: when its plant or
K changes it judges K on every operating point, finds the gain ranges stable for all of them
and the model at the parameter the user moved — each by one core call, here and nowhere else.
A Monte Carlo run goes to a background thread (or a Dask cluster) so that no session waits for
it; its progress and result come back through ``deliver``, which the workbench points at the
session's own event loop. Like DesignState it knows nothing of Panel or Bokeh and never raises:
problems are reported in :attr:`message`.
"""

from __future__ import annotations

import logging
import threading

import numpy as np
import param

from gainboard import core

from .refresh_policy import Detail

__all__ = ["RobustnessState", "SAMPLING_CAUTION", "MAX_SAMPLES"]

#: Shown wherever a sampled fraction is shown (the views take it from here, not from the core).
SAMPLING_CAUTION = core.SAMPLING_CAUTION
MAX_SAMPLES = core.MAX_SAMPLES

log = logging.getLogger(__name__)

#: Sampled poles kept for the pole map's cloud.
CLOUD_SAMPLES = 10_000


class RobustnessState(param.Parameterized):
    """Operating points, common stable ranges, one moved parameter and Monte Carlo for a design."""

    family = param.Parameter(default=None, constant=True,
                             doc="The plant family of the loaded plant file, or None when the plant is not one.")
    family_note = param.String(default="", doc="Why there is no family (plant edited, sampled, plain file).")
    report = param.Parameter(default=None, constant=True, doc="OperatingPointsReport of the current K.")
    common = param.Parameter(default=None, constant=True,
                             doc="Gain entry → CommonEntryInterval: values stable for every operating point.")
    envelope = param.Parameter(default=None, constant=True, doc="ResponseEnvelope of the reference step.")
    envelopes = param.Dict(default={}, constant=True,
                           doc="Response kind → one ResponseEnvelope per output, over the operating points.")
    spec_over_points = param.Parameter(default=(), constant=True,
                                       doc="Each spec's worst case and pass count over the operating points.")
    moved_parameter = param.String(default="", doc="The parameter moved in the parameter panel.")
    moved_value = param.Number(default=0.0, doc="Its value.")
    moved = param.Parameter(default=None, constant=True,
                            doc="ClosedLoopReport of the model at the moved parameter (others nominal).")
    samples = param.Integer(default=10_000, bounds=(1, core.MAX_SAMPLES), doc="Number of Monte Carlo samples.")
    seed = param.Integer(default=0, bounds=(0, None), doc="Seed of the sampling; the same seed, the same figures.")
    scheduler = param.String(default="", doc="Address of a Dask scheduler to sample on; empty: this server.")
    running = param.Boolean(default=False, constant=True, doc="A sampling is running.")
    progress = param.Number(default=0.0, bounds=(0.0, 1.0), constant=True, doc="Fraction of samples done.")
    result = param.Parameter(default=None, constant=True, doc="The last MonteCarloResult, or None.")
    result_is_current = param.Boolean(default=False, constant=True,
                                      doc="False once plant or K changed after the sampling.")
    message = param.String(default="", doc="The last note or error of the robustness views.")
    revision = param.Integer(default=0, constant=True, doc="Counts refreshes, for views and tests.")

    def __init__(self, design, deliver=None, background: bool = False, **params):
        super().__init__(**params)
        self.design = design
        #: Runs a function in the session's own thread (the workbench sets it); default: at once.
        self.deliver = deliver or (lambda function: function())
        #: Judge the operating points in a worker thread (a served session) instead of at once.
        self.background = background
        self._lock = threading.Lock()
        self._request = 0
        self._pending = None
        self._working = False
        self._cancel = threading.Event()
        self._thread: threading.Thread | None = None
        self._family_source = None
        self._sampled_for = None
        # after the session's own views (precedence 0), so they have redrawn from the evaluation first
        design.param.watch(self._on_design, ["evaluation"], precedence=1)
        self.refresh()

    # -- following the design --------------------------------------------------------------------

    def _on_design(self, *events) -> None:
        if self.design.detail != Detail.COMPLETE:  # a gesture step: the operating points follow its release
            return
        self.refresh()

    def strip_range(self, row: int, col: int) -> tuple[float, float]:
        """The range of the gain slider of k[row, col] (from the evaluation's view ranges), for the strips."""
        evaluation = self.design.evaluation
        found = evaluation.view_ranges.sliders.get((row, col)) if evaluation is not None else None
        if found is not None:
            return found.low, found.high
        return core.default_entry_range(self.design.plant, self.design.gain, row, col)

    def _family_for(self, plant: core.Plant):
        """The family whose nominal model is exactly the design's plant, else (None, reason)."""
        text = self.design.plant_text
        if self._family_source is not None and self._family_source[:2] == (text, plant):
            return self._family_source[2:]
        family, note = None, ""
        try:
            family = core.parse_plant_family_text(text) if text else None
        except core.GainboardError:
            family = None
        if family is None or not (family.parameters or family.operating_points):
            family, note = None, "This plant file has no [parameters] or [[operating_points]]."
        elif not all(np.array_equal(getattr(family.nominal, key), getattr(plant, key)) for key in ("A", "B", "C", "D")) \
                or family.nominal.sample_time != plant.sample_time:
            family, note = None, ("The plant was changed after it was loaded (edited or sampled), so its "
                                  "parameters and operating points no longer apply.")
        self._family_source = (text, plant, family, note)
        return family, note

    def refresh(self) -> None:
        """Judge the current K on every operating point (one call per result, from the core).

        With ``background`` set the work (margins at every point are the slow part) runs in a
        worker thread and the newest request wins; the results come back through ``deliver``.
        """
        plant, gain, specs = self.design.plant, self.design.gain.copy(), self.design.specs
        family, note = self._family_for(plant)
        self._request += 1
        request = self._request
        if family is None or not self.background:
            self._apply(request, family, note, plant, gain, specs, *self._judge(family, gain, specs))
            return
        with self._lock:  # one worker at a time; it takes the newest request when it is free
            self._pending = (request, family, note, plant, gain, specs)
            if self._working:
                return
            self._working = True
        threading.Thread(target=self._work_pending, name="gainboard-operating-points", daemon=True).start()

    def _work_pending(self) -> None:
        while True:
            with self._lock:
                pending, self._pending = self._pending, None
                if pending is None:
                    self._working = False
                    return
            request, family, note, plant, gain, specs = pending
            results = self._judge(family, gain, specs)
            self.deliver(lambda: self._apply(request, family, note, plant, gain, specs, *results))

    @staticmethod
    def _judge(family, gain, specs):
        """(report, common, envelope, spec_over_points, message) of K on the family: the core's calls only."""
        if family is None:
            return None, None, (None, {}), (), ""
        try:
            report = core.evaluate_operating_points(family, gain, specs=specs)
            common = core.common_entry_intervals(family, gain)
            outputs = range(family.nominal.output_count)
            envelopes = {kind: tuple(core.response_envelope(report, kind, k) for k in outputs)
                         for kind in ("initial", "step", "disturbance")
                         if getattr(report.points[0].evaluation.responses, kind) is not None}
            envelope = core.response_envelope(report, "step") or core.response_envelope(report, "initial")
            return report, common, (envelope, envelopes), core.spec_checks_over_points(report), ""
        except core.GainboardError as error:
            return None, None, (None, {}), (), f"Operating points not evaluated: {error}"
        except Exception as error:  # a worker failure is shown, never lost
            log.exception("evaluating the operating points failed")
            return None, None, (None, {}), (), f"Operating points not evaluated: {type(error).__name__}: {error}"

    def _apply(self, request, family, note, plant, gain, specs, report, common, envelopes, over_points,
               message) -> None:
        if request != self._request:  # a newer design is on its way
            return
        stale = self._sampled_for is None or self._sampled_for != (id(plant), gain.tobytes(), id(specs))
        with param.edit_constant(self):
            self.param.update(family=family, family_note=note, report=report, common=common,
                              envelope=envelopes[0], envelopes=envelopes[1], spec_over_points=over_points, result_is_current=not stale and self.result is not None,
                              message=message)
        if family is not None and family.parameters and self.moved_parameter not in family.parameter_names:
            first = (family.varying_parameters or family.parameters)[0]
            self.move_parameter(first.name, first.nominal)
        else:
            self._refresh_moved()
        with param.edit_constant(self):
            self.revision += 1

    # -- the parameter panel ---------------------------------------------------------------------

    def move_parameter(self, name: str, value: float) -> None:
        """Show the model with ``name`` at ``value`` and the other parameters at nominal."""
        self.param.update(moved_parameter=name, moved_value=float(value))
        self._refresh_moved()

    def _refresh_moved(self) -> None:
        moved = None
        family = self.family
        if family is not None and self.moved_parameter in family.parameter_names:
            try:
                plant = family.plant_at({self.moved_parameter: self.moved_value})
                moved = core.analyze_closed_loop(plant, self.design.gain)
            except core.GainboardError as error:
                self.message = f"{self.moved_parameter} = {self.moved_value:g}: {error}"
        with param.edit_constant(self):
            self.moved = moved

    # -- Monte Carlo -----------------------------------------------------------------------------

    def start_sampling(self) -> bool:
        """Start a Monte Carlo run in the background; False (with a message) when it cannot start."""
        if self.running:
            self.message = "A sampling is already running; cancel it first."
            return False
        family = self.family
        if family is None:
            self.message = self.family_note or "This plant has no parameters to sample."
            return False
        try:
            specs = self.design.specs
            plan = core.plan_monte_carlo(family, self.design.gain, samples=self.samples, seed=self.seed,
                                         specs=specs, include_margins=core.margins_needed(specs),
                                         keep_poles=CLOUD_SAMPLES)
        except core.GainboardError as error:
            self.message = f"Cannot sample: {error}"
            return False
        key = (id(self.design.plant), self.design.gain.tobytes(), id(self.design.specs))
        self._cancel = threading.Event()
        cancel, scheduler = self._cancel, self.scheduler.strip() or None
        with param.edit_constant(self):
            self.param.update(running=True, progress=0.0)
        self.message = f"Sampling {plan.samples} models…"

        def progress(done: int, total: int) -> None:
            self.deliver(lambda: self._set_progress(done / total))

        def work() -> None:
            try:
                if scheduler is None:
                    result = core.run_monte_carlo(plan, progress=progress, cancelled=cancel.is_set)
                else:
                    result = core.run_monte_carlo_on_dask(plan, scheduler, progress=progress, cancelled=cancel.is_set)
            except core.SamplingCancelled:
                outcome, text = None, "Sampling cancelled."
            except core.GainboardError as error:
                outcome, text = None, f"Sampling failed: {error}"
            except Exception as error:  # never let a background failure pass silently
                log.exception("a Monte Carlo run failed")
                outcome, text = None, f"Sampling failed: {type(error).__name__}: {error}"
            else:
                outcome, text = result, ""
            self.deliver(lambda: self._finish(outcome, text, key))

        self._thread = threading.Thread(target=work, name="gainboard-sampling", daemon=True)
        self._thread.start()
        return True

    def cancel_sampling(self) -> None:
        """Ask the running sampling to stop after its current chunk."""
        if self.running:
            self._cancel.set()
            self.message = "Cancelling after the current chunk…"

    def wait(self, timeout: float | None = None) -> None:
        """Wait for a running sampling's thread (tests and shutdown)."""
        if self._thread is not None:
            self._thread.join(timeout)

    def _set_progress(self, value: float) -> None:
        with param.edit_constant(self):
            self.progress = min(max(value, 0.0), 1.0)

    def _finish(self, result, message: str, key) -> None:
        with param.edit_constant(self):
            if result is not None:
                self._sampled_for = key
                current = key == (id(self.design.plant), self.design.gain.tobytes(), id(self.design.specs))
                self.param.update(result=result, result_is_current=current, progress=1.0)
            self.running = False
        self.message = message
