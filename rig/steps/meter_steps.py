"""Step kinds that are a DMM or supply reading on a route: volts, drops, resistance, current."""

from __future__ import annotations

import math

from drivers.base import MeterFunction
from rig.config.reader import Section
from rig.judge.propagate import u_difference_one_range
from rig.quantity import format_quantity
from rig.routing import Route
from rig.steps.base import Outcome, Reading, StepKind, StepSpec
from rig.steps.context import StepContext
from rig.steps.limits import read_limits
from rig.steps.pins import read_pins, read_supply


def _with_supply(spec: StepSpec, route: Route) -> Route:
    if spec.supply is None:
        return route
    return route + Route.supply(spec.supply.pos, spec.supply.neg)


class Volts(StepKind):
    """DC voltage between two pins (a sensor signal against its ground, the reference...)."""

    name = "volts"
    unit = "V"
    gives: str | None = "V"
    routes_in_order = True

    def one_reading(self, spec: StepSpec) -> str | None:
        return "hi-lo"

    def parse(self, sec: Section, spec: StepSpec) -> None:
        read_pins(sec, spec, "hi", "lo")
        read_supply(sec, spec)
        spec.limits = read_limits(sec, self.unit)

    def routes(self, spec: StepSpec) -> list[Route]:
        return [_with_supply(spec, Route.dmm(spec.pins["hi"], spec.pins["lo"]))]

    def run(self, ctx: StepContext, spec: StepSpec) -> Outcome:
        ctx.power(spec.supply)
        fn = MeterFunction.DC_VOLTS
        route = self.routes(spec)[0]
        r = ctx.measure_on(route, fn, role="hi-lo", range_=spec.range_, nplc=spec.nplc)
        return Outcome(r.value, self.unit, r.u_std, spec.limits, [r])


class GroundDrop(Volts):
    """Voltage drop from a ground pin of the unit to bench ground (default: the fixture's)."""

    name = "ground-drop"
    gives = None  # a drop, not the level of a reference
    small_is_good = True

    def parse(self, sec: Section, spec: StepSpec) -> None:
        read_pins(sec, spec, "pin")
        ground = sec.string("ground", "")
        if ground:
            spec.pins["ground"] = ground
        read_supply(sec, spec)
        spec.limits = read_limits(sec, self.unit)
        spec.pins["hi"] = spec.pins.get("pin", "?")
        spec.pins["lo"] = spec.pins.get("ground", "")  # filled from the fixture at planning
        spec.pin_keys.update(hi="pin", lo="ground")


class WireDrop(StepKind):
    """Voltage drop along one wire: across its two ends directly, and from two readings to a
    common reference at either end.  The direct reading is judged; both are kept."""

    name = "wire-drop"
    unit = "V"
    routes_in_order = True
    small_is_good = True

    def parse(self, sec: Section, spec: StepSpec) -> None:
        read_pins(sec, spec, "from", "to", "reference")
        read_supply(sec, spec)
        spec.limits = read_limits(sec, self.unit)

    def routes(self, spec: StepSpec) -> list[Route]:
        p = spec.pins
        return [
            _with_supply(spec, Route.dmm(p["from"], p["to"])),
            _with_supply(spec, Route.dmm(p["from"], p["reference"])),
            _with_supply(spec, Route.dmm(p["to"], p["reference"])),
        ]

    def autoranged_readings(self, spec: StepSpec, held: float | None) -> int:
        """The reading from the reference autoranges onto the signal's range (nothing in the
        file bounds it), after the direct reading on the held range, or its own autorange."""
        return 1 + super().autoranged_readings(spec, held)

    def run(self, ctx: StepContext, spec: StepSpec) -> Outcome:
        ctx.power(spec.supply)
        direct_route, from_route, to_route = self.routes(spec)
        fn = MeterFunction.DC_VOLTS
        direct = ctx.measure_on(direct_route, fn, role="direct", range_=spec.range_, nplc=spec.nplc)
        at_from = ctx.measure_on(from_route, fn, role="from-reference", range_=None, nplc=spec.nplc)
        at_to = ctx.measure_on(
            to_route, fn, role="to-reference", range_=at_from.range_, nplc=spec.nplc
        )
        computed = at_from.value - at_to.value
        u_computed = _u_computed_drop(ctx, at_from, at_to)
        return Outcome(
            direct.value,
            self.unit,
            direct.u_std,
            spec.limits,
            [direct, at_from, at_to],
            note=drop_disagreement(direct.value, direct.u_std, computed, u_computed),
            extras={"computed_drop_v": computed, "computed_drop_u_v": u_computed},
        )


