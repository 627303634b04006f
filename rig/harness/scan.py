"""A whole harness check on a bench: continuity of every net, isolation of the islands that
continuity leaves, and the findings named in wire-list words.

An *island* is a set of fixture pins continuity proved joined: a good net is one island; a net
that reads open falls into several; each spare pin of the harness's connectors (a fixture pin no
row uses) is one more, so a wire landed on a spare cavity is found.  Isolation ties one pin of each
island to HI or LO; the group plan (``rig.harness.isolation``) or pair by pair.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

from drivers.base import MeterFunction
from rig.config.fixture import Bus, FixtureMap
from rig.errors import InterlockError
from rig.harness.conductors import Allowances, PathLimit
from rig.harness.continuity import (
    ContinuityCheck,
    ContinuityResult,
    MeasurePort,
    orientation,
    plan_continuity,
    plan_pair,
    read_check,
    run_continuity,
)
from rig.harness.isolation import (
    IsolationResult,
    Join,
    Reader,
    isolate_by_groups,
    isolate_pairwise,
)
from rig.harness.miswire import Finding, name_findings
from rig.harness.wire_list import WireList
from rig.judge.decision import DecisionRule
from rig.routing import Route

METHODS = ("groups", "pairs", "off")


@dataclass
class HarnessSettings:
    temp_c: float
    allowances: Allowances = field(default_factory=Allowances)
    isolation_ohm: float = 1e6
    """Every pair of nets must be isolated by at least this much."""
    method: str = "groups"
    continuity_range_ohm: float = 100.0
    isolation_range_ohm: float = 1e7
    nplc: float = 1.0
    net_limits: dict[str, float] = field(default_factory=dict)
    rule: DecisionRule = DecisionRule.SIMPLE


@dataclass
class HarnessReport:
    continuity: list[ContinuityResult]
    islands: list[tuple[str, ...]]
    isolation: IsolationResult | None
    findings: list[Finding]
    rejoined: list[ContinuityResult] = field(default_factory=list)
    """Pairs of one net that the star of readings left apart and isolation found joined, read
    again on the continuity range and judged against the path between them (the branches
    beyond an open trunk, say)."""

    @property
    def passed(self) -> bool:
        return not self.findings

    @property
    def continuity_readings(self) -> int:
        return len(self.continuity)

    @property
    def isolation_readings(self) -> int:
        return 0 if self.isolation is None else len(self.isolation.readings)


def spare_pins(wires: WireList, fixture: FixtureMap) -> list[str]:
    """Fixture pins on the harness's connectors that no row uses and that can reach HI and LO."""
    used = set(wires.pins)
    connectors = set(wires.connectors)
    return [
        pin.name
        for pin in fixture.pins.values()
        if pin.name not in used
        and (pin.connector or pin.name.rsplit("-", 1)[0]) in connectors
        and {Bus.DMM_HI, Bus.DMM_LO} <= set(pin.relays)
    ]


def find_islands(
    wires: WireList, continuity: list[ContinuityResult], spare: list[str]
) -> list[tuple[str, ...]]:
    reached = {(r.check.hi, r.check.lo) for r in continuity if r.reached}
    islands: list[tuple[str, ...]] = []
    for net in wires.nets:
        first = net.pins[0]
        joined = [first] + [
            p for p in net.pins[1:] if (first, p) in reached or (p, first) in reached
        ]
        islands.append(tuple(joined))
        islands.extend((p,) for p in net.pins if p not in joined)
    islands.extend((p,) for p in spare)
    return islands


def _check_relays(wires: WireList, fixture: FixtureMap) -> None:
    lacking = [
        pin for pin in wires.pins if not {Bus.DMM_HI, Bus.DMM_LO} <= set(fixture.pins[pin].relays)
    ]
    if lacking:
        raise InterlockError(
            f"fixture {fixture.name!r} cannot put pins {', '.join(lacking)} on both DMM HI and "
            "DMM LO; a harness check needs dmm_hi and dmm_lo relays on every wire-list pin"
        )


