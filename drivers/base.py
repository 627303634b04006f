"""The small protocols every instrument driver implements.

Everything above the drivers (engine, routing, safe state) talks only to these classes, so a shop
can plug in its own meter or relay board by shipping a class that implements one of them and
registering it under the ``rig.drivers`` entry-point group.
"""

from __future__ import annotations

import enum
from abc import ABC, abstractmethod
from collections.abc import Callable, Iterable, Mapping
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

    @classmethod
    def setting_problems(
        cls, resource: str, settings: Mapping[str, object]
    ) -> list[tuple[str, str]]:
        """What is wrong with a resource and settings as a station file gives them, as (key
        under the instrument's table, what was expected), so a station is checked when it
        loads and not first at a run.  This default finds nothing; a driver names its own."""
        return []

    @abstractmethod
    def identity(self) -> InstrumentIdentity:
        """Ask the instrument who it is."""

    @abstractmethod
    def close(self) -> None:
        """Release the connection; never raises."""


class Dmm(Instrument):
    """A digital multimeter."""

    _to_configure: tuple[MeterFunction, float | None, float] | None = None

    @abstractmethod
    def reset(self) -> None:
        """Return the meter to a known state (``*RST``, ``*CLS``) and check its error queue."""

    @abstractmethod
    def configure(self, function: MeterFunction, range_: float | None, nplc: float) -> None:
        """Set function, range (``None`` for autorange) and integration time in power-line cycles.

        Reads the instrument's error queue afterwards and raises ``InstrumentReportedError``.
        """

    def send_configuration(
        self, function: MeterFunction, range_: float | None, nplc: float
    ) -> None:
        """The first half of ``configure``: send the setup without waiting for anything, so it
        can go out while relays move (a meter that stops answering then holds nothing up).
        ``confirm_configuration`` must follow before the next reading.

        This default only remembers the setup; a driver that can split the two overrides both."""
        self._to_configure = (function, range_, nplc)

    def confirm_configuration(self) -> None:
        """The second half of ``configure``: check that the setup sent was taken (the error
        queue), raising ``InstrumentReportedError`` if not."""
        wanted, self._to_configure = self._to_configure, None
        if wanted is not None:
            self.configure(*wanted)

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

    def send_output_off(self) -> None:
        """Switch the output off without reading the error queue, where the read-back that
        follows is the proof and a refusal matters only if the output still reads on (the end of
        a run).  This default checks, as ``set_output(False)``; a driver that can send without
        waiting overrides it."""
        self.set_output(False)

    @abstractmethod
    def measure_voltage(self) -> float: ...

    @abstractmethod
    def measure_current(self) -> float: ...


class RelayBox(Instrument):
    """A box of numbered relays (1-based)."""

    relay_count: int | None = None
    """How many relays the box says it has (None: a box that cannot say)."""
    max_closed: int | None = None
    """How many relays the box says may be closed at once (None: a box that cannot say)."""

    @abstractmethod
    def open_all(self) -> None:
        """Open every relay and verify by read-back."""

    @abstractmethod
    def apply(self, closed: Iterable[int]) -> None:
        """Make exactly ``closed`` the closed set, break-before-make, verified by read-back.

        Relays already closed that stay closed are not touched.
        """

    def send_change(self, closed: Iterable[int]) -> None:
        """Start ``apply(closed)`` and return while the contacts move; ``finish_change`` then
        verifies it.  Until then the caller may do other work, such as setting up the meter or
        filing the last step's results, and the relays move meanwhile.

        This default cannot split a change and makes it whole here; a driver whose box answers
        only once its contacts have moved overrides both."""
        self.apply(closed)

    def finish_change(self) -> None:
        """Wait for the change ``send_change`` started, verify it by read-back, and raise what
        went wrong with it.  Nothing to do when no change is pending."""

    def apply_overlapping(self, closed: Iterable[int], meanwhile: Callable[[], object]) -> None:
        """``apply(closed)``, calling ``meanwhile`` once while the contacts move, so that other
        instruments are set up inside the relay time instead of after it.  The change is read
        back first; an error from ``meanwhile`` is raised after that."""
        self.send_change(closed)
        try:
            meanwhile()
        except Exception:
            self.finish_change()  # a failed change is the more urgent news: raised first
            raise
        self.finish_change()

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
