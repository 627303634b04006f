"""A sensor read through a pull-up from a reference: the voltage, its inverse, its slopes.

The controller sees V = v_ref R_low / (R_low + r_pull), where R_low is the sensor in parallel with
the input's own load (``r_load``, infinite by default).  An open sensor therefore reads near
v_ref and a short near 0 V (common practice, no published source).  The sensitivities feed the
law of propagation of uncertainty in ``rig.judge.propagate``.
"""

from __future__ import annotations

import math
from typing import overload

import numpy as np

from rig.models._common import FloatArray, ModelInputError, Real, as_array, first_bad, shaped


def _params(v_ref: Real, r_pull: Real, r_load: Real) -> tuple[FloatArray, FloatArray, FloatArray]:
    vr = as_array(v_ref, "v_ref")
    rp = as_array(r_pull, "r_pull")
    rl = as_array(r_load, "r_load")
    for arr, name, unit in ((vr, "v_ref", "V"), (rp, "r_pull", "ohm"), (rl, "r_load", "ohm")):
        bad = ~(arr > 0.0) | np.isnan(arr)
        if np.any(bad):
            raise ModelInputError(f"{name} = {first_bad(arr, bad)!r} {unit}: expected above 0")
    if np.any(~np.isfinite(vr) | ~np.isfinite(rp)):
        raise ModelInputError("v_ref and r_pull must be finite")
    return vr, rp, rl


def _g_low(r_sensor: Real, r_load: FloatArray) -> FloatArray:
    """Conductance of sensor and load in parallel; an open sensor (inf) adds nothing."""
    rs = as_array(r_sensor, "r_sensor")
    bad = ~(rs >= 0.0)
    if np.any(bad):
        raise ModelInputError(f"r_sensor = {first_bad(rs, bad)!r} ohm: expected 0 or above")
    with np.errstate(divide="ignore"):
        return np.asarray(1.0 / rs + 1.0 / r_load, dtype=np.float64)


def _denominator(r_pull: FloatArray, g_low: FloatArray) -> FloatArray:
    """D = 1 + r_pull G_low, so that V = v_ref / D (inf for a shorted sensor)."""
    return np.asarray(1.0 + r_pull * g_low, dtype=np.float64)


@overload
def divider_voltage(  # type: ignore[overload-overlap]  # float in, float out
    v_ref: float, r_pull: float, r_sensor: float, r_load: float = ...
) -> float: ...
@overload
def divider_voltage(
    v_ref: Real, r_pull: Real, r_sensor: Real, r_load: Real = ...
) -> FloatArray: ...
def divider_voltage(v_ref: Real, r_pull: Real, r_sensor: Real, r_load: Real = math.inf) -> Real:
    """Voltage at the sensor node in V: v_ref R_low / (R_low + r_pull)."""
    vr, rp, rl = _params(v_ref, r_pull, r_load)
    d = _denominator(rp, _g_low(r_sensor, rl))
    return shaped(vr / d, v_ref, r_pull, r_sensor, r_load)


@overload
def dv_dr_sensor(  # type: ignore[overload-overlap]
    v_ref: float, r_pull: float, r_sensor: float, r_load: float = ...
) -> float: ...
@overload
def dv_dr_sensor(v_ref: Real, r_pull: Real, r_sensor: Real, r_load: Real = ...) -> FloatArray: ...
def dv_dr_sensor(v_ref: Real, r_pull: Real, r_sensor: Real, r_load: Real = math.inf) -> Real:
    """dV/dR_sensor in V/ohm: v_ref r_pull / (r_sensor^2 D^2), positive (more R, more V)."""
    vr, rp, rl = _params(v_ref, r_pull, r_load)
    rs = as_array(r_sensor, "r_sensor")
    d = _denominator(rp, _g_low(rs, rl))
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = vr * rp / (rs**2 * d**2)
    return shaped(slope, v_ref, r_pull, r_sensor, r_load)


@overload
def dv_dr_pull(  # type: ignore[overload-overlap]
    v_ref: float, r_pull: float, r_sensor: float, r_load: float = ...
) -> float: ...
@overload
def dv_dr_pull(v_ref: Real, r_pull: Real, r_sensor: Real, r_load: Real = ...) -> FloatArray: ...
def dv_dr_pull(v_ref: Real, r_pull: Real, r_sensor: Real, r_load: Real = math.inf) -> Real:
    """dV/dR_pull in V/ohm: -v_ref G_low / D^2, negative (a larger pull-up lowers V)."""
    vr, rp, rl = _params(v_ref, r_pull, r_load)
    g = _g_low(r_sensor, rl)
    d = _denominator(rp, g)
    with np.errstate(invalid="ignore"):
        slope = -vr * g / d**2
    return shaped(slope, v_ref, r_pull, r_sensor, r_load)


@overload
def dv_dv_ref(  # type: ignore[overload-overlap]
    v_ref: float, r_pull: float, r_sensor: float, r_load: float = ...
) -> float: ...
@overload
def dv_dv_ref(v_ref: Real, r_pull: Real, r_sensor: Real, r_load: Real = ...) -> FloatArray: ...
def dv_dv_ref(v_ref: Real, r_pull: Real, r_sensor: Real, r_load: Real = math.inf) -> Real:
    """dV/dv_ref = 1/D, dimensionless: the divider ratio itself (the reading is ratiometric)."""
    vr, rp, rl = _params(v_ref, r_pull, r_load)
    d = _denominator(rp, _g_low(r_sensor, rl))
    return shaped(
        np.broadcast_to(1.0 / d, np.broadcast(vr, d).shape), v_ref, r_pull, r_sensor, r_load
    )


@overload
def sensor_r_from_voltage(  # type: ignore[overload-overlap]
    v_out: float, v_ref: float, r_pull: float, r_load: float = ...
) -> float: ...
@overload
def sensor_r_from_voltage(
    v_out: Real, v_ref: Real, r_pull: Real, r_load: Real = ...
) -> FloatArray: ...
def sensor_r_from_voltage(v_out: Real, v_ref: Real, r_pull: Real, r_load: Real = math.inf) -> Real:
    """The sensor resistance in ohm that explains ``v_out``: the divider solved for R_sensor.

    0 V gives 0 ohm and the open-circuit voltage v_ref / (1 + r_pull/r_load) gives inf.  A voltage
    outside that span (noise around a short, or above the open level) has no resistance that
    explains it and gives NaN, which the judging treats as a fail, never a pass.
    """
    vr, rp, rl = _params(v_ref, r_pull, r_load)
    v = as_array(v_out, "v_out")
    with np.errstate(divide="ignore", invalid="ignore"):
        g_sensor = (vr / v - 1.0) / rp - 1.0 / rl
        # rounding can leave a hair of negative conductance right at the open level
        r = np.where(v == 0.0, 0.0, np.where(g_sensor <= 0.0, np.inf, 1.0 / g_sensor))
        v_open = vr / (1.0 + rp / rl)
        r = np.where((v < 0.0) | (v > v_open) | np.isnan(v), np.nan, r)
        r = np.where(v == v_open, np.inf, r)
    return shaped(np.asarray(r, dtype=np.float64), v_out, v_ref, r_pull, r_load)
