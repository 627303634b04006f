"""A reading over its limit that fits a wire a size smaller than listed says so, beside the crimp
(rig.harness.gauge_hint): checked against published per-metre resistances."""

from __future__ import annotations

import itertools
from pathlib import Path

import pytest

from rig.harness.gauge_hint import gauge_hint
from rig.harness.wire_list import WireRow, load_wire_list

HEADER = "wire,net,from_connector,from_pin,to_connector,to_pin,gauge,length_m,colour\n"
CONTACTS_OHM = 2 * 0.002  # two contacts of 2 mohm each: invented figures
ALLOWANCE_OHM = 2 * 0.005  # the default contact allowance, once per end


def _row(tmp_path: Path, gauge: str, length_m: float) -> WireRow:
    path = tmp_path / "one.csv"
    path.write_text(f"# invented\n{HEADER}W1,N1,A,1,B,1,{gauge},{length_m},red\n", "utf-8")
    return load_wire_list(path).rows[0]


def test_resistance_per_metre_of_neighbouring_sizes_scales_with_their_areas() -> None:
    # What the hint rests on.  IEC 60228 class 5 (flexible) copper, maximum ohm/km at 20 degC
    # (IEC 60228 table 3; checked against copies): 0.5 39.0, 0.75 26.0, 1.0 19.5, 1.5 13.3,
    # 2.5 7.98.
    table = {0.5: 39.0, 0.75: 26.0, 1.0: 19.5, 1.5: 13.3, 2.5: 7.98}
    sizes = sorted(table)
    for small, big in itertools.pairwise(sizes):
        assert table[small] / table[big] == pytest.approx(big / small, rel=0.03)


def test_a_listed_0_75_mm2_wire_that_reads_like_0_5_mm2_gets_the_hint(tmp_path: Path) -> None:
    # 2.5 m listed 0.75 mm2 at 20 degC; built of 0.5 mm2: its copper is the nominal 0.75 one
    # times the IEC 60228 class 5 ratio 39.0/26.0 (table 3), plus two contacts
    row = _row(tmp_path, "0.75 mm2", 2.5)
    listed = 2.5 * 0.0172414 / 0.75  # rho20 = 1/58 ohm mm2/m (IEC 60028)
    reading = listed * 39.0 / 26.0 + CONTACTS_OHM
    hint = gauge_hint([row], reading, 0.004, 20.0, ALLOWANCE_OHM)
    assert "a poor crimp or joint, or a wire smaller than listed (0.5 mm2 for 0.75 mm2)" in hint
    assert hint.endswith("check the wire's size too")


def test_a_listed_18_awg_wire_that_reads_like_20_awg_gets_the_hint(tmp_path: Path) -> None:
    # solid copper at 20 degC, ohm/km: 18 AWG 20.95, 20 AWG 33.30 (handbook AWG table,
    # recomputed from the ASTM B258 diameter and rho; ../shared/SOURCES.md)
    row = _row(tmp_path, "18 AWG", 2.0)
    assert gauge_hint([row], 2.0 * 0.02095 + CONTACTS_OHM, 0.004, 20.0, ALLOWANCE_OHM) == ""
    reading = 2.0 * 0.03330 + CONTACTS_OHM
    assert "(20 AWG for 18 AWG)" in gauge_hint([row], reading, 0.004, 20.0, ALLOWANCE_OHM)


def test_a_poor_crimp_far_beyond_any_smaller_size_gets_no_hint(tmp_path: Path) -> None:
    row = _row(tmp_path, "0.75 mm2", 2.5)
    listed = 2.5 * 0.0172414 / 0.75
    assert gauge_hint([row], listed + 0.4, 0.004, 20.0, ALLOWANCE_OHM) == ""
