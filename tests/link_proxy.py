"""A TCP relay between rig and the PostgreSQL server that can cut the link on cue: after a number
of bytes sent towards the server, or just after the server was sent its n-th COMMIT (so the
server commits and the station never hears it).  Real sockets both ways; nothing is simulated.
"""

from __future__ import annotations

import contextlib
import socket
import threading
import time
from dataclasses import dataclass, field


@dataclass
class Cut:
    up_bytes: int | None = None  # cut once this many bytes went towards the server
    after_commit: int | None = None  # cut the replies once the n-th COMMIT went to the server


@dataclass
class LinkProxy:
    target_port: int
    cut: Cut = field(default_factory=Cut)
    up_total: int = 0
    commits_seen: int = 0
    cut_happened: bool = False

    def __post_init__(self) -> None:
        self._listener = socket.create_server(("127.0.0.1", 0))
        self.port = int(self._listener.getsockname()[1])
        self._stop = threading.Event()
        self._open: list[socket.socket] = []
        threading.Thread(target=self._accept, daemon=True).start()

    def close(self) -> None:
        self._stop.set()
        self._listener.close()
        self._drop_all()

    def _drop_all(self) -> None:
        for s in self._open:
            with contextlib.suppress(OSError):
                s.shutdown(socket.SHUT_RDWR)
            s.close()

    def _accept(self) -> None:
        while not self._stop.is_set():
            try:
                client, _ = self._listener.accept()
            except OSError:
                return
            server = socket.create_connection(("127.0.0.1", self.target_port))
            self._open += [client, server]
            threading.Thread(target=self._pump, args=(client, server, True), daemon=True).start()
            threading.Thread(target=self._pump, args=(server, client, False), daemon=True).start()

    def _pump(self, src: socket.socket, dst: socket.socket, up: bool) -> None:
        while True:
            try:
                data = src.recv(65536)
            except OSError:
                return
            if not data or self.cut_happened:
                return
            if up:
                data = self._up(data)
            try:
                dst.sendall(data)
            except OSError:
                return
            if self.cut_happened:
                if up and self.cut.after_commit is not None:
                    time.sleep(0.3)  # let the server read and run the COMMIT before the close
                self._drop_all()
                return

    def _up(self, data: bytes) -> bytes:
        budget = self.cut.up_bytes
        if budget is not None and self.up_total + len(data) >= budget:
            data = data[: max(0, budget - self.up_total)]
            self.cut_happened = True
        self.up_total += len(data)
        self.commits_seen += data.count(b"COMMIT")
        if self.cut.after_commit is not None and self.commits_seen >= self.cut.after_commit:
            self.cut_happened = True
        return data
