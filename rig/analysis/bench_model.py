"""The unit on its fixture as a good meter sees it, without the instruments' noise.

Reuses the virtual bench's circuit probe (fixture relays, meter input, test currents, supply) and
its meter front end (ranges, autorange, overload), so a prediction made here and a reading taken on
the virtual bench in instant timing come from the same physics.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from drivers.base import MeterFunction
from rig.circuit import BatchSolution, Kind, solve_batch
from rig.config.fixture import Bus, FixtureMap
from rig.config.unit_file import (
    NtcSensor,
    Potentiometer,
    RatiometricSensor,
    RtdSensor,
    UnitModel,
)
from rig.faults import Fault
from rig.sim.circuit_probe import (
    DCI_SHUNT_OHM,
    DCV_INPUT_OHM,
    OHMS_INPUT_OHM,
    CircuitProbe,
    bus_node,
)
from rig.sim.probe import SupplySettings
from rig.sim.sim_dmm import OVERRANGE_FACTOR, SPECS
from rig.sim.timing import BenchClock, Timing
from rig.unit_circuit import R_OPEN_OHM, R_SHORT_OHM

FloatArray = npt.NDArray[np.float64]


@dataclass(frozen=True)
class Condition:
    """Everything a reading depends on besides the unit: relays, meter function, supply."""

    relays: frozenset[int]
    function: MeterFunction | None
    """None for the supply's own current readback."""
    test_current_a: float = 0.0
    supply_v: float = 0.0
    supply_limit_a: float = 0.1
    supply_on: bool = False


class StaticBench:
    """One unit with static faults on its fixture; relays and supply set by the caller."""

    def __init__(self, unit: UnitModel, fixture: FixtureMap, faults: list[Fault]) -> None:
        self.closed: frozenset[int] = frozenset()
        self.supply = SupplySettings()
        self.probe = CircuitProbe(
            unit,
            fixture,
            lambda: self.closed,
            self.supply,
            BenchClock(Timing.INSTANT),
            faults=faults,
        )

    def set_faults(self, faults: list[Fault]) -> None:
        self.probe.set_faults(faults)

    def read(self, function: MeterFunction, range_: float | None) -> tuple[float, float]:
        """(reading, test current) as the meter driver gives it: autorange when ``range_`` is None;
        beyond 120 % of the range the meter sends overload and the driver makes it ±inf."""
        spec = SPECS[function]
        seen: dict[float, float] = {}  # one solve per test current, as the meter's autorange

        def value_at(range_in_use: float) -> float:
            current = spec.test_current(range_in_use)
            if current not in seen:
                seen[current] = self.probe.meter_value(function, current)
            return seen[current]

        if range_ is None:
            chosen = next(
                (r for r in spec.ranges if math.isfinite(value_at(r)) and abs(value_at(r)) <= r),
                spec.ranges[-1],
            )
        else:
            chosen = next((r for r in spec.ranges if abs(range_) <= r), spec.ranges[-1])
        current = spec.test_current(chosen)
        value = value_at(chosen)
        if math.isnan(value) or abs(value) > chosen * OVERRANGE_FACTOR:
            return math.copysign(math.inf, 1.0 if math.isnan(value) else value), current
        return value, current

    def supply_current(self) -> float:
        return self.probe.supply_reading("supply", self.supply).current_a

    def condition(self, function: MeterFunction | None, test_current_a: float) -> Condition:
        return Condition(
            self.closed,
            function,
            test_current_a,
            self.supply.voltage_v,
            self.supply.current_limit_a,
            self.supply.output_on,
        )


R_INACTIVE_OHM = 1e18
"""A short fault element switched off: far above any insulation the circuit models."""


@dataclass(frozen=True)
class Hypothesis:
    """One candidate state of the unit for a batch: a fault kind, its targets and value."""

    kind: str
    """"none" or a fault kind of ``rig.faults``."""
    targets: tuple[str, ...] = ()
    value: float | None = None

    def fault(self) -> Fault | None:
        return None if self.kind == "none" else Fault(self.kind, self.targets, self.value)


