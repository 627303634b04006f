"""Every single static fault a unit model admits, and where each sits in the unit file's words.

Per wire: open, shorted half way along to bench ground, to the controller's reference and feed
(when the unit has them), and a series resistance at its first end.  Per pair of wires that share a
connector on the fixture: a short between them.  Per sensor: drifted up and down.  Intermittent
faults are left out: they are not one state, so no single prediction describes them.
"""

from __future__ import annotations

import itertools
import math

from rig.config.fixture import FixtureMap
from rig.config.unit_file import SwitchSensor, UnitModel
from rig.faults import Fault
from rig.judge.decision import Verdict
from rig.plan import Plan

DEFAULT_DRIFT_PCT = 10.0
"""Sensor drift tried by default, either way (our own choice, no published source)."""
FALLBACK_SERIES_OHM = 10.0
"""Series resistance tried when no step of the sequence fails for any value, or when there is no
sequence: a badly corroded terminal (our own choice, no published source)."""
SERIES_SEARCH_OHM = (0.001, 1e6)

DETECTING = (Verdict.FAIL, Verdict.CONDITIONAL_FAIL, Verdict.ERROR)
"""A fault is detected when a step would not let the unit pass."""


def connectors_of(wire_ends: tuple[str, str], fixture: FixtureMap | None) -> set[str]:
    """The fixture connectors a wire's ends are pins of."""
    if fixture is None:
        return set()
    pins = fixture.pins
    return {pins[end].connector for end in wire_ends if end in pins and pins[end].connector}


def wire_pairs(unit: UnitModel, fixture: FixtureMap | None) -> list[tuple[str, str]]:
    """Pairs of wires that share a connector (every pair when the connectors are not known)."""
    names = list(unit.wires)
    if fixture is None:
        return list(itertools.combinations(names, 2))
    found = []
    for a, b in itertools.combinations(names, 2):
        wa, wb = unit.wires[a], unit.wires[b]
        if connectors_of((wa.a, wa.b), fixture) & connectors_of((wb.a, wb.b), fixture):
            found.append((a, b))
    return found


def single_faults(
    unit: UnitModel,
    plan: Plan | None = None,
    *,
    series_ohm: float | None = None,
    drift_pct: float = DEFAULT_DRIFT_PCT,
) -> list[Fault]:
    """The single-fault set, in a stable order.

    The series resistance per wire is ``series_ohm`` when given, else the smallest that makes a
    step of ``plan`` fail (found on the solver), else ``FALLBACK_SERIES_OHM``.
    """
    controller = unit.controller
    sources = set() if controller is None else {s.name for s in controller.sources}
    faults: list[Fault] = []
    for name in unit.wires:
        faults.append(Fault("open", (name,)))
        faults.append(Fault("short-ground", (name,)))
        if "reference" in sources:
            faults.append(Fault("short-ref", (name,)))
        if "feed" in sources:
            faults.append(Fault("short-feed", (name,)))
        value = series_ohm if series_ohm is not None else smallest_failing_series(unit, plan, name)
        faults.append(Fault("series", (name,), value))
    fixture = None if plan is None else plan.station.fixture
    for a, b in wire_pairs(unit, fixture):
        faults.append(Fault("short", (a, b)))
    for sensor in drifting_sensors(unit):
        faults.append(Fault("drift", (sensor,), +abs(drift_pct)))
        faults.append(Fault("drift", (sensor,), -abs(drift_pct)))
    return faults


def drifting_sensors(unit: UnitModel) -> list[str]:
    """Sensors that can read off a curve (a switch has none: it is open or closed)."""
    return [name for name, s in unit.sensors.items() if not isinstance(s, SwitchSensor)]


def smallest_failing_series(unit: UnitModel, plan: Plan | None, wire: str) -> float:
    """The smallest added resistance in ``wire`` that fails a step of ``plan`` (2 significant
    digits, rounded up); ``FALLBACK_SERIES_OHM`` when nothing fails or there is no plan."""
    if plan is None:
        return FALLBACK_SERIES_OHM
    from rig.analysis.predict import SequencePredictor

    predictor = SequencePredictor(plan, unit)

    def fails(r_ohm: float) -> bool:
        steps = predictor.predict([Fault("series", (wire,), r_ohm)])
        return any(s.verdict in DETECTING for s in steps)

    low, high = SERIES_SEARCH_OHM
    if fails(low):
        return low
    value = low
    while value < high and not fails(value * 10):
        value *= 10
    if value >= high:
        return FALLBACK_SERIES_OHM
    lo, hi = value, value * 10
    for _ in range(8):  # bisection in log: 10**(1/256) is under 1 %, finer than 2 digits
        mid = math.sqrt(lo * hi)
        lo, hi = (lo, mid) if fails(mid) else (mid, hi)
    found = _round_up(hi)
    digit = 10 ** (math.floor(math.log10(found)) - 1)
    while found - digit > lo and fails(found - digit):  # the bisection leaves < 1 % to spare
        found = float(f"{found - digit:.2g}")
        digit = 10 ** (math.floor(math.log10(found)) - 1)
    return found


def _round_up(value: float) -> float:
    digits = 1 - math.floor(math.log10(value))
    return math.ceil(value * 10**digits) / 10**digits


def where(fault: Fault, unit: UnitModel, fixture: FixtureMap | None) -> str:
    """Where the fault sits, in the unit file's words: wire, pins, connectors."""

    def wire_text(name: str) -> str:
        w = unit.wires[name]
        ends = []
        for end in (w.a, w.b):
            connector = connectors_of((end, end), fixture)
            ends.append(f"{end} ({', '.join(sorted(connector))})" if connector else end)
        return f"wire {name} ({w.gauge}, {w.length_m:g} m) from {ends[0]} to {ends[1]}"

    kind, targets = fault.kind, fault.targets
    if kind == "drift":
        return f"sensor {targets[0]} off its curve"
    if kind == "short":
        return f"{wire_text(targets[0])} touching {wire_text(targets[1])}, half way along"
    text = wire_text(targets[0])
    if kind == "open":
        return f"{text}: broken"
    if kind == "series":
        end = unit.wires[targets[0]].a
        return f"{text}: extra resistance at the {end} end (a corroded pin or crimp)"
    touching = "bench ground"
    if kind in ("short-ref", "short-feed") and unit.controller is not None:
        name = "reference" if kind == "short-ref" else "feed"
        source = unit.controller.source(name)
        touching = f"the controller's {name}" + ("" if source is None else f" ({source.volts:g} V)")
    return f"{text}: touching {touching} half way along"
