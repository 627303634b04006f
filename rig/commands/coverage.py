"""``rig coverage SEQUENCE --station S --unit U``: which single faults a sequence catches."""

from __future__ import annotations

import argparse
from pathlib import Path

from rig.cli_output import Output

VERDICT_MARKS = {
    "pass": "ok",
    "conditional pass": "ok?",
    "conditional fail": "FAIL?",
    "fail": "FAIL",
    "error": "ERR",
    "skipped": "-",
}
"""Short cell text for the fault x step matrix."""


def register(sub: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    p = sub.add_parser("coverage", help="fault coverage of a sequence, by simulation")
    p.add_argument("sequence", type=Path, help="the sequence file")
    p.add_argument("--station", type=Path, required=True, help="the station file")
    p.add_argument("--unit", type=Path, required=True, help="unit file the faults are put in")
    p.add_argument(
        "--series",
        metavar="OHMS",
        help="series resistance to try in each wire, e.g. '15 ohm' (default: the smallest that "
        "a step of the sequence should fail)",
    )
    p.add_argument(
        "--drift", metavar="PCT", default="10 %", help="sensor drift to try either way (10 %%)"
    )
    p.add_argument("--fault", action="append", default=[], metavar="SPEC", help="only these faults")
    p.add_argument("--json", action="store_true", help="machine-readable output")
    p.set_defaults(func=cmd_coverage)


def cmd_coverage(args: argparse.Namespace, out: Output) -> int:
    from rig.analysis.coverage import fault_coverage
    from rig.analysis.fault_set import single_faults
    from rig.analysis.predict import check_static
    from rig.cli import EXIT_FAIL, EXIT_PASS
    from rig.faults import parse_faults
    from rig.runner import load_inputs

    plan, unit = load_inputs(args.sequence, args.station, args.unit)
    assert unit is not None  # --unit is required
    if args.fault:
        faults = parse_faults(args.fault, unit, source="--fault")
        check_static(faults)
    else:
        series = None if args.series is None else _quantity(args.series, "ohm", "--series")
        drift = _quantity(args.drift, "%", "--drift")
        faults = single_faults(unit, plan, series_ohm=series, drift_pct=drift)
    report = fault_coverage(plan, unit, faults)
    # a sequence that fails the unit with no fault "detects" every fault: no figure, exit 1
    code = EXIT_FAIL if report.coverage_pct is None else EXIT_PASS
    if args.json:
        out.json(report.as_dict())
        return code
    out.line(f"fault coverage of {plan.sequence.name} on unit {unit.name} (solver, no bench)")
    if report.coverage_pct is None:
        out.line(f"warning: {report.no_coverage_reason}: every fault below counts as detected")
    rows = [
        [
            row.fault.spec,
            *(VERDICT_MARKS[v.value] for v in row.verdicts),
            "yes" if row.detected else "NO",
        ]
        for row in report.rows
    ]
    out.table(["fault", *report.steps, "detected"], rows)
    out.line()
    if report.undetected:
        out.line("not detected by any step:")
        for row in report.rows:
            if not row.detected:
                why = (
                    " (moves no reading by more than its uncertainty: no limit here can catch "
                    "it; it needs another reading, or changes nothing these readings see)"
                    if row.unseen
                    else " (moves a reading by more than its uncertainty, but within its limits)"
                )
                out.line(f"  {row.fault.spec}{why}")
    if report.coverage_pct is None:
        out.line(f"coverage: not meaningful: {report.no_coverage_reason}")
    else:
        out.line(
            f"coverage: {len(report.detected)} of {len(report.rows)} single faults "
            f"({report.coverage_pct:.1f} %)"
        )
    return code


def _quantity(text: str, unit: str, option: str) -> float:
    from rig.errors import ConfigError, Problem
    from rig.quantity import QuantityError, parse_quantity

    try:
        return parse_quantity(text, unit)
    except QuantityError as exc:
        raise ConfigError([Problem(option, text, str(exc))]) from None
