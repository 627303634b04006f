"""Whether a reading over its limit looks like a wire one or two sizes smaller than listed
(pure).

A poor crimp adds resistance at one point; a conductor of a smaller cross-section than the wire
list gives reads high along its whole length, by the ratio of the two areas (R = rho L / A, the
same copper and length).  Where a reading is what the path would read with one of its wires a
size or two smaller, the finding says so beside the crimp: the technician checks the wire's size
before recrimping it.  The verdict is not touched.

Standard sizes: the nominal cross-sections of IEC 60228 from 0.5 mm² up, and below that the
ISO 6722-1 road-vehicle sizes 0.13, 0.22 and 0.35 mm² (the IEC 60228 sizes checked against
published copies of its tables, December 2026; the ISO 6722-1 ones from memory); AWG sizes are the
ASTM B258 series, one size smaller being one gauge number up.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from rig.harness.conductors import row_resistance_ohm
from rig.harness.wire_list import WireRow
from rig.models.copper import AWG_MAX, AWG_MIN, awg_area_mm2

METRIC_MM2 = (
    0.13,
    0.22,
    0.35,
    0.5,
    0.75,
    1.0,
    1.5,
    2.5,
    4.0,
    6.0,
    10.0,
    16.0,
    25.0,
    35.0,
    50.0,
    70.0,
    95.0,
    120.0,
)
"""Nominal cross-sections, mm² (IEC 60228 from 0.5 up, checked; ISO 6722-1 below, from memory)."""

SIZES_DOWN = 2
"""How many sizes smaller are considered: one size is the usual slip, two the odd one."""

LENGTH_TOLERANCE = 0.05
"""Spread of a real wire's resistance about its drawing's (length cut long, stranding, copper
grade), as a fraction: our figure, common practice, no published source."""


def smaller_sizes(gauge: str, area_mm2: float) -> list[tuple[str, float]]:
    """The next ``SIZES_DOWN`` standard sizes below ``gauge`` (name, area in mm²), nearest
    first: AWG for an AWG gauge, metric for a metric one."""
    if "awg" in gauge.lower():
        n = min(range(AWG_MIN, AWG_MAX + 1), key=lambda k: abs(awg_area_mm2(float(k)) - area_mm2))
        return [
            (_awg_name(k), float(awg_area_mm2(float(k))))
            for k in range(n + 1, min(n + SIZES_DOWN, AWG_MAX) + 1)
        ]
    below = [a for a in METRIC_MM2 if a < area_mm2 * (1 - 1e-9)]
    return [(f"{a:g} mm2", a) for a in reversed(below[-SIZES_DOWN:])]


def _awg_name(n: int) -> str:
    return f"{n} AWG" if n > 0 else f"{1 - n}/0 AWG"


def gauge_hint(
    rows: Sequence[WireRow],
    reading_ohm: float,
    expanded_u_ohm: float,
    temp_c: float,
    allowance_ohm: float,
) -> str:
    """Words for a finding where ``reading_ohm`` fits the path of ``rows`` with one wire a size
    or two smaller than listed, or "" where none fits (a captured row, a reading far beyond).

    It fits when the reading lies between that path's copper and the same plus the path's
    allowance (contacts, splices, 2-wire leads), widened by the reading's expanded uncertainty
    and ``LENGTH_TOLERANCE`` of the wire's copper."""
    drawn = [(r, r.area_mm2) for r in rows if r.area_mm2 is not None and r.length_m is not None]
    if not math.isfinite(reading_ohm) or not rows or len(drawn) < len(rows):
        return ""
    copper = [row_resistance_ohm(r, temp_c) for r in rows]
    fits = []
    for (row, listed), own in zip(drawn, copper, strict=True):
        rest = sum(copper) - own
        for name, area in smaller_sizes(row.gauge, listed):
            thinner = own * listed / area
            slack = expanded_u_ohm + LENGTH_TOLERANCE * thinner
            if rest + thinner - slack <= reading_ohm <= rest + thinner + allowance_ohm + slack:
                which = f" (wire {row.wire})" if len(rows) > 1 else ""
                fits.append(f"{name} for {row.gauge}{which}")
    if not fits:
        return ""
    return (
        f"a poor crimp or joint, or a wire smaller than listed ({' or '.join(fits)}): check "
        "the wire's size too"
    )
