"""The small protocols every instrument driver implements.

Everything above the drivers (engine, routing, safe state) talks only to these classes, so a shop
can plug in its own meter or relay board by shipping a class that implements one of them and
registering it under the ``rig.drivers`` entry-point group.
"""

from __future__ import annotations

import enum
from abc import ABC, abstractmethod
from collections.abc import Iterable
from dataclasses import dataclass


class MeterFunction(enum.Enum):
    """What a DMM measures."""

    DC_VOLTS = "dcv"
    RES_2W = "res2w"
    RES_4W = "res4w"
    DC_CURRENT = "dci"


@dataclass(frozen=True)
class InstrumentIdentity:
    """The four fields of ``*IDN?`` (IEEE 488.2), or their equivalent for a non-SCPI device."""

    manufacturer: str
    model: str
    serial: str
    firmware: str

    def __str__(self) -> str:
        return f"{self.manufacturer} {self.model} s/n {self.serial} fw {self.firmware}"


class Instrument(ABC):
    """What every instrument driver has: a name, a resource string, identity and a close."""

    name: str
    resource: str

    @abstractmethod
    def identity(self) -> InstrumentIdentity:
        """Ask the instrument who it is."""

    @abstractmethod
    def close(self) -> None:
        """Release the connection; never raises."""


class Dmm(Instrument):
    """A digital multimeter."""

    @abstractmethod
    def reset(self) -> None:
        """Return the meter to a known state (``*RST``, ``*CLS``) and check its error queue."""

    @abstractmethod
    def configure(self, function: MeterFunction, range_: float | None, nplc: float) -> None:
        """Set function, range (``None`` for autorange) and integration time in power-line cycles.

        Reads the instrument's error queue afterwards and raises ``InstrumentReportedError``.
        """

    @abstractmethod
    def read(self) -> float:
        """Trigger and return one reading in SI units; overload comes back as ``math.inf``."""

    @abstractmethod
    def read_many(self, count: int) -> list[float]:
        """Trigger ``count`` readings at once and return them all."""

    @abstractmethod
    def check_errors(self) -> None:
        """Raise ``InstrumentReportedError`` if the instrument's error queue is not empty."""


class Supply(Instrument):
    """A programmable DC power supply with one output."""

    @abstractmethod
    def set_voltage(self, volts: float) -> None: ...

    @abstractmethod
    def set_current_limit(self, amps: float) -> None: ...

    @abstractmethod
    def set_output(self, on: bool) -> None: ...

    @abstractmethod
    def output_is_on(self) -> bool:
        """Read back whether the output is on (never a cached value)."""

    @abstractmethod
    def measure_voltage(self) -> float: ...

    @abstractmethod
    def measure_current(self) -> float: ...


class RelayBox(Instrument):
    """A box of numbered relays (1-based)."""

    @abstractmethod
    def open_all(self) -> None:
        """Open every relay and verify by read-back."""

    @abstractmethod
    def apply(self, closed: Iterable[int]) -> None:
        """Make exactly ``closed`` the closed set, break-before-make, verified by read-back.

        Relays already closed that stay closed are not touched.
        """

    @abstractmethod
    def closed_relays(self) -> frozenset[int]:
        """Read back the set of closed relays from the box itself."""

    @abstractmethod
    def start_watchdog(self, timeout_s: float) -> None:
        """Arm the box's watchdog and keep it fed from a background heartbeat until stopped."""

    @abstractmethod
    def stop_watchdog(self) -> None:
        """Stop the heartbeat and disarm the watchdog."""

    @abstractmethod
    def operation_counts(self) -> dict[int, int]:
        """Relay operations (close or open) this driver commanded since it was opened."""
