"""A simulated single-output bench supply with SCPI programming and readback from the bench.

Settings are kept in the bench's own ``SupplySettings`` object (changed in place) and ``on_change``
is called after each change, so the bench always solves its circuit with what the host programmed.

Figures (typical 30 V / 3 A bench supply, from memory): 0..30 V, 1 mA..3 A limit, readback costs
20 ms in real timing.
"""

from __future__ import annotations

import logging
import math
from collections.abc import Callable
from typing import ClassVar

from drivers.base import InstrumentIdentity
from rig.errors import RigError
from rig.sim.probe import BenchProbe, SupplySettings
from rig.sim.scpi import Call, ScpiInstrument
from rig.sim.scpi_errors import ScpiError
from rig.sim.timing import BenchClock

log = logging.getLogger(__name__)

VOLTAGE_MAX_V = 30.0
CURRENT_MIN_A, CURRENT_MAX_A = 1e-3, 3.0
READBACK_S = 20e-3
#: *RST values: the defaults of ``SupplySettings``.
_DEFAULTS = SupplySettings()


class SimSupply(ScpiInstrument):
    """A SCPI supply named ``name`` on the bench; serve it with ``ScpiTcpServer``."""

    FAULT_KINDS: ClassVar[tuple[str, ...]] = (*ScpiInstrument.FAULT_KINDS, "trip")

    def __init__(
        self,
        probe: BenchProbe,
        clock: BenchClock,
        *,
        name: str,
        settings: SupplySettings,
        identity: InstrumentIdentity,
        on_change: Callable[[], None] | None = None,
    ) -> None:
        super().__init__(identity)
        self.probe = probe
        self.clock = clock
        self.name = name
        self.settings = settings
        self.on_change = on_change
        self._tripped = False
        add = self.tree.add
        level = "[:LEVel][:IMMediate][:AMPLitude]"
        add(f"[SOURce:]VOLTage{level}", on_set=self._voltage_set, on_query=self._voltage_query)
        add(f"[SOURce:]CURRent{level}", on_set=self._current_set, on_query=self._current_query)
        add("OUTPut#1[:STATe]", on_set=self._output_set, on_query=self._output_query)
        add("OUTPut#1:PROTection:TRIPped?", on_query=self._tripped_query)
        add("OUTPut#1:PROTection:CLEar", on_set=self._trip_clear)
        add("MEASure[:SCALar]:VOLTage[:DC]?", on_query=self._measure_voltage)
        add("MEASure[:SCALar]:CURRent[:DC]?", on_query=self._measure_current)

    @property
    def tripped(self) -> bool:
        """Whether the over-current protection has switched the output off since the last clear."""
        return self._tripped

    # ----------------------------------------------------------------- state changes

    def reset_device(self) -> None:
        """*RST: output off, voltage and limit to their defaults, trip flag cleared."""
        self.settings.output_on = False
        self.settings.voltage_v = _DEFAULTS.voltage_v
        self.settings.current_limit_a = _DEFAULTS.current_limit_a
        self._tripped = False
        self._changed()

    def _changed(self) -> None:
        if self.on_change is None:
            return
        try:
            self.on_change()
        except Exception:
            log.exception("on_change of supply %s failed", self.name)

    def _fault_armed(self, kind: str) -> None:
        if kind == "trip" and self.settings.output_on:
            self._fire_trip()

    def _fire_trip(self) -> None:
        """Switch the output off as an over-current trip would, and say so in the queue."""
        if not self._take_fault("trip"):
            return
        self.settings.output_on = False
        self._tripped = True
        self.push_error(-300, "over-current protection tripped")
        log.info("supply %s tripped", self.name)
        self._changed()

    # ----------------------------------------------------------------- handlers

    def _voltage_set(self, call: Call) -> None:
        call.count(1, 1)
        volts = call.number(0, unit="V", low=0.0, high=VOLTAGE_MAX_V, default=_DEFAULTS.voltage_v)
        self.settings.voltage_v = volts
        self._changed()

    def _voltage_query(self, call: Call) -> str:
        call.count(0, 1)
        if call.has(0):
            word = call.word(0, ("MINimum", "MAXimum"))
            return f"{0.0 if word == 'MINIMUM' else VOLTAGE_MAX_V:+.6E}"
        return f"{self.settings.voltage_v:+.6E}"

    def _current_set(self, call: Call) -> None:
        call.count(1, 1)
        amps = call.number(
            0, unit="A", low=CURRENT_MIN_A, high=CURRENT_MAX_A, default=_DEFAULTS.current_limit_a
        )
        self.settings.current_limit_a = amps
        self._changed()

    def _current_query(self, call: Call) -> str:
        call.count(0, 1)
        if call.has(0):
            word = call.word(0, ("MINimum", "MAXimum"))
            return f"{CURRENT_MIN_A if word == 'MINIMUM' else CURRENT_MAX_A:+.6E}"
        return f"{self.settings.current_limit_a:+.6E}"

    def _output_set(self, call: Call) -> None:
        call.count(1, 1)
        on = call.boolean(0)
        self.settings.output_on = on
        if on:
            self._tripped = False
        self._changed()
        if on:
            self._fire_trip()

    def _output_query(self, call: Call) -> str:
        call.count(0, 0)
        return "1" if self.settings.output_on else "0"

    def _tripped_query(self, call: Call) -> str:
        call.count(0, 0)
        return "1" if self._tripped else "0"

    def _trip_clear(self, call: Call) -> None:
        call.count(0, 0)
        self._tripped = False

    def _reading(self, call: Call) -> tuple[float, float]:
        call.count(0, 0)
        self.clock.wait(READBACK_S)
        try:
            r = self.probe.supply_reading(self.name, self.settings)
        except RigError as error:
            log.warning("bench could not give a reading for supply %s: %s", self.name, error)
            raise ScpiError(-240, str(error)) from error
        if not (math.isfinite(r.voltage_v) and math.isfinite(r.current_a)):
            raise ScpiError(-240, "readback is not a finite number")
        return r.voltage_v, r.current_a

    def _measure_voltage(self, call: Call) -> str:
        return f"{self._reading(call)[0]:+.6E}"

    def _measure_current(self, call: Call) -> str:
        return f"{self._reading(call)[1]:+.6E}"
