"""A simulated relay box that speaks the relay-box protocol on a pseudo-terminal.

The driver talks to it through pyserial exactly as it would to a real box, so everything between
the driver and the wire (framing, checksums, retries, lost ports) is exercised for real.  The only
way to move its relays is the serial protocol; the test-facing methods only look or inject faults.
"""

from __future__ import annotations

import contextlib
import errno
import logging
import os
import select
import threading
import time
import tty
from collections.abc import Callable
from dataclasses import dataclass
from typing import Literal

from drivers.relay_frames import (
    MAX_COMMAND_LINE,
    TERMINATOR,
    VERBS_WITH_ARGUMENT,
    BoxInfo,
    BoxState,
    Command,
    ErrorCode,
    FrameError,
    Reply,
    Verb,
    WatchdogMode,
    decode_command,
    encode_reply,
    format_counts,
    format_info,
    format_state,
    parse_relays,
    parse_watchdog_ms,
    safe_text,
)
from rig.sim.timing import BenchClock

log = logging.getLogger(__name__)

FAULT_KINDS = ("bad_checksum", "no_ack", "close_pty")
_POLL_S = 0.02
"""Longest the serving loop sleeps; bounds how late a stop or a close_pty fault is noticed."""


@dataclass(frozen=True)
class RelayEvent:
    """One contact movement, in the order it happened; ``t`` is ``clock.now()`` when complete."""

    t: float
    relay: int
    action: Literal["open", "close"]
    cause: Literal["command", "watchdog"]


