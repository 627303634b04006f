"""Where a sequence's reference-temperature step and the unit file's reference probe disagree
on the probe's R0.  Pure: no I/O.

A Pt1000 read with a Pt100's r0 (or the reverse) reads off the curve and the run stops on the
bench; the unit file, where it states the probe's r0, tells it before anything moves.
"""

from __future__ import annotations

import math

from rig.config.sequence import Sequence
from rig.config.unit_file import UnitModel
from rig.errors import Problem

PROBE_PINS = ("force_hi", "sense_hi", "force_lo", "sense_lo")


def probe_r0_warnings(sequence: Sequence, unit: UnitModel) -> list[Problem]:
    """A warning at each reference-temperature step on the unit's probe pins whose r0 is not
    the r0 the unit file states for that probe (none where the unit file states none)."""
    probe = unit.probe
    table = unit.source.data.get("reference_probe") if unit.source is not None else None
    if probe is None or not isinstance(table, dict) or "r0" not in table:
        return []
    found = []
    for spec in sequence.steps:
        r0 = spec.params.get("r0_ohm")
        if spec.kind != "reference-temperature" or r0 is None:
            continue
        if any(spec.pins.get(pin) != getattr(probe, pin) for pin in PROBE_PINS):
            continue  # another probe than the unit file's
        if math.isclose(float(r0), probe.r0_ohm, rel_tol=1e-9):
            continue
        where = unit.problem("reference_probe.r0", "")
        found.append(
            sequence.problem(
                f"{spec.key}.r0",
                f"step {spec.id} reads the probe with r0 = {float(r0):g} ohm, but the unit "
                f"file states r0 = {probe.r0_ohm:g} ohm for it ({where.file}:{where.line} "
                f"[reference_probe.r0]): a Pt{probe.r0_ohm:g} read as a Pt{float(r0):g} reads "
                "off the curve, or at a wrong temperature; give the step the probe's r0",
            )
        )
    return found
