"""Where a sequence's platinum steps and the unit file disagree on R0: a reference-temperature
step and the unit's reference probe, an ``rtd`` step and the unit's RTD sensors.  Pure: no I/O.

A Pt1000 read with a Pt100's r0 (or the reverse) reads off the curve and the run stops on the
bench; the unit file, where it states the probe's r0, tells it before anything moves.
"""

from __future__ import annotations

import math

from rig.config.sequence import Sequence
from rig.config.unit_file import RtdSensor, UnitModel
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


def rtd_r0_warnings(sequence: Sequence, unit: UnitModel) -> list[Problem]:
    """A warning at each ``rtd`` step whose r0 is that of none of the unit file's RTD sensors
    (none where the unit has no RTD sensor): read with a Pt100's r0, a Pt1000 overloads the
    range held for it, or fails as far off its curve, and a good unit is rejected."""
    sensors = {name: s for name, s in unit.sensors.items() if isinstance(s, RtdSensor)}
    if not sensors:
        return []
    found = []
    for spec in sequence.steps:
        r0 = spec.params.get("r0_ohm")
        if spec.kind != "rtd" or r0 is None:
            continue
        if any(math.isclose(float(r0), s.r0_ohm, rel_tol=1e-9) for s in sensors.values()):
            continue
        stated = ", ".join(
            f"[sensors.{name}] r0 = {s.r0_ohm:g} ohm at {_where(unit, name)}"
            for name, s in sensors.items()
        )
        found.append(
            sequence.problem(
                f"{spec.key}.r0",
                f"step {spec.id} judges an RTD with r0 = {float(r0):g} ohm, but the unit file's "
                f"RTD sensors state another ({stated}): a good unit would fail; give the step "
                "the sensor's r0",
            )
        )
    return found


def _where(unit: UnitModel, sensor: str) -> str:
    """file:line of a sensor's r0 (of its table, where r0 is left at its default)."""
    found = unit.problem(f"sensors.{sensor}.r0", "")
    if found.line is None:
        found = unit.problem(f"sensors.{sensor}", "")
    return found.file if found.line is None else f"{found.file}:{found.line}"
