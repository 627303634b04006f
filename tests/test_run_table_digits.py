"""``rig run``'s table shows each reading, its limits and its U to the digits U supports, as the
HTML report does: U to two significant digits, rounded up, the value to the same decimal place
(JCGM 100:2008, GUM 7.2.6), written with the unit prefix the reading needs.

A reviewer found ``23 °C`` beside ``±0.2347 °C`` in the terminal where the report read ``23.00``
and ``0.24``.  The runs here go through the real drivers to the virtual bench (TCP sockets and a
pseudo-terminal) into a SQLite file; the report's cells are read from the same run's record.
"""

from __future__ import annotations

import io
import re
from dataclasses import replace
from decimal import Decimal
from pathlib import Path

import pytest
from bench_helpers import SEQUENCES, shipped_bench
from test_report_digits import step_rows
from test_value_digits_shown import result

from reports.run_export import run_record
from reports.run_html import render_run
from rig.cli import main
from rig.cli_output import Output
from rig.judge.decision import Limits, Verdict
from rig.store import ResultStore

PREFIX = {"p": -12, "n": -9, "u": -6, "m": -3, "k": 3, "M": 6, "G": 9}


def table_rows(out: str) -> dict[str, dict[str, str]]:
    """``rig run``'s result table as {step: {column: cell}}, columns found from its rule line."""
    lines = out.splitlines()
    rule = next(n for n, line in enumerate(lines) if re.fullmatch(r"-+(  -+)+", line.rstrip()))
    starts = [m.start() for m in re.finditer(r"-+", lines[rule])]

    def cells(line: str) -> list[str]:
        ends = [*starts[1:], len(line)]
        return [line[a:b].strip() for a, b in zip(starts, ends, strict=True)]

    header = cells(lines[rule - 1])
    rows = {}
    for line in lines[rule + 1 :]:
        if not line.strip():
            break
        row = dict(zip(header, cells(line), strict=True))
        rows[row["step"]] = row
    return rows


def in_base_unit(text: str, unit: str) -> str:
    """A shown number with its prefixed unit ("2.163 kohm") as the report writes it in the
    step's own unit ("2163"): the same digits, the decimal point moved by the prefix."""
    number, symbol = text.removeprefix("±").split(" ")
    symbol = {"°C": "degC"}.get(symbol, symbol)
    prefix = symbol.removesuffix(unit)
    assert prefix + unit == symbol, (text, unit)
    return str(Decimal(number).scaleb(PREFIX.get(prefix, 0)))


def report_rows(store_path: Path) -> tuple[list[dict[str, object]], dict[str, dict[str, str]]]:
    """The run's steps as stored and the report's step table, as {step: {column: cell}}."""
    store = ResultStore(store_path)
    try:
        record = run_record(store, 1)
    finally:
        store.close()
    return record["steps"], step_rows(render_run(record))


@pytest.mark.parametrize(
    ("unit", "sequence", "faults"),
    [
        ("ntc-sender", "ntc-sender-screen", ()),  # °C of a reference probe, kohm of a sender
        ("temp-circuit", "temp-circuit-check", ("open:signal",)),  # V, mV and uV, overloads
    ],
)
def test_the_run_table_shows_value_limits_and_u_to_the_reports_digits(
    unit: str,
    sequence: str,
    faults: tuple[str, ...],
    tmp_path: Path,
    capsys: pytest.CaptureFixture[str],
) -> None:
    with shipped_bench(unit, faults, folder=tmp_path) as (_, station):
        args = ["run", str(SEQUENCES / f"{sequence}.toml"), "--station", str(station.path)]
        main([*args, "--serial", "D1", "--yes"])
        out = capsys.readouterr().out
        steps, report = report_rows(station.store_path)
    shown = table_rows(out)
    compared = 0
    for step in steps:
        row, cells = shown[str(step["step_id"])], report[str(step["step_id"])]
        if not cells["U (expanded)"] or not re.fullmatch(r"-?[\d.]+", cells["value"]):
            continue  # an answer, an overload: no digits of U to agree on
        su = str(step["unit"])
        assert in_base_unit(row["value"], su) == cells["value"], (row, cells)
        assert in_base_unit(row["U (k=2)"], su) == cells["U (expanded)"], (row, cells)
        low, high = row["limits"].split(" .. ")
        # a limit is a stated figure: the same number, its trailing zeros left off
        assert Decimal(in_base_unit(low, su)) == Decimal(cells["low limit"]), (row, cells)
        assert Decimal(in_base_unit(high, su)) == Decimal(cells["high limit"]), (row, cells)
        compared += 1
    assert compared >= 3, out


def one_row(value: float, u: float, unit: str, limits: Limits) -> dict[str, str]:
    step = replace(result(value, Verdict.PASS, 10.0), unit=unit, limits=limits, expanded_u=u)
    buffer = io.StringIO()
    Output(buffer).results([step])
    return table_rows(buffer.getvalue())["signal"]


@pytest.mark.parametrize(
    ("value", "u", "unit", "limits", "shown"),
    [
        # the reviewer's ambient: GUM 7.2.6, U to two significant digits rounded up, the value
        # to the same decimal place; a stated limit that place holds exactly without the
        # trailing zeros a reading would have
        (
            23.00376,
            0.2347,
            "degC",
            Limits(10.0, 40.0),
            ("23.00 °C", "10 °C .. 40 °C", "±0.24 °C"),
        ),
        # a sender in kohm: U 20.96 ohm reads 21 ohm, the value to the ohm (GUM 7.2.6), both
        # written in kohm as the value is
        (
            2162.62,
            20.96,
            "ohm",
            Limits(2054.0, 2270.0),
            ("2.163 kohm", "2.054 kohm .. 2.27 kohm", "±0.021 kohm"),
        ),
        # U of exactly two significant digits is not rounded up by the change of prefix:
        # 0.0041 V / 0.001 is 4.1000000000000005 in binary floating point, whose two digits
        # rounded up would read 4.2 (IEEE 754 doubles; checked with Python's float)
        (0.0123, 0.0041, "V", Limits(-0.02, 0.02), ("12.3 mV", "-20 mV .. 20 mV", "±4.1 mV")),
    ],
)
def test_worked_values_read_to_the_digits_their_u_supports(
    value: float, u: float, unit: str, limits: Limits, shown: tuple[str, str, str]
) -> None:
    row = one_row(value, u, unit, limits)
    assert (row["value"], row["limits"], row["U (k=2)"]) == shown
