"""The LQR comparison of a design state: weights (Bryson's rule by default), the LQR gain and its poles.

A mixin of :class:`gainboard.app.state.DesignState` (its parameters ``lqr_weights``,
``lqr_result`` and ``lqr_poles`` are declared there); the numbers come from the core.
"""

from __future__ import annotations

import logging

import numpy as np
import param

from gainboard import core

__all__ = ["LqrMixin"]

log = logging.getLogger(__name__)


class LqrMixin:
    """LQR comparison methods of DesignState."""

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
            with param.edit_constant(self):
                self.param.update(lqr_weights=(Q, R), lqr_result=result, lqr_poles=tuple(result.closed_loop_poles))
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
