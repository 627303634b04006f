"""``rig limits SEQUENCE --unit U``: limits for a false-reject target, from a Monte Carlo of good
units, and the faults of the coverage set they still catch."""

from __future__ import annotations

import argparse
import json
import math
import tempfile
import textwrap
import time
from pathlib import Path
from typing import TYPE_CHECKING, Any

from rig.cli_output import Output, show

if TYPE_CHECKING:
    from rig.analysis.limits import ClassLimits, FigureLimits, LimitsStudy
    from rig.config.station import Station
    from rig.config.unit_file import UnitModel

VIRTUAL_RESOURCE = "TCPIP::127.0.0.1::1::SOCKET"
"""Placeholder resources of the default station: nothing is opened, only its accuracy is read."""


def register(sub: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    p = sub.add_parser(
        "limits", help="propose limits for a false-reject target by Monte Carlo over tolerances"
    )
    p.add_argument("sequence", type=Path, help="the sequence file")
    p.add_argument("--unit", type=Path, required=True, help="unit file with the tolerances")
    p.add_argument(
        "--station",
        type=Path,
        help="station whose DMM accuracy is used (default: the virtual bench's figures)",
    )
    p.add_argument("--samples", type=int, default=100_000, help="good units to draw (100000)")
    p.add_argument("--seed", type=int, default=0, help="seed of the Monte Carlo draws")
    p.add_argument(
        "--false-reject-ppm",
        type=float,
        default=100.0,
        help="target share of good units rejected, per step, in ppm (100)",
    )
    p.add_argument("--step", action="append", default=[], metavar="ID", help="only these steps")
    p.add_argument("--toml", action="store_true", help="print the proposed limits as TOML")
    p.add_argument("--json", action="store_true", help="machine-readable output")
    p.set_defaults(func=cmd_limits)


def cmd_limits(args: argparse.Namespace, out: Output) -> int:
    from rig.analysis.limits import study_limits, toml_text
    from rig.config.sequence import load_sequence
    from rig.config.unit_file import load_unit
    from rig.plan import build_plan

    _check_numbers(args)
    unit = load_unit(args.unit)
    sequence = load_sequence(args.sequence)
    _check_steps(args.step, sequence.path, [s.id for s in sequence.steps])
    station = load_station_or_virtual(args.station, unit)
    plan = build_plan(sequence, station)
    started = time.perf_counter()
    study = study_limits(
        plan,
        unit,
        samples=args.samples,
        seed=args.seed,
        false_reject_ppm=args.false_reject_ppm,
        only=args.step or None,
    )
    seconds = time.perf_counter() - started
    if args.toml:
        out.line(toml_text(study, plan.sequence.name, unit.name).rstrip("\n"))
    elif args.json:
        out.json(study_dict(study, seconds))
    else:
        _print(out, study, plan.sequence.name, unit, station, seconds)
    return 0


def _check_numbers(args: argparse.Namespace) -> None:
    from rig.errors import ConfigError, Problem

    problems = []
    if args.samples < 1000:
        problems.append(Problem("--samples", str(args.samples), "expected at least 1000 samples"))
    ppm = args.false_reject_ppm
    if not (math.isfinite(ppm) and 0 < ppm < 1e6):
        problems.append(
            Problem("--false-reject-ppm", f"{ppm:g}", "expected a rate above 0 and under 1e6 ppm")
        )
    if problems:
        raise ConfigError(problems)


def _check_steps(wanted: list[str], path: Path, ids: list[str]) -> None:
    from rig.errors import ConfigError, Problem

    unknown = [step for step in wanted if step not in ids]
    if unknown:
        raise ConfigError(
            [
                Problem(
                    str(path),
                    "--step",
                    f"no step {step!r} in this sequence; its steps: " + ", ".join(ids),
                )
                for step in unknown
            ]
        )


def load_station_or_virtual(path: Path | None, unit: UnitModel) -> Station:
    """The station file given, or one with the virtual bench's DMM figures on the unit's fixture
    (written to a temporary folder and read back, so it is checked like any station file)."""
    from rig.config.station import load_station
    from rig.sim.bench import STATION_TEMPLATE

    if path is not None:
        return load_station(path)
    with tempfile.TemporaryDirectory(prefix="rig-limits-") as folder:
        station_path = Path(folder) / "virtual-station.toml"
        station_path.write_text(
            STATION_TEMPLATE.format(
                name="virtual-bench",
                fixture=json.dumps(str(unit.fixture_path)),
                line="50 Hz",
                data_dir=json.dumps(folder),
                dmm=VIRTUAL_RESOURCE,
                supply=VIRTUAL_RESOURCE,
                relays="/dev/null",
            ),
            encoding="utf-8",
        )
        return load_station(station_path)


def _limits_text(limits: FigureLimits | ClassLimits | None, unit: str, form: str) -> str:
    from rig.analysis.limits import ClassLimits

    if limits is None:
        return "(none)"
    if isinstance(limits, ClassLimits):  # ± at the temperature each unit is judged at
        widths = dict.fromkeys(f"±{show(value, unit)}" for value in limits.span)
        return f"class {limits.tolerance_class}: {' .. '.join(widths)}"
    if form == "tolerance":
        return f"±{show(limits.high, unit)}"
    if form == "magnitude" and limits.low is not None and limits.low == -(limits.high or 0.0):
        return f"|x| ≤ {show(limits.high, unit)}"
    low = "-inf" if limits.low is None else show(limits.low, unit)
    high = "+inf" if limits.high is None else show(limits.high, unit)
    return f"{low} .. {high}"


def _print(
    out: Output,
    study: LimitsStudy,
    sequence: str,
    unit: UnitModel,
    station: Station,
    seconds: float,
) -> None:
    from rig.analysis.good_units import UNIFORM, UNIFORM_METER
    from rig.judge.decision import tur_text

    r = study.result
    out.line(f"Monte Carlo limits for {sequence} on unit {unit.name} (station {station.name})")
    out.line(
        f"{r.samples} good units drawn (seed {r.seed}) in {seconds:.1f} s; false-reject target "
        f"{study.false_reject_ppm:g} ppm per step, split evenly between the two limits"
    )
    out.line()
    out.line("How each tolerance is drawn:")
    rows = [[d.what, d.spread, d.distribution] for d in r.draws]
    rows.append(["meter, per reading", "the station's DMM accuracy", UNIFORM])
    out.table(["part", "spread", "distribution"], rows)
    for why in dict.fromkeys([*(d.why for d in r.draws), UNIFORM_METER]):
        out.line(textwrap.fill(why, 100, initial_indent="  - ", subsequent_indent="    "))
    out.line()
    rows = []
    for p in study.proposals:
        checks = study.checks[p.step_id]
        rows.append(
            [
                p.step_id,
                f"{show(p.mean, p.figure_unit)} ± {show(p.sd, p.figure_unit)}",
                _limits_text(p.present, p.figure_unit, p.form),
                f"{p.present_ppm:.0f}",
                _limits_text(p.limits, p.figure_unit, p.form),
                f"{p.proposed_ppm:.0f}",
                tur_text(p.tur) + ("" if p.tur_at_c is None else f" ({p.tur_at_c:g} degC)"),
                f"{sum(c.present for c in checks)} -> {sum(c.proposed for c in checks)}",
                p.method,
            ]
        )
    out.table(
        [
            "step",
            "good units (mean ± sd)",
            "present limits",
            "ppm",
            "proposed",
            "ppm",
            "TUR",
            "faults caught",
            "tail quantile",
        ],
        rows,
    )
    for step_id, reason in r.skipped.items():
        if step_id not in study.not_studied:
            out.line(f"skipped {step_id}: {reason}")
    if study.not_studied:
        out.line(f"not studied (--step leaves them out): {', '.join(study.not_studied)}")
    if not study.proposals:
        out.line("no limits proposed: no studied step takes limits from this study")
    out.line(
        "(tolerance steps show their deviation from the step's prediction; TUR is what rig check "
        "shows once the proposed limits are pasted, for an ntc, rtd or ratiometric step at the "
        "worst end of the unit's temperature range)"
    )
    out.line()
    studied = " of the studied steps" if study.not_studied else ""
    out.line(
        f"Faults of the fault set ({len(study.faults)}) caught by the proposed limits{studied}:"
    )
    for p in study.proposals:
        caught = [c.fault.spec for c in study.checks[p.step_id] if c.proposed]
        out.line(f"  {p.step_id}: {', '.join(caught) or 'none'}")
    missed = ", ".join(f.spec for f in study.faults if f not in study.caught_by_any("proposed"))
    if study.not_studied:
        out.line(f"  faults no studied step catches (other steps not studied): {missed or 'none'}")
    else:
        out.line(f"  by no step: {missed or 'none'}")
    if study.warnings:
        out.line()
        out.line("Warnings:")
        for warning in study.warnings:
            out.line(f"  {warning}")
    out.line()
    out.line("The limits know only what the unit file states; `--toml` prints them to paste.")


def study_dict(study: LimitsStudy, seconds: float) -> dict[str, Any]:
    """The study as plain data (``--json``)."""
    from rig.analysis.good_units import UNIFORM_METER
    from rig.analysis.limits import ClassLimits

    r = study.result

    def finite(value: float | None) -> float | None:
        return None if value is None or not math.isfinite(value) else value

    def limits(lim: FigureLimits | ClassLimits | None) -> dict[str, Any] | None:
        if lim is None:
            return None
        if isinstance(lim, ClassLimits):
            narrowest, widest = lim.span
            return {
                "tolerance_class": lim.tolerance_class,
                "narrowest": finite(narrowest),
                "widest": finite(widest),
            }
        return {"low": finite(lim.low), "high": finite(lim.high)}

    return {
        "samples": r.samples,
        "seed": r.seed,
        "seconds": seconds,
        "false_reject_ppm": study.false_reject_ppm,
        "draws": [
            {"what": d.what, "spread": d.spread, "distribution": d.distribution, "why": d.why}
            for d in r.draws
        ],
        "meter": UNIFORM_METER,
        "steps": [
            {
                "id": p.step_id,
                "kind": p.kind,
                "form": p.form,
                "figure_unit": p.figure_unit,
                "mean": p.mean,
                "sd": p.sd,
                "quantile_method": p.method,
                "present": limits(p.present),
                "present_reject_ppm": p.present_ppm,
                "proposed": limits(p.limits),
                "proposed_reject_ppm": p.proposed_ppm,
                "tur": finite(p.tur),
                "tur_at_c": p.tur_at_c,
                "toml": p.toml,
                "caught_present": [c.fault.spec for c in study.checks[p.step_id] if c.present],
                "caught_proposed": [c.fault.spec for c in study.checks[p.step_id] if c.proposed],
            }
            for p in study.proposals
        ],
        "skipped": [
            {"id": k, "reason": v} for k, v in r.skipped.items() if k not in study.not_studied
        ],
        "not_studied": study.not_studied,
        "faults": [f.spec for f in study.faults],
        "caught_by_none": [
            f.spec for f in study.faults if f not in study.caught_by_any("proposed")
        ],
        "warnings": study.warnings,
    }
