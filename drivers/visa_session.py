"""One pyvisa session per instrument, with every transport failure turned into a typed rig error.

pyvisa-py reports failures in several shapes (``VisaIOError`` for a timeout, raw ``OSError`` for a
reset or broken pipe, silence for a clean close) and a timed-out reply still arrives later and would
answer the next query.  This module hides all of that: callers get a reply to the query they sent,
or an ``InstrumentTimeout`` / ``InstrumentConnectionLost`` / ``InstrumentProtocolError`` naming the
instrument, the resource and the command.

The small helpers at the end (numbers, the SCPI error queue, command templates) are shared by the
SCPI drivers so each driver is a table of commands rather than a second copy of this logic.
"""

from __future__ import annotations

import logging
import math
import re
import socket
import string
import threading
from collections.abc import Mapping
from typing import Any

import pyvisa
import pyvisa.constants
import pyvisa.errors
import pyvisa.rname

from rig.errors import (
    ConfigError,
    InstrumentConnectionLost,
    InstrumentError,
    InstrumentProtocolError,
    InstrumentReportedError,
    InstrumentTimeout,
    InstrumentUnreachable,
    Problem,
)

log = logging.getLogger(__name__)

DEFAULT_TIMEOUT_MS = 3000
EXAMPLE_RESOURCE = "TCPIP0::192.168.0.20::5025::SOCKET"
#: SCPI-1999: 9.9E37 is +infinity; anything at or above it in magnitude is not a reading.
OVERLOAD_THRESHOLD = 9.9e37
#: How many SYSTem:ERRor? reads before we give up on an error queue that never empties.
MAX_ERROR_READS = 32

_rm_lock = threading.Lock()
_rm: Any = None
_ERROR_REPLY = re.compile(r'\s*([+-]?\d+)\s*,\s*"(.*)"\s*', re.DOTALL)


def _resource_manager() -> Any:
    """The process's pyvisa-py resource manager, made on first use."""
    global _rm
    with _rm_lock:
        if _rm is None:
            _rm = pyvisa.ResourceManager("@py")
        return _rm


def _short(text: str | bytes, limit: int = 60) -> str:
    shown = repr(text)
    return shown if len(shown) <= limit else shown[:limit] + "..."


def timeout_setting(name: str, settings: Mapping[str, object]) -> int:
    """``timeout_ms`` from an instrument's settings (default 3000); bad values are a ConfigError."""
    value = settings.get("timeout_ms", DEFAULT_TIMEOUT_MS)
    if isinstance(value, bool) or not isinstance(value, int | float) or not value > 0:
        raise ConfigError(
            [
                Problem(
                    f"settings of instrument {name}",
                    "timeout_ms",
                    f"expected a positive number of milliseconds, found {value!r}",
                )
            ]
        )
    return max(1, round(value))


def resource_problem(resource: str) -> str:
    """Why ``resource`` is not a VISA resource string pyvisa can open (empty when it is): a
    missing ``::`` would otherwise surface at the first run as a confusing attribute error."""
    try:
        pyvisa.rname.parse_resource_name(resource)
    except pyvisa.rname.InvalidResourceName as error:
        said = str(error).rstrip(".")
        return f"not a VISA resource string: {said}; expected e.g. {EXAMPLE_RESOURCE}"
    return ""


