"""Reading pin names of a step and checking them against the fixture later."""

from __future__ import annotations

from rig.config.reader import Section
from rig.steps.base import StepSpec, SupplyRequest


def read_pins(sec: Section, spec: StepSpec, *roles: str) -> None:
    for role in roles:
        pin = sec.string(role)
        if pin:
            spec.pins[role] = pin


def read_supply(sec: Section, spec: StepSpec, *, required: bool = False) -> None:
    """``supply = { pos = "S_5V", neg = "S_GND", voltage = "5 V", limit = "50 mA" }``."""
    table = sec.table("supply", required=required)
    if table is None:
        return
    pos = table.string("pos")
    neg = table.string("neg")
    volts = table.quantity("voltage", "V")
    limit = table.quantity("limit", "A", positive=True)
    table.reject_unknown()
    if volts is not None and not 0 <= volts <= 30:
        table.problem("voltage", f"expected 0 V to 30 V for a bench supply, found {volts:g} V")
    if pos and neg and volts is not None and limit is not None:
        spec.supply = SupplyRequest(pos, neg, volts, limit)
        spec.pins["supply_pos"] = pos
        spec.pins["supply_neg"] = neg
        spec.pin_keys.update(supply_pos="supply.pos", supply_neg="supply.neg")
