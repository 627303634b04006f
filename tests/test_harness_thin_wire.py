"""The `thin` build fault: a wire built one standard size smaller than its row lists, at its
length and the bench's ambient.  Checked by `rig harness check` on the virtual bench through the
real stack (pyvisa-py over TCP, pyserial on a pty, a real SQLite store), its resistance against
published per-metre figures.  The wire list is invented for the test."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from harness_helpers import one_blas_thread

from rig.cli import EXIT_FAIL, EXIT_PASS, main
from rig.config.fixture import load_fixture
from rig.config.unit_file import UnitModel
from rig.harness.as_built import BuildFault, build_unit, parse_build_fault
from rig.harness.wire_list import load_wire_list
from rig.sim.control import handle_command
from rig.sim.harness_bench import HarnessBuild, HarnessFaults, fixture_for

one_blas_thread()

WIRES = (
    "# Invented wire list for a test: one long AWG run and one short metric wire.\n"
    "wire,net,from_connector,from_pin,to_connector,to_pin,gauge,length_m,colour\n"
    "W1,LONG,A,1,B,1,18 AWG,6.0,red\n"
    "W2,SHORT,A,2,B,2,1.0 mm2,0.8,green\n"
)
AWG_STEP = 92 ** (2 / 39)
"""Area of n AWG over n+1 AWG: the square of the diameter step, d = 0.127 mm x 92^((36-n)/39)
(ASTM B258; recomputed): 1.2610."""
OHM_PER_M_18AWG = 0.02095
"""Solid 18 AWG copper at 20 degC (handbook AWG table; ../shared/SOURCES.md)."""
IEC_CLASS5_OHM_PER_M = {1.0: 0.0195, 0.75: 0.0260}
"""Maximum of class 5 plain copper at 20 degC (IEC 60228 table 3; checked against published
copies of the table)."""
RHO20 = 1 / 58
"""Annealed copper, ohm mm2/m at 20 degC (IEC 60028)."""


def _wire_list(tmp_path: Path) -> tuple[Path, Path]:
    wires = tmp_path / "wires.csv"
    wires.write_text(WIRES, encoding="utf-8")
    fixture = tmp_path / "fixture.toml"
    fixture.write_text(fixture_for(load_wire_list(wires), spare=1), encoding="utf-8")
    return wires, fixture


def test_thin_is_one_standard_size_smaller_in_the_wire_lists_own_sizing(tmp_path: Path) -> None:
    wires_path, fixture_path = _wire_list(tmp_path)
    wires = load_wire_list(wires_path, load_fixture(fixture_path))
    assert parse_build_fault(" thin:W1 ").spec == "thin:W1"
    thin = [BuildFault("thin", "W1"), BuildFault("thin", "W2")]
    unit: UnitModel = build_unit(wires, thin, fixture_path=fixture_path)[0]
    good: UnitModel = build_unit(wires, [], fixture_path=fixture_path)[0]
    # AWG stays AWG: the next gauge number up, its area the ASTM B258 step smaller
    assert unit.wires["W1"].gauge == "19 AWG"
    assert good.wires["W1"].area_mm2 / unit.wires["W1"].area_mm2 == pytest.approx(AWG_STEP)
    # metric stays metric: the next IEC 60228 size down, at the listed length
    assert (unit.wires["W2"].gauge, unit.wires["W2"].area_mm2) == ("0.75 mm2", 0.75)
    assert unit.wires["W2"].length_m == good.wires["W2"].length_m == 0.8
    assert unit.resistors == good.resistors  # the contacts are the same harness's


def test_a_check_fails_a_long_thin_wire_with_the_hint_and_passes_a_short_one(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    wires_path, fixture_path = _wire_list(tmp_path)
    fixture = load_fixture(fixture_path)
    built = HarnessFaults(
        HarnessBuild(load_wire_list(wires_path, fixture), fixture, ambient_c=20.0)
    )
    bench = built.bench
    bench.start()
    try:
        station = bench.write_station(tmp_path / "station.toml")
        args = ["harness", "check", str(wires_path), "--station", str(station)]

        def check(serial: str) -> tuple[int, dict[str, object]]:
            code = main([*args, "--serial", serial, "--ambient", "20 degC", "--json"])
            return code, dict(json.loads(capsys.readouterr().out))

        code, good = check("T-GOOD")
        assert code == EXIT_PASS, good["notes"]
        assert handle_command(built, "add thin:W1 thin:W2") == {"faults": ["thin:W1", "thin:W2"]}
        code, thin = check("T-THIN")
    finally:
        bench.stop()
    before, after = dict(good["extras"]), dict(thin["extras"])  # type: ignore[call-overload]
    long_, short = "net LONG A-1>B-1", "net SHORT A-2>B-2"

    # 6 m of 18 AWG built of 19 AWG: the reading rises by the copper's share of the ASTM B258
    # area step, at 20 degC where the temperature coefficient drops out (readings on the 100
    # ohm range resolve 0.1 mohm: 0.5 mohm covers two of them and the meter's noise)
    rise = 6.0 * OHM_PER_M_18AWG * (AWG_STEP - 1)  # 32.8 mohm
    assert after[f"{long_} ohm"] - before[f"{long_} ohm"] == pytest.approx(rise, abs=5e-4)
    # over its limit (copper of 18 AWG plus the 10 % AWG margin, two 5 mohm contacts: 148 mohm)
    assert after[f"{long_} ohm"] > after[f"{long_} max_ohm"] + after[f"{long_} u_ohm"]
    assert code == EXIT_FAIL
    notes = list(thin["notes"])  # type: ignore[call-overload]
    assert any(
        n.startswith("net LONG: A-1 to B-1 (wire W1, red) reads ")
        and "a wire smaller than listed (19 AWG for 18 AWG): check the wire's size too" in n
        for n in notes
    ), notes

    # 0.8 m of 1.0 mm2 built of 0.75 mm2 rises by the IEC 60228 class 5 ratio 26.0/19.5 less
    # one (the areas' 4/3) times its copper, 4.6 mohm, and stays within its limit (the class
    # 5 maximum of 1.0 mm2, 0.8 x 19.5 = 15.6 mohm, plus two 5 mohm contacts: 25.6 mohm): the
    # check passes it and names nothing, so no hint either.
    ratio = IEC_CLASS5_OHM_PER_M[0.75] / IEC_CLASS5_OHM_PER_M[1.0]
    rise = 0.8 * RHO20 / 1.0 * (ratio - 1)
    assert after[f"{short} ohm"] - before[f"{short} ohm"] == pytest.approx(rise, abs=5e-4)
    assert after[f"{short} max_ohm"] == pytest.approx(0.8 * 0.0195 + 2 * 0.005, rel=1e-3)
    assert after[f"{short} ohm"] < after[f"{short} max_ohm"]
    assert not any("SHORT" in n or "W2" in n for n in notes), notes
