"""The controller's side of ``throughput.py``: rig's run and the hand-written script, timed.

On a real bench the instruments are separate hardware.  On the virtual bench they are threads of
the process that serves them, so a controller timed in that same process shares its interpreter
lock with the simulated meter, supply and relay box, and their CPU time lands in the controller's
wall time (about 0.2 ms a step on this machine).  ``throughput.py`` therefore keeps the bench in
its own process and runs this module as a second one, talking over stdin and stdout, one JSON
object a line:

- ``{"open": "rig", "serial": S}`` or ``{"open": "script", "dmm": R, "relays": P, "csv": F}``:
  open the connections (not timed); answers ``{"ready": true}``;
- ``{"go": true}``: the timed work; answers ``{"wall_s": ..., "readings": ...}``;
- ``{"close": true}``: close the connections; answers ``{"closed": true}``.

Between ``ready`` and ``go``, and after the answer to ``go``, the parent reads the bench's
counters, so they hold exactly the timed work.  A failure answers ``{"error": "..."}``.  The same
class serves in-process too (``throughput.py --same-process``), to show what the shared process
costs.

Usage (by throughput.py): python controller_process.py STATION SEQUENCE RESULTS_DB [CPU]
"""

from __future__ import annotations

import json
import subprocess
import sys
import time
from pathlib import Path
from typing import Any, TextIO

from handwritten_script import HandReading, HandScript
from host_tuning import pin_this_process

from rig.bench_open import Bench, close_bench, open_bench
from rig.config.station import load_station
from rig.engine import Engine
from rig.plan import Plan
from rig.runner import load_plan
from rig.steps import KINDS
from rig.store import ResultStore


def hand_table(plan: Plan) -> list[HandReading]:
    """The engineer's table for the script: every reading in file order, relays as planned."""
    table = []
    for spec in plan.sequence.steps:
        planned = next(p for p in plan.steps if p.spec.id == spec.id)
        function = KINDS[spec.kind].meter_function(spec)
        if function is None or spec.supply is not None:
            if planned.relay_sets:
                raise ValueError(f"the hand script takes no supply steps ({spec.id})")
            continue
        for index, relays in enumerate(planned.relay_sets):
            label = f"{spec.id}[{index}]"
            table.append(HandReading(label, tuple(sorted(relays)), function.value, spec.nplc))
    return table


class ControllerSide:
    """One sequence on one station: opens rig or the script, times one run, closes."""

    def __init__(self, station: Path, sequence: Path, results: Path) -> None:
        self.plan = load_plan(sequence, load_station(station))
        self.table = hand_table(self.plan)
        self.store = ResultStore(results)
        self._instruments: Bench | None = None
        self._engine: Engine | None = None
        self._script: HandScript | None = None
        self._serial = ""
        self._csv = Path()

    def open(self, request: dict[str, Any]) -> dict[str, Any]:
        if request["open"] == "rig":
            self._instruments = open_bench(self.plan.station)
            self._engine = Engine(self.plan, self._instruments, self.store)
            self._serial = str(request["serial"])
        else:
            self._script = HandScript(str(request["dmm"]), str(request["relays"]))
            self._csv = Path(request["csv"])
        return {"ready": True}

    def go(self) -> dict[str, Any]:
        start = time.perf_counter()
        if self._engine is not None:
            summary = self._engine.run(self._serial)
            wall = time.perf_counter() - start
            if summary.status != "complete":
                raise RuntimeError(f"rig run did not complete: {summary.reason}")
            return {"wall_s": wall, "readings": sum(r.readings for r in summary.results)}
        if self._script is None:
            raise RuntimeError("go before open")
        self._script.run(self.table, self._csv)
        return {"wall_s": time.perf_counter() - start, "readings": len(self.table)}

    def close(self) -> dict[str, Any]:
        if self._instruments is not None:
            close_bench(self._instruments)
        if self._script is not None:
            self._script.close()
        self._instruments = self._engine = self._script = None
        return {"closed": True}

    def answer(self, request: dict[str, Any]) -> dict[str, Any]:
        if "open" in request:
            return self.open(request)
        if "go" in request:
            return self.go()
        if "close" in request:
            return self.close()
        raise ValueError(f"unknown request {request!r}: expected open, go or close")

    def shut(self) -> None:
        self.close()
        self.store.close()


class ControllerProcess:
    """The parent's handle on a ``ControllerSide`` in a process of its own, on ``cpu`` if
    given (``host_tuning``)."""

    def __init__(
        self, station: Path, sequence: Path, results: Path, cpu: int | None = None
    ) -> None:
        argv = [sys.executable, __file__, str(station), str(sequence), str(results)]
        if cpu is not None:
            argv.append(str(cpu))
        self._child = subprocess.Popen(
            argv, stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True, bufsize=1
        )

    def answer(self, request: dict[str, Any]) -> dict[str, Any]:
        assert self._child.stdin is not None and self._child.stdout is not None
        self._child.stdin.write(json.dumps(request) + "\n")
        self._child.stdin.flush()
        line = self._child.stdout.readline()
        if not line:
            raise RuntimeError(f"the controller process ended (exit {self._child.wait()})")
        reply: dict[str, Any] = json.loads(line)
        if "error" in reply:
            raise RuntimeError(f"controller process: {reply['error']}")
        return reply

    def shut(self) -> None:
        assert self._child.stdin is not None
        self._child.stdin.close()
        if self._child.wait(timeout=30) != 0:
            raise RuntimeError(f"the controller process exited {self._child.returncode}")


def serve(side: ControllerSide, requests: TextIO, replies: TextIO) -> None:
    """Answer requests line by line until the parent closes its end."""
    for line in requests:
        try:
            reply = side.answer(json.loads(line))
        except Exception as exc:
            reply = {"error": f"{type(exc).__name__}: {exc}"}
        replies.write(json.dumps(reply) + "\n")
        replies.flush()
    side.shut()


def main() -> None:
    station, sequence, results = (Path(a) for a in sys.argv[1:4])
    pin_this_process(int(sys.argv[4]) if len(sys.argv) > 4 else None)
    replies = sys.stdout
    sys.stdout = sys.stderr  # nothing else may write on the reply channel
    serve(ControllerSide(station, sequence, results), sys.stdin, replies)


if __name__ == "__main__":
    main()
