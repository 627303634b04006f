"""Driver for a serial relay box speaking our line protocol (docs/relay-box-protocol.md).

Every change is verified against the state the box reports back, every reply is checked
(checksum, sequence number), and one corrupted or missing reply is retried: every verb of the
protocol is idempotent, so repeating a command whose acknowledgement was lost cannot move a relay
twice.
"""

from __future__ import annotations

import contextlib
import logging
import math
import os
import termios
import threading
from collections import deque
from collections.abc import Iterable, Iterator, Mapping
from dataclasses import dataclass

import serial

from drivers.base import InstrumentIdentity, RelayBox
from drivers.relay_frames import (
    MAX_REPLY_LINE,
    TERMINATOR,
    BoxInfo,
    BoxState,
    Command,
    ErrorCode,
    FrameError,
    Reply,
    Verb,
    WatchdogMode,
    decode_reply,
    encode_command,
    format_relays,
    next_seq,
    parse_counts,
    parse_info,
    parse_state,
)
from drivers.serial_lines import LineReader
from rig.errors import (
    ConfigError,
    InstrumentConnectionLost,
    InstrumentError,
    InstrumentProtocolError,
    InstrumentReportedError,
    InstrumentTimeout,
    Problem,
)

log = logging.getLogger(__name__)

DEFAULT_BAUDRATE = 115200
DEFAULT_TIMEOUT_MS = 500
_KNOWN_SETTINGS = ("baudrate", "timeout_ms", "assert_dtr_rts")
_ATTEMPTS = 2
"""One try and one retry."""


def _read_settings(name: str, settings: Mapping[str, object]) -> tuple[int, float, bool]:
    """Check the station settings of one box; return (baudrate, timeout in ms, whether DTR and
    RTS are raised when the port opens)."""
    where = f"settings of instrument {name!r}"
    problems: list[Problem] = []
    for key in settings:
        if key not in _KNOWN_SETTINGS:
            problems.append(
                Problem(where, key, f"unknown setting; known: {', '.join(_KNOWN_SETTINGS)}")
            )
    baudrate = settings.get("baudrate", DEFAULT_BAUDRATE)
    if isinstance(baudrate, bool) or not isinstance(baudrate, int) or baudrate <= 0:
        problems.append(
            Problem(where, "baudrate", f"expected a positive whole number, found {baudrate!r}")
        )
    timeout = settings.get("timeout_ms", DEFAULT_TIMEOUT_MS)
    if (
        isinstance(timeout, bool)
        or not isinstance(timeout, int | float)
        or not math.isfinite(timeout)
        or timeout <= 0
    ):
        problems.append(
            Problem(where, "timeout_ms", f"expected a positive number of ms, found {timeout!r}")
        )
    lines = settings.get("assert_dtr_rts", True)
    if not isinstance(lines, bool):
        problems.append(
            Problem(where, "assert_dtr_rts", f"expected true or false, found {lines!r}")
        )
    if problems:
        raise ConfigError(problems)
    assert isinstance(baudrate, int) and isinstance(timeout, int | float)
    return baudrate, float(timeout), bool(lines)