def island_reader(
    port: MeasurePort, islands: list[tuple[str, ...]], settings: HarnessSettings
) -> tuple[list[int], Reader]:
    """``read(hi, lo)`` over island numbers, through the port; counts readings in ``[0]``."""
    count = [0]

    def read(hi: frozenset[int], lo: frozenset[int]) -> float:
        count[0] += 1
        reading = port.measure_on(
            Route.ganged_dmm(
                [islands[i][0] for i in sorted(hi)], [islands[i][0] for i in sorted(lo)]
            ),
            MeterFunction.RES_2W,
            role=f"isolation {count[0]} ({len(hi)} to {len(lo)})",
            range_=settings.isolation_range_ohm,
            nplc=settings.nplc,
        )
        return reading.value if not math.isnan(reading.value) else 0.0

    return count, read


def scan_harness(
    port: MeasurePort, wires: WireList, fixture: FixtureMap, settings: HarnessSettings
) -> HarnessReport:
    """Continuity, then isolation, then the findings; every reading goes through ``port``."""
    _check_relays(wires, fixture)
    checks = plan_continuity(
        wires, fixture, settings.temp_c, settings.allowances, settings.net_limits
    )
    continuity = run_continuity(
        port,
        checks,
        range_ohm=settings.continuity_range_ohm,
        nplc=settings.nplc,
        rule=settings.rule,
    )
    islands = find_islands(wires, continuity, spare_pins(wires, fixture))
    isolation = None
    if settings.method != "off":
        _, read = island_reader(port, islands, settings)
        method = isolate_pairwise if settings.method == "pairs" else isolate_by_groups
        isolation = method(
            len(islands),
            read,
            settings.isolation_ohm,
            ceiling_ohm=settings.isolation_range_ohm,
        )
    joins: list[Join] = []
    rejoined: list[ContinuityResult] = []
    for join in [] if isolation is None else isolation.joins:
        found, judged = _refine(port, wires, fixture, islands, join, settings)
        joins.append(found)
        rejoined += [judged] if judged is not None else []
    findings = name_findings(wires, islands, joins, continuity + rejoined, settings.temp_c)
    return HarnessReport(continuity, islands, isolation, findings, rejoined)


def _refine(
    port: MeasurePort,
    wires: WireList,
    fixture: FixtureMap,
    islands: list[tuple[str, ...]],
    join: Join,
    settings: HarnessSettings,
) -> tuple[Join, ContinuityResult | None]:
    """Read a located join again on the continuity range (4-wire where possible), so that it is
    quoted with a resistance worth quoting.  Two islands of one net are judged against the limit
    of the wire-list path between them (the result is returned).  A join over the continuity
    range (a broken strand, a near-open) is read again on the smallest range of the station's
    accuracy table that holds the isolation reading, a range up while that reads over: quoted
    from the isolation range, its uncertainty would be that of a 10 Mohm range.  Kept as found
    where every range below the isolation range reads over."""
    a, b = islands[join.a][0], islands[join.b][0]
    net = next((n for n in wires.nets if a in n.pins and b in n.pins), None)
    if net is not None:
        limit = settings.net_limits.get(net.name)
        check = plan_pair(net, fixture, a, b, settings.temp_c, settings.allowances, limit)
    else:
        check = ContinuityCheck("", *orientation(fixture, a, b), PathLimit(math.inf, 0.0))

    def read(range_ohm: float) -> ContinuityResult:
        return read_check(
            port, check, role="join", range_ohm=range_ohm, nplc=settings.nplc, rule=settings.rule
        )

    result = read(settings.continuity_range_ohm)
    if result.reached:
        return replace(join, r_ohm=result.value_ohm), (result if net is not None else None)
    for range_ohm in ranges_to_try(
        port.meter_ranges(check.function),
        join.r_ohm,
        above=settings.continuity_range_ohm,
        below=settings.isolation_range_ohm,
    ):
        again = read(range_ohm)
        if again.reached:
            return replace(join, r_ohm=again.value_ohm), None
    return join, None


def ranges_to_try(
    ranges: list[float], estimate_ohm: float, *, above: float, below: float
) -> list[float]:
    """The listed ranges, smallest first, between ``above`` and ``below`` (both left out) that
    hold ``estimate_ohm``: the first is the smallest that holds the value, the rest are the
    steps up should it read over."""
    return [r for r in sorted(ranges) if above < r < below and r >= abs(estimate_ohm)]
