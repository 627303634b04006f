"""One error hierarchy for the whole project.

Every error a user can meet is a ``RigError`` with a message a technician can act on; the CLI prints
``str(error)`` and never a traceback.  This module imports nothing from rig so that every layer,
the pure computation included, can raise these errors.
"""

from __future__ import annotations

from dataclasses import dataclass


class RigError(Exception):
    """Base of every error rig raises on purpose."""


@dataclass(frozen=True)
class Problem:
    """One problem found in a file: where it is, what was expected and what was found."""

    file: str
    key: str
    message: str
    line: int | None = None

    def __str__(self) -> str:
        where = self.file if self.line is None else f"{self.file}:{self.line}"
        key = f" [{self.key}]" if self.key else ""
        return f"{where}{key}: {self.message}"


class ConfigError(RigError):
    """A data file (unit, fixture, station, sequence, fault spec) is invalid: every problem."""

    def __init__(self, problems: list[Problem]) -> None:
        self.problems = list(problems)
        super().__init__("\n".join(str(p) for p in self.problems))


class CircuitError(RigError):
    """The circuit cannot be solved: a floating node or a loop of ideal voltage sources."""

    def __init__(self, message: str, nodes: tuple[str, ...] = ()) -> None:
        self.nodes = nodes
        super().__init__(message)


class SettingMismatch(RigError):
    """A setting of the sequence or station does not fit what the bench found (a Pt1000 read
    with a Pt100's r0): the run ends on a file to correct, not on a fault of the unit or bench."""


class InterlockError(RigError):
    """A requested relay state would break an interlock; nothing was moved."""


class InstrumentError(RigError):
    """An instrument did not do what was asked; carries which instrument, where, and the command."""

    def __init__(
        self, message: str, *, instrument: str = "", resource: str = "", command: str = ""
    ) -> None:
        self.message = message
        """What went wrong, without where (the instrument, resource and command follow it)."""
        self.instrument = instrument
        self.resource = resource
        self.command = command
        parts = [message]
        if instrument:
            parts.append(f"instrument {instrument}")
        if resource:
            parts.append(f"at {resource}")
        if command:
            parts.append(f"command {command!r}")
        super().__init__(", ".join(parts) if len(parts) > 1 else message)


class InstrumentTimeout(InstrumentError):
    """No reply came within the timeout."""


class InstrumentConnectionLost(InstrumentError):
    """The link to the instrument dropped (socket reset, pty gone, port closed)."""


class InstrumentUnreachable(InstrumentConnectionLost):
    """Nothing answers at the instrument's address (connection refused, or no connection could be
    made): it is off or the address is wrong, which a lost connection's hint would not say."""


class InstrumentProtocolError(InstrumentError):
    """A reply came but could not be understood (garbled, bad checksum, wrong sequence number)."""


class InstrumentReportedError(InstrumentError):
    """The instrument itself reported an error (SCPI error queue, relay box error reply).

    ``code`` is the first error's number; ``codes`` every one read with it."""

    def __init__(
        self, message: str, *, code: int = 0, codes: tuple[int, ...] = (), **where: str
    ) -> None:
        self.code = code
        self.codes = codes or (code,)
        super().__init__(message, **where)


class SettingRefused(InstrumentReportedError):
    """The instrument refused a value it was asked to set, with a SCPI command error or a
    parameter error (-100 to -199, -220 to -229; SCPI-1999 Vol. 2, 21.8) and nothing else: it
    did not take the value, and no fault of the instrument or of what it drives was reported."""


class SafeStateError(RigError):
    """The bench could not be verified safe; names the instruments that failed."""
