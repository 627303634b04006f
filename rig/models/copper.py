"""Copper conductors: AWG sizes, resistance at temperature, and gauge strings.

Resistivity at 20 degC is that of annealed copper, 1/58 ohm mm^2/m = 0.017241 (IEC 60028).  The
temperature coefficient assumed is alpha20 = 0.00393 /K, the annealed-copper value (from memory,
not confirmed in a document); the correction factors of IEC 60228 Annex B fit about 0.004 /K, so
a caller who must match that standard passes ``alpha20=0.004``.  Over a bench's 15-35 degC the two
differ by under 0.2 % of resistance, below what a wire check resolves.
"""

from __future__ import annotations

import math
import re

import numpy as np

from rig.models._common import F, ModelInputError, Real, as_array, first_bad, like, shaped

RHO20_OHM_MM2_PER_M = 1.0 / 58.0
"""Annealed copper at 20 degC (IEC 60028)."""

ALPHA20_PER_K = 0.00393
"""Temperature coefficient of resistance at 20 degC assumed for copper (see the module note)."""

AWG_MIN = -3
AWG_MAX = 56
"""0000 AWG (written -3 here) to 56 AWG, the span ASTM B258 tabulates."""


def awg_diameter_mm(n: F) -> F:
    """Diameter in mm of solid wire of gauge ``n``: d = 0.127 mm x 92^((36 - n)/39) (ASTM B258).

    Gauges 0, 00, 000 and 0000 are n = 0, -1, -2, -3.
    """
    g = as_array(n, "n")
    bad = ~((g >= AWG_MIN) & (g <= AWG_MAX))
    if np.any(bad):
        raise ModelInputError(
            f"AWG gauge {first_bad(g, bad)!r} is outside {AWG_MIN} (0000) to {AWG_MAX}"
        )
    return like(0.127 * 92.0 ** ((36.0 - g) / 39.0), n)


def awg_area_mm2(n: F) -> F:
    """Cross-section in mm^2 of solid wire of gauge ``n``."""
    d = as_array(awg_diameter_mm(n), "n")
    return like(math.pi / 4.0 * d**2, n)


def wire_resistance_ohm(
    length_m: Real,
    area_mm2: Real,
    temp_c: Real = 20.0,
    rho20: float = RHO20_OHM_MM2_PER_M,
    alpha20: float = ALPHA20_PER_K,
) -> Real:
    """Resistance in ohm of a copper conductor: rho20 L / A x [1 + alpha20 (T - 20)].

    Returns a float when every argument is a scalar, else an array.
    """
    length = as_array(length_m, "length_m")
    area = as_array(area_mm2, "area_mm2")
    temp = as_array(temp_c, "temp_c")
    if np.any(bad := ~(length >= 0.0) | ~np.isfinite(length)):
        raise ModelInputError(f"length_m = {first_bad(length, bad)!r}: expected 0 or above")
    if np.any(bad := ~(area > 0.0) | ~np.isfinite(area)):
        raise ModelInputError(f"area_mm2 = {first_bad(area, bad)!r}: expected above 0")
    if np.any(bad := ~((temp > -273.15) & np.isfinite(temp))):
        raise ModelInputError(f"temp_c = {first_bad(temp, bad)!r}: expected a finite temperature")
    if not (rho20 > 0.0 and math.isfinite(rho20)):
        raise ModelInputError(f"rho20 = {rho20!r}: expected a resistivity above 0 ohm mm^2/m")
    if not math.isfinite(alpha20):
        raise ModelInputError(f"alpha20 = {alpha20!r}: expected a finite coefficient per K")
    r = rho20 * length / area * (1.0 + alpha20 * (temp - 20.0))
    return shaped(np.asarray(r, dtype=np.float64), length_m, area_mm2, temp_c)


_AWG_RE = re.compile(r"^\s*(?P<n>\d+(?:/0)?)\s*awg\s*$", re.IGNORECASE)
_MM2_RE = re.compile(
    r"^\s*(?P<a>\d+(?:\.\d*)?|\.\d+)\s*(?:mm2|mm²|mm\^2|sq\s*mm)\s*$", re.IGNORECASE
)
_AUGHT = {"1/0": 0, "2/0": -1, "3/0": -2, "4/0": -3}


def area_from_gauge(spec: str) -> float:
    """Cross-section in mm^2 from "18 AWG", "18AWG", "2/0 AWG", "0.75 mm2" or "0.75 mm²".

    AWG sizes are taken as solid wire; a stranded conductor of the same gauge has nearly the same
    copper area, which is what its resistance depends on.
    """
    expected = "expected a gauge such as '18 AWG', '2/0 AWG', '0.75 mm2' or '0.75 mm²'"
    if not isinstance(spec, str):
        raise ModelInputError(f"wire gauge {spec!r} is not text: {expected}")
    if m := _AWG_RE.match(spec):
        text = m.group("n")
        if text in _AUGHT:
            n = _AUGHT[text]
        elif "/" in text:
            raise ModelInputError(f"wire gauge {spec!r}: only 1/0 to 4/0 are known, {expected}")
        elif len(text) > 1 and set(text) == {"0"}:
            n = 1 - len(text)  # "00" is 2/0, "0000" is 4/0
        else:
            n = int(text)
        if not AWG_MIN <= n <= AWG_MAX:
            raise ModelInputError(f"wire gauge {spec!r} is outside 4/0 to {AWG_MAX} AWG")
        return float(awg_area_mm2(float(n)))
    if m := _MM2_RE.match(spec):
        area = float(m.group("a"))
        if area <= 0.0:
            raise ModelInputError(f"wire gauge {spec!r}: the area must be above 0 mm2")
        return area
    raise ModelInputError(f"wire gauge {spec!r} not understood: {expected}")
