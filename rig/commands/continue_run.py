"""``rig continue RUN_ID --station FILE``: carry on a run a stopped controller left unfinished.

The run's own record says which sequence it ran and for which serial number; the steps it had
finished are kept and the rest are run in the same record (see ``rig.resume``).
"""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import TYPE_CHECKING, Any

from rig.cli_output import Output

if TYPE_CHECKING:
    from rig.config.station import Station


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
    from rig.cli import EXIT_BAD_INPUT, _parser, cmd_run
    from rig.config.station import load_station
    from rig.resume import ResumeRefused
    from rig.run_admission import operator_problem
    from rig.store import ResultStore, StoreError

    station = load_station(args.station)
    problem = operator_problem(station, args.operator or "")  # who carries on, named anew
    if problem:
        out.error(f"rig: {problem}")
        return EXIT_BAD_INPUT
    store = ResultStore(station.store_path)
    try:
        run = store.run(args.run_id)
    except StoreError as exc:  # no such run: a wrong id is bad input
        out.error(f"rig: {exc}")
        return EXIT_BAD_INPUT
    finally:
        store.close()
    problem = _refusal(args, run, station.store_path) or _mismatch(args.run_id, run, station)
    if problem:
        out.error(f"rig: {problem}")
        return EXIT_BAD_INPUT
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
    try:
        return cmd_run(run_args, out)
    except ResumeRefused as exc:  # found once the run's own record is read: a changed sequence
        out.error(f"rig: {exc}")
        return EXIT_BAD_INPUT


def _mismatch(run_id: int, run: dict[str, Any], station: Station) -> str:
    """Why this station or the sequence file as it is now cannot carry the run on (empty: they
    can), found from the record before the bench is opened; the engine checks again."""
    from rig.config.sequence import load_sequence
    from rig.resume import same_sequence

    if run["station"] != station.name:
        return (
            f"run {run_id} ran on station {run['station']!r}; {station.path} is station "
            f"{station.name!r}: continue it with its own station file"
        )
    path = Path(str(run["sequence_path"]))
    if path.is_file() and not same_sequence(run, load_sequence(path)):
        return (
            f"the sequence {path} changed since run {run_id} began (its content hash differs); "
            "start a new run instead"
        )
    return ""


def _refusal(args: argparse.Namespace, run: dict[str, Any], store: Path) -> str:
    """Why the run cannot be continued, before anything is opened (empty: it may be).  A run
    still recorded as running is let through: its controller may have died, and the start of
    the continuing run marks it incomplete first."""
    from rig.commands.harness import harness_run_of
    from rig.resume import ENDED, not_incomplete

    run_id, status = args.run_id, str(run["status"])
    harness = harness_run_of(str(run["sequence_path"]))
    if harness is not None:
        what, subject = harness
        again = (
            f"rig harness check {subject}"
            if what == "check"
            else f"rig harness capture --out {subject}"
        )
        return (
            f"run {run_id} in {store} is a rig harness {what} of {subject} ({status}); a "
            "harness run cannot be continued, by design: it is one step that proves the whole "
            f"harness at once, so there is no next step to carry on from. {what.capitalize()} "
            "the harness again: "
            f"{again} --station {args.station} --serial {run['serial']} --ambient TEMPERATURE"
        )
    if status in ENDED:
        return not_incomplete(run_id, status, store)
    return ""
