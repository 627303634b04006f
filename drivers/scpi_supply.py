"""A driver for single-output SCPI bench supplies, spellings in a table as for the DMM.

Every set is followed by a read of the error queue, so a refused value or an over-current trip is
reported at the step that caused it; ``output_is_on`` always asks the supply, because safe state is
proven by read-back, never by what we last sent.
"""

from __future__ import annotations

import logging
import math
from collections.abc import Mapping
from types import MappingProxyType
from typing import ClassVar

from drivers.base import Supply
from drivers.scpi_driver import ScpiDriver
from drivers.visa_session import (
    format_number,
    parse_number,
)
from rig.errors import InstrumentProtocolError, InstrumentReportedError, RigError, SettingRefused

log = logging.getLogger(__name__)


class ScpiSupply(ScpiDriver, Supply):
    """``drivers.base.Supply`` over SCPI; constructor ``(name, resource, settings)``."""

    #: Command roles -> templates.  Placeholders: {volts}, {amps}, {state} (``on``/``off`` entry).
    DIALECT: ClassVar[Mapping[str, str]] = MappingProxyType(
        {
            "identity": "*IDN?",
            "reset": "*RST;*CLS",
            "error": "SYST:ERR?",
            "voltage": "VOLT {volts}",
            "current_limit": "CURR {amps}",
            "output": "OUTP {state}",
            "output_query": "OUTP?",
            "measure_voltage": "MEAS:VOLT?",
            "measure_current": "MEAS:CURR?",
            "on": "ON",
            "off": "OFF",
        }
    )

    # ----------------------------------------------------------------- Supply

    def reset(self) -> None:
        """``*RST`` (output off on SCPI supplies) and ``*CLS``, then check the queue."""
        self._set(self._commands["reset"])

    def set_voltage(self, volts: float) -> None:
        value = self._non_negative("volts", volts)
        self._set_value(self._commands["voltage"].format(volts=format_number(value)))

    def set_current_limit(self, amps: float) -> None:
        value = self._non_negative("amps", amps)
        self._set_value(self._commands["current_limit"].format(amps=format_number(value)))

    def set_output(self, on: bool) -> None:
        if not isinstance(on, bool):
            raise RigError(f"{self.name}: set_output needs True or False, got {on!r}")
        state = self._commands["on" if on else "off"]
        self._set(self._commands["output"].format(state=state))

    def send_output_off(self) -> None:
        """``OUTP OFF`` alone: the read-back that follows waits for it (queries are answered in
        order), and the next ``set_output`` or safe start empties the error queue."""
        self._session.write(self._commands["output"].format(state=self._commands["off"]))

    def output_is_on(self) -> bool:
        command = self._commands["output_query"]
        reply = self._session.query(command).strip().upper()
        if reply in ("1", "ON"):
            return True
        if reply in ("0", "OFF"):
            return False
        raise InstrumentProtocolError(
            f"expected 1/0 or ON/OFF, got {reply!r}", **self._session.where(command)
        )

    def measure_voltage(self) -> float:
        return self._measure("measure_voltage")

    def measure_current(self) -> float:
        return self._measure("measure_current")

    # ----------------------------------------------------------------- internals

    def _set(self, command: str) -> None:
        self._session.write(command)
        self.check_errors(after=command)

    def _set_value(self, command: str) -> None:
        """A voltage or current limit: one refused as a value, with nothing else reported, is a
        ``SettingRefused`` (a setting to correct, not a trip to look into)."""
        try:
            self._set(command)
        except InstrumentReportedError as exc:
            if all(-199 <= c <= -100 or -229 <= c <= -220 for c in exc.codes):
                raise SettingRefused(
                    exc.message,
                    code=exc.code,
                    codes=exc.codes,
                    instrument=exc.instrument,
                    resource=exc.resource,
                    command=exc.command,
                ) from exc
            raise

    def _measure(self, role: str) -> float:
        command = self._commands[role]
        value = parse_number(self._session.query(command), where=self._session.where(command))
        if math.isinf(value):
            raise InstrumentProtocolError(
                "supply sent an overload value as a reading", **self._session.where(command)
            )
        return value

    def _non_negative(self, what: str, value: float) -> float:
        if (
            isinstance(value, bool)
            or not isinstance(value, int | float)
            or not math.isfinite(value)
            or value < 0
        ):
            raise RigError(f"{self.name}: {what} must be a finite number >= 0, got {value!r}")
        return float(value)
