"""Physical models of the sensors and wires a rig checks: pure computation, no I/O.

Every model takes floats or numpy arrays and answers in the same shape.
"""

from rig.models._common import FloatArray, ModelInputError, Real
from rig.models.copper import (
    ALPHA20_PER_K,
    RHO20_OHM_MM2_PER_M,
    area_from_gauge,
    awg_area_mm2,
    awg_diameter_mm,
    wire_resistance_ohm,
)
from rig.models.divider import (
    divider_voltage,
    dv_dr_pull,
    dv_dr_sensor,
    dv_dv_ref,
    sensor_r_from_voltage,
)
from rig.models.ntc import (
    KELVIN_OFFSET,
    BetaNtc,
    NtcModel,
    SteinhartHart,
    beta_as_steinhart_hart,
    steinhart_hart_fit,
    steinhart_hart_from_points,
    temp_error_from_r_error,
)
from rig.models.ratiometric import Ratiometric
from rig.models.rtd import PT100, PT1000, Rtd, ToleranceClass, tolerance_c

__all__ = [
    "ALPHA20_PER_K",
    "KELVIN_OFFSET",
    "PT100",
    "PT1000",
    "RHO20_OHM_MM2_PER_M",
    "BetaNtc",
    "FloatArray",
    "ModelInputError",
    "NtcModel",
    "Ratiometric",
    "Real",
    "Rtd",
    "SteinhartHart",
    "ToleranceClass",
    "area_from_gauge",
    "awg_area_mm2",
    "awg_diameter_mm",
    "beta_as_steinhart_hart",
    "divider_voltage",
    "dv_dr_pull",
    "dv_dr_sensor",
    "dv_dv_ref",
    "sensor_r_from_voltage",
    "steinhart_hart_fit",
    "steinhart_hart_from_points",
    "temp_error_from_r_error",
    "tolerance_c",
    "wire_resistance_ohm",
]
