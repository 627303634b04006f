"""``rig sync``: send the runs waiting in a station's own store to its results server."""

from __future__ import annotations

import argparse
from pathlib import Path

from rig.cli_output import Output

EXIT_SENT, EXIT_WAITING = 0, 3


def register(sub: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    sync = sub.add_parser(
        "sync", help="send runs waiting in the station's own store to its results server"
    )
    sync.add_argument("--station", type=Path, required=True, help="the station file")
    sync.add_argument("--json", action="store_true", help="one machine-readable summary")
    sync.set_defaults(func=cmd_sync)


def cmd_sync(args: argparse.Namespace, out: Output) -> int:
    """Exit 0 when nothing is left waiting, 3 when runs still wait (the reason is printed)."""
    from rig.config.station import load_station
    from rig.store_sync import sync_station

    report = sync_station(load_station(args.station))
    if args.json:
        out.json(
            {
                "configured": report.configured,
                "sent": report.sent,
                "waiting": report.waiting,
                "problem": report.problem or None,
            }
        )
    elif report.problem:
        out.error(f"rig: {report.describe()}")
    else:
        out.line(report.describe())
    return EXIT_WAITING if report.problem else EXIT_SENT
