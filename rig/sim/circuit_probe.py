"""The unit on its fixture, as the simulated instruments see it: one circuit, solved per reading.

The unit's own circuit (``rig.unit_circuit``) gets the fixture around it: a relay contact from each
pin to each instrument bus it can reach, the DMM's front end across its buses (10 Mohm input in DC
volts, a test current source in ohms, a shunt in DC current, a high-impedance sense input for
4-wire), and the supply on its buses.  Every reading solves this circuit for the relay state at
that moment, so parallel paths, loading and in-circuit parts read as they would on a real bench.
After a relay change, readings approach the new value with the circuit's time constant (from the
capacitances the unit declares), so a reading taken too early is visibly wrong in real timing.
"""

from __future__ import annotations

import math
import threading
from collections.abc import Callable

import numpy as np

from drivers.base import MeterFunction
from rig.circuit import Circuit, Solution, solve
from rig.config.fixture import Bus, FixtureMap
from rig.config.unit_file import UnitModel
from rig.faults import Fault
from rig.sim.probe import SupplyReading, SupplySettings
from rig.sim.timing import BenchClock
from rig.unit_circuit import UnitCircuit, build_unit_circuit

DCV_INPUT_OHM = 10e6
"""DC volts input resistance of a bench DMM on its usual setting (common practice)."""
OHMS_INPUT_OHM = 10e9
SENSE_INPUT_OHM = 10e9
DCI_SHUNT_OHM = 0.1
"""Burden of the current shunt (a typical figure, from memory)."""
RELAY_ON_OHM = 0.05
RELAY_OFF_OHM = 1e9
SUPPLY_OFF_OHM = 1e9


def bus_node(bus: Bus) -> str:
    return f"bus:{bus.value}"


