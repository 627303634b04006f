"""Platinum resistance thermometers: Callendar-Van Dusen per IEC 60751.

R(t) = R0 [1 + A t + B t^2 + C (t - 100) t^3], the C term only below 0 degC.  Above 0 degC the
inverse is the quadratic's closed form; below, the quartic is solved by Newton iteration started
from that closed form, which converges in a few steps because the C term is tiny.
The standard defines the curve from -200 degC to 850 degC; values outside are refused.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np

from rig.models._common import (
    F,
    FloatArray,
    ModelInputError,
    as_array,
    check_range,
    like,
    require_finite,
    require_positive,
)

T_MIN_C = -200.0
T_MAX_C = 850.0
"""The span over which IEC 60751 defines the curve."""

IEC_A = 3.9083e-3
IEC_B = -5.775e-7
IEC_C = -4.183e-12
"""IEC 60751 coefficients, per degC, degC^2 and degC^4."""

ToleranceClass = Literal["AA", "A", "B"]

TOLERANCE_CLASSES: dict[str, tuple[float, float]] = {
    "AA": (0.10, 0.0017),
    "A": (0.15, 0.002),
    "B": (0.30, 0.005),
}
"""IEC 60751 class tolerance +-(fixed + per_degree |t|) degC."""

CLASS_SPAN_WIRE_WOUND_C: dict[str, tuple[float, float]] = {
    "AA": (-50.0, 250.0),
    "A": (-100.0, 450.0),
    "B": (-196.0, 600.0),
}
"""The temperatures over which IEC 60751:2008 (Table 1) gives each class for a wire-wound
element (checked against a published summary of the table, December 2026): the widest a class
is valid for, whatever the construction."""

CLASS_SPAN_FILM_C: dict[str, tuple[float, float]] = {
    "AA": (0.0, 150.0),
    "A": (-30.0, 300.0),
    "B": (-50.0, 500.0),
}
"""The same for a film element (IEC 60751:2008, Table 1, from memory): narrower."""


def class_span_note(cls: str, temps_c: tuple[float, ...]) -> str:
    """Why a class tolerance applied at ``temps_c`` is not one IEC 60751 gives (empty where
    every temperature lies within the class's wire-wound span).  The element's construction is
    not known, so only the wider span is held against it, and the note says the film one is
    narrower: the class's formula is still applied, as an extrapolation the reader must weigh."""
    if cls not in CLASS_SPAN_WIRE_WOUND_C:
        return ""
    low, high = CLASS_SPAN_WIRE_WOUND_C[cls]
    outside = sorted({t for t in temps_c if math.isfinite(t) and not low <= t <= high})
    if not outside:
        return ""
    film_low, film_high = CLASS_SPAN_FILM_C[cls]
    at = " and ".join(f"{t:g} degC" for t in outside)
    return (
        f"class {cls} is judged at {at}, outside the {low:g} to {high:g} degC IEC 60751 gives "
        f"it for a wire-wound element (a film element's span is narrower, {film_low:g} to "
        f"{film_high:g} degC): its tolerance there is an extrapolation"
    )


@dataclass(frozen=True)
class Rtd:
    """A platinum RTD of nominal resistance ``r0_ohm`` at 0 degC."""

    r0_ohm: float = 100.0
    a: float = IEC_A
    b: float = IEC_B
    c: float = IEC_C

    def __post_init__(self) -> None:
        require_positive(self.r0_ohm, "r0_ohm")
        require_positive(self.a, "a")
        require_finite(self.b, "b")
        require_finite(self.c, "c")

    def _ratio(self, t: FloatArray) -> FloatArray:
        low = np.where(t < 0.0, self.c * (t - 100.0) * t**3, 0.0)
        return np.asarray(1.0 + self.a * t + self.b * t**2 + low, dtype=np.float64)

    def _slope(self, t: FloatArray) -> FloatArray:
        low = np.where(t < 0.0, self.c * (4.0 * t**3 - 300.0 * t**2), 0.0)
        return np.asarray(self.r0_ohm * (self.a + 2.0 * self.b * t + low), dtype=np.float64)

    def r_at(self, temp_c: F) -> F:
        """Resistance in ohm at ``temp_c`` (-200 to 850 degC)."""
        t = as_array(temp_c, "temp_c")
        check_range(t, "temp_c", T_MIN_C, T_MAX_C, "degC")
        return like(self.r0_ohm * self._ratio(t), temp_c)

    def r_of_element(self, temp_c: FloatArray, deviation_c: FloatArray) -> FloatArray:
        """Resistance of an element at ``temp_c`` (-200 to 850 degC) that deviates from the curve
        by ``deviation_c``: the curve read at ``temp_c + deviation_c``.

        IEC 60751 states an element's tolerance as a deviation in degC from the curve, so an
        element at the end of the span may read as the curve a little past it; the polynomial is
        carried on that far (at most a class tolerance, 4.55 degC for class B at 850 degC) rather
        than refusing an element whose own temperature is inside the span.
        """
        t = as_array(temp_c, "temp_c")
        check_range(t, "temp_c", T_MIN_C, T_MAX_C, "degC")
        dev = as_array(deviation_c, "deviation_c")
        if np.any(~np.isfinite(dev)):
            raise ModelInputError("deviation_c must be finite")
        return np.asarray(self.r0_ohm * self._ratio(t + dev), dtype=np.float64)

    def dr_dt(self, temp_c: F) -> F:
        """Slope dR/dT in ohm per kelvin at ``temp_c``."""
        t = as_array(temp_c, "temp_c")
        check_range(t, "temp_c", T_MIN_C, T_MAX_C, "degC")
        return like(self._slope(t), temp_c)

    def r_span(self) -> tuple[float, float]:
        """The resistances at the ends of the curve (-200 and 850 degC): all it can read."""
        r_lo = float(self.r0_ohm * self._ratio(np.array(T_MIN_C)))
        r_hi = float(self.r0_ohm * self._ratio(np.array(T_MAX_C)))
        return r_lo, r_hi

    def t_at(self, r_ohm: F) -> F:
        """Temperature in degC at ``r_ohm``, valid on both sides of 0 degC."""
        r = as_array(r_ohm, "r_ohm")
        check_range(r, "r_ohm", *self.r_span(), "ohm")
        ratio = r / self.r0_ohm
        # closed form of 1 + A t + B t^2 = ratio, the root that is near A t for small t
        t = (-self.a + np.sqrt(self.a**2 - 4.0 * self.b * (1.0 - ratio))) / (2.0 * self.b)
        below = ratio < 1.0
        if np.any(below):
            t = np.where(below, self._newton(r, np.asarray(t, dtype=np.float64)), t)
        return like(np.asarray(t, dtype=np.float64), r_ohm)

    def _newton(self, r: FloatArray, t: FloatArray) -> FloatArray:
        """Refine ``t`` so that r_at(t) = r below 0 degC; converges in a few steps."""
        for _ in range(50):
            step = (self.r0_ohm * self._ratio(t) - r) / self._slope(t)
            t = np.minimum(t - step, 0.0)
            if np.all(np.abs(step) < 1e-12):
                break
        return t

    def tolerance_c(self, temp_c: F, cls: ToleranceClass) -> F:
        """Permitted deviation +-degC of a class AA, A or B element at ``temp_c`` (IEC 60751)."""
        return tolerance_c(temp_c, cls)

    def class_tolerance_ohm(self, temp_c: F, cls: ToleranceClass) -> F:
        """Permitted deviation +-ohm of a class AA, A or B element at ``temp_c``: the class's
        tolerance in degC through the curve's slope there (IEC 60751).  One function for a run's
        one temperature and for every unit ``rig limits`` draws, so both judge alike."""
        t = as_array(temp_c, "temp_c")
        allowed = np.asarray(tolerance_c(t, cls) * self.dr_dt(t), dtype=np.float64)
        return like(allowed, temp_c)


def tolerance_c(temp_c: F, cls: ToleranceClass) -> F:
    """Permitted deviation +-degC of a class AA, A or B element at ``temp_c`` (IEC 60751)."""
    if cls not in TOLERANCE_CLASSES:
        raise ModelInputError(
            f"tolerance class {cls!r} is not known: expected one of {', '.join(TOLERANCE_CLASSES)}"
        )
    fixed, per_degree = TOLERANCE_CLASSES[cls]
    t = as_array(temp_c, "temp_c")
    if np.any(~np.isfinite(t)):
        raise ModelInputError("temp_c must be finite")
    return like(fixed + per_degree * np.abs(t), temp_c)


PT100 = Rtd(r0_ohm=100.0)
PT1000 = Rtd(r0_ohm=1000.0)
"""The two common IEC 60751 elements."""

__all__ = [
    "CLASS_SPAN_FILM_C",
    "CLASS_SPAN_WIRE_WOUND_C",
    "IEC_A",
    "IEC_B",
    "IEC_C",
    "PT100",
    "PT1000",
    "Rtd",
    "ToleranceClass",
    "class_span_note",
    "tolerance_c",
]


R0_STEP = 10.0
"""The ratio between the usual nominal resistances, 100 and 1000 ohm (IEC 60751 names both)."""


def r0_it_fits(r_ohm: float, r0_ohm: float) -> float | None:
    """The R0 a reading outside the curve of ``r0_ohm`` fits instead, ten times more or less
    (a Pt1000 read as a Pt100, or the reverse), or None: such a reading is a mix-up of probes
    in the sequence, not a fault of the meter."""
    if not math.isfinite(r_ohm):
        return None
    low, high = Rtd(r0_ohm).r_span()
    if low <= r_ohm <= high:
        return None
    for other in (r0_ohm * R0_STEP, r0_ohm / R0_STEP):
        low, high = Rtd(other).r_span()
        if low <= r_ohm <= high:
            return other
    return None
