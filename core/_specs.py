"""Design specifications: what a good K must achieve."""

from __future__ import annotations

import math
from dataclasses import dataclass, fields

from ._errors import PlantError

__all__ = ["DesignSpecs"]


@dataclass(frozen=True)
class DesignSpecs:
    """Targets a design is checked against; ``None`` means "not specified".

    Parameters
    ----------
    max_settling_time : float, optional
        Longest allowed settling time in seconds (reference step and initial-condition
        responses), measured with the band ``settling_band``.
    max_overshoot_percent : float, optional
        Largest allowed step overshoot in percent of the final value.
    min_damping_ratio : float, optional
        Smallest allowed damping ratio of any closed-loop pole (0..1).
    max_input_magnitude : tuple of float, optional
        Largest allowed peak |u| of each input over the responses, in input units.
    min_gain_margin_db : float, optional
        Smallest allowed gain margin (both directions) in decibels, loop broken at the plant input.
    min_phase_margin_deg : float, optional
        Smallest allowed phase margin in degrees, loop broken at the plant input.
    settling_band : float
        Relative band for settling time (0.02 means within 2 % of the final value).
    """

    max_settling_time: float | None = None
    max_overshoot_percent: float | None = None
    min_damping_ratio: float | None = None
    max_input_magnitude: tuple[float, ...] | None = None
    min_gain_margin_db: float | None = None
    min_phase_margin_deg: float | None = None
    settling_band: float = 0.02

    def __post_init__(self):
        for spec in fields(self):
            value = getattr(self, spec.name)
            if value is None:
                continue
            values = value if spec.name == "max_input_magnitude" else (value,)
            if spec.name == "max_input_magnitude":
                if not isinstance(value, (list, tuple)):
                    raise PlantError(f"specs: {spec.name} must be a list with one number per input, got {value!r}")
                object.__setattr__(self, spec.name, tuple(float(v) for v in value))
            for v in values:
                if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
                    raise PlantError(f"specs: {spec.name} must be a finite number, got {v!r}")
                if v < 0:
                    raise PlantError(f"specs: {spec.name} must not be negative, got {v!r}")
            if spec.name != "max_input_magnitude":
                object.__setattr__(self, spec.name, float(value))
        if self.min_damping_ratio is not None and self.min_damping_ratio > 1:
            raise PlantError(f"specs: min_damping_ratio must lie between 0 and 1, got {self.min_damping_ratio}")
        if not 0 < self.settling_band < 1:
            raise PlantError(f"specs: settling_band must lie between 0 and 1 (0.02 for 2 %), got {self.settling_band}")

    @classmethod
    def field_names(cls) -> tuple[str, ...]:
        """Names of every spec, as used in plant and spec files."""
        return tuple(f.name for f in fields(cls))
