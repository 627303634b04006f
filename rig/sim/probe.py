"""What a simulated instrument asks of the bench it sits on.

The simulated DMM and supply know SCPI and their own front-end behaviour (ranges, noise, overload,
integration time); the bench knows the circuit.  They meet through this protocol, so the instruments
can be tested on a small circuit of their own and the bench can be swapped without touching them.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Protocol

from drivers.base import MeterFunction


@dataclass
class SupplySettings:
    """What the host has programmed into a simulated supply."""

    voltage_v: float = 0.0
    current_limit_a: float = 0.1
    output_on: bool = False


@dataclass(frozen=True)
class SupplyReading:
    """What the supply's own readback would show, from the solved circuit."""

    voltage_v: float
    current_a: float
    constant_current: bool


class BenchProbe(Protocol):
    """The circuit as seen from the instrument terminals at this moment."""

    def meter_value(self, function: MeterFunction, test_current_a: float) -> float:
        """The noiseless value the DMM would see now.

        DC volts: V(HI) - V(LO) with the meter's 10 Mohm input across HI and LO.
        Resistance: the voltage across HI-LO (2-wire) or SENSE HI-LO (4-wire) divided by
        ``test_current_a``, with that current driven from HI to LO through the circuit.
        DC current: the current through the meter's shunt from HI to LO.
        Includes settling after a relay change (a reading taken too early is visibly wrong).
        """
        ...

    def supply_reading(self, name: str, settings: SupplySettings) -> SupplyReading:
        """Solve the circuit with supply ``name`` as programmed and report its terminals."""
        ...