def _u_computed_drop(ctx: StepContext, at_from: Reading, at_to: Reading) -> float:
    """u of the drop computed from the two reference readings, both on one range of one meter:
    their common gain error cancels but for p % of the drop, their range parts are taken as
    independent (``u_difference_one_range``).  NaN where either reading has no u."""
    spec = ctx.meter_accuracy(MeterFunction.DC_VOLTS, at_from.range_)
    readings_ok = all(math.isfinite(r.u_std) for r in (at_from, at_to))
    if spec is None or at_from.range_ is None or not readings_ok:
        return math.nan
    return u_difference_one_range(at_from.value, at_to.value, spec, at_from.range_)


def drop_disagreement(direct: float, u_direct: float, computed: float, u_computed: float) -> str:
    """A note where the direct drop and the one computed from the reference differ by more than
    their expanded uncertainty (k = 2, GUM 6.2): one of the routes has a bad contact, or the
    reference pin carries current; the step is still judged on the direct reading."""
    values = (direct, u_direct, computed, u_computed)
    if not all(math.isfinite(v) for v in values):
        return ""
    expanded = 2.0 * math.hypot(u_direct, u_computed)
    if abs(direct - computed) <= expanded:
        return ""
    shown = ", ".join(
        f"{name} {format_quantity(v, 'V')}"
        for name, v in (("direct", direct), ("computed", computed), ("U", expanded))
    )
    return (
        f"direct and computed drops disagree ({shown}): a contact on one route, or current in "
        "the reference pin"
    )


class Resistance(StepKind):
    """2-wire or 4-wire resistance between two pins, with the stored fixture lead zero removed."""

    name = "resistance"
    unit = "ohm"
    gives = "ohm"
    routes_in_order = True  # its supply is always off (``spec.supply`` is None)

    def one_reading(self, spec: StepSpec) -> str | None:
        return "hi-lo"

    def parse(self, sec: Section, spec: StepSpec) -> None:
        read_two_or_four_wire(sec, spec)
        spec.limits = read_limits(sec, self.unit)

    def meter_function(self, spec: StepSpec) -> MeterFunction:
        return ohms_function(spec)

    def routes(self, spec: StepSpec) -> list[Route]:
        return [ohms_route(spec)]

    def run(self, ctx: StepContext, spec: StepSpec) -> Outcome:
        ctx.power(None)
        r = ctx.measure_on(
            ohms_route(spec), ohms_function(spec), role="hi-lo", range_=spec.range_, nplc=spec.nplc
        )
        zero = lead_zero_of(ctx, spec)
        note = f"lead zero {zero:g} ohm subtracted" if zero else ""
        return Outcome(r.value - zero, self.unit, r.u_std, spec.limits, [r], note=note)


def read_two_or_four_wire(sec: Section, spec: StepSpec) -> None:
    """``hi``, ``lo``, ``wires`` (2 or 4) and ``lead_zero``: a resistance read between two pins."""
    read_pins(sec, spec, "hi", "lo")
    wires = sec.integer("wires", 2)
    if wires not in (2, 4):
        sec.problem("wires", f"expected 2 or 4, found {wires!r}")
    spec.params["wires"] = wires
    spec.params["zero_ohm"] = sec.quantity("lead_zero", "ohm", None)


def ohms_function(spec: StepSpec) -> MeterFunction:
    return MeterFunction.RES_4W if spec.params.get("wires") == 4 else MeterFunction.RES_2W


def ohms_route(spec: StepSpec) -> Route:
    """Both pins on DMM HI/LO; 4-wire also on the sense buses, so the leads drop out."""
    hi, lo = spec.pins["hi"], spec.pins["lo"]
    if spec.params.get("wires") == 4:
        return Route.four_wire(hi, hi, lo, lo)
    return Route.dmm(hi, lo)


def lead_zero_of(ctx: StepContext, spec: StepSpec) -> float:
    """The lead resistance to take off a reading: the stated one, none 4-wire (sensing leaves the
    leads out), else the station's stored zero for the pin pair."""
    stated = spec.params.get("zero_ohm")
    if stated is not None:
        return float(stated)
    if spec.params.get("wires") == 4:
        return 0.0
    return ctx.lead_zero(spec.pins["hi"], spec.pins["lo"])


class SupplyCurrent(StepKind):
    """Current drawn by a powered part, from the supply's own readback."""

    name = "supply-current"
    unit = "A"
    gives = "A"
    function = None

    def parse(self, sec: Section, spec: StepSpec) -> None:
        read_supply(sec, spec, required=True)
        spec.params["settle_s"] = sec.quantity("settle", "s", 0.05)
        spec.limits = read_limits(sec, self.unit)

    def routes(self, spec: StepSpec) -> list[Route]:
        if spec.supply is None:
            return []
        return [Route.supply(spec.supply.pos, spec.supply.neg)]

    def run(self, ctx: StepContext, spec: StepSpec) -> Outcome:
        ctx.power(spec.supply)  # first: the output is off while the route's relays move
        ctx.connect(self.routes(spec)[0])
        ctx.wait(float(spec.params.get("settle_s") or 0.0))
        r = ctx.supply_current(role="supply")
        return Outcome(r.value, self.unit, r.u_std, spec.limits, [r])