class CircuitProbe:
    """Implements ``rig.sim.probe.BenchProbe`` for a unit model on a fixture."""

    def __init__(
        self,
        unit: UnitModel,
        fixture: FixtureMap,
        closed: Callable[[], frozenset[int]],
        supply: SupplySettings,
        clock: BenchClock,
        *,
        faults: list[Fault] | None = None,
        seed: int = 0,
    ) -> None:
        self.unit = unit
        self.fixture = fixture
        self.closed = closed
        self.supply = supply
        self.clock = clock
        self._rng = np.random.default_rng(seed)
        self._lock = threading.RLock()
        self._changed_at: float | None = None
        self._value_before = 0.0
        self._last_value = 0.0
        self._tau_cache: dict[tuple[frozenset[int], str], float] = {}
        self.set_faults(faults or [])

    # --- building -----------------------------------------------------------------------------

    def set_faults(self, faults: list[Fault]) -> None:
        with self._lock:
            self.faults = list(faults)
            self.unit_circuit: UnitCircuit = build_unit_circuit(self.unit, self.faults)
            self.circuit = self._with_fixture(self.unit_circuit.circuit)
            self._applied: frozenset[int] = frozenset()
            self._tau_cache.clear()

    def set_unit(self, unit: UnitModel, faults: list[Fault]) -> None:
        """Serve another unit on the same fixture from the next reading on: a harness rebuilt
        with other build faults (its wires landed elsewhere), while the bench runs."""
        with self._lock:
            self.unit = unit
            self.set_faults(faults)

    def _with_fixture(self, unit_circuit: Circuit) -> Circuit:
        c = unit_circuit.copy()
        for pin in self.fixture.pins.values():
            for bus, relay in pin.relays.items():
                c.switch(
                    f"relay:{relay}", pin.name, bus_node(bus), False, RELAY_ON_OHM, RELAY_OFF_OHM
                )
            if pin.bench_ground:
                c.vsource("bench:ground", pin.name, "0", 0.0)
        hi, lo = bus_node(Bus.DMM_HI), bus_node(Bus.DMM_LO)
        c.resistor("meter:input", hi, lo, DCV_INPUT_OHM)
        c.isource("meter:test", lo, hi, 0.0)
        c.resistor("meter:sense", bus_node(Bus.SENSE_HI), bus_node(Bus.SENSE_LO), SENSE_INPUT_OHM)
        c.vsource("supply:source", "supply:inner", bus_node(Bus.SUPPLY_NEG), 0.0)
        c.switch(
            "supply:output", "supply:inner", bus_node(Bus.SUPPLY_POS), False, 1e-3, SUPPLY_OFF_OHM
        )
        for bus in Bus:  # instruments float, with the isolation of their own chassis to earth
            c.resistor(f"isolation:{bus.value}", bus_node(bus), "0", 1e11)
        return c

    # --- state --------------------------------------------------------------------------------

    def relays_changed(self) -> None:
        """Called by the relay box after each change: settling starts from the last reading."""
        with self._lock:
            self._changed_at = self.clock.now()
            self._value_before = self._last_value

    def _prepare(self, function: MeterFunction, test_current_a: float) -> Circuit:
        c = self.circuit
        closed = self.closed()
        for relay in closed ^ self._applied:  # only the contacts that moved
            c.set_switch(f"relay:{relay}", relay in closed)
        self._applied = closed
        if function is MeterFunction.DC_VOLTS:
            c.set_value("meter:input", DCV_INPUT_OHM)
            c.set_value("meter:test", 0.0)
        elif function is MeterFunction.DC_CURRENT:
            c.set_value("meter:input", DCI_SHUNT_OHM)
            c.set_value("meter:test", 0.0)
        else:
            c.set_value("meter:input", OHMS_INPUT_OHM)
            c.set_value("meter:test", test_current_a)
        c.set_value("supply:source", self.supply.voltage_v)
        c.set_switch("supply:output", self.supply.output_on)
        self.unit_circuit.reroll_intermittent(self._rng, c)
        return c

    def _solve_supplied(self, c: Circuit) -> tuple[Solution, bool]:
        """Solve with the supply as programmed; past its current limit, solve again with the
        supply in constant current.  Returns the solution and whether it is in CC."""
        sol = solve(c)
        if not self.supply.output_on:
            return sol, False
        if abs(sol.i("supply:source")) <= self.supply.current_limit_a:
            return sol, False
        return solve(self._constant_current(c)), True

    # --- BenchProbe ---------------------------------------------------------------------------

    def meter_value(self, function: MeterFunction, test_current_a: float) -> float:
        with self._lock:
            c = self._prepare(function, test_current_a)
            sol, _ = self._solve_supplied(c)
            hi, lo = bus_node(Bus.DMM_HI), bus_node(Bus.DMM_LO)
            if function is MeterFunction.DC_VOLTS:
                value = sol.vdiff(hi, lo)
            elif function is MeterFunction.DC_CURRENT:
                value = sol.i_resistor("meter:input")
            elif function is MeterFunction.RES_4W:
                value = sol.vdiff(bus_node(Bus.SENSE_HI), bus_node(Bus.SENSE_LO)) / test_current_a
            else:
                value = sol.vdiff(hi, lo) / test_current_a
            value = self._settling(value, function)
            self._last_value = value
            return value

    def _constant_current(self, c: Circuit) -> Circuit:
        cc = c.copy()
        cc.remove("supply:source")
        cc.isource(
            "supply:cc", bus_node(Bus.SUPPLY_NEG), "supply:inner", self.supply.current_limit_a
        )
        return cc

    def supply_reading(self, name: str, settings: SupplySettings) -> SupplyReading:
        with self._lock:
            c = self._prepare(MeterFunction.DC_VOLTS, 0.0)
            sol, cc = self._solve_supplied(c)
            volts = sol.vdiff(bus_node(Bus.SUPPLY_POS), bus_node(Bus.SUPPLY_NEG))
            if not settings.output_on:
                return SupplyReading(volts, 0.0, False)
            amps = settings.current_limit_a if cc else -sol.i("supply:source")
            return SupplyReading(volts, amps, cc)

    # --- settling -----------------------------------------------------------------------------

    def _settling(self, settled: float, function: MeterFunction) -> float:
        if self.clock.instant or not self.unit.capacitors or self._changed_at is None:
            return settled
        tau = self._tau(function)
        elapsed = self.clock.now() - self._changed_at
        if tau <= 0 or elapsed > 20 * tau:
            return settled
        return settled + (self._value_before - settled) * math.exp(-elapsed / tau)

    def _tau(self, function: MeterFunction) -> float:
        """The slowest R*C of the declared capacitances, with R the Thevenin resistance the
        capacitor sees in the present relay state."""
        key = (self.closed(), function.value)
        if key in self._tau_cache:
            return self._tau_cache[key]
        tau = self._slowest_tau(self.circuit, function)
        self._tau_cache[key] = tau
        return tau

    def time_constant(self, relays: frozenset[int], function: MeterFunction) -> float:
        """The slowest R*C the meter sees on ``relays`` in ``function`` (seconds; 0 without
        capacitors), leaving the bench as it is: what an engineer states a settle time from."""
        with self._lock:
            c = self.circuit.copy()
            for pin in self.fixture.pins.values():
                for relay in pin.relays.values():
                    c.set_switch(f"relay:{relay}", relay in relays)
            ohms = function not in (MeterFunction.DC_VOLTS, MeterFunction.DC_CURRENT)
            inputs = {
                MeterFunction.DC_VOLTS: DCV_INPUT_OHM,
                MeterFunction.DC_CURRENT: DCI_SHUNT_OHM,
            }
            c.set_value("meter:input", inputs.get(function, OHMS_INPUT_OHM))
            c.set_value("meter:test", 0.0 if not ohms else 1e-3)  # a source: no conductance
            return self._slowest_tau(c, function)

    def _slowest_tau(self, base: Circuit, function: MeterFunction) -> float:
        """The slowest R*C among the capacitors the meter sees: a capacitor whose voltage does
        not reach the meter's terminals (on a route of its own) cannot slow this reading."""
        sense = function is MeterFunction.RES_4W
        hi = bus_node(Bus.SENSE_HI if sense else Bus.DMM_HI)
        lo = bus_node(Bus.SENSE_LO if sense else Bus.DMM_LO)
        tau = 0.0
        probe_a = 1e-6
        for cap in self.unit.capacitors.values():
            c = base.copy()
            before = solve(c)
            c.isource("probe:thevenin", cap.b, cap.a, probe_a)
            after = solve(c)
            swing = abs(after.vdiff(cap.a, cap.b) - before.vdiff(cap.a, cap.b))
            seen = abs(after.vdiff(hi, lo) - before.vdiff(hi, lo))
            if seen <= 1e-6 * swing:  # coupled to the meter by less than 1 ppm
                continue
            tau = max(tau, swing / probe_a * cap.c_farad)
        return tau
