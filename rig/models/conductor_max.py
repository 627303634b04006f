"""The most a copper conductor of a stated size may resist and still be within its standard
(pure): what a continuity limit should allow for the wire itself, where nominal copper
(rho20 L / A) would fail a long, correctly sized wire whose stranding reads a little high.

Metric sizes: IEC 60228, table 3 (class 5, flexible conductors), the column for plain (not
metal-coated) annealed copper wires, maximum ohm/km at 20 degC (values checked against two
published copies of the table, December 2026).  Class 5 is
the flexible stranding of harness wire; a class 2 (stranded) or class 1 (solid) conductor has a
lower maximum and so is judged a little more loosely than its own class, never more strictly.
A tinned conductor's maximum is some 2-4 % higher (the same copies) and is not tabulated here.
Sizes IEC 60228 does not list (the ISO 6722-1 road-vehicle sizes under 0.5 mm², any other
area) get no standard maximum: nominal copper.

AWG sizes: the ASTM B258 solid-wire area gives the nominal; a stranded conductor has a little
less copper and longer strands (the lay), so a margin of ``AWG_MARGIN`` is allowed over it (our
figure: common practice, no published source; kept below the 13-16 % by which IEC 60228 class 5
lies above nominal copper for the metric sizes nearest, so that an AWG wire is not judged more
loosely than its metric neighbour).
"""

from __future__ import annotations

import math

from rig.models._common import ModelInputError

IEC60228_CLASS5_MAX_OHM_PER_KM: dict[float, float] = {
    0.5: 39.0,
    0.75: 26.0,
    1.0: 19.5,
    1.5: 13.3,
    2.5: 7.98,
    4.0: 4.95,
    6.0: 3.30,
    10.0: 1.91,
    16.0: 1.21,
    25.0: 0.780,
    35.0: 0.554,
    50.0: 0.386,
    70.0: 0.272,
    95.0: 0.206,
    120.0: 0.161,
}
"""IEC 60228 table 3, class 5, plain copper: maximum ohm/km at 20 degC (checked against two
published copies of the table, December 2026)."""

AWG_MARGIN = 0.10
"""Allowed over the ASTM B258 nominal for an AWG conductor (common practice, no published
source; see the module note)."""


def iec60228_max_ohm_per_km(area_mm2: float) -> float | None:
    """The class 5 maximum at 20 degC for an IEC 60228 nominal size, or None for another area."""
    if not (area_mm2 > 0.0 and math.isfinite(area_mm2)):
        raise ModelInputError(f"area_mm2 = {area_mm2!r}: expected above 0")
    for size, ohm_per_km in IEC60228_CLASS5_MAX_OHM_PER_KM.items():
        if math.isclose(size, area_mm2, rel_tol=1e-6):
            return ohm_per_km
    return None


def max_over_nominal(gauge: str, area_mm2: float, nominal_ohm_per_km: float) -> float:
    """The ratio of the most a conductor of ``gauge`` may resist to its nominal copper: the IEC
    60228 maximum over nominal for a metric size it lists, 1 + ``AWG_MARGIN`` for an AWG size,
    1 for any other (no standard maximum is known: nominal copper)."""
    if "awg" in gauge.lower():
        return 1.0 + AWG_MARGIN
    listed = iec60228_max_ohm_per_km(area_mm2)
    if listed is None:
        return 1.0
    return max(listed / nominal_ohm_per_km, 1.0)
