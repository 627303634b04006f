"""Serving a virtual bench with its control channel, for ``rig sim`` and ``rig harness sim``:
the ports, the station file and the control channel are set up and torn down the same way,
whatever kind of faults the bench has."""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import TYPE_CHECKING

from rig.cli_output import Output, serve_bench
from rig.errors import RigError

if TYPE_CHECKING:  # the bench's modules load when a bench is served, not with every command
    from rig.sim.control import BenchFaults


def add_port_args(parser: argparse.ArgumentParser) -> None:
    """``--dmm-port``, ``--supply-port`` and ``--control-port``: fixed ports let a console or a
    script stay pointed at one bench while its faults change."""
    parser.add_argument("--dmm-port", type=int, default=0, help="TCP port of the DMM (0: any free)")
    parser.add_argument(
        "--supply-port", type=int, default=0, help="TCP port of the supply (0: any free)"
    )
    parser.add_argument(
        "--control-port", type=int, default=0, help="TCP port of the control channel (0: any)"
    )


def serve_with_control(
    out: Output,
    faults: BenchFaults,
    *,
    control_port: int,
    station_out: Path,
    station_name: str,
    title: str,
    preface: str = "",
) -> None:
    """Start the bench and its control channel, write the station file, say where they are
    served and wait for Ctrl-C or SIGTERM; nothing stays listening after a refusal or a stop."""
    from rig.sim.control import ControlServer

    bench = faults.bench
    try:
        endpoints = bench.start()
        control = ControlServer(faults, control_port)
    except RigError:
        bench.stop()  # the DMM may listen where the supply or the control channel could not
        raise
    try:
        control.start()
        station = bench.write_station(station_out, name=station_name)
        if preface:
            out.line(preface)
        rows = [
            ("DMM", endpoints.dmm_resource),
            ("supply", endpoints.supply_resource),
            ("relay box", endpoints.relay_port),
            ("control", f"127.0.0.1:{control.port}"),
            ("faults", ", ".join(faults.specs()) or "none"),
        ]
        serve_bench(out, title, rows, station)
    finally:
        control.stop()
        bench.stop()
