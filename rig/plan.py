"""From a validated sequence and a station to a plan: routes checked, steps ordered, time estimated.

Everything that can be known before a relay moves is decided here: every pin exists on the fixture,
every route passes the interlocks, the order of steps (fewest relay operations where the sequence
allows reordering, never across an operator prompt or soak, never before a step it depends on), the
meter range each step will hold, and the run's duration at the physical limit of the instruments.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass, field

import numpy as np

from rig.config.model_input import refused
from rig.config.sequence import Sequence
from rig.config.station import FUNCTIONS, Station
from rig.errors import ConfigError, InterlockError, Problem
from rig.judge.decision import DecisionRule
from rig.models import ModelInputError
from rig.quantity import format_quantity
from rig.routing import interlock_violations, relay_operations, relays_for
from rig.step_order import order_steps
from rig.steps import KINDS, StepSpec
from rig.steps.base import EarlierSteps


@dataclass
class PlannedStep:
    spec: StepSpec
    relay_sets: list[frozenset[int]]
    range_: float | None
    """The fixed range chosen from the limits (None: autorange)."""


@dataclass
class InstrumentTiming:
    """Stated instrument figures the physical limit is computed from.

    Typical figures, from memory (no published source): a signal relay operates in about 5 ms and
    releases in about 3 ms; a bench DMM spends about 1 ms per reading beyond its aperture and
    about 5 ms on a range change under autorange; a bench supply's readback takes about 20 ms.
    The virtual bench is built with the same figures (tests check that they agree).
    """

    relay_operate_s: float = 0.005
    relay_release_s: float = 0.003
    reading_overhead_s: float = 0.001
    autorange_s: float = 0.005
    supply_readback_s: float = 0.020


@dataclass(frozen=True)
class PhysicalLimit:
    """The run's duration at the physical limit, by cause, with what it was computed from."""

    relays_s: float
    readings_s: float
    autorange_s: float
    waits_s: float
    transitions: int
    """Relay changes: each is one release time (if any relay opens) plus one operate time (if
    any closes), break before make; relays in one change move together."""
    readings: int
    autoranged: int
    settle_proof_s: float
    """One more integration after each change of route of a step that states no settle time:
    proving a reading settled, the only way to know it when the time constant is not known."""
    settle_s: float = 0.0
    """The stated settle time after each change of route of a step that states one."""

    @property
    def total_s(self) -> float:
        """The floor: the instruments' own times plus the settling that cannot be skipped (the
        stated settle time where the circuit's time constant is known, a proof where not)."""
        return self.strict_s + self.settle_s + self.settle_proof_s

    @property
    def strict_s(self) -> float:
        """Relays, readings, autorange and the sequence's waits, with no settling at all: the
        floor of a controller that knew every circuit had settled the moment its relays had."""
        return self.relays_s + self.readings_s + self.autorange_s + self.waits_s


@dataclass
class Plan:
    sequence: Sequence
    station: Station
    steps: list[PlannedStep] = field(default_factory=list)
    timing: InstrumentTiming = field(default_factory=InstrumentTiming)
    warnings: list[str] = field(default_factory=list)
    """What the plan allows but a run would regret (``rig check`` prints them)."""

    @property
    def reads_reference_probe(self) -> bool:
        """Whether a step reads the station's reference thermometer (its calibration matters)."""
        return reads_reference_probe(self.sequence.steps)

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
        """The floor under any controller's run time (see ``physical_limit``)."""
        return self.physical_limit().total_s

    def physical_limit(self) -> PhysicalLimit:
        """Relay changes after ordering times their release and operate times, plus readings
        times their integration time (NPLC / line frequency, plus the meter's own time per
        reading), plus the autorange penalty for each reading the planner cannot hold a range
        for (``StepKind.autoranged_readings``), plus the waits the
        sequence states (soaks, settle before a supply readback), plus the settling after each
        change of route (stated, or one proving integration).  Operator time is left out."""
        t = self.timing
        relays_s, transitions = _relay_time(
            [rs for s in self.steps for rs in s.relay_sets], t.relay_release_s, t.relay_operate_s
        )
        readings_s = autorange_s = waits_s = proof_s = settle_s = 0.0
        readings = autoranged = 0
        previous: tuple[object, ...] | None = None
        for step in self.steps:
            spec = step.spec
            if spec.kind == "soak":
                waits_s += float(spec.params.get("duration_s") or 0.0)
            if spec.kind == "supply-current":
                waits_s += float(spec.params.get("settle_s") or 0.0) + t.supply_readback_s
                previous = None
                continue
            integration = spec.nplc / self.station.line_hz + t.reading_overhead_s
            function = KINDS[spec.kind].meter_function(spec)
            for relays in step.relay_sets:
                readings += 1
                readings_s += integration
                setup = (relays, spec.supply, function, step.range_, spec.nplc)
                if setup != previous:  # the engine settles after any change of route or setup
                    if spec.settle_s is None:
                        proof_s += integration
                    else:
                        settle_s += spec.settle_s
                previous = setup
            if step.relay_sets:  # autorange pays on a change of range: at most once a reading
                paid = KINDS[spec.kind].autoranged_readings(spec, step.range_)
                autoranged += paid
                autorange_s += paid * t.autorange_s
        return PhysicalLimit(
            relays_s,
            readings_s,
            autorange_s,
            waits_s,
            transitions,
            readings,
            autoranged,
            proof_s,
            settle_s,
        )


