"""rig check shows a supply-current step's U and TUR from the supply's readback accuracy, as the
run computes them (``rig.step_judging.supply_current_u``)."""

from __future__ import annotations

import math
from pathlib import Path

import pytest
from offline_station import offline_demo_station

from rig.cli import main

SEQUENCE = """
[sequence]
name = "draw-only"
[[steps]]
id = "quiescent"
kind = "supply-current"
supply = { pos = "P_5V", neg = "P_GND", voltage = "5 V", limit = "30 mA" }
low = "3 mA"
high = "10 mA"
"""


def _row(out: str, step_id: str) -> list[str]:
    return next(line.split() for line in out.splitlines() if line.startswith(step_id + " "))


def test_check_shows_u_and_tur_of_a_supply_current_step(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    station = offline_demo_station("readback", tmp_path)
    seq = tmp_path / "draw.toml"
    seq.write_text(SEQUENCE, encoding="utf-8")
    assert main(["check", str(seq), "--station", str(station.path)]) == 0
    row = _row(capsys.readouterr().out, "quiescent")
    # The station's [supply.accuracy.current] is range 1 A, 0.1 % of reading + 0.05 % of range
    # (the virtual bench's template, invented figures).  At the upper limit, 10 mA, the bound is
    # a = 0.1 % x 10 mA + 0.05 % x 1 A = 510 uA; u = a / sqrt(3) (rectangular, GUM 4.3.7);
    # U = 2u = 588.9 uA (k = 2, GUM 6.2); TUR = (10 - 3) mA / 2U = 5.94 (tolerance span over
    # twice U, common practice in calibration).  Recomputed by hand.
    expanded = 2 * (0.001 * 0.010 + 0.0005 * 1.0) / math.sqrt(3)
    assert f"{expanded * 1e6:.1f}" == "588.9"
    assert row[-5:] == ["1", "A", "588.9", "uA", "5.9:1"]  # range, U (k=2), TUR


def test_check_shows_no_u_where_the_station_states_no_readback_accuracy(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    station = offline_demo_station("readback", tmp_path)
    text = station.path.read_text(encoding="utf-8")
    start = text.index("[supply.accuracy.current]")
    end = text.index("\n\n", start)
    station.path.write_text(text[:start] + text[end:], encoding="utf-8")
    seq = tmp_path / "draw.toml"
    seq.write_text(SEQUENCE, encoding="utf-8")
    assert main(["check", str(seq), "--station", str(station.path)]) == 0
    row = _row(capsys.readouterr().out, "quiescent")
    assert row[-3:] == ["-", "-", "-"]
