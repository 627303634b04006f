"""From a validated sequence and a station to a plan: routes checked, steps ordered, time estimated.

Everything that can be known before a relay moves is decided here: every pin exists on the fixture,
every route passes the interlocks, the order of steps (fewest relay operations where the sequence
allows reordering, never across an operator prompt or soak, never before a step it depends on), the
meter range each step will hold, and the run's duration at the physical limit of the instruments.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from rig.config.sequence import Sequence
from rig.config.station import Station
from rig.errors import ConfigError, InterlockError, Problem
from rig.routing import interlock_violations, relay_operations, relays_for
from rig.steps import KINDS, StepSpec


@dataclass
class PlannedStep:
    spec: StepSpec
    relay_sets: list[frozenset[int]]
    range_: float | None
    """The fixed range chosen from the limits (None: autorange)."""


@dataclass
class InstrumentTiming:
    """Stated instrument figures the physical limit is computed from."""

    relay_operate_s: float = 0.005
    relay_release_s: float = 0.003
    reading_overhead_s: float = 0.0005


@dataclass
class Plan:
    sequence: Sequence
    station: Station
    steps: list[PlannedStep] = field(default_factory=list)
    timing: InstrumentTiming = field(default_factory=InstrumentTiming)

    @property
    def relay_ops(self) -> int:
        return relay_operations(rs for s in self.steps for rs in s.relay_sets)

    def relay_ops_unordered(self) -> int:
        """Operations in file order, opening everything between readings (the naive way)."""
        in_file = [self._by_id(s.id) for s in self.sequence.steps]
        return sum(2 * len(rs) for s in in_file for rs in s.relay_sets)

    def relay_ops_file_order(self) -> int:
        in_file = [self._by_id(s.id) for s in self.sequence.steps]
        return relay_operations(rs for s in in_file for rs in s.relay_sets)

    def _by_id(self, step_id: str) -> PlannedStep:
        return next(p for p in self.steps if p.spec.id == step_id)

    def physical_limit_s(self) -> float:
        """Relay operations times their times, plus readings times their integration time, plus
        the stated soaks: the floor under any controller's run time."""
        t = self.timing
        per_op = (t.relay_operate_s + t.relay_release_s) / 2
        total = self.relay_ops * per_op
        for step in self.steps:
            readings = len(step.relay_sets)
            total += readings * (step.spec.nplc / self.station.line_hz + t.reading_overhead_s)
            if step.spec.kind == "soak":
                total += float(step.spec.params.get("duration_s") or 0.0)
        return total


def build_plan(sequence: Sequence, station: Station) -> Plan:
    """Check every route against the fixture and the interlocks, then order the steps."""
    fixture = station.fixture
    problems: list[Problem] = []
    planned: dict[str, PlannedStep] = {}
    bench_ground = next((p.name for p in fixture.pins.values() if p.bench_ground), None)
    for spec in sequence.steps:
        kind = KINDS[spec.kind]
        if spec.kind == "ground-drop" and not spec.pins.get("lo"):
            if bench_ground is None:
                problems.append(
                    Problem(
                        str(sequence.path),
                        f"{spec.key}.ground",
                        "no ground pin given and the fixture has no bench_ground pin",
                    )
                )
                continue
            spec.pins["lo"] = bench_ground
        for role, pin in spec.pins.items():
            if pin not in fixture.pins:
                problems.append(
                    Problem(
                        str(sequence.path),
                        f"{spec.key}.{role}",
                        f"pin {pin!r} is not in fixture {fixture.name!r} ({fixture.path.name})",
                    )
                )
        if any(p.key.startswith(spec.key + ".") for p in problems):
            continue
        relay_sets = []
        for route in kind.routes(spec):
            try:
                relays = relays_for(fixture, route)
            except InterlockError as exc:
                problems.append(Problem(str(sequence.path), spec.key, str(exc)))
                continue
            violations = interlock_violations(fixture, relays, zero_check=route.zero_check)
            for violation in violations:
                problems.append(Problem(str(sequence.path), spec.key, f"interlock: {violation}"))
            relay_sets.append(relays)
        planned[spec.id] = PlannedStep(spec, relay_sets, _fixed_range(spec, station))
    if problems:
        raise ConfigError(problems)
    plan = Plan(sequence, station)
    in_file = list(planned.values())
    plan.steps = in_file
    if sequence.reorder:
        ordered = _order(sequence, planned)
        cost = relay_operations(rs for s in ordered for rs in s.relay_sets)
        if cost < relay_operations(rs for s in in_file for rs in s.relay_sets):
            plan.steps = ordered  # greedy is a heuristic: keep it only when it saves operations
    return plan


def _fixed_range(spec: StepSpec, station: Station) -> float | None:
    """Hold a fixed range where the limits allow it, so no reading pays for autorange."""
    if spec.range_ is not None:
        return spec.range_
    kind = KINDS[spec.kind]
    function = kind.meter_function(spec)
    if function is None or spec.limits is None or not kind.limits_in_meter_units:
        return None
    bounds = [abs(b) for b in (spec.limits.low, spec.limits.high) if b is not None]
    if not bounds:
        return None
    try:
        return float(station.dmm_accuracy.range_for(function.value, max(bounds)))
    except ValueError:
        return None


def _order(sequence: Sequence, planned: dict[str, PlannedStep]) -> list[PlannedStep]:
    """Greedy nearest-neighbour on relay sets inside each stretch between barriers, respecting
    dependencies: small, predictable, and close to optimal for bench sequences."""
    ordered: list[PlannedStep] = []
    current: frozenset[int] = frozenset()
    done: set[str] = set()
    segment: list[PlannedStep] = []

    def flush() -> None:
        nonlocal current
        pending = list(segment)
        while pending:
            ready = [p for p in pending if all(d in done for d in p.spec.depends_on)]
            if not ready:  # cannot happen after validation; keep file order
                ready = pending[:1]
            best = min(ready, key=lambda p: _cost(current, p))
            pending.remove(best)
            ordered.append(best)
            done.add(best.spec.id)
            if best.relay_sets:
                current = best.relay_sets[-1]
        segment.clear()

    for spec in sequence.steps:
        step = planned[spec.id]
        if spec.barrier:
            flush()
            ordered.append(step)
            done.add(spec.id)
        else:
            segment.append(step)
    flush()
    return ordered


def _cost(current: frozenset[int], step: PlannedStep) -> int:
    """Relay operations to reach the step's first route from the relays closed now."""
    return len(current ^ step.relay_sets[0]) if step.relay_sets else 0