def _relay_time(
    path: list[frozenset[int]],
    release_s: float,
    operate_s: float,
    start: frozenset[int] = frozenset(),
) -> tuple[float, int]:
    """Time and number of relay changes along ``path``, from ``start`` to all open."""
    total, changes = 0.0, 0
    current = start
    for relays in [*path, frozenset()]:
        if relays != current:
            changes += 1
            total += (release_s if current - relays else 0.0) + (
                operate_s if relays - current else 0.0
            )
        current = relays
    return total, changes


def _switching_cost(
    steps: list[PlannedStep], timing: InstrumentTiming, start: frozenset[int] = frozenset()
) -> tuple[int, float]:
    """Relay operations (wear) first, then switching time (changes that could be merged)."""
    path = [rs for s in steps for rs in s.relay_sets]
    seconds, _ = _relay_time(path, timing.relay_release_s, timing.relay_operate_s, start)
    return relay_operations(path, start), seconds


def reads_reference_probe(steps: Iterable[StepSpec]) -> bool:
    return any(spec.kind == "reference-temperature" for spec in steps)


NO_PROBE_WARNING = (
    "the station states no [reference_probe]: reference-temperature steps carry only the "
    "meter's uncertainty, not the probe's own, and the record names no reference thermometer"
)
"""Once per sequence, however many reference-temperature steps it has."""


def build_plan(sequence: Sequence, station: Station) -> Plan:
    """Check every route against the fixture and the interlocks, then order the steps."""
    fixture = station.fixture
    problems: list[Problem] = []
    warnings: list[str] = []
    planned: dict[str, PlannedStep] = {}
    bench_ground = next((p.name for p in fixture.pins.values() if p.bench_ground), None)
    by_id = {spec.id: spec for spec in sequence.steps}
    for spec in sequence.steps:
        kind = KINDS[spec.kind]
        if spec.kind == "ground-drop" and not spec.pins.get("lo"):
            if bench_ground is None:
                problems.append(
                    sequence.problem(
                        f"{spec.key}.ground",
                        "no ground pin given and the fixture has no bench_ground pin",
                    )
                )
                continue
            spec.pins["lo"] = bench_ground
        in_files = kind.data_file_problems(spec, fixture)
        problems.extend(p for p in in_files if p not in problems)  # one file, many steps: once
        if in_files:
            continue
        unknown = {  # by the key it was written under: a pin in two roles is one mistake
            f"{spec.key}.{spec.pin_keys.get(role, role)}": pin
            for role, pin in spec.pins.items()
            if pin not in fixture.pins
        }
        for key, pin in unknown.items():
            problems.append(
                sequence.problem(
                    key, f"pin {pin!r} is not in fixture {fixture.name!r} ({fixture.path.name})"
                )
            )
        if unknown:
            continue
        relay_sets = []
        for route in kind.routes(spec):
            try:
                relays = relays_for(fixture, route)
            except InterlockError as exc:
                problems.append(sequence.problem(spec.key, str(exc)))
                continue
            violations = interlock_violations(
                fixture, relays, zero_check=route.zero_check, ganged=route.ganged
            )
            for violation in violations:
                problems.append(sequence.problem(spec.key, f"interlock: {violation}"))
            relay_sets.append(relays)
        unlisted = _unlisted_range(spec, station)
        if unlisted is not None:
            problems.append(sequence.problem(f"{spec.key}.range", unlisted))
        for key, message in _over_supply_caps(spec, station):
            problems.append(sequence.problem(f"{spec.key}.supply.{key}", message))
        for key, message in kind.fixture_problems(spec, fixture):
            problems.append(sequence.problem(f"{spec.key}.{key}", message))
        try:
            with np.errstate(over="ignore", invalid="ignore"):  # what overflows is refused
                held = held_range(spec, by_id.get, station)
                beyond = None if held is not None else _beyond_accuracy(spec, by_id.get, station)
        except ModelInputError as exc:  # the step's model, asked for its largest reading
            problems.append(sequence.problem(spec.key, refused(exc)))
            continue
        if beyond is not None and spec.rule is DecisionRule.GUARDED:
            problems.append(
                sequence.problem(
                    spec.key,
                    f"{beyond[0]}, so the guarded rule cannot be applied to it; {beyond[1]}, or "
                    'give the step decision_rule = "simple"',
                )
            )
        elif beyond is not None:
            warnings.append(f"step {spec.id}: {beyond[0]} (no U, no TUR); {beyond[1]}")
        for warning in kind.check_warnings(spec, by_id.get, station.reference_probe):
            warnings.append(f"step {spec.id}: {warning}")
        planned[spec.id] = PlannedStep(spec, relay_sets, held)
    if problems:
        raise ConfigError(problems)
    if station.reference_probe is None and reads_reference_probe(sequence.steps):
        warnings.append(NO_PROBE_WARNING)
    plan = Plan(sequence, station, warnings=warnings)
    in_file = list(planned.values())
    plan.steps = in_file
    if sequence.reorder:
        ordered = order_steps(
            (planned[spec.id] for spec in sequence.steps),
            lambda steps, start: _switching_cost(steps, plan.timing, start),
        )
        if _switching_cost(ordered, plan.timing) < _switching_cost(in_file, plan.timing):
            plan.steps = ordered  # greedy is a heuristic: keep it only when it saves something
    return plan


