"""A simulated SCPI instrument on a real TCP socket (a raw "SOCKET" resource, as on a LAN meter).

Drivers reach the virtual bench through pyvisa over this socket exactly as they reach a real meter,
so the whole stack (terminations, timeouts, resets, late replies) is exercised, never a shortcut.
"""

from __future__ import annotations

import io
import logging
import socket
import struct
import threading
from collections.abc import Callable
from contextlib import AbstractContextManager, suppress
from types import TracebackType
from typing import Protocol

from rig.errors import InstrumentError

log = logging.getLogger(__name__)

#: Longest line accepted; a longer one is discarded with -363 Input buffer overrun.
MAX_LINE_BYTES = 64 * 1024
_JOIN_S = 5.0


class LineInstrument(Protocol):
    """What the server needs of an instrument (``ScpiInstrument`` provides it)."""

    @property
    def lock(self) -> AbstractContextManager[object]: ...

    def handle(self, line: str) -> str | None: ...

    def transport_fault(self, line: str) -> str | None: ...

    def unterminated(self, fragment: str) -> None: ...

    def overrun(self) -> None: ...


class ScpiTcpServer:
    """Serves one instrument to any number of clients, one thread each, one line at a time."""

    def __init__(
        self, instrument: LineInstrument, *, name: str, host: str = "127.0.0.1", port: int = 0
    ) -> None:
        self.instrument = instrument
        self.name = name
        self.host = host
        self._requested_port = port
        self._listener: socket.socket | None = None
        self._accept_thread: threading.Thread | None = None
        self._clients: dict[socket.socket, threading.Thread] = {}
        self._clients_lock = threading.Lock()
        self._stopping = threading.Event()
        self._port: int | None = None

    # ----------------------------------------------------------------- lifecycle

    def start(self) -> None:
        """Bind and start accepting; a second call does nothing."""
        if self._listener is not None:
            return
        try:
            listener = socket.create_server((self.host, self._requested_port))
        except OSError as error:
            raise InstrumentError(
                f"cannot listen on {self.host}:{self._requested_port}: {error}",
                instrument=self.name,
            ) from error
        self._stopping.clear()
        self._listener = listener
        self._port = listener.getsockname()[1]
        self._accept_thread = threading.Thread(
            target=self._accept_loop, name=f"scpi-{self.name}-accept", daemon=True
        )
        self._accept_thread.start()
        log.info("%s serving on %s", self.name, self.resource)

    def stop(self) -> None:
        """Reset every client, close every socket and join every thread; safe to call twice."""
        self._stopping.set()
        listener, self._listener = self._listener, None
        if listener is not None:
            _quietly(lambda: listener.shutdown(socket.SHUT_RDWR))
            _quietly(listener.close)
        if self._accept_thread is not None:
            self._accept_thread.join(_JOIN_S)
            self._accept_thread = None
        with self._clients_lock:
            clients = list(self._clients.items())
        for conn, _ in clients:
            _shutdown(conn)
        for conn, thread in clients:
            thread.join(_JOIN_S)
            _quietly(conn.close)
        with self._clients_lock:
            self._clients.clear()

    def __enter__(self) -> ScpiTcpServer:
        self.start()
        return self

    def __exit__(
        self,
        exc_type: type[BaseException] | None,
        exc: BaseException | None,
        tb: TracebackType | None,
    ) -> None:
        self.stop()

    @property
    def port(self) -> int:
        if self._port is None:
            raise InstrumentError("server not started", instrument=self.name)
        return self._port

    @property
    def resource(self) -> str:
        """The VISA resource string a driver opens."""
        return f"TCPIP::{self.host}::{self.port}::SOCKET"

    # ----------------------------------------------------------------- threads

    def _accept_loop(self) -> None:
        listener = self._listener
        assert listener is not None
        while not self._stopping.is_set():
            try:
                conn, peer = listener.accept()
            except OSError:
                break  # the listener was shut down by stop()
            conn.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
            thread = threading.Thread(
                target=self._serve, args=(conn,), name=f"scpi-{self.name}-{peer[1]}", daemon=True
            )
            with self._clients_lock:
                if self._stopping.is_set():
                    conn.close()
                    break
                self._clients[conn] = thread
            thread.start()

    def _serve(self, conn: socket.socket) -> None:
        try:
            with conn.makefile("rb") as reader:
                self._serve_lines(conn, reader)
        except OSError as error:
            log.debug("%s: client went away: %s", self.name, error)
        finally:
            if self._stopping.is_set():
                _reset(conn)  # stopped: the client learns at once, not by a timeout
            else:
                _quietly(conn.close)
            with self._clients_lock:
                self._clients.pop(conn, None)

    def _serve_lines(self, conn: socket.socket, reader: io.BufferedReader) -> None:
        readline = reader.readline
        while not self._stopping.is_set():
            raw = readline(MAX_LINE_BYTES + 1)
            if not raw:
                return
            if not raw.endswith(b"\n"):
                if len(raw) <= MAX_LINE_BYTES:
                    self.instrument.unterminated(raw.decode("latin-1"))
                    return
                while raw and not raw.endswith(b"\n"):
                    raw = readline(MAX_LINE_BYTES + 1)
                self.instrument.overrun()
                continue
            line = raw.decode("latin-1").rstrip("\r\n")
            with self.instrument.lock:
                fault = self.instrument.transport_fault(line)
                if fault == "drop":
                    log.info("%s: dropping the connection (injected fault)", self.name)
                    _reset(conn)
                    return
                reply = self.instrument.handle(line)
            if reply is None or fault == "silent":
                continue
            conn.sendall((reply + "\n").encode("latin-1", errors="replace"))


def _reset(conn: socket.socket) -> None:
    """Close with a TCP reset, as a power-cycled instrument does (the client sees ECONNRESET)."""
    _quietly(lambda: conn.setsockopt(socket.SOL_SOCKET, socket.SO_LINGER, struct.pack("ii", 1, 0)))
    _quietly(conn.close)


def _shutdown(conn: socket.socket) -> None:
    """Wake the thread reading ``conn`` (it sees end of file) and make its close a TCP reset.

    A clean close would look like silence to pyvisa-py (a timeout); a reset tells the driver at
    once that the instrument went away.
    """
    _quietly(lambda: conn.setsockopt(socket.SOL_SOCKET, socket.SO_LINGER, struct.pack("ii", 1, 0)))
    _quietly(lambda: conn.shutdown(socket.SHUT_RD))


def _quietly(action: Callable[[], object]) -> None:
    with suppress(OSError):
        action()
