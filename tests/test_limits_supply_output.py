"""rig limits draws the bench supply's output within the station's setting accuracy
(``[supply.accuracy.setting]``), and says plainly where it took the output as exact."""

from __future__ import annotations

import math
from pathlib import Path

import pytest
from offline_station import DEMO_FIXTURE, offline_station_text
from test_steps_on_bench import BARE_SENSOR

from rig.analysis.limits import LimitsStudy, study_limits
from rig.cli import main
from rig.config.sequence import load_sequence
from rig.config.station import load_station
from rig.config.unit_file import load_unit
from rig.plan import build_plan

UNIT = BARE_SENSOR
"""An invented ratiometric sensor alone on the demo fixture, powered from the bench supply."""

SEQUENCE = """
# invented: the supply read at the sensor, then the sensor's output as a fraction of it
[sequence]
name = "supply-read"
[[steps]]
id = "at-sensor"
kind = "volts"
hi = "P_5V"
lo = "P_GND"
supply = { pos = "P_5V", neg = "P_GND", voltage = "5 V", limit = "50 mA" }
nominal = "5 V"
tolerance = "0.1 V"
[[steps]]
id = "fraction"
kind = "ratiometric"
output = "P_SIG"
power = "P_5V"
ground = "P_GND"
range_low = "0 kPa"
range_high = "500 kPa"
pressure = "101.3 kPa"
tolerance = "1 %"
supply = { pos = "P_5V", neg = "P_GND", voltage = "5 V", limit = "50 mA" }
"""

SETTING = """
[supply.accuracy.setting]
range = "30 V"
pct_reading = 0.03
pct_range = 0.01
"""
"""An invented setting accuracy: ±(0.03 % of setting + 0.01 % of 30 V)."""


def _files(tmp_path: Path, setting: bool) -> tuple[Path, Path, Path]:
    unit = tmp_path / "unit.toml"
    unit.write_text(UNIT, encoding="utf-8")
    seq = tmp_path / "seq.toml"
    seq.write_text(SEQUENCE, encoding="utf-8")
    text = offline_station_text("supply-bench", DEMO_FIXTURE, tmp_path / "data")
    if setting:
        text = text.replace("[supply.accuracy.current]", SETTING + "[supply.accuracy.current]")
    station = tmp_path / "station.toml"
    station.write_text(text, encoding="utf-8")
    return unit, seq, station


def _study(tmp_path: Path, setting: bool) -> LimitsStudy:
    unit, seq, station_path = _files(tmp_path, setting)
    station = load_station(station_path)
    plan = build_plan(load_sequence(seq), station)
    return study_limits(plan, load_unit(unit), samples=100_000, seed=3)


def test_a_step_reading_the_supply_is_widened_by_its_setting_accuracy(tmp_path: Path) -> None:
    study = _study(tmp_path, setting=True)
    p = next(p for p in study.proposals if p.step_id == "at-sensor")
    # Hand computation (GUM 4.3.7, 5.1.2): the supply's output is uniform within
    # a_s = 0.03 % x 5 V + 0.01 % x 30 V = 4.5 mV of 5 V; the meter adds, per reading, uniform
    # within a_m = 0.0035 % x 5 V + 0.0005 % x 10 V = 0.225 mV (the virtual bench template's
    # 10 V dcv row, invented figures).  The reading is the output less a fixed drop (the
    # sensor's 8 mA through the fixture's relays and wiring, under a millivolt) plus the meter's
    # error, so its standard deviation is sqrt(a_s^2 + a_m^2) / sqrt(3) = 2.601 mV.  Without
    # the setting accuracy it was the meter's 0.130 mV alone.  With 100 000 samples the sample
    # sd's standard error is about 0.15 % (sqrt((kurtosis - 1) / 4N), kurtosis 1.8 for a
    # uniform), so 1 % is a safe and still sharp tolerance.
    a_s = (0.03 * 5.0 + 0.01 * 30.0) / 100.0
    a_m = (0.0035 * 5.0 + 0.0005 * 10.0) / 100.0
    sd = math.sqrt(a_s**2 + a_m**2) / math.sqrt(3.0)
    assert p.sd == pytest.approx(sd, rel=0.01)
    assert p.mean == pytest.approx(5.0, abs=1e-3)
    # The sum of two uniforms is trapezoidal; its tail beyond a_s + a_m - t holds
    # t^2 / (8 a_s a_m) (area of the corner triangle), so 50 ppm per side lies at
    # t = sqrt(8 a_s a_m 50e-6) = 20 uV inside the bound: the limits must reach out to about
    # the mean ± (a_s + a_m - t) = ± 4.705 mV.  Outward they may go past the bound by what the
    # tail line (docs/limits.md) overshoots a bounded tail, for a uniform of half-width a
    # 1.040 a at 50 ppm (the line through its 0.2 % and 2 % quantiles, -0.996 a and -0.96 a at
    # z = -2.878 and -2.054, carried to z = -3.891; recomputed), plus the outward rounding to 4
    # significant digits (1 mV at 5 V).
    t = math.sqrt(8 * a_s * a_m * 50e-6)
    reach = a_s + a_m - t
    assert p.limits.high is not None and p.limits.low is not None
    high, low = p.limits.high - p.mean, p.mean - p.limits.low
    assert high >= reach and low >= reach
    outer = 1.05 * (a_s + a_m) + 1e-3
    assert high <= outer and low <= outer


def test_a_ratio_to_the_same_supply_does_not_widen(tmp_path: Path) -> None:
    # Output over supply: one supply's error is the same in both readings of a unit (drawn once
    # per unit), so the fraction cancels it.  Drawn independently per step it would not.
    sd = {}
    for setting in (True, False):
        folder = tmp_path / str(setting)
        folder.mkdir()
        study = _study(folder, setting)
        sd[setting] = next(p.sd for p in study.proposals if p.step_id == "fraction")
    assert sd[True] == pytest.approx(sd[False], rel=0.02)


def test_without_a_setting_accuracy_rig_limits_says_it_took_the_output_exact(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    unit, seq, station = _files(tmp_path, setting=False)
    code = main(["limits", str(seq), "--unit", str(unit), "--station", str(station)])
    out = capsys.readouterr().out
    assert code == 0
    warning = next(line for line in out.splitlines() if "taken as exactly its setting" in line)
    assert "at-sensor" in warning and "fraction" in warning
    assert "add [supply.accuracy.setting]" in warning and str(station) in warning
    assert "supply output" not in out  # nothing drawn for it


def test_with_a_setting_accuracy_the_draw_is_listed_and_nothing_warned(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    unit, seq, station = _files(tmp_path, setting=True)
    assert main(["limits", str(seq), "--unit", str(unit), "--station", str(station)]) == 0
    out = capsys.readouterr().out
    assert "taken as exactly its setting" not in out
    row = next(line for line in out.splitlines() if line.startswith("supply output"))
    assert "±(0.03 % of setting + 0.01 % of 30 V)" in row and "uniform" in row


def test_a_setting_table_with_a_bad_value_is_refused_at_its_key(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    _, _, station = _files(tmp_path, setting=True)
    text = station.read_text(encoding="utf-8").replace("pct_reading = 0.03", "pct_reading = -1")
    station.write_text(text, encoding="utf-8")
    assert main(["check", "--station", str(station)]) == 2
    err = capsys.readouterr().err
    assert "[supply.accuracy.setting.pct_reading]: expected a number of at least 0" in err
