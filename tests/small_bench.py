"""A tiny ``BenchProbe`` over fixed resistor circuits, solved by hand, for the instrument tests.

The meter sees one of four hookups (``SmallBench.hookup``); values are worked out with Ohm's law and
the divider rule here, so the instrument tests do not depend on the circuit solver.

    "resistor": R_X between HI and LO, each lead R_LEAD (2-wire sees R_X + 2 R_LEAD, 4-wire R_X).
    "divider":  supply -> R_TOP -> node -> R_BOTTOM -> ground; the meter across R_BOTTOM, loaded by
                its 10 Mohm input.
    "open":     nothing between HI and LO.
    "series":   supply -> R_LOAD -> meter (current) -> ground; the shunt burden is neglected.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from drivers.base import MeterFunction
from rig.errors import CircuitError
from rig.sim.probe import SupplyReading, SupplySettings

R_X = 1000.0
R_LEAD = 0.5
R_TOP = 10_000.0
R_BOTTOM = 4_700.0
R_LOAD = 100.0
DMM_INPUT_OHM = 10e6


def parallel(a: float, b: float) -> float:
    return a * b / (a + b)


@dataclass
class SmallBench:
    """One supply (named ``supply_name``) and one meter hookup."""

    hookup: str = "resistor"
    supply: SupplySettings = field(default_factory=SupplySettings)
    supply_name: str = "psu"
    test_currents: list[float] = field(default_factory=list)

    def load_ohm(self) -> float:
        """What the supply drives: the divider (with the meter across R_BOTTOM) or R_LOAD."""
        if self.hookup == "series":
            return R_LOAD
        return R_TOP + parallel(R_BOTTOM, DMM_INPUT_OHM)

    def supply_reading(self, name: str, settings: SupplySettings) -> SupplyReading:
        """An ideal CV/CC supply into a resistive load."""
        assert name == self.supply_name, name
        if not settings.output_on:
            return SupplyReading(0.0, 0.0, False)
        load = self.load_ohm()
        current = settings.voltage_v / load
        if current > settings.current_limit_a:
            return SupplyReading(settings.current_limit_a * load, settings.current_limit_a, True)
        return SupplyReading(settings.voltage_v, current, False)

    def meter_value(self, function: MeterFunction, test_current_a: float) -> float:
        self.test_currents.append(test_current_a)
        terminal_v = self.supply_reading(self.supply_name, self.supply).voltage_v
        if function is MeterFunction.DC_VOLTS:
            if self.hookup == "divider":
                return terminal_v * parallel(R_BOTTOM, DMM_INPUT_OHM) / self.load_ohm()
            return 0.0
        if function is MeterFunction.DC_CURRENT:
            return terminal_v / R_LOAD if self.hookup == "series" else 0.0
        if self.hookup == "open":
            return math.inf
        if self.hookup != "resistor":
            raise CircuitError(f"resistance of hookup {self.hookup!r} is not worked out")
        # Drive test_current_a from HI to LO; V = I R; reading = V / I.
        r = R_X + 2 * R_LEAD if function is MeterFunction.RES_2W else R_X
        return (test_current_a * r) / test_current_a