class SerialRelayBox(RelayBox):
    """A relay box on a serial port (or the simulator's pseudo-terminal)."""

    def __init__(self, name: str, resource: str, settings: Mapping[str, object]) -> None:
        self.name = name
        self.resource = resource
        self._baudrate, self._timeout_ms, raise_lines = _read_settings(name, settings)
        self.retries = 0
        """Commands that succeeded on their retry (a transient fault the engine should note)."""
        self.tripped_at_open = False
        """The box's watchdog had tripped before this driver opened it (and was then cleared)."""
        self.heartbeat_error: InstrumentError | None = None
        """The last error of the heartbeat thread, if any."""
        self._lock = threading.RLock()
        self._seq = 0
        self._abandoned: deque[int] = deque(maxlen=8)
        self._change: _Change | None = None
        """The last change sent with ``send_change``, until ``finish_change`` takes it."""
        self._beat_stop: threading.Event | None = None
        self._beat_thread: threading.Thread | None = None
        try:
            self._port = serial.Serial(  # not opened yet: no port named
                None,
                self._baudrate,
                timeout=self._timeout_ms / 1000.0,
                write_timeout=self._timeout_ms / 1000.0,
                exclusive=True,
            )
            # pyserial raises DTR and RTS on opening unless told before: a board that resets
            # on DTR would reboot at every run (assert_dtr_rts = false holds them low)
            self._port.port = resource
            self._port.dtr = self._port.rts = raise_lines
            self._port.open()
            self._lines = LineReader(self._port, TERMINATOR)
        except (serial.SerialException, OSError, ValueError) as exc:
            raise InstrumentConnectionLost(
                f"cannot open serial port: {exc}", instrument=name, resource=resource
            ) from exc
        try:
            info = self._info()
            self._identity_text = info.identity
            self.relay_count = info.relays
            self.max_closed = info.budget
            self._counts = dict.fromkeys(range(1, info.relays + 1), 0)
            state = self._read_state()
            self._known = state.closed
            if state.watchdog is WatchdogMode.TRIPPED:
                log.warning(
                    "relay box %s at %s: watchdog had tripped before this session; clearing it",
                    name,
                    resource,
                )
                self.tripped_at_open = True
                self._transact(Verb.WDOFF)
        except BaseException:
            self._port.close()
            raise

    # ---- RelayBox -----------------------------------------------------------------------------

    @classmethod
    def setting_problems(
        cls, resource: str, settings: Mapping[str, object]
    ) -> list[tuple[str, str]]:
        """Unknown settings, ``baudrate``, ``timeout_ms`` and ``assert_dtr_rts`` (any port name may
        exist)."""
        try:
            _read_settings("", settings)
        except ConfigError as exc:
            return [(f"settings.{p.key}", p.message) for p in exc.problems]
        return []

    def identity(self) -> InstrumentIdentity:
        """The identity the box gave in its ``WHO`` reply when the port was opened.

        The driver asks ``WHO`` on opening anyway (for the relay count and budget); asking again
        for every run's record would cost a serial round trip a run.  ``rig run`` and the
        console open the bench for every run, so a box exchanged between runs is asked anew."""
        text = self._identity_text
        fields = text.split(",")
        if len(fields) != 4:
            raise self._error(
                InstrumentProtocolError,
                "identity must have 4 comma-separated fields (maker, model, serial, firmware), "
                f"found {text!r}",
                "WHO",
            )
        return InstrumentIdentity(*(f.strip() for f in fields))

    def open_all(self) -> None:
        with self._lock:
            change = self._drop_change()  # counted before the opening, and superseded by it
            if change is not None and change.verified and not change.target:
                return  # that change opened every relay: the box's answer to it proved it
            before = self._known
            reply = self._transact(Verb.OPENALL)
            self._count(before, frozenset())
            self._verify(reply, frozenset(), "OPENALL")

    def apply(self, closed: Iterable[int]) -> None:
        self.send_change(closed)
        self.finish_change()

    def send_change(self, closed: Iterable[int]) -> None:
        """Write the SET and return without its answer (the box gives it once its contacts have
        moved).  The lock is not held meanwhile: whoever talks to the box next (the heartbeat, a
        safe state, ``finish_change``) reads that answer first, so one command is in flight at a
        time and the heartbeat is never held up by the caller's work.  What went wrong with the
        change is raised by ``finish_change``; a later change or ``open_all`` supersedes it."""
        target = self._check_relays(closed)
        arg = format_relays(target)
        with self._lock:
            self._drop_change()  # one command in flight; an unfinished change is superseded
            change = _Change(arg, target, self._known)
            change.seq = self._send(Verb.SET, arg)
            self._change = change

    def finish_change(self) -> None:
        """Read and verify the answer to the change sent last (if another call has not already),
        raising what went wrong with it."""
        with self._lock:
            change = self._take_change()
        if change is not None and change.error is not None:
            raise change.error

    def _answer_change(self) -> None:
        """Read the answer to a change in flight, if any, keeping its error for
        ``finish_change`` (the lock is held)."""
        change = self._change
        if change is None or change.answered:
            return
        change.answered = True
        try:
            reply = self._transact(Verb.SET, change.arg, sent=change.seq)
            self._count(change.before, change.target)
            self._verify(reply, change.target, f"SET {change.arg}")
            change.verified = True
        except InstrumentError as exc:
            change.error = exc
            log.debug("relay box %s: change to %s failed: %s", self.name, change.arg, exc)

    def _take_change(self) -> _Change | None:
        """The change sent last, answered, and no longer pending (the lock is held)."""
        self._answer_change()
        change, self._change = self._change, None
        return change

    def _drop_change(self) -> _Change | None:
        """``_take_change`` where what comes next supersedes the change: its failure, which
        nobody will now be told of, is logged."""
        change = self._take_change()
        if change is not None and change.error is not None:
            log.warning(
                "relay box %s: superseded change to %s had failed: %s",
                self.name,
                change.arg,
                change.error,
            )
        return change

    def closed_relays(self) -> frozenset[int]:
        with self._lock:
            state = self._read_state()
            self._known = state.closed
            return state.closed

    def start_watchdog(self, timeout_s: float) -> None:
        if (
            isinstance(timeout_s, bool)
            or not isinstance(timeout_s, int | float)
            or not math.isfinite(timeout_s)
            or timeout_s <= 0
        ):
            raise self._error(
                InstrumentError,
                f"watchdog timeout must be a positive number of seconds, found {timeout_s!r}",
                "WDARM",
            )
        self._stop_heartbeat()
        self._transact(Verb.WDARM, str(round(timeout_s * 1000)))
        stop = threading.Event()
        thread = threading.Thread(
            target=self._heartbeat,
            args=(timeout_s / 3.0, stop),
            name=f"relay-box heartbeat {self.name}",
            daemon=True,
        )
        self._beat_stop, self._beat_thread = stop, thread
        thread.start()

    def stop_watchdog(self) -> None:
        beat = self._beat_stop
        if beat is not None:
            beat.set()  # no beat after this one: a watchdog left armed (WDOFF failed) goes unfed
        try:
            self._transact(Verb.WDOFF)
        finally:
            self._stop_heartbeat()  # joined after: waking its thread costs the command nothing

    def operation_counts(self) -> dict[int, int]:
        with self._lock:
            return dict(self._counts)

    def close(self) -> None:
        """Stop the heartbeat and release the port; an armed watchdog stays armed and will trip."""
        try:
            self._stop_heartbeat()
            self._port.close()
        except Exception:  # close must never raise
            log.exception("closing relay box %s at %s failed", self.name, self.resource)

    # ---- extras -------------------------------------------------------------------------------

    def box_counts(self) -> dict[int, int]:
        """The box's own contact-operation counters (since its power-on), relay by relay."""
        reply = self._transact(Verb.COUNTS)
        try:
            counts = parse_counts(reply.payload)
        except FrameError as exc:
            raise self._error(InstrumentProtocolError, str(exc), "COUNTS") from exc
        if len(counts) != self.relay_count:
            raise self._error(
                InstrumentProtocolError,
                f"box reported {len(counts)} counters, expected {self.relay_count}",
                "COUNTS",
            )
        return {relay: counts[relay - 1] for relay in range(1, self.relay_count + 1)}

    def watchdog_state(self) -> BoxState:
        """The whole state reply (closed relays, watchdog mode and timeout)."""
        return self._read_state()

    # ---- internals ----------------------------------------------------------------------------

    def _error(self, cls: type[InstrumentError], message: str, command: str) -> InstrumentError:
        return cls(message, instrument=self.name, resource=self.resource, command=command)

    def _check_relays(self, closed: Iterable[int]) -> frozenset[int]:
        relays: set[int] = set()
        for relay in closed:
            if isinstance(relay, bool) or not isinstance(relay, int) or relay < 0:
                raise self._error(
                    InstrumentError,
                    f"relay numbers must be whole numbers >= 1, found {relay!r}",
                    "SET",
                )
            relays.add(relay)
        return frozenset(relays)

    def _info(self) -> BoxInfo:
        reply = self._transact(Verb.WHO)
        try:
            return parse_info(reply.payload)
        except FrameError as exc:
            raise self._error(InstrumentProtocolError, str(exc), "WHO") from exc

    def _read_state(self) -> BoxState:
        return self._state_of(self._transact(Verb.STATE), "STATE")

    def _state_of(self, reply: Reply, command: str) -> BoxState:
        try:
            return parse_state(reply.payload)
        except FrameError as exc:
            raise self._error(InstrumentProtocolError, str(exc), command) from exc

    def _count(self, before: frozenset[int], after: frozenset[int]) -> None:
        for relay in before ^ after:
            if relay in self._counts:
                self._counts[relay] += 1

    def _verify(self, reply: Reply, expected: frozenset[int], command: str) -> None:
        """Compare the state the box reports after the change with the one asked for.  The
        reply to SET and OPENALL is that state, read by the box once its contacts have moved
        (checksummed and numbered like any reply), so no STATE query is needed."""
        state = self._state_of(reply, command)
        self._known = state.closed
        if state.closed != expected:
            tripped = (
                " (its watchdog has tripped)" if state.watchdog is WatchdogMode.TRIPPED else ""
            )
            raise self._error(
                InstrumentReportedError,
                f"read-back after the change shows closed {format_relays(state.closed)}"
                f"{tripped}, expected {format_relays(expected)}",
                command,
            )

    def _transact(self, verb: Verb, arg: str = "", *, sent: int | None = None) -> Reply:
        """Send one command and return its OK reply, retrying once on a bad or missing reply.
        With ``sent`` (its sequence number), the command was written already: read its reply
        (and retry it the same way)."""
        text = f"{verb.value} {arg}".strip()
        with self._lock:
            if sent is None:
                self._answer_change()  # one command in flight at a time
            failure: InstrumentError | None = None
            for attempt in range(_ATTEMPTS):
                try:
                    seq = sent if attempt == 0 and sent is not None else self._send(verb, arg)
                    reply = self._receive(seq, text)
                except (InstrumentTimeout, InstrumentProtocolError) as exc:
                    failure = exc
                    log.warning("relay box %s: %s (attempt %d)", self.name, exc, attempt + 1)
                    continue
                if not reply.ok and reply.code == ErrorCode.BAD_CHECKSUM and attempt == 0:
                    failure = self._reported(reply, text)
                    log.warning("relay box %s: command corrupted on the way: %s", self.name, reply)
                    continue
                if attempt > 0:
                    self.retries += 1
                if not reply.ok:
                    raise self._reported(reply, text)
                return reply
            assert failure is not None
            raise failure

    def _reported(self, reply: Reply, command: str) -> InstrumentReportedError:
        return InstrumentReportedError(
            f"relay box refused: error {reply.code} {reply.text}",
            code=reply.code,
            instrument=self.name,
            resource=self.resource,
            command=command,
        )

    def _send(self, verb: Verb, arg: str) -> int:
        """Write one command with the next sequence number; returns that number."""
        seq = self._seq
        self._seq = next_seq(seq)
        frame = encode_command(Command(seq, verb.value, arg))
        command = f"{verb.value} {arg}".strip()
        try:
            with self._port_errors(command):
                self._lines.discard_input()
                self._port.write(frame)
            # The kernel hands the bytes on to the line (or to the pseudo-terminal's other end)
            # from a work item on this CPU, which waits while this thread keeps computing: let it
            # run now, since the caller may go on computing while the box carries the command out.
            os.sched_yield()
        except (InstrumentTimeout, KeyboardInterrupt, SystemExit):
            # part of it, or all, may have gone (a write cut short, Ctrl-C): its reply is skipped
            self._abandoned.append(seq)
            raise
        return seq

    def _receive(self, seq: int, command: str) -> Reply:
        """The reply to command ``seq``; a timed-out or garbled one is given up on (its late
        reply is then skipped)."""
        with self._port_errors(command):
            try:
                return self._read_reply(seq, command)
            except (InstrumentTimeout, InstrumentProtocolError):
                self._abandoned.append(seq)
                raise
            except (KeyboardInterrupt, SystemExit):
                self._abandoned.append(seq)  # Ctrl-C: the reply still comes; the next skips it
                raise

    @contextlib.contextmanager
    def _port_errors(self, command: str) -> Iterator[None]:
        """Port failures as instrument errors that name the box and the command."""
        try:
            yield
        except serial.SerialTimeoutException as exc:
            raise self._error(
                InstrumentTimeout, f"write not done within {self._timeout_ms:g} ms", command
            ) from exc
        except (serial.SerialException, OSError, termios.error) as exc:
            raise self._error(
                InstrumentConnectionLost, f"serial port failed: {exc}", command
            ) from exc

    def _read_reply(self, seq: int, command: str) -> Reply:
        """Our reply, skipping late replies to commands given up on (a few may precede it).
        Port failures are turned into instrument errors by the caller, ``_receive``."""
        for _ in range(1 + len(self._abandoned)):
            line = self._lines.read_line(MAX_REPLY_LINE)
            if not line.endswith(TERMINATOR):
                if line:
                    raise self._error(
                        InstrumentProtocolError,
                        f"reply not terminated by LF within {self._timeout_ms:g} ms: {line[:60]!r}",
                        command,
                    )
                raise self._error(
                    InstrumentTimeout, f"no reply within {self._timeout_ms:g} ms", command
                )
            try:
                reply = decode_reply(line)
            except FrameError as exc:
                raise self._error(
                    InstrumentProtocolError, f"bad reply {line[:60]!r}: {exc}", command
                ) from exc
            if reply.seq is None or reply.seq == seq:
                return reply
            if reply.seq in self._abandoned:
                log.debug("relay box %s: discarding late reply %r", self.name, line)
                continue
            raise self._error(
                InstrumentProtocolError,
                f"reply carries sequence number {reply.seq:04X}, expected {seq:04X}",
                command,
            )
        raise self._error(InstrumentProtocolError, "only stale replies arrived", command)

    def _heartbeat(self, interval_s: float, stop: threading.Event) -> None:
        """Feed the box's watchdog until told to stop; each beat takes the command lock."""
        while not stop.wait(interval_s):
            try:
                with self._lock:
                    if stop.is_set():  # told to stop while waiting for the lock
                        return
                    reply = self._transact(Verb.BEAT)
            except InstrumentConnectionLost as exc:
                log.error("relay box %s: heartbeat stopped, port lost: %s", self.name, exc)
                self.heartbeat_error = exc
                return
            except InstrumentError as exc:
                log.warning("relay box %s: heartbeat failed: %s", self.name, exc)
                self.heartbeat_error = exc
                continue
            if reply.payload == WatchdogMode.TRIPPED.value:
                self.heartbeat_error = self._error(
                    InstrumentReportedError, "watchdog has tripped: every relay was opened", "BEAT"
                )
                log.error("relay box %s: %s", self.name, self.heartbeat_error)

    def _stop_heartbeat(self) -> None:
        stop, thread = self._beat_stop, self._beat_thread
        self._beat_stop = self._beat_thread = None
        if stop is not None:
            stop.set()
        if thread is not None and thread is not threading.current_thread():
            thread.join()


@dataclass
class _Change:
    """A SET written to the box whose answer may still be unread."""

    arg: str
    target: frozenset[int]
    before: frozenset[int]
    seq: int = 0
    answered: bool = False
    """Its answer has been read, or given up on (an interrupt while waiting for it)."""
    verified: bool = False
    """The box's answer showed exactly ``target`` closed."""
    error: InstrumentError | None = None
