"""A ratiometric sensor: output a fixed fraction of its supply across its pressure span.

Such a sensor (typically 10 % to 90 % of supply over its span, common practice) is judged on the
fraction, not the voltage, so a sagging supply does not look like a pressure change.  Outside the
span the line is extended as is; a caller who needs the sensor's own clamping checks the fraction.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import overload

import numpy as np

from rig.models._common import (
    F,
    FloatArray,
    ModelInputError,
    Real,
    as_array,
    first_bad,
    like,
    require_finite,
    shaped,
)


def _supply(v_supply: Real) -> FloatArray:
    vs = as_array(v_supply, "v_supply")
    bad = ~((vs > 0.0) & np.isfinite(vs))
    if np.any(bad):
        raise ModelInputError(
            f"v_supply = {first_bad(vs, bad)!r} V: expected a finite value above 0"
        )
    return vs


@dataclass(frozen=True)
class Ratiometric:
    """Linear from (p_min, frac_min) to (p_max, frac_max); pressure in the caller's unit."""

    p_min: float
    p_max: float
    frac_min: float = 0.1
    frac_max: float = 0.9

    def __post_init__(self) -> None:
        for name in ("p_min", "p_max", "frac_min", "frac_max"):
            require_finite(getattr(self, name), name)
        if self.p_max == self.p_min:
            raise ModelInputError(f"p_min and p_max must differ, both are {self.p_min!r}")
        for name in ("frac_min", "frac_max"):
            if not 0.0 <= getattr(self, name) <= 1.0:
                raise ModelInputError(f"{name} = {getattr(self, name)!r}: expected 0 to 1")
        if self.frac_max == self.frac_min:
            raise ModelInputError(f"frac_min and frac_max must differ, both are {self.frac_min!r}")

    @property
    def _slope(self) -> float:
        return (self.frac_max - self.frac_min) / (self.p_max - self.p_min)

    def fraction_at(self, pressure: F) -> F:
        """Output as a fraction of supply at ``pressure``."""
        p = as_array(pressure, "pressure")
        return like(self.frac_min + (p - self.p_min) * self._slope, pressure)

    @overload
    def output_v(self, pressure: float, v_supply: float) -> float: ...  # type: ignore[overload-overlap]
    @overload
    def output_v(self, pressure: Real, v_supply: Real) -> FloatArray: ...
    def output_v(self, pressure: Real, v_supply: Real) -> Real:
        """Output voltage in V at ``pressure`` from supply ``v_supply``."""
        p = as_array(pressure, "pressure")
        v = (self.frac_min + (p - self.p_min) * self._slope) * _supply(v_supply)
        return shaped(np.asarray(v, dtype=np.float64), pressure, v_supply)

    @overload
    def pressure_at(self, v_out: float, v_supply: float) -> float: ...  # type: ignore[overload-overlap]
    @overload
    def pressure_at(self, v_out: Real, v_supply: Real) -> FloatArray: ...
    def pressure_at(self, v_out: Real, v_supply: Real) -> Real:
        """Pressure that explains ``v_out`` at supply ``v_supply``."""
        frac = as_array(v_out, "v_out") / _supply(v_supply)
        p = self.p_min + (frac - self.frac_min) / self._slope
        return shaped(np.asarray(p, dtype=np.float64), v_out, v_supply)