class SimRelayBox:
    """A box of ``relay_count`` relays with a coil budget, a watchdog and operation counters."""

    def __init__(
        self,
        *,
        relay_count: int,
        max_closed: int,
        clock: BenchClock,
        operate_s: float = 0.005,
        release_s: float = 0.003,
        on_change: Callable[[], None] | None = None,
        identity: str = "rig,sim-relay-box,SIM-0001,1.0",
    ) -> None:
        if not 1 <= relay_count <= 999:
            raise ValueError(f"relay_count must be 1..999, got {relay_count}")
        if not 0 <= max_closed <= relay_count:
            raise ValueError(f"max_closed must be 0..relay_count ({relay_count}), got {max_closed}")
        if operate_s < 0 or release_s < 0:
            raise ValueError(
                f"operate_s and release_s must be >= 0, got {operate_s} and {release_s}"
            )
        if any(not " " <= ch <= "~" or ch == "*" for ch in identity):
            raise ValueError(f"identity must be printable ASCII without '*', got {identity!r}")
        self.relay_count = relay_count
        self.max_closed = max_closed
        self.clock = clock
        self.operate_s = operate_s
        self.release_s = release_s
        self.identity = identity
        self._on_change = on_change
        self.port_path = ""
        self._lock = threading.Lock()
        self._closed: set[int] = set()
        self._counts = dict.fromkeys(range(1, relay_count + 1), 0)
        self._events: list[RelayEvent] = []
        self.lines_handled = 0
        """Command lines received (for benchmarks counting the host's round trips)."""
        self._arrived: float | None = None
        """When the command being handled arrived (``clock.mark()``): its decoding overlaps the
        first contact movement, as a box's firmware does it in microseconds."""
        self._wd_ms = 0
        self._wd_deadline: float | None = None
        self._tripped = False
        self._faults: dict[str, int | None] = {}
        self._master = -1
        self._slave = -1
        self._thread: threading.Thread | None = None
        self._stop = threading.Event()
        self._gone = threading.Event()
        self._triggers: list[tuple[frozenset[int], Callable[[], None]]] = []

    # ---- life cycle ---------------------------------------------------------------------------

    def start(self) -> str:
        """Open the pty pair and serve on it in a thread; return the path clients open."""
        if self._thread is not None:
            raise RuntimeError("SimRelayBox.start() called twice")
        self._master, self._slave = os.openpty()
        tty.setraw(self._slave)
        os.set_blocking(self._master, False)
        self.port_path = os.ttyname(self._slave)
        self._thread = threading.Thread(
            target=self._serve, name=f"sim-relay-box {self.port_path}", daemon=True
        )
        self._thread.start()
        log.debug("simulated relay box serving on %s", self.port_path)
        return self.port_path

    def stop(self) -> None:
        """Stop serving and close the pty; safe to call more than once."""
        self._stop.set()
        if self._thread is not None and self._thread is not threading.current_thread():
            self._thread.join()
        self._close_fds()

    def __enter__(self) -> SimRelayBox:
        self.start()
        return self

    def __exit__(self, *exc: object) -> None:
        self.stop()

    def _close_fds(self) -> None:
        for fd in (self._master, self._slave):
            if fd >= 0:
                with contextlib.suppress(OSError):
                    os.close(fd)
        self._master = self._slave = -1

    # ---- looking ------------------------------------------------------------------------------

    def closed(self) -> frozenset[int]:
        with self._lock:
            return frozenset(self._closed)

    @property
    def watchdog_tripped(self) -> bool:
        with self._lock:
            return self._tripped

    def operation_counts(self) -> dict[int, int]:
        """Contact operations (open or close) per relay since the box was created."""
        with self._lock:
            return dict(self._counts)

    def events(self) -> list[RelayEvent]:
        with self._lock:
            return list(self._events)

    # ---- faults -------------------------------------------------------------------------------

    def inject_fault(self, kind: str, count: int | None = 1) -> None:
        """Make the next ``count`` replies faulty (``None``: until cleared).

        ``close_pty`` makes the box vanish (both pty ends closed) as soon as the serving loop sees
        it; it happens once, ``count`` does not apply, and this call returns once it has happened.
        """
        if kind not in FAULT_KINDS:
            raise ValueError(f"unknown fault kind {kind!r}; known kinds: {', '.join(FAULT_KINDS)}")
        if count is not None and count < 1:
            raise ValueError(f"fault count must be >= 1 or None, got {count}")
        with self._lock:
            self._faults[kind] = count
        serving = self._thread is not None and self._thread.is_alive()
        if kind == "close_pty" and serving and threading.current_thread() is not self._thread:
            self._gone.wait(timeout=5.0)

    def when_closed(self, relays: frozenset[int], action: Callable[[], None]) -> None:
        """Call ``action`` once, in the serving thread, when exactly ``relays`` are closed and
        before the command that closed them is answered: a fault drill arms its fault at a
        chosen step this way, independent of how fast the host runs."""
        with self._lock:
            self._triggers.append((frozenset(relays), action))

    def _fire_triggers(self) -> None:
        with self._lock:
            closed = frozenset(self._closed)
            due = [t for t in self._triggers if t[0] == closed]
            self._triggers = [t for t in self._triggers if t[0] != closed]
        for _, action in due:
            action()

    def clear_faults(self) -> None:
        with self._lock:
            self._faults.clear()

    def _take_fault(self, kind: str) -> bool:
        with self._lock:
            if kind not in self._faults:
                return False
            left = self._faults[kind]
            if left is not None:
                if left <= 1:
                    del self._faults[kind]
                else:
                    self._faults[kind] = left - 1
            return True

    # ---- serving ------------------------------------------------------------------------------

    def _serve(self) -> None:
        buffer = b""
        discarding = False
        while not self._stop.is_set():
            if self._take_fault("close_pty"):
                log.info("simulated relay box on %s vanishes (close_pty fault)", self.port_path)
                self._close_fds()
                self._gone.set()
                self._watch_without_link()
                return
            self._check_watchdog()
            try:
                ready, _, _ = select.select([self._master], [], [], self._poll_timeout())
            except (OSError, ValueError):
                return
            if not ready:
                continue
            try:
                chunk = os.read(self._master, 4096)
            except BlockingIOError:
                continue
            except OSError as exc:
                if exc.errno == errno.EIO:  # no client has the slave open
                    time.sleep(_POLL_S)
                    continue
                raise
            buffer += chunk
            while True:
                line, sep, rest = buffer.partition(TERMINATOR)
                if not sep:
                    if len(buffer) >= MAX_COMMAND_LINE and not discarding:
                        discarding = True
                        self._send(
                            Reply(
                                None,
                                False,
                                code=ErrorCode.LINE_TOO_LONG,
                                text=f"line longer than {MAX_COMMAND_LINE} bytes discarded",
                            )
                        )
                    if discarding:
                        buffer = b""
                    break
                buffer = rest
                if discarding:
                    discarding = False
                    continue
                if line:
                    self._handle_line(line + TERMINATOR)

    def _watch_without_link(self) -> None:
        """The link is gone but the box is still powered: its watchdog still opens every relay
        when the host falls silent, as a real box's firmware does with its cable pulled."""
        while not self._stop.wait(self._poll_timeout() or _POLL_S):
            self._check_watchdog()

    def _poll_timeout(self) -> float:
        with self._lock:
            deadline = self._wd_deadline
        if deadline is None:
            return _POLL_S
        return max(0.0, min(_POLL_S, deadline - self.clock.now()))

    def _handle_line(self, line: bytes) -> None:
        self._arrived = self.clock.mark()
        self.lines_handled += 1
        try:
            self._handle_arrived(line)
        finally:
            self._arrived = None

    def _handle_arrived(self, line: bytes) -> None:
        try:
            command = decode_command(line)
        except FrameError as exc:
            if exc.seq is not None:
                self._feed_watchdog()
            log.debug("refused frame %r: %s", line, exc)
            self._send(Reply(exc.seq, False, code=exc.code, text=safe_text(str(exc))))
            return
        self._feed_watchdog()
        try:
            payload = self._execute(command)
        except FrameError as exc:
            log.debug("refused command %r: %s", line, exc)
            self._send(Reply(command.seq, False, code=exc.code, text=safe_text(str(exc))))
            return
        if self._take_fault("no_ack"):
            log.debug("no_ack fault: command %r executed, not acknowledged", line)
            return
        self._send(Reply(command.seq, True, payload=payload))

    def _send(self, reply: Reply) -> None:
        frame = encode_reply(reply)
        if self._take_fault("bad_checksum"):
            body, _, _ = frame.rpartition(b"*")
            good = int(frame[len(body) + 1 : len(body) + 3], 16)
            frame = body + b"*" + f"{good ^ 0x5A:02X}".encode("ascii") + TERMINATOR
        try:
            os.write(self._master, frame)
        except BlockingIOError:
            log.warning("reply dropped: nobody reads %s and its buffer is full", self.port_path)
        except OSError as exc:
            log.warning("reply dropped on %s: %s", self.port_path, exc)

    # ---- the box ------------------------------------------------------------------------------

    def _execute(self, command: Command) -> str:
        verb = command.verb
        known = {v.value for v in Verb}
        if verb not in known:
            raise FrameError(
                ErrorCode.UNKNOWN_VERB,
                f"unknown verb {verb!r}; known verbs: {', '.join(sorted(known))}",
            )
        if verb in VERBS_WITH_ARGUMENT and not command.arg:
            raise FrameError(ErrorCode.BAD_ARGUMENT, f"{verb} needs an argument")
        if verb not in VERBS_WITH_ARGUMENT and command.arg:
            raise FrameError(ErrorCode.BAD_ARGUMENT, f"{verb} takes no argument")
        if verb == Verb.WHO:
            return format_info(BoxInfo(self.relay_count, self.max_closed, self.identity))
        if verb == Verb.SET:
            self._set_closed(parse_relays(command.arg))
        elif verb == Verb.OPENALL:
            self._change(set(), cause="command")
        elif verb == Verb.WDARM:
            ms = parse_watchdog_ms(command.arg)
            with self._lock:
                self._wd_ms = ms
                self._tripped = False
                self._wd_deadline = self.clock.now() + ms / 1000.0
        elif verb == Verb.WDOFF:
            with self._lock:
                self._wd_ms = 0
                self._tripped = False
                self._wd_deadline = None
        elif verb == Verb.COUNTS:
            with self._lock:
                return format_counts([self._counts[r] for r in range(1, self.relay_count + 1)])
        if verb == Verb.BEAT:
            return self._state().watchdog.value
        return format_state(self._state())

    def _state(self) -> BoxState:
        with self._lock:
            if self._tripped:
                mode = WatchdogMode.TRIPPED
            elif self._wd_deadline is not None:
                mode = WatchdogMode.ARMED
            else:
                mode = WatchdogMode.OFF
            return BoxState(frozenset(self._closed), mode, self._wd_ms)

    def _set_closed(self, relays: list[int]) -> None:
        unknown = [r for r in relays if not 1 <= r <= self.relay_count]
        if unknown:
            raise FrameError(
                ErrorCode.UNKNOWN_RELAY,
                f"no relay {','.join(map(str, unknown))}; relays are 1..{self.relay_count}",
            )
        if len(relays) > self.max_closed:
            raise FrameError(
                ErrorCode.COIL_BUDGET,
                f"{len(relays)} relays asked closed, coil budget is {self.max_closed}",
            )
        if relays and self.watchdog_tripped:
            raise FrameError(
                ErrorCode.WATCHDOG_TRIPPED,
                "watchdog tripped; clear it with WDARM or WDOFF before closing relays",
            )
        self._change(set(relays), cause="command")

    def _change(self, target: set[int], cause: Literal["command", "watchdog"]) -> bool:
        """Break before make: open what must open, wait the release time, then close the rest.

        Returns whether any contact moved (``on_change`` has then been called).
        """
        with self._lock:
            to_open = sorted(self._closed - target)
            to_close = sorted(target - self._closed)
        since, self._arrived = self._arrived, None  # only the first movement overlaps it
        if to_open:
            self.clock.wait(self.release_s, since=since)
            opened_at = self.clock.now()
            since = self.clock.mark()  # the bookkeeping below overlaps the operate time
            with self._lock:
                for relay in to_open:
                    self._closed.discard(relay)
                    self._counts[relay] += 1
                    self._events.append(RelayEvent(opened_at, relay, "open", cause))
            self._notify()
        if to_close:
            self.clock.wait(self.operate_s, since=since)
            with self._lock:
                for relay in to_close:
                    self._closed.add(relay)
                    self._counts[relay] += 1
                    self._events.append(RelayEvent(self.clock.now(), relay, "close", cause))
            self._notify()
            self._fire_triggers()
        return bool(to_open or to_close)

    def _feed_watchdog(self) -> None:
        with self._lock:
            if self._wd_deadline is not None:
                self._wd_deadline = self.clock.now() + self._wd_ms / 1000.0

    def _check_watchdog(self) -> None:
        with self._lock:
            due = self._wd_deadline is not None and self.clock.now() >= self._wd_deadline
            if due:
                self._wd_deadline = None
                self._tripped = True
        if due:
            log.warning("watchdog on %s tripped: host silent, opening every relay", self.port_path)
            if not self._change(set(), cause="watchdog"):
                self._notify()

    def _notify(self) -> None:
        if self._on_change is not None:
            try:
                self._on_change()
            except Exception:
                log.exception("on_change callback of the simulated relay box failed")
