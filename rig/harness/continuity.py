"""Continuity of each net: which pin pairs to read, 4-wire where the fixture allows, and the
verdict of each reading against its conductor limit.

A net is read from its first fixture pin to each of its other pins (a star), so a 2-pin net costs
one reading.  4-wire needs DMM HI and sense HI on one end and DMM LO and sense LO on the other; the
pair is turned round when only the other orientation has them, and read 2-wire (with the station's
lead zero removed and the stated 2-wire allowance added to the limit) when neither has.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Protocol

from drivers.base import MeterFunction
from rig.config.fixture import Bus, FixtureMap
from rig.harness.conductors import Allowances, PathLimit, path_limit
from rig.harness.wire_list import Net, WireList
from rig.judge.decision import COVERAGE_K, DecisionRule, Limits, Verdict, judge
from rig.routing import Route

if TYPE_CHECKING:
    from rig.steps.base import Reading


class MeasurePort(Protocol):
    """What a harness scan needs of a bench: the engine's step context provides it."""

    def measure_on(
        self,
        route: Route,
        function: MeterFunction,
        *,
        role: str,
        range_: float | None,
        nplc: float,
    ) -> Reading: ...

    def lead_zero(self, hi: str, lo: str) -> float: ...

    def meter_ranges(self, function: MeterFunction) -> list[float]: ...


@dataclass(frozen=True)
class ContinuityCheck:
    net: str
    hi: str
    lo: str
    four_wire: bool
    limit: PathLimit

    @property
    def route(self) -> Route:
        if self.four_wire:
            return Route.four_wire(self.hi, self.hi, self.lo, self.lo)
        return Route.dmm(self.hi, self.lo)

    @property
    def function(self) -> MeterFunction:
        return MeterFunction.RES_4W if self.four_wire else MeterFunction.RES_2W


@dataclass(frozen=True)
class ContinuityResult:
    check: ContinuityCheck
    reading: Reading
    value_ohm: float
    verdict: Verdict

    @property
    def expanded_u_ohm(self) -> float:
        """U (k = 2) of the reading, 0 where the meter gave none: what the verdict used."""
        u = self.reading.u_std
        return COVERAGE_K * u if math.isfinite(u) else 0.0

    @property
    def reached(self) -> bool:
        """A finite reading on the continuity range: the two pins are joined by a conductor."""
        return math.isfinite(self.value_ohm)


def _has(fixture: FixtureMap, pin: str, *buses: Bus) -> bool:
    found = fixture.pins.get(pin)
    return found is not None and all(b in found.relays for b in buses)


def orientation(fixture: FixtureMap, a: str, b: str) -> tuple[str, str, bool]:
    """(hi, lo, four_wire) for reading ``a`` to ``b``: 4-wire either way round if possible."""
    if _has(fixture, a, Bus.DMM_HI, Bus.SENSE_HI) and _has(fixture, b, Bus.DMM_LO, Bus.SENSE_LO):
        return a, b, True
    if _has(fixture, b, Bus.DMM_HI, Bus.SENSE_HI) and _has(fixture, a, Bus.DMM_LO, Bus.SENSE_LO):
        return b, a, True
    return a, b, False


def plan_pair(
    net: Net,
    fixture: FixtureMap,
    a: str,
    b: str,
    temp_c: float,
    allowances: Allowances,
    max_ohm: float | None = None,
) -> ContinuityCheck:
    """The reading from pin ``a`` to pin ``b`` of ``net``, against the limit of the wire-list
    path between them; ``max_ohm`` overrides the computed limit."""
    hi, lo, four = orientation(fixture, a, b)
    limit = path_limit(net.path(a, b), temp_c, allowances, four_wire=four)
    if max_ohm is not None:  # the copper and allowances stay known, for the findings' words
        limit = replace(limit, stated_ohm=max_ohm)
    return ContinuityCheck(net.name, hi, lo, four, limit)


def plan_net(
    net: Net,
    fixture: FixtureMap,
    temp_c: float,
    allowances: Allowances,
    max_ohm: float | None = None,
) -> list[ContinuityCheck]:
    """The star of readings for one net; ``max_ohm`` overrides the computed limit."""
    first = net.pins[0]
    return [
        plan_pair(net, fixture, first, other, temp_c, allowances, max_ohm) for other in net.pins[1:]
    ]


def plan_continuity(
    wires: WireList,
    fixture: FixtureMap,
    temp_c: float,
    allowances: Allowances,
    net_limits: dict[str, float] | None = None,
) -> list[ContinuityCheck]:
    limits = net_limits or {}
    return [
        check
        for net in wires.nets
        for check in plan_net(net, fixture, temp_c, allowances, limits.get(net.name))
    ]


def run_continuity(
    port: MeasurePort,
    checks: list[ContinuityCheck],
    *,
    range_ohm: float,
    nplc: float,
    rule: DecisionRule = DecisionRule.SIMPLE,
) -> list[ContinuityResult]:
    return [
        read_check(port, check, role="continuity", range_ohm=range_ohm, nplc=nplc, rule=rule)
        for check in checks
    ]


def read_check(
    port: MeasurePort,
    check: ContinuityCheck,
    *,
    role: str,
    range_ohm: float,
    nplc: float,
    rule: DecisionRule = DecisionRule.SIMPLE,
) -> ContinuityResult:
    """One reading of ``check`` on ``range_ohm`` (role ``"<role> HI>LO"``), less the lead zero
    where 2-wire, judged against the check's limit."""
    reading = port.measure_on(
        check.route,
        check.function,
        role=f"{role} {check.hi}>{check.lo}",
        range_=range_ohm,
        nplc=nplc,
    )
    value = reading.value
    if not check.four_wire and math.isfinite(value):
        value -= port.lead_zero(check.hi, check.lo)
    result = ContinuityResult(check, reading, value, Verdict.FAIL)
    if math.isfinite(check.limit.max_ohm):
        verdict = judge(value, Limits(None, check.limit.max_ohm), result.expanded_u_ohm, rule)
    else:  # capturing, or a join between nets: no limit, only whether there is a reading
        verdict = Verdict.PASS if math.isfinite(value) else Verdict.FAIL
    return replace(result, verdict=verdict)
