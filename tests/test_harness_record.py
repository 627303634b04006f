"""What the record of a harness check says once it is stored: the ambient its copper limits
were moved to, its limits to the digits its readings show, every finding counted by ``rig
stats``, and where ``--station-out`` writes.  Through the real stack: ``rig harness check`` over
pyvisa-py (TCP) and pyserial (pty) to the virtual bench, a real SQLite store, ``rig report`` and
``rig stats`` as a technician runs them.  The harness faults are our own invented cases on the
shipped wire list."""

from __future__ import annotations

import csv
import io
import json
import re
import signal
from pathlib import Path

import pytest
from harness_helpers import one_blas_thread
from sim_process import served

from rig.cli import EXIT_BAD_INPUT, EXIT_FAIL, main
from rig.config.fixture import load_fixture
from rig.config.station import load_station
from rig.harness.as_built import parse_build_faults
from rig.harness.wire_list import load_wire_list
from rig.sim.harness_bench import harness_bench

one_blas_thread()

SHIPPED = Path(__file__).resolve().parent.parent / "sequences" / "harness"
WIRE_LIST = SHIPPED / "wire-list.csv"
THREE_FAULTS = ("swap:W4,W5", "missing-splice:W10c", "high:W7=0.4ohm")
"""docs/harness.md's example: three faults in one harness, three findings of three kinds."""


def _check(folder: Path, faults: tuple[str, ...], serial: str, ambient: str) -> Path:
    """``rig harness check`` of the shipped list on a bench built with ``faults``; the
    station file (its store is ``folder/data/results.sqlite``, shared by every call)."""
    fixture = load_fixture(SHIPPED / "fixture.toml")
    wires = load_wire_list(WIRE_LIST, fixture)
    built = parse_build_faults(list(faults), wires, fixture.pins)
    bench = harness_bench(wires, fixture, built, ambient_c=23.0, seed=1)
    bench.start()
    try:
        station = bench.write_station(folder / f"{serial}.toml", data_dir=str(folder / "data"))
        args = ["harness", "check", str(WIRE_LIST), "--station", str(station)]
        assert main([*args, "--serial", serial, "--ambient", ambient]) == EXIT_FAIL
    finally:
        bench.stop()
    return station