class HypothesisBench:
    """The bench circuit with every short of a fault set built in and switched off, so that one
    compiled topology serves every hypothesis and every reading in a single batched solve."""

    def __init__(self, unit: UnitModel, fixture: FixtureMap, shorts: list[Fault]) -> None:
        self.unit = unit
        self.shorts = {(f.kind, f.targets): index for index, f in enumerate(shorts)}
        self._bench = StaticBench(unit, fixture, shorts)
        circuit = self._bench.probe.circuit
        for index in range(len(shorts)):
            if circuit.has_element(f"fault:{index}"):
                circuit.set_value(f"fault:{index}", R_INACTIVE_OHM)
        self.circuit = circuit

    def element_values(self, h: Hypothesis) -> dict[str, float]:
        """The element values that put hypothesis ``h`` into the circuit."""
        c = self.circuit
        if h.kind == "none":
            return {}
        first = h.targets[0] if h.targets else ""
        if h.kind == "open":
            return {f"wire:{first}:a": R_OPEN_OHM}
        if h.kind == "series":
            element = f"wire:{first}:a"
            return {element: c.elements[element].value + (h.value or 0.0)}
        if h.kind == "drift":
            element = drift_element(self.unit, first)
            return {element: c.elements[element].value * (1 + (h.value or 0.0) / 100)}
        index = self.shorts.get((h.kind, h.targets))
        if index is None:
            raise ValueError(f"hypothesis {h} is not in this bench's fault set")
        return {f"fault:{index}": R_SHORT_OHM}

    def readings(self, hypotheses: list[Hypothesis], conditions: list[Condition]) -> FloatArray:
        """Noiseless readings, shape (hypotheses, conditions); overload is not applied here."""
        return self.readings_of([self.element_values(h) for h in hypotheses], conditions)

    def readings_of(
        self, states: list[dict[str, float]], conditions: list[Condition]
    ) -> FloatArray:
        """Noiseless readings with the elements of each row set as ``states`` says (the others
        as built), shape (states, conditions)."""
        n = len(states) * len(conditions)
        c = self.circuit
        overrides: dict[str, FloatArray] = {}
        for row, state in enumerate(states):
            for element, value in state.items():
                if element not in overrides:
                    overrides[element] = np.full(n, c.elements[element].value)
                overrides[element][row * len(conditions) : (row + 1) * len(conditions)] = value
        return self._batch(overrides, len(states), conditions)[0]

    def parametric_element(self, h: Hypothesis) -> str:
        """The one element a series or drift hypothesis changes."""
        if h.kind == "series":
            return f"wire:{h.targets[0]}:a"
        return drift_element(self.unit, h.targets[0])

    def matrix_parameter(self, element: str, values: FloatArray) -> FloatArray:
        """Element values as the parameter they are in the nodal matrix: a resistor's
        conductance, a VCVS's gain."""
        if self.circuit.elements[element].kind is Kind.RESISTOR:
            return np.asarray(1.0 / values, dtype=np.float64)
        return np.asarray(values, dtype=np.float64)

    def curves(
        self, samples: list[tuple[Hypothesis, Hypothesis]], conditions: list[Condition]
    ) -> list[OneParameter]:
        """Each reading as an exact function of one element (see ``OneParameter``), from the
        unit as built and two sample hypotheses per element, all in one batched solve."""
        rows = [Hypothesis("none")] + [h for pair in samples for h in pair]
        y = self.readings(rows, conditions)
        found = []
        for k, (first, second) in enumerate(samples):
            element = self.parametric_element(first)
            base = self.circuit.elements[element].value
            p0, p1, p2 = self.matrix_parameter(
                element,
                np.array(
                    [
                        base,
                        self.element_values(first)[element],
                        self.element_values(second)[element],
                    ]
                ),
            )
            found.append(
                OneParameter.from_samples(
                    float(p0), y[0], float(p1), y[1 + 2 * k], float(p2), y[2 + 2 * k]
                )
            )
        return found

    def _batch(
        self, overrides: dict[str, FloatArray], n_h: int, conditions: list[Condition]
    ) -> tuple[FloatArray, BatchSolution]:
        """One batched solve of ``n_h`` rows of hypotheses x every condition."""
        per_condition: dict[str, list[float]] = {
            "meter:input": [],
            "meter:test": [],
            "supply:source": [],
            "supply:output": [],
        }
        used = set().union(*(cond.relays for cond in conditions))
        closed = {relay: [relay in cond.relays for cond in conditions] for relay in used}
        for cond in conditions:
            ohms = cond.function in (MeterFunction.RES_2W, MeterFunction.RES_4W)
            current = cond.function is MeterFunction.DC_CURRENT
            per_condition["meter:input"].append(
                OHMS_INPUT_OHM if ohms else DCI_SHUNT_OHM if current else DCV_INPUT_OHM
            )
            per_condition["meter:test"].append(cond.test_current_a if ohms else 0.0)
            per_condition["supply:source"].append(cond.supply_v)
            per_condition["supply:output"].append(float(cond.supply_on))
        for name, values in per_condition.items():
            overrides[name] = np.tile(np.asarray(values, dtype=np.float64), n_h)
        for relay, states in closed.items():
            overrides[f"relay:{relay}"] = np.tile(np.asarray(states, dtype=np.float64), n_h)
        sol = solve_batch(self.circuit, overrides)
        hi, lo = bus_node(Bus.DMM_HI), bus_node(Bus.DMM_LO)
        volts = sol.vdiff(hi, lo)
        sense = sol.vdiff(bus_node(Bus.SENSE_HI), bus_node(Bus.SENSE_LO))
        shunt = sol.i_resistor("meter:input")
        supply = -sol.i("supply:source")
        test = np.tile([cond.test_current_a or 1.0 for cond in conditions], n_h)
        code = np.tile([_CODES[cond.function] for cond in conditions], n_h)
        out = np.select(
            [code == 0, code == 1, code == 2, code == 3],
            [volts, volts / test, sense / test, shunt],
            supply,
        )
        return np.asarray(out.reshape(n_h, len(conditions)), dtype=np.float64), sol


