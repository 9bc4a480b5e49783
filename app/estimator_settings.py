"""The estimator part of a design: L, its form and how it was made, as a design file stores it.

In a design file (version 2) the top-level key ``"estimator"`` is ``null`` (full-state
feedback only) or::

    {
      "form": "prediction",                    // one of gainboard.core.ESTIMATOR_FORMS
      "L": [[...]],                            // n×p ((n − p)×p for "reduced-order")
      "method": "pole assignment",             // or "steady-state Kalman filter" or "by hand"
      "poles": [[re, im], ...] or null,        // the estimator poles asked for (pole assignment)
      "process_noise": [[...]] or null,        // W used by the Kalman design
      "measurement_noise": [[...]] or null,    // V used by the Kalman design
      "initial_estimate": [...] or null        // estimate at the start of the initial response
    }

Everything is validated against the plant when a design is built, so a file whose L
does not fit its plant is refused with a message naming the key.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from gainboard import core

__all__ = ["ESTIMATOR_METHODS", "EstimatorDesign", "estimator_to_mapping", "estimator_from_mapping"]

#: How an estimator gain can have been made.
ESTIMATOR_METHODS = ("pole assignment", "steady-state Kalman filter", "by hand")

_KEYS = {"form", "L", "method", "poles", "process_noise", "measurement_noise", "initial_estimate"}


class EstimatorSettingsError(core.GainboardError, ValueError):
    """The estimator part of a design is malformed."""


def _frozen(matrix) -> np.ndarray | None:
    if matrix is None:
        return None
    out = np.array(matrix, dtype=float, copy=True)
    out.setflags(write=False)
    return out


@dataclass(frozen=True, eq=False)
class EstimatorDesign:
    """The estimator of a design: form, gain L and the settings it came from.

    Examples
    --------
    >>> plant = core.Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]], C=[[1.0, 0.0]])
    >>> settings = EstimatorDesign(form="full-order", gain=[[6.0], [25.0]], poles=(-3 + 4j, -3 - 4j))
    >>> settings.checked_for(plant).gain.tolist()
    [[6.0], [25.0]]
    """

    form: str
    gain: np.ndarray
    method: str = "by hand"
    poles: tuple[complex, ...] | None = None
    process_noise: np.ndarray | None = None
    measurement_noise: np.ndarray | None = None
    initial_estimate: np.ndarray | None = None

    def __post_init__(self):
        set_ = lambda key, value: object.__setattr__(self, key, value)  # noqa: E731
        if self.form not in core.ESTIMATOR_FORMS:
            raise EstimatorSettingsError(f"estimator form {self.form!r} is not known; use one of "
                                         f"{', '.join(core.ESTIMATOR_FORMS)}")
        if self.method not in ESTIMATOR_METHODS:
            raise EstimatorSettingsError(f"estimator method {self.method!r} is not known; use one of "
                                         f"{', '.join(ESTIMATOR_METHODS)}")
        set_("gain", _frozen(self.gain))
        if self.poles is not None:
            set_("poles", tuple(complex(p) for p in self.poles))
        for key in ("process_noise", "measurement_noise", "initial_estimate"):
            set_(key, _frozen(getattr(self, key)))

    def checked_for(self, plant: core.Plant) -> "EstimatorDesign":
        """The same settings with every part checked against ``plant`` (form, L shape, noise, estimate)."""
        form = core.check_estimator_form(plant, self.form)
        gain = core.check_estimator_gain(plant, self.gain, form)
        if self.process_noise is not None or self.measurement_noise is not None:
            if self.process_noise is None or self.measurement_noise is None:
                raise EstimatorSettingsError("the estimator's process_noise and measurement_noise go together")
            core.estimator_noise(plant, self.process_noise, self.measurement_noise)
        estimate = self.initial_estimate
        if estimate is not None:
            estimate = np.asarray(estimate, dtype=float).reshape(-1)
            if estimate.shape != (plant.state_count,) or not np.all(np.isfinite(estimate)):
                raise EstimatorSettingsError(f"the initial estimate must be {plant.state_count} finite numbers, one "
                                             f"per state, got {estimate.tolist()!r}")
        return replace(self, form=form, gain=gain, initial_estimate=estimate)

    @classmethod
    def from_result(cls, result: core.EstimatorResult, poles=None, initial_estimate=None) -> "EstimatorDesign":
        """The settings of a core estimator design (pole assignment or Kalman)."""
        noise = result.noise
        return cls(
            form=result.form, gain=result.gain, method=result.design,
            poles=None if poles is None else tuple(complex(p) for p in poles),
            process_noise=None if noise is None else noise.process,
            measurement_noise=None if noise is None else noise.measurement,
            initial_estimate=initial_estimate,
        )


def _rows(matrix) -> list | None:
    return None if matrix is None else [[float(v) for v in row] for row in np.asarray(matrix, dtype=float)]


def estimator_to_mapping(settings: EstimatorDesign | None) -> dict | None:
    """The ``"estimator"`` value of a design file (every float exact)."""
    if settings is None:
        return None
    return {
        "form": settings.form,
        "L": _rows(settings.gain),
        "method": settings.method,
        "poles": None if settings.poles is None else [[float(p.real), float(p.imag)] for p in settings.poles],
        "process_noise": _rows(settings.process_noise),
        "measurement_noise": _rows(settings.measurement_noise),
        "initial_estimate": None if settings.initial_estimate is None else [float(v) for v in settings.initial_estimate],
    }


def _numbers(value, what: str, depth: int):
    """Check nested lists of numbers (depth 1: a list, depth 2: rows) without guessing shapes."""
    if not isinstance(value, list):
        raise EstimatorSettingsError(f"{what} must be a list{' of rows' if depth == 2 else ''}, got {value!r}"[:300])
    for item in value:
        if depth == 2:
            _numbers(item, what, 1)
        elif isinstance(item, bool) or not isinstance(item, (int, float)):
            raise EstimatorSettingsError(f"{what} contains {item!r}, which is not a number"[:300])
    return value


def estimator_from_mapping(data, where: str = "estimator") -> EstimatorDesign | None:
    """Read the ``"estimator"`` value of a design file (``None`` stays ``None``)."""
    if data is None:
        return None
    if not isinstance(data, dict):
        raise EstimatorSettingsError(f"{where} must be an object {{\"form\": ..., \"L\": [[...]], ...}} or null")
    unknown = set(data) - _KEYS
    if unknown:
        raise EstimatorSettingsError(f"{where} has unknown key(s) {sorted(unknown)}; allowed are {sorted(_KEYS)}")
    for key in ("form", "L"):
        if key not in data:
            raise EstimatorSettingsError(f"{where} must give \"{key}\"")
    if not isinstance(data["form"], str) or not isinstance(data.get("method", "by hand"), str):
        raise EstimatorSettingsError(f"{where}: \"form\" and \"method\" must be text")
    poles = data.get("poles")
    if poles is not None:
        _numbers(poles, f"{where} poles", 2)
        if any(len(pair) != 2 for pair in poles):
            raise EstimatorSettingsError(f"{where} poles must be [re, im] pairs")
        poles = tuple(complex(re, im) for re, im in poles)
    matrices = {key: None if data.get(key) is None else _numbers(data[key], f"{where} {key}", 2)
                for key in ("L", "process_noise", "measurement_noise")}
    estimate = data.get("initial_estimate")
    if estimate is not None:
        _numbers(estimate, f"{where} initial_estimate", 1)
    lengths = {len(row) for row in matrices["L"]}
    if len(lengths) > 1 or not matrices["L"]:
        raise EstimatorSettingsError(f"{where} L must be a non-empty list of rows of equal length")
    return EstimatorDesign(form=data["form"], gain=matrices["L"], method=data.get("method", "by hand"), poles=poles,
                           process_noise=matrices["process_noise"], measurement_noise=matrices["measurement_noise"],
                           initial_estimate=estimate)
