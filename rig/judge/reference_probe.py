"""The bench's reference thermometer: who it is, when it is due, and how good it is.

A reference-temperature step reads the probe's resistance with the DMM; the meter's part of the
uncertainty comes from the DMM's table, the probe's own part from here.  A probe's accuracy is
either its IEC 60751 tolerance class, a bound read as a rectangular distribution (u = a/sqrt(3),
GUM 4.3.7), or the expanded uncertainty of its calibration certificate with the coverage factor
the certificate states (u = U/k, GUM 6.2.1).
"""

from __future__ import annotations

import datetime as dt
import math
from dataclasses import dataclass

from rig.models.rtd import TOLERANCE_CLASSES, Rtd, ToleranceClass, tolerance_c

PROBE_ROLE = "reference_probe"
"""The probe's name in a run's instruments, and its table in the station file."""


@dataclass(frozen=True)
class ReferenceProbe:
    """A station's reference probe; exactly one of ``tolerance_class`` and ``expanded_c``."""

    identity: str
    calibration_due: dt.date | None = None
    allow_past_due: bool = False
    tolerance_class: ToleranceClass | None = None
    expanded_c: float | None = None
    """A certificate's expanded uncertainty in degC, at ``coverage_factor``."""
    coverage_factor: float = 2.0

    def __post_init__(self) -> None:
        if (self.tolerance_class is None) == (self.expanded_c is None):
            raise ValueError("a reference probe states a tolerance class or an uncertainty")
        if self.tolerance_class is not None and self.tolerance_class not in TOLERANCE_CLASSES:
            raise ValueError(f"tolerance class {self.tolerance_class!r} is not known")

    def u_std_c(self, temp_c: float) -> float:
        """The probe's standard uncertainty in degC at ``temp_c`` (a class widens with |t|)."""
        if self.tolerance_class is not None:
            return float(tolerance_c(temp_c, self.tolerance_class)) / math.sqrt(3.0)
        assert self.expanded_c is not None
        return self.expanded_c / self.coverage_factor

    def accuracy_text(self) -> str:
        """The accuracy as the station file states it, for records and ``rig check``."""
        if self.tolerance_class is not None:
            return f"class {self.tolerance_class} (IEC 60751)"
        return f"U = {self.expanded_c:g} degC (k = {self.coverage_factor:g})"

    def record(self) -> dict[str, str]:
        """The probe as a run's instruments list keeps it (beside the DMM, supply, relay box)."""
        due = self.calibration_due.isoformat() if self.calibration_due else ""
        return {
            "role": PROBE_ROLE,
            "identity": self.identity,
            "resource": "",
            "calibration_due": due,
            "accuracy": self.accuracy_text(),
        }


def combined_u_c(meter_u_c: float, probe: ReferenceProbe | None, temp_c: float) -> float:
    """The reference temperature's standard uncertainty: the meter's and the probe's, which are
    uncorrelated, as a root sum of squares (GUM 5.1.2); the meter's alone without a probe."""
    if probe is None or not math.isfinite(temp_c):
        return meter_u_c
    return math.hypot(meter_u_c, probe.u_std_c(temp_c))


def reading_u_c(
    rtd: Rtd, u_ohm: float, probe: ReferenceProbe | None, temp_c: float
) -> tuple[float, float]:
    """The meter's part of a reference temperature read off ``rtd``'s curve at ``temp_c`` (its
    standard uncertainty ``u_ohm`` in ohm through the curve's slope there, GUM 5.1.2) and the
    combined standard uncertainty with the probe's own: one computation for a run's reading and
    the U ``rig check`` states at a limit."""
    u_meter = u_ohm / float(rtd.dr_dt(temp_c))
    return u_meter, combined_u_c(u_meter, probe, temp_c)
