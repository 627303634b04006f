"""Whether a step's supply current limit could heat the thinnest wire it powers (pure).

The station's caps (``max_current``) know nothing of the wires on the fixture; the unit file and
a harness step's wire list do.  A limit above a conservative continuous current
(``rig.models.wire_current``) for the thinnest conductor on the powered path is worth a warning
before a short makes that current flow.  The powered path is taken generously: every wire joined
to the supply's + or - pin through wires alone (a unit file's ``[wires]``), or every row of the
wire-list nets those pins are on, since a short anywhere along them passes the whole limit.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass

from rig.config.sequence import Sequence as StepSequence
from rig.config.unit_file import UnitModel
from rig.harness.wire_list import WireList
from rig.models.wire_current import SOURCE, continuous_current_a
from rig.quantity import format_quantity
from rig.steps.base import StepSpec


@dataclass(frozen=True)
class Conductor:
    """A wire of known size, and where it is described (for the warning)."""

    name: str
    gauge: str
    area_mm2: float
    where: str


def unit_conductors(unit: UnitModel, pins: Iterable[str]) -> list[Conductor]:
    """The unit file's wires joined to any of ``pins`` through wires alone."""
    reached = set(pins)
    found: dict[str, Conductor] = {}
    grew = True
    while grew:
        grew = False
        for wire in unit.wires.values():
            if wire.name not in found and ({wire.a, wire.b} & reached):
                found[wire.name] = Conductor(
                    f"wire {wire.name}",
                    wire.gauge,
                    wire.area_mm2,
                    f"{unit.path.name} [wires.{wire.name}]",
                )
                reached |= {wire.a, wire.b}
                grew = True
    return [c for c in found.values() if c.area_mm2 > 0.0]


def wire_list_conductors(wires: WireList, pins: Iterable[str]) -> list[Conductor]:
    """Every row of the wire-list nets that ``pins`` are on."""
    by_pin = wires.net_of_pin()
    nets = {by_pin[p].name: by_pin[p] for p in pins if p in by_pin}
    return [
        Conductor(f"wire {row.wire}", row.gauge, row.area_mm2, f"{wires.path.name} line {row.line}")
        for net in nets.values()
        for row in net.rows
        if row.area_mm2 is not None and row.area_mm2 > 0.0
    ]


def supply_wire_warnings(
    sequence: StepSequence, unit: UnitModel | None, wire_lists: Sequence[WireList]
) -> list[str]:
    """A warning for each powered step whose current limit is above the conservative continuous
    current of the thinnest known conductor on its path, at the step's ``supply.limit``."""
    warnings = []
    for spec in sequence.steps:
        thinnest = _thinnest(spec, unit, wire_lists)
        if spec.supply is None or thinnest is None:
            continue
        allowed = continuous_current_a(thinnest.area_mm2)
        if spec.supply.limit_a <= allowed * (1 + 1e-9):
            continue
        message = (
            f"step {spec.id}: the supply's current limit "
            f"{format_quantity(spec.supply.limit_a, 'A')} is above "
            f"{format_quantity(allowed, 'A', 3)}, a conservative continuous current for "
            f"{thinnest.name} ({thinnest.gauge}, {thinnest.where}), the thinnest conductor on "
            f"its powered path ({SOURCE}): a short would pass the whole limit "
            "through it. Lower the limit, or confirm the wire's rating from the cable maker's "
            "data, local codes and licensed practice"
        )
        warnings.append(str(sequence.problem(f"{spec.key}.supply.limit", message)))
    return warnings


def _thinnest(
    spec: StepSpec, unit: UnitModel | None, wire_lists: Sequence[WireList]
) -> Conductor | None:
    if spec.supply is None:
        return None
    pins = (spec.supply.pos, spec.supply.neg)
    found = [] if unit is None else unit_conductors(unit, pins)
    for wires in wire_lists:
        found += wire_list_conductors(wires, pins)
    return min(found, key=lambda c: c.area_mm2, default=None)
