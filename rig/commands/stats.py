"""``rig stats``: yield, failure Pareto and step capability over stored runs; ``rig stats grr``:
a gauge R&R study from study-mode runs or from a CSV made elsewhere."""

from __future__ import annotations

import argparse
import math
from pathlib import Path
from typing import TYPE_CHECKING, Any

from rig.cli_output import Output
from rig.commands._store_args import (
    ArgumentProblem,
    OpenedStore,
    ServerUnreachable,
    checked_output,
    file_to_write,
    open_from_args,
)
from rig.stats.filters import RunFilter

if TYPE_CHECKING:
    from rig.stats.from_store import FaultFinder

EXIT_OK, EXIT_BAD_INPUT, EXIT_UNREACHABLE = 0, 2, 3
FEW_FOR_CAPABILITY = 30


def register(sub: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    stats = sub.add_parser(
        "stats",
        help="shop statistics (yield, failure Pareto, capability); 'rig stats grr' for gauge R&R",
    )
    stats.add_argument("topic", nargs="?", choices=("grr",), help="grr: a gauge R&R study")
    where = stats.add_mutually_exclusive_group()
    where.add_argument("--station", type=Path, help="station file: its store (or its server)")
    where.add_argument("--store", type=Path, help="a results store file (SQLite)")
    stats.add_argument("--sequence", help="only runs of this sequence (name)")
    stats.add_argument("--station-name", help="only runs made on this station (name)")
    stats.add_argument("--since", metavar="YYYY-MM-DD", help="only runs started on or after")
    stats.add_argument("--until", metavar="YYYY-MM-DD", help="only runs started on or before")
    stats.add_argument("--serial-prefix", help="only units whose serial starts with this")
    stats.add_argument(
        "--sequence-hash",
        metavar="PREFIX",
        help="only runs of the sequence version whose hash starts with this (as the output names)",
    )
    stats.add_argument("--json", action="store_true", help="one machine-readable document")
    stats.add_argument(
        "--html",
        nargs="?",
        const="",
        type=str,
        metavar="PATH",
        help="also write a page with the charts: to PATH, or into the folder PATH (one that "
        "exists, or a path ending with /: made if need be) as stats.html; default: the data "
        "folder",
    )
    stats.add_argument("--csv", type=Path, help="grr: the study as CSV (part,operator,trial,value)")
    stats.add_argument("--step", help="grr: the step whose values the study-mode runs recorded")
    stats.set_defaults(func=cmd_stats)


def cmd_stats(args: argparse.Namespace, out: Output) -> int:
    from rig.stats.filters import FilterError
    from rig.stats.grr import GaugeStudyError
    from rig.store import StoreError

    try:
        if args.topic == "grr":
            return _grr(args, out)
        return _shop(args, out)
    except ServerUnreachable as exc:  # not the input's fault: as rig report and rig sync say it
        out.error(f"rig: {exc}")
        return EXIT_UNREACHABLE
    except (FilterError, GaugeStudyError, ArgumentProblem, StoreError) as exc:
        out.error(f"rig: {exc}")
        return EXIT_BAD_INPUT


def _filter(args: argparse.Namespace) -> RunFilter:
    from rig.stats.filters import make_filter

    return make_filter(
        sequence=args.sequence,
        station=args.station_name,
        since=args.since,
        until=args.until,
        serial_prefix=args.serial_prefix,
        sequence_hash=args.sequence_hash,
    )


def _open(args: argparse.Namespace) -> OpenedStore:
    if args.station is None and args.store is None:
        raise ArgumentProblem("give --station STATION or --store PATH (where the runs are)")
    return open_from_args(args)


def _pct(value: Any) -> str:
    return (
        ""
        if value is None or (isinstance(value, float) and math.isnan(value))
        else (f"{100 * float(value):.1f} %")
    )


def _g(value: Any, digits: int = 5) -> str:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return ""
    return f"{value:.{digits}g}" if isinstance(value, float) else str(value)


def _fault_finder(opened: OpenedStore) -> FaultFinder | None:
    """The most likely fault of a failed run, when a station and the analysis are available."""
    import importlib.util

    if opened.station is None or importlib.util.find_spec("rig.analysis.diagnose") is None:
        return None
    from reports.diagnosis import diagnose_stored_run

    def find(run_id: int) -> str | None:
        found = diagnose_stored_run(opened.store, opened.store.run(run_id), station=opened.station)
        return found["hypotheses"][0]["spec"] if found["hypotheses"] else None

    return find


def _shop(args: argparse.Namespace, out: Output) -> int:
    from rig.stats.filters import FilterError
    from rig.stats.from_store import shop_stats
    from rig.stats.no_match import no_match_text, unknown_names

    where = _filter(args)
    opened = _open(args)
    try:
        stats = shop_stats(opened.store, where, _fault_finder(opened))
        no_match = ""
        if stats.runs == 0:  # a misspelt name is an error; a valid one, said in words
            unknown = unknown_names(where, opened.store.run_names)
            if unknown:
                raise FilterError(unknown)
            no_match = no_match_text(where, opened.store.run_names, opened.store.where)
        page_path = None
        if args.html is not None:
            page_path = _write_page(opened, stats, args.html)
    finally:
        opened.store.close()
    if args.json:
        data = stats.to_dict()
        data["no_match"] = no_match or None
        data["html"] = None if page_path is None else str(page_path)
        out.json(data)
        return EXIT_OK
    if no_match:
        out.line(no_match)
        if page_path is not None:
            out.line(f"page (empty) written to {page_path}")
        return EXIT_OK
    _print_shop(stats, out)
    if page_path is not None:
        out.line(f"page with the charts written to {page_path}")
    return EXIT_OK


def _write_page(opened: OpenedStore, stats: Any, html_arg: str) -> Path:
    from reports.stats_html import render_stats, series_from_rows

    # the text as typed: a trailing / names a folder (file_to_write), which Path would drop
    where = html_arg or opened.data_dir / "reports" / "stats.html"
    target = checked_output(file_to_write(where, "--html", name="stats.html"))

    def series(step: Any) -> Any:
        rows = opened.store.step_series(stats.where, step.sequence, step.step_id)
        return series_from_rows(rows, step)

    text = render_stats(stats, series)
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        target.write_text(text, encoding="utf-8")
    except OSError as exc:
        raise ArgumentProblem(f"cannot write {target}: {exc}") from None
    return target


def _print_shop(stats: Any, out: Output) -> None:
    from rig.stats.from_store import versions_text

    out.line(f"{stats.runs} production runs")
    out.line()
    out.line("Yield per sequence")
    out.table(
        ["sequence", "units", "runs", "first-pass yield", "final yield"],
        [
            [r.sequence, str(r.units), str(r.runs), _pct(r.first_pass_yield), _pct(r.final_yield)]
            for r in stats.by_sequence.itertuples()
        ],
    )
    for line in versions_text(stats.versions):
        out.line(f"  {line}")
    if versions_text(stats.versions):
        out.line(
            "  their runs count together above and below; one version alone: --sequence-hash PREFIX"
        )
    out.line()
    out.line("Yield per day (day of each unit's first run)")
    out.table(
        ["sequence", "day", "units", "first-pass yield", "final yield"],
        [
            [r.sequence, r.day, str(r.units), _pct(r.first_pass_yield), _pct(r.final_yield)]
            for r in stats.by_day.itertuples()
        ],
    )
    out.line()
    out.line("Screens: last verdict per unit (confirmed failure / no fault found)")
    out.table(
        [
            "sequence",
            "units",
            "confirmed",
            "no fault found",
            "inconclusive",
            "undecided",
            "confirmed share",
        ],
        [
            [
                r.sequence,
                str(r.units),
                str(r.confirmed_failure),
                str(r.no_fault_found),
                str(r.inconclusive),
                str(r.undecided),
                _pct(r.confirmed_share),
            ]
            for r in stats.screens.itertuples()
        ],
    )
    out.line(
        "  confirmed: a fail beyond the uncertainty of the reading; no fault found: a pass beyond "
        "it; inconclusive: a reading within it of a limit, or judged with no uncertainty "
        "(retest); undecided: not completed, not measured, a question answered no, or the "
        "bench's reference failed"
    )
    out.line()
    out.line(
        "Failure Pareto by step (part failures: fail or conditional fail of a step of the part,"
        " in a run that decides)"
    )
    _pareto(out, stats.pareto_steps, ["step", "failures"])
    out.line()
    out.line("Runs not decided (not counted as part failures)")
    if len(stats.undecided):
        out.table(["cause", "runs"], [[r.cause, str(r.runs)] for r in stats.undecided.itertuples()])
    else:
        out.line("  none: every run completed and measured every step")
    out.line()
    out.line("Failure Pareto by diagnosed fault kind")
    if stats.pareto_faults is None:
        out.line(f"  {stats.fault_note}")
    else:
        _pareto(out, stats.pareto_faults, ["fault kind", "runs"])
        out.line(f"  {stats.fault_note}")
    if stats.pareto_findings is not None:
        out.line()
        out.line("Harness findings by kind (every finding of each failed harness proof)")
        _pareto(out, stats.pareto_findings, ["finding kind", "findings"])
        out.line(f"  {stats.findings_note}")
    out.line()
    out.line("Numeric steps")
    out.table(
        ["sequence", "step", "unit", "low", "high", "n", "mean", "std dev", "Cp", "Cpk"],
        [
            [
                s.sequence,
                s.step_id,
                s.unit,
                _g(s.low),
                _g(s.high),
                str(s.n),
                _g(s.mean),
                _g(s.std, 3),
                _g(s.cp, 3),
                _g(s.cpk, 3),
            ]
            for s in stats.steps
        ],
    )
    if any(s.n < FEW_FOR_CAPABILITY for s in stats.steps if s.cpk is not None):
        out.line(
            f"  Cp and Cpk from fewer than {FEW_FOR_CAPABILITY} values are rough: their "
            "confidence interval is wide (common practice, no published source)"
        )


def _pareto(out: Output, frame: Any, headers: list[str]) -> None:
    """A Pareto table: label and count (the first two columns), share, cumulative share."""
    out.table(
        [*headers, "share", "cumulative"],
        [
            [str(label), str(count), _pct(share), _pct(cumulative)]
            for label, count, share, cumulative in frame.itertuples(index=False)
        ],
    )


def _grr(args: argparse.Namespace, out: Output) -> int:
    from rig.stats.from_store import stored_study
    from rig.stats.grr import study_summary
    from rig.stats.study_csv import read_study_csv

    if args.csv is not None:
        study = __import__("rig.stats.grr", fromlist=["gauge_rr"]).gauge_rr(
            read_study_csv(args.csv)
        )
        source = str(args.csv)
    else:
        if not args.sequence or not args.step:
            raise ArgumentProblem(
                "rig stats grr needs --csv FILE, or --station/--store with --sequence and --step"
            )
        opened = _open(args)
        try:
            study = stored_study(opened.store, _filter(args), args.sequence, args.step)
        finally:
            opened.store.close()
        source = f"{opened.store.where}: {args.sequence} / {args.step}"
    summary = study_summary(study)
    if args.json:
        out.json({"source": source, **summary})
        return EXIT_OK
    _print_grr(source, summary, out)
    return EXIT_OK


def _print_grr(source: str, summary: dict[str, Any], out: Output) -> None:
    out.line(
        f"gauge R&R (ANOVA) of {source}: {summary['parts']} parts x {summary['operators']} "
        f"operators x {summary['trials']} trials"
    )
    out.table(
        ["source", "df", "SS", "MS", "F", "p"],
        [
            [r["source"], str(r["df"]), _g(r["ss"]), _g(r["ms"]), _g(r["f"], 4), _g(r["p"], 3)]
            for r in summary["anova"]
        ],
    )
    if summary["interaction_pooled"]:
        out.line("the part x operator interaction is not significant: pooled into repeatability")
    out.line()
    out.table(
        ["component", "variance", "std dev", "% of total variation", "% contribution"],
        [
            [
                name,
                _g(c["variance"]),
                _g(c["std_dev"]),
                f"{c['percent_of_total']:.1f} %",
                f"{c['percent_contribution']:.1f} %",
            ]
            for name, c in summary["components"].items()
        ],
    )
    out.line()
    out.line(
        f"%GRR {summary['percent_grr']:.1f} %   "
        f"%contribution {summary['percent_contribution']:.1f} %   ndc {summary['ndc']}"
    )
    out.line(f"verdict: {summary['verdict']}")
    out.line(
        "bands (AIAG MSA): %GRR under 10 % acceptable, 10-30 % marginal, over 30 % "
        "unacceptable; ndc at least 5"
    )