@pytest.fixture(scope="module")
def checked(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """Two failed harnesses in one store: run 1 with the three faults, run 2 swapped only."""
    folder = tmp_path_factory.mktemp("harness-record")
    _check(folder, THREE_FAULTS, "H-3", "21.5 degC")
    _check(folder, ("swap:W4,W5",), "H-1", "23 degC")
    return folder / "data" / "results.sqlite"


def _out(capsys: pytest.CaptureFixture[str], *args: str) -> str:
    capsys.readouterr()
    assert main(list(args)) == 0, capsys.readouterr().err
    return capsys.readouterr().out


def test_the_record_states_the_ambient_the_limits_were_worked_out_at(
    checked: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # every copper limit is R20 [1 + alpha (T - 20 degC)] at the check's ambient (IEC 60028,
    # docs/harness.md), so the proof of a harness must name T: the HTML and the CSV say it, and
    # that it was stated (--ambient), not read from the bench's probe
    page = _out(capsys, "report", "1", "--store", str(checked), "--out", "-")
    nets = page.split("<h2>Continuity, net by net</h2>")[1].split('<table id="nets"')[0]
    assert "harness: limits at 21.5 °C (stated)" in nets
    rows = list(csv.DictReader(io.StringIO(_out(capsys, "report", "2", "--store", str(checked),
                                                "--format", "csv", "--out", "-"))))  # fmt: skip
    assert [r["ambient"] for r in rows] == ["limits at 23.0 degC (stated)"]


def test_every_finding_of_a_harness_run_is_counted_by_kind(
    checked: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # run 1: a swap, an open at the splice and a high-resistance wire; run 2: a swap.  Each
    # finding counts (docs/harness.md, Findings: the kinds), not one per run
    data = json.loads(_out(capsys, "stats", "--store", str(checked), "--json"))
    found = {r["finding_kind"]: r["count"] for r in data["harness_findings_by_kind"]}
    assert found == {"swap": 2, "splice": 1, "high-resistance": 1}
    assert data["harness_findings_note"].startswith("4 findings of 2 failed harness runs")
    text = _out(capsys, "stats", "--store", str(checked))
    table = text.split("Harness findings by kind")[1]
    assert "finding kind" in table and "findings" in table
    assert "swap             2         50.0 %" in table


def test_a_station_out_ending_with_a_slash_is_a_folder_made_for_the_station_file(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # `rig sim --station-out rig-data/` wrote a FILE named rig-data, and the next command failed
    # with "Not a directory"; the trailing / names a folder (POSIX pathname resolution: a path
    # ending in a slash resolves to a directory)
    unit = SHIPPED.parent / "units" / "temp-circuit.toml"
    commands = {
        "virtual-station.toml": ["sim", "--unit", str(unit)],
        "harness-station.toml": ["harness", "sim", str(WIRE_LIST), "--fixture",
                                 str(SHIPPED / "fixture.toml")],
    }  # fmt: skip
    for name, args in commands.items():
        folder = tmp_path / name.split("-")[0] / "rig-data"
        with served([*args, "--station-out", f"{folder}/"]) as (proc, lines):
            assert f"station file written to {folder / name}\n" in lines, lines
            assert load_station(folder / name).data_dir == folder
            proc.send_signal(signal.SIGTERM)
            assert proc.wait(timeout=10) == 0
        # a file where the folder is named: refused before a bench is served, nothing written
        taken = tmp_path / f"taken-{name}"
        taken.write_text("mine\n", encoding="utf-8")
        capsys.readouterr()
        assert main([*args, "--station-out", f"{taken}/"]) == EXIT_BAD_INPUT
        assert capsys.readouterr().err.splitlines() == [
            f"rig: --station-out {taken}/: names a folder, but {taken} is a file"
        ]
        assert taken.read_text(encoding="utf-8") == "mine\n"


def test_the_nets_limits_are_shown_to_the_digits_of_their_readings(
    checked: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # JCGM 100:2008 (GUM) 7.2.6: U to two significant digits, the reading to the same decimal
    # place; a limit beside them to that place too (0.05735177 beside 0.0454 read 0.0574), not
    # to eight digits.  Checked against Python's own float formatting of the stored figures.
    extras = json.loads(_out(capsys, "report", "1", "--store", str(checked), "--format",
                             "json", "--out", "-"))["steps"][0]["extras"]  # fmt: skip
    page = _out(capsys, "report", "1", "--store", str(checked), "--out", "-")
    nets = page.split('id="nets"')[1].split("</table>")[0]
    rows = [re.findall(r"<td[^>]*>(.*?)</td>", r) for r in nets.split("<tr>")[2:]]
    assert len(rows) == sum(1 for key in extras if key.endswith(" max_ohm")) >= 10
    for _, net, hi, lo, reading, limit, u, _ in rows:
        key = f"net {net} {hi}>{lo}"
        if reading == "no reading":  # an open: the limit as the findings quote it
            assert limit == f"{extras[f'{key} max_ohm']:.3g}"
            continue
        places = len(reading.split(".")[1])
        assert limit == f"{extras[f'{key} max_ohm']:.{places}f}", (net, reading, limit)
        assert len(u.split(".")[1]) == places and len(u.lstrip("0.")) == 2, u
        assert float(u) >= extras[f"{key} u_ohm"]  # U rounded up, never smaller
    margins = page.split("<h2>Margins</h2>")[-1] if "<h2>Margins</h2>" in page else page
    assert "no size to scale by" not in page
    assert "harness, a count of faults found where none is allowed" in margins


def test_a_reading_next_to_its_limit_keeps_the_digits_that_tell_them_apart() -> None:
    # worked by hand: 0.0574 ohm with U 0.0046 ohm shows to 4 decimals, where the limit
    # 0.05735177 ohm also reads 0.0574; one more decimal tells them apart (0.05740 > 0.05735)
    from reports.run_html import _net_cells

    assert _net_cells(0.0454, 0.05735177, 0.004624) == ("0.0454", "0.0574", "0.0047")
    assert _net_cells(0.0574, 0.05735177, 0.0046) == ("0.05740", "0.05735", "0.0046")
    assert _net_cells(None, 0.07576635, 0.0) == ("no reading", "0.0758", "0")
