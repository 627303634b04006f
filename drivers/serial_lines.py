"""Reading LF-terminated lines from a pyserial port in chunks, not a byte at a time.

``Serial.read_until`` asks the port for one byte per call (a ``select`` and a ``read`` each), which
costs about 0.4 ms on a 40-byte reply over a pseudo-terminal here: more than the reply's own round
trip.  This reader takes one byte (so it waits as the port's timeout says), then whatever else is
already waiting, in one read.  Bytes after the terminator are kept for the next line, so two
replies arriving together are not run into one.
"""

from __future__ import annotations

import time
from typing import Protocol


class Port(Protocol):
    """What the reader needs of a ``serial.Serial``."""

    timeout: float | None

    @property
    def in_waiting(self) -> int: ...

    def read(self, size: int = 1) -> bytes: ...

    def reset_input_buffer(self) -> None: ...


class LineReader:
    """Lines from ``port``, each ending in ``terminator`` (or cut at ``limit`` bytes)."""

    def __init__(self, port: Port, terminator: bytes = b"\n") -> None:
        self._port = port
        self._terminator = terminator
        self._pending = b""

    def discard_input(self) -> None:
        """Forget everything received and not yet read (the port's buffer and ours).  The
        port is flushed only when it holds something: a flush waits for the terminal's own
        buffer work and costs about 0.1 ms on a pseudo-terminal here, asking costs nothing."""
        self._pending = b""
        if self._port.in_waiting:
            self._port.reset_input_buffer()

    def read_line(self, limit: int) -> bytes:
        """The next line with its terminator; without one when ``limit`` bytes came first or the
        port's timeout passed with the line unfinished (empty: nothing came at all)."""
        timeout = self._port.timeout
        deadline = None if timeout is None else time.monotonic() + timeout
        buffer = self._pending
        while True:
            end = buffer.find(self._terminator, 0, limit)
            if end >= 0:
                cut = end + len(self._terminator)
                self._pending = buffer[cut:]
                return buffer[:cut]
            if len(buffer) >= limit:
                self._pending = buffer[limit:]
                return buffer[:limit]
            if deadline is not None and time.monotonic() >= deadline:
                self._pending = b""
                return buffer
            first = self._port.read(1)
            if not first:
                self._pending = b""
                return buffer
            waiting = self._port.in_waiting
            buffer += first + (self._port.read(waiting) if waiting else b"")
