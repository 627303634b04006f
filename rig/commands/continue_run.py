"""``rig continue RUN_ID --station FILE``: carry on a run a stopped controller left unfinished.

The run's own record says which sequence it ran and for which serial number; the steps it had
finished are kept and the rest are run in the same record (see ``rig.resume``).
"""

from __future__ import annotations

import argparse
from pathlib import Path

from rig.cli_output import Output


def register(sub: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    parser = sub.add_parser(
        "continue", help="continue an incomplete run from its next step (after a crash)"
    )
    parser.add_argument(
        "run_id", type=int, metavar="RUN_ID", help="the incomplete run's id, as rig run printed it"
    )
    parser.add_argument("--station", type=Path, required=True, help="the station file")
    parser.add_argument(
        "--operator",
        help="who carries on the run, noted in its record (default: who started it)",
    )
    parser.add_argument("--yes", action="store_true", help="confirm operator prompts automatically")
    parser.add_argument("--json", action="store_true", help="one machine-readable summary")
    parser.add_argument(
        "--readings",
        action="store_true",
        help="print every reading once it is stored (settle-proof readings marked)",
    )
    parser.set_defaults(func=cmd_continue)


def cmd_continue(args: argparse.Namespace, out: Output) -> int:
    from rig.cli import EXIT_BAD_INPUT, _parser, cmd_run, operator_problem
    from rig.config.station import load_station
    from rig.store import ResultStore

    station = load_station(args.station)
    problem = operator_problem(station, args.operator or "")  # who carries on, named anew
    if problem:
        out.error(f"rig: {problem}")
        return EXIT_BAD_INPUT
    store = ResultStore(station.store_path)
    try:
        run = store.run(args.run_id)
    finally:
        store.close()
    # the options of `rig run`, every default included, as if the run were started again
    flags = [f"--{name}" for name in ("yes", "json", "readings") if getattr(args, name)]
    run_args = _parser().parse_args(
        [
            "run",
            str(run["sequence_path"]),
            "--station",
            str(args.station),
            "--serial",
            str(run["serial"]),
            "--operator",
            str(run["operator"]) if args.operator is None else args.operator,
            *flags,
        ]
    )
    run_args.resume = args.run_id
    return cmd_run(run_args, out)
