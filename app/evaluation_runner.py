"""Where a design's evaluations run: at once in the caller (tests, scripts) or off the event loop (served).

A :class:`DesignState` hands each evaluation it needs to a runner as an
:class:`EvaluationRequest` with a function to deliver the result to. The inline
runner computes it at once, so a state used from Python or a test is synchronous.
The served workbench uses a pooled runner (see :mod:`gainboard.app.evaluation_pool`):
the computation runs in a bounded executor and the result is delivered on the
session's own event loop, newest request first, stale ones dropped.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from gainboard import core

from .refresh_policy import Detail

__all__ = ["EvaluationRequest", "Placed", "Delivery", "InlineRunner", "evaluate_request"]


@dataclass(frozen=True, eq=False)
class EvaluationRequest:
    """One evaluation a session asks for.

    Attributes
    ----------
    sequence : int
        Counts the session's requests; a result is shown only if no newer one has been shown.
    plant : gainboard.core.Plant
    gain : numpy.ndarray, shape (m, n)
    options : gainboard.core.EvaluationOptions
    detail : Detail
        The level of detail the options were made for (see :mod:`gainboard.app.refresh_policy`).
    inputs : dict
        The state's inputs this evaluation describes (restored if a newer one fails).
    refine : gainboard.core.DesignEvaluation or None
        When set, the request only adds the stable intervals of every entry to this evaluation.
    targets : tuple of complex or None
        When set, K is first computed by pole assignment for these closed-loop poles (a pole
        drag, typed targets) and the result is a :class:`Placed`.
    estimator_gain : numpy.ndarray or None
        L of the design's estimator; with it the result is a
        :class:`gainboard.core.ObserverDesignEvaluation` (the compensator evaluated too).
    estimator_options : gainboard.core.EstimatorOptions or None
        What to compute for the estimator side.
    """

    sequence: int
    plant: core.Plant
    gain: np.ndarray
    options: core.EvaluationOptions
    detail: Detail
    inputs: dict
    refine: object | None = None
    targets: tuple | None = None
    estimator_gain: np.ndarray | None = None
    estimator_options: object | None = None


@dataclass(frozen=True, eq=False)
class Placed:
    """The result of a request with targets: the pole assignment and the evaluation of its K."""

    placement: object
    evaluation: object


#: ``deliver(request, evaluation, error)``: exactly one of evaluation and error is None.
Delivery = Callable[[EvaluationRequest, object, BaseException], None]


def evaluate_request(request: EvaluationRequest):
    """The computation itself (the same in every runner): a few calls of the core.

    With targets, K is computed by pole assignment first and the result is a :class:`Placed`.
    With an estimator gain the evaluation is an :class:`gainboard.core.ObserverDesignEvaluation`:
    full-state feedback of K and the compensator with L, sharing the margins of K.
    """
    refine = request.refine
    if isinstance(refine, core.ObserverDesignEvaluation):
        refine = refine.design
    gain, placement = request.gain, None
    if request.targets is not None and refine is None:
        placement = core.assign_poles(request.plant, list(request.targets))
        gain = placement.gain
    if request.estimator_gain is None:
        if refine is not None:
            evaluation = core.with_all_entry_intervals(refine)
        else:
            evaluation = core.evaluate_design(request.plant, gain, request.options)
    elif refine is None:
        evaluation = core.evaluate_observer_design(request.plant, gain, request.estimator_gain, request.options,
                                                   request.estimator_options)
    else:
        design = core.with_all_entry_intervals(refine)
        compensator = core.evaluate_compensator(request.plant, design.gain, request.estimator_gain,
                                                request.estimator_options, state_feedback_margins=design.margins)
        evaluation = core.ObserverDesignEvaluation(design=design, compensator=compensator)
    return evaluation if placement is None else Placed(placement, evaluation)


class InlineRunner:
    """Evaluates at once, in the caller's thread (a state used from Python, the tests)."""

    #: Results (and failures) are delivered before ``submit`` returns.
    synchronous = True

    def submit(self, request: EvaluationRequest, deliver: Delivery) -> None:
        try:
            evaluation = evaluate_request(request)
        except Exception as error:  # delivered: the state decides what the user sees
            deliver(request, None, error)
            return
        deliver(request, evaluation, None)

    def close(self) -> None:
        """Nothing to release."""
