"""``rig report RUN``: one run's record as HTML (plots inline), CSV or JSON."""

from __future__ import annotations

import argparse
import re
from pathlib import Path

from rig.cli_output import Output
from rig.commands._run_ref import (
    close_run,
    file_label,
    locate_run,
    planned_elsewhere,
    run_ref,
    run_words,
)
from rig.commands._store_args import (
    ArgumentProblem,
    add_store_args,
    checked_output,
    file_to_write,
    open_from_args,
)

EXIT_WRITTEN, EXIT_BAD_INPUT = 0, 2


def register(sub: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    report = sub.add_parser("report", help="one run's record as HTML, CSV or JSON")
    report.add_argument(
        "run",
        type=run_ref,
        metavar="RUN",
        help="the run id rig run printed (the station's own, also where the record is read from "
        "the results server), or the run's record id (32 hex digits, or its first 8 or more, "
        "as rig runs lists them: any station's run)",
    )
    report.add_argument(
        "--format",
        choices=("html", "csv", "json"),
        default="html",
        help="html (default), csv or json",
    )
    report.add_argument(
        "--out",
        type=str,  # as typed: a trailing / names a folder (file_to_write), which Path drops
        help="file to write ('-' for the terminal), or a folder (one that exists, or a path "
        "ending with /: made if need be) to write it in under its default name; default: the "
        "data folder",
    )
    add_store_args(report)
    report.add_argument("--unit", type=Path, help="unit file, for the diagnosis of a failed run")
    report.set_defaults(func=cmd_report)


def default_name(run_id: int | str, serial: str, fmt: str) -> str:
    """``run-12-HAR-0102.html``: the serial reduced to characters safe in any file name."""
    safe = re.sub(r"[^A-Za-z0-9._-]+", "_", serial).strip("._") or "unit"
    return f"run-{run_id}-{safe[:60]}.{fmt}"


def cmd_report(args: argparse.Namespace, out: Output) -> int:
    from reports.diagnosis import diagnose_stored_run
    from reports.run_export import record_csv, record_json, run_record
    from reports.run_html import render_run

    try:
        opened = open_from_args(args, own_file_if_unreachable=True)
    except ArgumentProblem as exc:
        out.error(f"rig: {exc}")
        return EXIT_BAD_INPUT
    found = locate_run(opened, args.run, out.error)
    if found is None:
        return EXIT_BAD_INPUT
    try:
        run = found.store.run(found.run_id)
        diagnosis = diagnose_stored_run(
            found.store, run, station=opened.station, unit_path=args.unit
        )
        record = run_record(found.store, found.run_id, diagnosis, opened.station)
        record["run"].update(found.numbers())
    finally:
        close_run(opened, found)
    elsewhere = (
        ""
        if opened.station is None
        else planned_elsewhere(run_words(found, run), run, opened.station)
    )
    if diagnosis["available"] and elsewhere:  # the same note rig diagnose gives
        out.error(f"note: {elsewhere}")
    # files are named by the number the station knows the run by, or a record id's start
    label = file_label(found, run)
    render = {"html": render_run, "csv": record_csv, "json": record_json}[args.format]
    text = render(record)
    if args.out == "-":
        out.line(text.rstrip("\n"))
        return EXIT_WRITTEN
    try:
        name = default_name(label, run["serial"], args.format)
        where = opened.data_dir / "reports" / name if args.out is None else args.out
        target = checked_output(file_to_write(where, "--out", name=name))
        target.parent.mkdir(parents=True, exist_ok=True)
        target.write_text(text, encoding="utf-8")
    except ArgumentProblem as exc:
        out.error(f"rig: {exc}")
        return EXIT_BAD_INPUT
    except OSError as exc:
        out.error(f"rig: cannot write the report: {exc}")
        return EXIT_BAD_INPUT
    out.line(f"report of {run_words(found, run)} ({run['serial']}) written to {target}")
    return EXIT_WRITTEN
