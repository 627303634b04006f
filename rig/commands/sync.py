"""``rig sync``: send the runs waiting in a station's own store to its results server, and
upgrade that server's schema when asked (the one command that does)."""

from __future__ import annotations

import argparse
from pathlib import Path

from rig.cli_output import Output

EXIT_SENT, EXIT_BAD_INPUT, EXIT_WAITING = 0, 2, 3


def register(sub: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    sync = sub.add_parser(
        "sync", help="send runs waiting in the station's own store to its results server"
    )
    sync.add_argument("--station", type=Path, required=True, help="the station file")
    sync.add_argument("--json", action="store_true", help="one machine-readable summary")
    sync.add_argument(
        "--upgrade-server",
        action="store_true",
        help="first bring the results server up to this rig's schema; do it once every station "
        "that writes there runs this rig version (or all in one maintenance window): a station "
        "still on the older rig can no longer send to the upgraded server",
    )
    sync.add_argument(
        "--take-over-name",
        action="store_true",
        help="first give this station's name on the results server to this station's file: only "
        "for a file that replaced the one that sent under the name (a new disk), never for a "
        "second bench, whose runs would then mix with the first's",
    )
    sync.add_argument(
        "--new-store-id",
        action="store_true",
        help="first give this station's file a store id of its own: only for a copy of another "
        "station's file (benches set up from one disk image) that the server refused as one; "
        "every run in the file is kept and sent",
    )
    sync.set_defaults(func=cmd_sync)


def cmd_sync(args: argparse.Namespace, out: Output) -> int:
    """Exit 0 when nothing is left waiting and the server took what was sent, 3 when runs still
    wait (under a station name another station's file holds, too) or the server cannot be used
    (a cron job must see both; the reason is printed)."""
    from rig.config.station import load_station
    from rig.store_copies import NotACopy
    from rig.store_sync import sync_station

    try:
        report = sync_station(
            load_station(args.station),
            upgrade_server=args.upgrade_server,
            take_over_name=args.take_over_name,
            renew_id=args.new_store_id,
        )
    except NotACopy as exc:
        out.error(f"rig: --new-store-id: {exc}")
        return EXIT_BAD_INPUT
    for option, given in (("--upgrade-server", args.upgrade_server),
                          ("--take-over-name", args.take_over_name),
                          ("--new-store-id", args.new_store_id)):  # fmt: skip
        if given and not report.configured:
            out.error(
                f"rig: {option}: {args.station} names no results server (set [store] "
                'database = "postgresql" or RIG_DATABASE_URL)'
            )
            return EXIT_BAD_INPUT
    if args.json:
        out.json(
            {
                "configured": report.configured,
                "sent": report.sent,
                "waiting": report.waiting,
                "problem": report.problem or None,
                "held": report.held or None,
                "upgraded": report.upgraded or None,
                "took_over": report.took_over or None,
                "new_store_id": report.renewed or None,
            }
        )
    elif report.problem or report.waiting:
        out.error(f"rig: {report.describe()}")
    else:
        out.line(report.describe())
    return EXIT_WAITING if report.problem or report.waiting else EXIT_SENT
