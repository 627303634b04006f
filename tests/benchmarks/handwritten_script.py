"""The same work as a rig run, written as an engineer writes it by hand with pyvisa and pyserial.

It is the yardstick of ``throughput.py``: for every reading it opens all relays, closes the route,
sleeps a fixed settle time, sets the meter to autorange at the step's NPLC and asks for one reading
(one query per reading), and appends the value to a CSV file.  It talks to the same virtual bench
over the same protocols as rig (SCPI over a pyvisa-py socket, the relay box on a pty through
pyserial, framed with the box's published line codec, ``drivers.relay_frames``).

Kept honest, not crippled: the meter is configured only as the reading needs, the NPLC is the
sequence's, and the socket gets the same TCP_NODELAY setting as rig's driver
(``drivers.visa_session.disable_nagle``), so the comparison measures the method, not a transport
quirk.  What it leaves out (settle proof, interlocks, read-back, the results store) it leaves out
as a quick script would.

Run alone (``--quick`` for the smoke run) it times itself on the harness sequence.
"""

from __future__ import annotations

import argparse
import csv
import json
import statistics
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pyvisa
import serial

from drivers.relay_frames import TERMINATOR, Command, decode_reply, encode_command, next_seq
from drivers.visa_session import disable_nagle

SETTLE_S = 0.05
"""The fixed wait after every switch: a usual hand-picked figure (common practice, from memory;
no published source), safe for most bench circuits without knowing their time constants."""

SCPI_FUNCTION = {"dcv": "VOLT:DC", "res2w": "RES", "res4w": "FRES", "dci": "CURR:DC"}


@dataclass(frozen=True)
class HandReading:
    """One line of the engineer's table: which relays, what to measure, at what NPLC."""

    label: str
    relays: tuple[int, ...]
    function: str
    """A key of ``SCPI_FUNCTION``."""
    nplc: float


class HandScript:
    """The script's two connections, opened as a script opens them."""

    def __init__(self, dmm_resource: str, relay_port: str) -> None:
        self.rm = pyvisa.ResourceManager("@py")
        self.dmm: Any = self.rm.open_resource(
            dmm_resource, read_termination="\n", write_termination="\n", timeout=3000
        )
        disable_nagle(self.dmm)
        self.box = serial.Serial(relay_port, 115200, timeout=1.0)
        self.seq = 0

    def close(self) -> None:
        self.dmm.close()
        self.box.close()

    def relay(self, verb: str, arg: str = "") -> None:
        """Send one relay-box command and wait for its OK."""
        self.box.write(encode_command(Command(self.seq, verb, arg)))
        self.seq = next_seq(self.seq)
        reply = decode_reply(self.box.read_until(TERMINATOR))
        if not reply.ok:
            raise RuntimeError(f"relay box refused {verb} {arg}: {reply.text}")

    def run(self, readings: list[HandReading], csv_path: Path, settle_s: float = SETTLE_S) -> int:
        """Take every reading in table order; returns how many relay operations it commanded."""
        self.dmm.write("*RST;*CLS")
        self.relay("OPENALL")
        operations = 0
        with csv_path.open("w", newline="", encoding="utf-8") as handle:
            out = csv.writer(handle)
            out.writerow(["label", "function", "value", "time"])
            for reading in readings:
                self.relay("OPENALL")
                self.relay("SET", ",".join(str(r) for r in reading.relays) or "-")
                operations += 2 * len(reading.relays)
                time.sleep(settle_s)
                function = SCPI_FUNCTION[reading.function]
                self.dmm.write(f"CONF:{function} AUTO")
                self.dmm.write(f"{function}:NPLC {reading.nplc:g}")
                value = float(self.dmm.query("READ?"))
                out.writerow([reading.label, reading.function, value, time.time()])
                handle.flush()
        self.relay("OPENALL")
        return operations


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="few repetitions (smoke run)")
    args = parser.parse_args()
    sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
    from bench_helpers import shipped_bench, shipped_plan
    from controller_process import hand_table

    from rig.sim.timing import Timing

    repeat = 1 if args.quick else 5
    with (
        tempfile.TemporaryDirectory() as folder,
        shipped_bench("temp-circuit", folder=Path(folder), timing=Timing.REAL) as (bench, station),
    ):
        table = hand_table(shipped_plan("temp-circuit-check", station))
        assert bench.endpoints is not None
        walls = []
        for _ in range(repeat):
            script = HandScript(bench.endpoints.dmm_resource, bench.endpoints.relay_port)
            try:
                start = time.perf_counter()
                ops = script.run(table, Path(folder) / "hand.csv")
                walls.append(time.perf_counter() - start)
            finally:
                script.close()
    wall_ms = statistics.median(walls) * 1000
    print(f"{'workload':<20} {'readings':>8} {'relay ops':>9} {'wall ms':>9}")
    print(f"{'temp-circuit-check':<20} {len(table):>8} {ops:>9} {wall_ms:>9.1f}")
    print(json.dumps({"readings": len(table), "relay_ops": ops, "wall_ms": round(wall_ms, 1)}))


if __name__ == "__main__":
    main()