class VisaSession:
    """A message-based link to one instrument; one lock around each write-and-read pair."""

    def __init__(self, name: str, resource: str, settings: Mapping[str, object]) -> None:
        self.name = name
        self.resource = resource
        self.timeout_ms = timeout_setting(name, settings)
        self._lock = threading.Lock()
        self._handle: Any = None
        self._open("(open)")

    # ----------------------------------------------------------------- public

    def write(self, command: str) -> None:
        """Send one line that expects no reply."""
        with self._lock:
            self._guarded(command, expect_reply=False)

    def query(self, command: str) -> str:
        """Send one line and return its reply line (without the terminator)."""
        with self._lock:
            reply = self._guarded(command, expect_reply=True)
        assert reply is not None
        return reply

    def close(self) -> None:
        """Release the session; never raises."""
        with self._lock:
            self._discard()

    # ----------------------------------------------------------------- internals

    def where(self, command: str) -> dict[str, str]:
        """The keyword arguments every ``InstrumentError`` from this session carries."""
        return {"instrument": self.name, "resource": self.resource, "command": command}

    def _open(self, command: str) -> None:
        try:
            self._handle = _resource_manager().open_resource(
                self.resource,
                read_termination="\n",
                write_termination="\n",
                timeout=self.timeout_ms,
            )
        except ValueError as error:  # pyvisa's InvalidResourceName
            raise InstrumentError(
                f"not a valid VISA resource string ({error}); expected e.g. "
                "TCPIP::127.0.0.1::5025::SOCKET",
                **self.where(command),
            ) from error
        except Exception as error:  # pyvisa-py raises bare Exception("could not connect")
            raise InstrumentUnreachable(
                f"cannot open the connection: {error}", **self.where(command)
            ) from error
        disable_nagle(self._handle)

    def _discard(self) -> None:
        handle, self._handle = self._handle, None
        if handle is not None:
            try:
                handle.close()
            except Exception as error:  # closing a dead socket must never hide the real error
                log.debug("%s: closing the session failed: %s", self.name, error)

    def _guarded(self, command: str, *, expect_reply: bool) -> str | None:
        if self._handle is None:
            self._open(command)  # the link was lost before: try again, the instrument may be back
        try:
            self._handle.write(command)
            if not expect_reply:
                return None
            raw: bytes = self._handle.read_raw()
        except pyvisa.errors.VisaIOError as error:
            if error.error_code == pyvisa.constants.StatusCode.error_timeout:
                self._resync()
                raise InstrumentTimeout(
                    f"no reply within {self.timeout_ms} ms", **self.where(command)
                ) from error
            self._discard()
            raise InstrumentConnectionLost(
                f"I/O failed: {error.description}", **self.where(command)
            ) from error
        except ConnectionRefusedError as error:  # pyvisa-py connects at the first I/O
            self._discard()
            raise InstrumentUnreachable("connection refused", **self.where(command)) from error
        except OSError as error:
            self._discard()
            raise InstrumentConnectionLost(
                f"connection lost ({type(error).__name__}: {error})", **self.where(command)
            ) from error
        except BaseException:
            # cut short (Ctrl-C): its reply may still come and would answer the next query, such
            # as the read-back that proves the bench safe; the next command opens a fresh socket
            self._discard()
            raise
        try:
            return raw.decode("ascii").rstrip("\r\n")
        except UnicodeDecodeError as error:
            raise InstrumentProtocolError(
                f"reply is not ASCII text: {_short(raw)}", **self.where(command)
            ) from error

    def _resync(self) -> None:
        """After a timeout the late reply would answer the next query: start on a fresh socket."""
        log.info("%s: timeout, reconnecting to drop any late reply", self.name)
        self._discard()
        try:
            self._open("(reconnect)")
        except InstrumentError as error:
            log.warning("%s: reconnect failed, will retry on next use: %s", self.name, error)
            self._handle = None


def disable_nagle(handle: Any) -> None:
    """Switch Nagle's algorithm off on a raw socket session, as NI-VISA does by default.

    With it on, a write followed by a second write waits for the instrument's delayed ACK (about
    40 ms on Linux) before the second goes out.  pyvisa-py 0.8.1 refuses to set
    VI_ATTR_TCPIP_NODELAY (its setter raises UnknownAttribute), so the option is set on the
    session's socket itself; a backend without one keeps its default.
    """
    try:
        sock = handle.visalib.sessions[handle.session].interface
        sock.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
    except (AttributeError, KeyError, OSError, TypeError) as error:
        log.debug("TCP_NODELAY not set on %s: %s", getattr(handle, "resource_name", "?"), error)


# --------------------------------------------------------------------------- reply parsing


