"""A driver for SCPI bench DMMs, with the command spellings in a table (the dialect).

Meters that spell a command differently need only a different table, given as the class attribute
``DIALECT`` of a subclass or as the ``dialect`` key of the instrument's settings.  The driver keeps
the last configuration it set and skips a configure that would change nothing: the engine calls
``configure`` before every measurement and a needless range change costs time and relay wear in the
meter.
"""

from __future__ import annotations

import logging
import math
from collections.abc import Mapping
from dataclasses import dataclass
from types import MappingProxyType
from typing import ClassVar

from drivers.base import Dmm, MeterFunction
from drivers.scpi_driver import ScpiDriver
from drivers.visa_session import (
    compound,
    format_number,
    parse_number,
    parse_numbers,
)
from rig.errors import InstrumentError, InstrumentProtocolError, RigError

log = logging.getLogger(__name__)

_UNITS = {
    MeterFunction.DC_VOLTS: "V",
    MeterFunction.RES_2W: "ohm",
    MeterFunction.RES_4W: "ohm",
    MeterFunction.DC_CURRENT: "A",
}


@dataclass(frozen=True)
class DmmConfiguration:
    """What the driver last set: function, range (None = autorange) and NPLC."""

    function: MeterFunction
    range_: float | None
    nplc: float


class ScpiDmm(ScpiDriver, Dmm):
    """``drivers.base.Dmm`` over SCPI; constructor ``(name, resource, settings)``."""

    #: Command roles -> templates.  Placeholders: {function} (a ``func_*`` entry), {range},
    #: {nplc}, {count}.
    DIALECT: ClassVar[Mapping[str, str]] = MappingProxyType(
        {
            "identity": "*IDN?",
            "reset": "*RST;*CLS",
            "error": "SYST:ERR?",
            "configure": "CONF:{function}",
            "range": "{function}:RANG {range}",
            "autorange": "{function}:RANG:AUTO ON",
            "nplc": "{function}:NPLC {nplc}",
            "count": "SAMP:COUN {count}",
            "read": "READ?",
            "func_dcv": "VOLT:DC",
            "func_res2w": "RES",
            "func_res4w": "FRES",
            "func_dci": "CURR:DC",
        }
    )

    def __init__(self, name: str, resource: str, settings: Mapping[str, object]) -> None:
        super().__init__(name, resource, settings)
        self._configuration: DmmConfiguration | None = None
        self._unconfirmed: tuple[DmmConfiguration, str, int | None] | None = None
        """A configuration sent whose error check is still to come, what was sent, and the
        sample count it set (None: left as it was)."""
        self._sample_count: int | None = None

    @property
    def configuration(self) -> DmmConfiguration | None:
        """The last configuration set, or None if unknown (after reset or a failed configure)."""
        return self._configuration

    # ----------------------------------------------------------------- Dmm

    def reset(self) -> None:
        self._configuration = None
        self._unconfirmed = None
        self._sample_count = None
        self._session.write(self._commands["reset"])
        self.check_errors(after=self._commands["reset"])

    def configure(self, function: MeterFunction, range_: float | None, nplc: float) -> None:
        self.send_configuration(function, range_, nplc)
        self.confirm_configuration()

    def send_configuration(
        self, function: MeterFunction, range_: float | None, nplc: float
    ) -> None:
        wanted = self._checked(function, range_, nplc)
        old = self._configuration
        if wanted == old:
            return
        func = self._commands[f"func_{function.value}"]
        commands: list[str] = []
        if old is None or old.function is not function:
            commands.append(self._commands["configure"].format(function=func))
        if old is None or old.function is not function or old.range_ != range_:
            if range_ is None:
                commands.append(self._commands["autorange"].format(function=func))
            else:
                commands.append(
                    self._commands["range"].format(function=func, range=format_number(range_))
                )
        if old is None or old.function is not function or old.nplc != nplc:
            commands.append(self._commands["nplc"].format(function=func, nplc=format_number(nplc)))
        self._configuration = None
        self._unconfirmed = None
        count: int | None = None
        if old is None or old.function is not function:
            # CONFigure resets the sample count on SCPI meters; it is set along, to the one
            # reading most steps take, so the first READ? needs no message of its own
            self._sample_count = None
            count = 1
            commands.append(self._commands["count"].format(count=count))
        # One program message, then the error query on its own: a meter may skip the rest of a
        # message after a refused unit (IEEE 488.2 leaves the recovery point to the device), so a
        # query at the end of it might never be answered.
        self._session.write(compound(commands))
        self._unconfirmed = (wanted, "; ".join(commands), count)

    def confirm_configuration(self) -> None:
        if self._unconfirmed is None:
            return
        (wanted, sent, count), self._unconfirmed = self._unconfirmed, None
        self.check_errors(after=sent)
        self._configuration = wanted
        if count is not None:
            self._sample_count = count
        log.debug("%s configured %s", self.name, wanted)

    def read(self) -> float:
        return self._read(1)[0]

    def read_many(self, count: int) -> list[float]:
        if isinstance(count, bool) or not isinstance(count, int) or count < 1:
            raise RigError(f"{self.name}: read_many needs a positive whole count, got {count!r}")
        return self._read(count)

    # ----------------------------------------------------------------- internals

    def _checked(
        self, function: MeterFunction, range_: float | None, nplc: float
    ) -> DmmConfiguration:
        if not isinstance(function, MeterFunction):
            raise RigError(f"{self.name}: expected a MeterFunction, got {function!r}")
        unit = _UNITS[function]
        if range_ is not None and (
            isinstance(range_, bool)
            or not isinstance(range_, int | float)
            or not math.isfinite(range_)
            or range_ <= 0
        ):
            raise RigError(
                f"{self.name}: range must be a positive number of {unit} or None for autorange, "
                f"got {range_!r}"
            )
        if (
            isinstance(nplc, bool)
            or not isinstance(nplc, int | float)
            or not math.isfinite(nplc)
            or nplc <= 0
        ):
            raise RigError(f"{self.name}: nplc must be a positive number, got {nplc!r}")
        return DmmConfiguration(function, None if range_ is None else float(range_), float(nplc))

    def _read(self, count: int) -> list[float]:
        if self._sample_count != count:
            command = self._commands["count"].format(count=count)
            self._sample_count = None
            self._session.write(command)
            self._sample_count = count
        command = self._commands["read"]
        where = self._session.where(command)
        try:
            reply = self._session.query(command)
        except InstrumentError:
            self._sample_count = None
            raise
        values = (
            parse_numbers(reply, where=where) if count > 1 else [parse_number(reply, where=where)]
        )
        if len(values) != count:
            self._sample_count = None
            self.check_errors(after=command)  # e.g. the meter refused the sample count
            raise InstrumentProtocolError(f"expected {count} readings, got {len(values)}", **where)
        return values