INSENSITIVE_REL = 1e-10
"""A reading that changes by less than this share when the element changes does not depend on
it: what it does show is rounding (about 1e-13 of the reading in these solves)."""


@dataclass(frozen=True)
class OneParameter:
    """Every reading as an exact function of one parameter p of the nodal matrix (a conductance,
    a gain).  A change of one such element is a rank-one change of the matrix, so by the
    Sherman-Morrison formula each reading is y(p) = y0 + a d / (1 + b d) with d = p - p0; two
    solves besides the base fix a and b for every reading at once."""

    p0: float
    y0: FloatArray
    a: FloatArray
    b: FloatArray

    @classmethod
    def from_samples(
        cls, p0: float, y0: FloatArray, p1: float, y1: FloatArray, p2: float, y2: FloatArray
    ) -> OneParameter:
        d1, d2 = p1 - p0, p2 - p0
        r1, r2 = y1 - y0, y2 - y0
        # a reading the element does not reach moves by rounding only: keep it constant
        moving = np.maximum(np.abs(r1), np.abs(r2)) > INSENSITIVE_REL * (np.abs(y0) + 1e-300)
        moving &= r1 != r2
        det = np.where(moving, d1 * d2 * (r1 - r2), 1.0)
        a = np.where(moving, r1 * r2 * (d1 - d2) / det, 0.0)
        b = np.where(moving, (d1 * r2 - d2 * r1) / det, 0.0)
        return cls(p0, y0, np.asarray(a, dtype=np.float64), np.asarray(b, dtype=np.float64))

    def readings(self, p: FloatArray) -> FloatArray:
        """Readings for each parameter value: shape (len(p), conditions)."""
        d = (np.asarray(p) - self.p0)[:, None]
        return np.asarray(self.y0 + self.a * d / (1.0 + self.b * d), dtype=np.float64)


_CODES: dict[MeterFunction | None, int] = {
    MeterFunction.DC_VOLTS: 0,
    MeterFunction.RES_2W: 1,
    MeterFunction.RES_4W: 2,
    MeterFunction.DC_CURRENT: 3,
    None: 4,
}


def drift_element(unit: UnitModel, sensor: str) -> str:
    """The circuit element a sensor's drift scales (see ``rig.unit_circuit``)."""
    part = unit.sensors[sensor]
    if isinstance(part, NtcSensor):
        return f"ntc:{sensor}"
    if isinstance(part, RtdSensor):
        return f"rtd:{sensor}"
    if isinstance(part, RatiometricSensor):
        return f"rat:{sensor}:gain"
    if isinstance(part, Potentiometer):
        return f"pot:{sensor}:aw"
    raise ValueError(f"sensor {sensor!r} ({type(part).__name__}) has no drift")
