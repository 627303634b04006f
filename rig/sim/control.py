"""The virtual bench's control channel: inject or clear faults while it runs.

A line protocol of our own on 127.0.0.1 (one JSON object per reply line)::

    faults                      -> {"faults": [...]}
    add SPEC [SPEC ...]         -> add faults, replies with the active set: unit faults (see
                                   rig.faults) on ``rig sim``, build faults (rig.harness.as_built)
                                   on ``rig harness sim``
    clear                       -> remove every fault of the bench and every instrument fault
    instrument NAME KIND [N]    -> an instrument fault: NAME is dmm, supply or relay_box;
                                   KIND as the instrument lists it; N times (default 1, 0 = until
                                   cleared)
    state                       -> the bench state (as in the state file)
"""

from __future__ import annotations

import contextlib
import json
import logging
import socket
import threading
from typing import Protocol

from rig.errors import ConfigError, RigError
from rig.faults import parse_faults
from rig.sim.bench import VirtualBench

log = logging.getLogger(__name__)

SOURCE = "control channel"
"""How a problem with a spec sent here is named."""


class BenchFaults(Protocol):
    """The faults a control channel lists, adds and clears on its bench: what differs between
    a unit's bench and a harness's (whose faults change what is built)."""

    @property
    def bench(self) -> VirtualBench: ...

    def specs(self) -> list[str]:
        """The active faults, as specs that ``add`` takes back."""
        ...

    def add(self, specs: list[str]) -> None:
        """Check every spec first and add none on a problem (``ConfigError``)."""
        ...

    def clear(self) -> None: ...


class UnitFaults:
    """A unit's faults (``rig sim``): specs of ``rig.faults`` on the unit's own circuit."""

    def __init__(self, bench: VirtualBench) -> None:
        self._bench = bench

    @property
    def bench(self) -> VirtualBench:
        return self._bench

    def specs(self) -> list[str]:
        return [f.spec for f in self._bench.faults]

    def add(self, specs: list[str]) -> None:
        added = parse_faults(specs, self._bench.unit, source=SOURCE)
        self._bench.set_faults(self._bench.faults + added)

    def clear(self) -> None:
        self._bench.set_faults([])


def handle_command(faults: BenchFaults, line: str) -> dict[str, object]:
    """Carry out one control command; errors come back as {"error": "..."}, never raised."""
    words = line.split()
    if not words:
        return {"error": "empty command; expected faults, add, clear, instrument or state"}
    verb, args = words[0].lower(), words[1:]
    bench = faults.bench
    try:
        if verb == "faults":
            return {"faults": faults.specs()}
        if verb == "add":
            faults.add(args)
            return {"faults": faults.specs()}
        if verb == "clear":
            faults.clear()
            bench.dmm.clear_faults()
            bench.supply.clear_faults()
            bench.relay_box.clear_faults()
            return {"faults": []}
        if verb == "instrument" and len(args) in (2, 3):
            count = int(args[2]) if len(args) == 3 else 1
            times = None if count == 0 else count
            if args[0] == "dmm":
                bench.dmm.inject_fault(args[1], times)
            elif args[0] == "supply":
                bench.supply.inject_fault(args[1], times)
            elif args[0] == "relay_box":
                bench.relay_box.inject_fault(args[1], times)
            else:
                return {"error": f"unknown instrument {args[0]!r}; expected dmm, supply, relay_box"}
            return {"injected": args[0], "kind": args[1]}
        if verb == "state":
            return {**bench.state(), "faults": faults.specs()}
    except (ConfigError, RigError, ValueError) as exc:
        return {"error": str(exc)}
    return {
        "error": f"unknown command {line.strip()!r}; expected faults, add, clear, instrument, state"
    }


class ControlServer:
    """Serves ``handle_command`` on a loopback TCP port, one line per command."""

    def __init__(self, faults: BenchFaults, port: int = 0) -> None:
        self.faults = faults
        try:
            self._sock = socket.create_server(("127.0.0.1", port))
        except OSError as error:
            raise RigError(f"--control-port: cannot listen on 127.0.0.1:{port}: {error}") from None
        self.port = int(self._sock.getsockname()[1])
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._serve, name="bench-control", daemon=True)

    def start(self) -> int:
        self._thread.start()
        return self.port

    def stop(self) -> None:
        self._stop.set()
        with contextlib.suppress(OSError):
            self._sock.close()
        self._thread.join(2.0)

    def _serve(self) -> None:
        self._sock.settimeout(0.2)
        while not self._stop.is_set():
            try:
                conn, _ = self._sock.accept()
            except TimeoutError:
                continue
            except OSError:
                return
            threading.Thread(target=self._client, args=(conn,), daemon=True).start()

    def _client(self, conn: socket.socket) -> None:
        with conn, conn.makefile("rw", encoding="utf-8", newline="\n") as stream:
            for line in stream:
                reply = handle_command(self.faults, line)
                stream.write(json.dumps(reply) + "\n")
                stream.flush()