def _over_supply_caps(spec: StepSpec, station: Station) -> list[tuple[str, str]]:
    """The supply settings of a step above what its station allows (``[supply]``'s
    ``max_voltage`` and ``max_current``), by key: refused before anything is powered."""
    request, caps = spec.supply, station.supply_caps
    if request is None:
        return []
    found = []
    for key, asked, cap, unit, what in (
        ("voltage", request.volts, caps.max_voltage, "V", "max_voltage"),
        ("limit", request.limit_a, caps.max_current, "A", "max_current"),
    ):
        if cap is not None and asked > cap * (1 + 1e-9):
            found.append(
                (
                    key,
                    f"{format_quantity(asked, unit)} is above the station's {what} of "
                    f"{format_quantity(cap, unit)} ({station.path.name}, [supply])",
                )
            )
    return found


def _unlisted_range(spec: StepSpec, station: Station) -> str | None:
    """Why a step's stated range cannot be used, or None: a range the station's accuracy table
    does not list would leave every reading of the step without an uncertainty to judge with."""
    function = KINDS[spec.kind].meter_function(spec)
    if spec.range_ is None or function is None:
        return None
    try:
        listed = station.dmm_accuracy.ranges(function.value)
    except ValueError as exc:
        return f"a fixed range needs the station's accuracy for {function.value}: {exc}"
    if any(math.isclose(spec.range_, r, rel_tol=1e-9) for r in listed):
        return None
    unit = FUNCTIONS[function.value]
    stated = format_quantity(spec.range_, unit)
    expected = ", ".join(format_quantity(r, unit) for r in listed)
    return (
        f"range {stated} is not one the station's accuracy table lists for "
        f'{function.value}: expected "auto" or one of {expected}'
    )


def _beyond_accuracy(
    spec: StepSpec, earlier: EarlierSteps, station: Station
) -> tuple[str, str] | None:
    """Where a passing unit may read beyond every range the station's accuracy table lists for
    the step's function (a reading it cannot give an uncertainty), the finding and its remedy;
    None where the file does not bound the reading or the table holds it."""
    kind = KINDS[spec.kind]
    function = kind.meter_function(spec)
    if spec.range_ is not None or function is None:
        return None
    largest = kind.largest_reading(spec, earlier)
    if largest is None or not math.isfinite(largest):
        return None
    try:
        top = station.dmm_accuracy.ranges(function.value)[-1]
    except ValueError:  # the station's loader requires every function; nothing to say here
        return None
    if largest <= top:
        return None
    unit = FUNCTIONS[function.value]
    most = format_quantity(largest, unit)
    return (
        f"a passing unit may read up to {most}, above the largest {function.value} range of "
        f"the accuracy table in {station.path.name} ({format_quantity(top, unit)}): such a "
        "reading has no uncertainty",
        f"add a [[dmm.accuracy.{function.value}]] row for the meter's range that holds {most}",
    )


def held_range(spec: StepSpec, earlier: EarlierSteps, station: Station) -> float | None:
    """The range the planner holds for ``spec`` (its own, or the smallest listed one that holds
    what the file bounds the reading to, so no reading pays for autorange); None: autorange."""
    if spec.range_ is not None:
        return spec.range_
    kind = KINDS[spec.kind]
    function = kind.meter_function(spec)
    if function is None:
        return None
    largest = kind.largest_reading(spec, earlier)
    if largest is None or not math.isfinite(largest):
        return None
    try:
        return float(station.dmm_accuracy.range_for(function.value, largest))
    except ValueError:
        return None
