"""A conservative continuous current for a copper conductor of a given cross-section (pure).

The figure is the "power transmission" rule of the AWG tables printed in electronics handbooks:
700 circular mils of copper per ampere (e.g. 20 AWG 1.5 A, 18 AWG 2.3 A; the rule and those
figures checked against published copies of such a table, December 2026).  It is far
below what a cable standard allows a single insulated conductor in free air (an appliance cord
of 0.5 mm² carries up to 3 A under IEC 60335-1 table 11, from memory), so it stays on the safe
side for a PVC-insulated wire bundled in a harness at about 30 °C ambient.  It is a screen, not a
rating: the cable maker's data, local codes and licensed practice decide what a wire may carry.
"""

from __future__ import annotations

import math

MM2_PER_CMIL = math.pi / 4.0 * 0.0254**2
"""One circular mil (a circle 0.001 in across) in mm²: 5.067e-4 mm²."""

CMIL_PER_AMPERE = 700.0
"""Copper per ampere of the handbook's power-transmission column (see the module note)."""

SOURCE = "700 circular mils per ampere, the power-transmission rule of handbook AWG tables"
"""The figure's source in words, for messages and docs."""


def continuous_current_a(area_mm2: float) -> float:
    """A conservative continuous current, in A, for a copper conductor of ``area_mm2``."""
    if not (area_mm2 > 0.0 and math.isfinite(area_mm2)):
        raise ValueError(f"area_mm2 = {area_mm2!r}: expected a cross-section above 0")
    return area_mm2 / MM2_PER_CMIL / CMIL_PER_AMPERE
