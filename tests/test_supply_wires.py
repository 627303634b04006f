"""A supply current limit above what the thinnest wire it powers should carry is warned of by
``rig check``, from the unit file's wires and from a harness step's wire list.

Before this, only the station's caps stood between a step's current limit and a thin wire.
"""

from __future__ import annotations

import re
import shutil
from pathlib import Path

import pytest
from bench_helpers import SEQUENCES
from doc_blocks import ROOT
from offline_station import DEMO_FIXTURE, offline_station_text

from rig.cli import main
from rig.models.copper import awg_area_mm2
from rig.models.wire_current import continuous_current_a

HANDBOOK_AWG_A = {16: "3.7", 18: "2.3", 20: "1.5", 22: "0.92", 24: "0.577"}
"""The power-transmission column of the AWG table printed in electronics handbooks (700
circular mils per ampere), in A, to the figures the table gives: checked against two published
copies of such a table (December 2026; one gives 24 AWG as 0.58)."""

IEC_60335_1_TABLE_11_A = {0.5: 3.0, 0.75: 6.0, 1.0: 10.0, 1.5: 16.0, 2.5: 25.0, 4.0: 32.0}
"""The most current an appliance supply cord of each cross-section (mm²) may be rated for,
IEC 60335-1 table 11: from memory."""


@pytest.mark.parametrize(("awg", "amps"), HANDBOOK_AWG_A.items())
def test_the_figure_is_the_handbook_power_transmission_column(awg: int, amps: str) -> None:
    # source: handbook AWG table, power-transmission column (checked), rounded as it is
    figures = len(amps.replace("0.", "").replace(".", ""))
    found = continuous_current_a(float(awg_area_mm2(float(awg))))
    assert float(f"{found:.{figures}g}") == float(amps)


@pytest.mark.parametrize(("area", "amps"), IEC_60335_1_TABLE_11_A.items())
def test_the_figure_stays_below_what_an_appliance_cord_may_carry(area: float, amps: float) -> None:
    # source: IEC 60335-1 table 11 (from memory): conservative means below it at every size
    assert continuous_current_a(area) < amps


def write_station(folder: Path, fixture: Path) -> Path:
    station = folder / "station.toml"
    station.write_text(offline_station_text("wires", fixture, folder / "data"), encoding="utf-8")
    return station


def powered_step(pos: str, neg: str, limit: str) -> str:
    return f"""
[[steps]]
id = "draw"
kind = "supply-current"
supply = {{ pos = "{pos}", neg = "{neg}", voltage = "5 V", limit = "{limit}" }}
low = "4 mA"
high = "12 mA"
"""


def check_warnings(capsys: pytest.CaptureFixture[str], *args: Path | str) -> list[str]:
    capsys.readouterr()
    assert main(["check", *(str(a) for a in args)]) == 0
    return [
        line for line in capsys.readouterr().out.splitlines() if "conservative continuous" in line
    ]


@pytest.mark.parametrize(("limit", "warned"), [("2 A", True), ("1.4 A", False)])
def test_a_limit_above_the_unit_files_thinnest_powered_wire_is_warned_of(
    limit: str, warned: bool, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # the shipped pressure circuit feeds P_5V and P_GND through 20 AWG wires: 1.46 A (handbook
    # power-transmission column 1.5 A)
    sequence = tmp_path / "powered.toml"
    sequence.write_text(
        '[sequence]\nname = "powered"\n' + powered_step("P_5V", "P_GND", limit), encoding="utf-8"
    )
    station = write_station(tmp_path, DEMO_FIXTURE)
    unit = SEQUENCES / "units" / "pressure-circuit.toml"
    found = check_warnings(capsys, sequence, "--station", station, "--unit", unit)
    if not warned:
        assert found == []
        return
    assert len(found) == 1
    assert f"{sequence}:7 [steps[0].supply.limit]: step draw:" in found[0]
    assert "current limit 2 A is above 1.46 A" in found[0]
    assert "wire supply (20 AWG, pressure-circuit.toml [wires.supply])" in found[0]
    assert "cable maker's data, local codes and licensed practice" in found[0]
    shown = (ROOT / "docs" / "sequence-file.md").read_text("utf-8")
    assert found[0].replace(str(sequence), sequence.name) in shown.splitlines()
    assert check_warnings(capsys, sequence, "--station", station) == []  # no wires known


def harness_with_supply(folder: Path, limit: str) -> tuple[Path, Path]:
    """The shipped invented harness, its fixture given supply relays on J1-9 (+) and J1-10
    (-), and a powered step after its proof: the sequence and a station for it."""
    for name in ("harness-proof.toml", "wire-list.csv", "fixture.toml"):
        shutil.copy(SEQUENCES / "harness" / name, folder / name)
    fixture = folder / "fixture.toml"
    text = fixture.read_text("utf-8").replace("relay_count = 100", "relay_count = 200")
    for pin, key, relay in (("J1-9", "supply_pos", 150), ("J1-10", "supply_neg", 151)):
        text, found = re.subn(rf'(\[pins\."{pin}"\]\n)', rf"\g<1>{key} = {relay}\n", text, count=1)
        assert found == 1
    fixture.write_text(text, encoding="utf-8")
    sequence = folder / "harness-proof.toml"
    with sequence.open("a", encoding="utf-8") as file:
        file.write(powered_step("J1-9", "J1-10", limit))
    return sequence, write_station(folder, fixture)


@pytest.mark.parametrize(("limit", "warned"), [("1.5 A", True), ("1.3 A", False)])
def test_a_limit_above_the_wire_lists_thinnest_powered_wire_is_warned_of(
    limit: str, warned: bool, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # J1-9 is on net SENSOR_FEED (W9, 0.5 mm2: 1.41 A), J1-10 on GROUND (down to W10c, 0.75
    # mm2: 2.12 A); 0.5 mm2 is 986.8 circular mils, / 700 (handbook rule)
    sequence, station = harness_with_supply(tmp_path, limit)
    found = check_warnings(capsys, sequence, "--station", station)
    if not warned:
        assert found == []
        return
    assert len(found) == 1
    assert "current limit 1.5 A is above 1.41 A" in found[0]
    assert "wire W9 (0.5 mm2, wire-list.csv line " in found[0]