def parse_numbers(reply: str, *, where: Mapping[str, str]) -> list[float]:
    """Comma-separated SCPI numbers; overload (|x| >= 9.9E37) becomes ±inf; anything else is an
    ``InstrumentProtocolError`` (a driver never returns a reading it did not get)."""
    values: list[float] = []
    for field in reply.split(","):
        try:
            value = float(field)
        except ValueError:
            raise InstrumentProtocolError(
                f"expected a number, got {_short(reply)}", **where
            ) from None
        if not math.isfinite(value):  # "inf"/"nan" text is not how SCPI sends overload
            raise InstrumentProtocolError(f"expected a number, got {_short(reply)}", **where)
        if abs(value) >= OVERLOAD_THRESHOLD:
            value = math.copysign(math.inf, value)
        values.append(value)
    return values


def parse_number(reply: str, *, where: Mapping[str, str]) -> float:
    values = parse_numbers(reply, where=where)
    if len(values) != 1:
        raise InstrumentProtocolError(
            f"expected one number, got {len(values)}: {_short(reply)}", **where
        )
    return values[0]


def parse_error_reply(reply: str, *, where: Mapping[str, str]) -> tuple[int, str]:
    """``-221,"Settings conflict"`` -> (-221, "Settings conflict")."""
    m = _ERROR_REPLY.fullmatch(reply)
    if m is None:
        raise InstrumentProtocolError(
            f'expected an error queue entry <code>,"<text>", got {_short(reply)}', **where
        )
    return int(m.group(1)), m.group(2).replace('""', '"')


def compound(commands: list[str]) -> str:
    """Commands as one program message (IEEE 488.2 §7.3: units joined by ``;``; a leading ``:``
    puts each SCPI path header back at the root; common commands such as ``*CLS`` and a dialect's
    headers without a path are joined as they are)."""
    units = [
        f":{c}" if i and ":" in c.split(" ", 1)[0] and not c.startswith((":", "*")) else c
        for i, c in enumerate(commands)
    ]
    return ";".join(units)


def raise_queued_errors(session: VisaSession, error_query: str, after: str) -> None:
    """Empty the instrument's error queue; raise ``InstrumentReportedError`` if it held anything."""
    found: list[tuple[int, str]] = []
    for _ in range(MAX_ERROR_READS):
        code, text = parse_error_reply(session.query(error_query), where=session.where(error_query))
        if code == 0:
            break
        found.append((code, text))
    else:
        raise InstrumentProtocolError(
            f"error queue did not empty after {MAX_ERROR_READS} reads", **session.where(after)
        )
    if found:
        listed = "; ".join(f'{code},"{text}"' for code, text in found)
        raise InstrumentReportedError(
            f"instrument reported {listed}",
            code=found[0][0],
            codes=tuple(code for code, _ in found),
            **session.where(after),
        )


# --------------------------------------------------------------------------- command templates


def merge_dialect(
    defaults: Mapping[str, str], name: str, settings: Mapping[str, object]
) -> dict[str, str]:
    """The command table: ``defaults`` overridden by the ``dialect`` setting, checked."""
    table = dict(defaults)
    given = settings.get("dialect", {})
    where = f"settings of instrument {name}"
    if not isinstance(given, Mapping):
        raise ConfigError([Problem(where, "dialect", f"expected a table, found {given!r}")])
    problems: list[Problem] = []
    for role, template in given.items():
        if role not in defaults:
            problems.append(
                Problem(
                    where,
                    f"dialect.{role}",
                    f"unknown command role; known roles: {', '.join(sorted(defaults))}",
                )
            )
        elif not isinstance(template, str):
            problems.append(
                Problem(where, f"dialect.{role}", f"expected a string, found {template!r}")
            )
        else:
            allowed = _fields(defaults[role])
            extra = _fields(template) - allowed
            if extra:
                problems.append(
                    Problem(
                        where,
                        f"dialect.{role}",
                        f"unknown placeholder(s) {', '.join(sorted(extra))}; "
                        f"allowed: {', '.join(sorted(allowed)) or 'none'}",
                    )
                )
            else:
                table[role] = template
    if problems:
        raise ConfigError(problems)
    return table


def _fields(template: str) -> set[str]:
    try:
        return {f for _, f, _, _ in string.Formatter().parse(template) if f is not None}
    except ValueError:
        return {"<malformed braces>"}


def format_number(value: float) -> str:
    """A number as sent to an instrument: plain SCPI decimal notation."""
    return format(value, ".10G")
