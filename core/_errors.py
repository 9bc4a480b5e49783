"""Exception types raised by the numeric core.

Every message is written for the engineer at the screen: it names what is
wrong (the key, the shape found, the shape expected, the pole) and what to do.
"""

__all__ = [
    "GainboardError",
    "PlantError",
    "GainError",
    "PlacementError",
    "AnalysisError",
    "EstimatorError",
]


class GainboardError(Exception):
    """Base class of every error that gainboard reports to its user."""


class PlantError(GainboardError, ValueError):
    """A plant model or plant file is malformed or inconsistent."""


class GainError(GainboardError, ValueError):
    """A feedback gain K has the wrong shape or non-finite entries."""


class PlacementError(GainboardError):
    """A pole-assignment request cannot be met (uncontrollable pole, multiplicity, conjugates)."""


class AnalysisError(GainboardError):
    """An analysis cannot be carried out for this design (singular DC gain, bad weights, ...)."""


class EstimatorError(GainboardError, ValueError):
    """An estimator gain L, its noise intensities or its settings are malformed or cannot be met."""
