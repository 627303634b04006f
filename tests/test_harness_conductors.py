"""Continuity limits against published copper figures."""

from __future__ import annotations

import math

import pytest

from rig.harness.conductors import Allowances, copper_factor, path_limit, row_resistance_ohm
from rig.harness.wire_list import End, WireRow
from rig.models.copper import area_from_gauge

# Solid annealed copper at 20 degC, ohm per km.  16, 18 and 20 AWG: the handbook AWG table as
# given in SOURCES.md ("Copper conductors"), recomputed there from the ASTM B258 diameter and the
# IEC 60028 resistivity.  14 and 22 AWG: NIST Handbook 100 (Copper Wire Tables), 2.525 and 16.14
# ohm per 1000 ft at 20 degC, converted to ohm per km (values from memory).
AWG_OHM_PER_KM = {14: 8.284, 16: 13.17, 18: 20.95, 20: 33.30, 22: 52.95}

# IEC 60028: annealed copper 1/58 ohm mm2/m at 20 degC; alpha20 = 0.00393 /K (SOURCES.md, the
# coefficient from memory; IEC 60228 Annex B fits about 0.004 /K, so these checks assume 0.00393).
RHO20 = 1 / 58
ALPHA20 = 0.00393


def _row(gauge: str, length_m: float) -> WireRow:
    return WireRow(
        line=2,
        wire="W1",
        start=End("J1", "1"),
        end=End("J2", "1"),
        gauge=gauge,
        area_mm2=area_from_gauge(gauge),
        length_m=length_m,
    )


@pytest.mark.parametrize(("awg", "ohm_per_km"), sorted(AWG_OHM_PER_KM.items()))
def test_awg_conductor_matches_the_published_table(awg: int, ohm_per_km: float) -> None:
    r = row_resistance_ohm(_row(f"{awg} AWG", 1000.0), 20.0)
    assert r == pytest.approx(ohm_per_km, rel=2e-3)


def test_one_square_millimetre_metre_is_the_iec_60028_resistivity() -> None:
    assert row_resistance_ohm(_row("1 mm2", 1.0), 20.0) == pytest.approx(0.017241, rel=1e-4)


@pytest.mark.parametrize("temp_c", [-20.0, 0.0, 23.0, 35.0, 60.0])
def test_resistance_follows_the_copper_coefficient(temp_c: float) -> None:
    # R_T = R20 [1 + alpha20 (T - 20)] (IEC 60028 resistivity; alpha20 as stated above)
    expected = RHO20 * 2.5 / 0.5 * (1 + ALPHA20 * (temp_c - 20.0))
    assert row_resistance_ohm(_row("0.5 mm2", 2.5), temp_c) == pytest.approx(expected, rel=1e-9)


def test_limit_is_copper_at_ambient_plus_one_allowance_per_contact_and_splice() -> None:
    allowances = Allowances(contact_ohm=0.005, splice_ohm=0.002)
    a = WireRow(2, "Wa", End("J1", "10"), End("SP1", ""), "2.5 mm2", 2.5, 1.2)
    b = WireRow(3, "Wb", End("SP1", ""), End("J2", "8"), "1.5 mm2", 1.5, 1.3)
    limit = path_limit([a, b], 28.0, allowances)
    copper = RHO20 * (1.2 / 2.5 + 1.3 / 1.5) * (1 + ALPHA20 * 8.0)
    assert limit.conductor_ohm == pytest.approx(copper, rel=1e-9)  # the expected value
    # two fixture contacts (J1-10, J2-8) and one splice
    assert limit.allowance_ohm == pytest.approx(2 * 0.005 + 0.002)
    # the limit allows each conductor its IEC 60228 class 5 maximum at 28 degC: 2.5 mm2 7.98,
    # 1.5 mm2 13.3 ohm/km at 20 degC (IEC 60228 table 3, plain copper; checked against copies)
    most = (7.98 * 1.2 + 13.3 * 1.3) / 1000 * (1 + ALPHA20 * 8.0)
    assert limit.max_ohm == pytest.approx(most + 0.012, rel=1e-9)


# IEC 60228 table 3, class 5 (flexible), plain copper, maximum ohm/km at 20 degC (checked
# against two published copies of the table, December 2026)
IEC60228_CLASS5 = {0.5: 39.0, 0.75: 26.0, 1.0: 19.5, 1.5: 13.3, 2.5: 7.98, 4.0: 4.95, 6.0: 3.30}


@pytest.mark.parametrize(("area", "ohm_per_km"), sorted(IEC60228_CLASS5.items()))
@pytest.mark.parametrize("temp_c", [20.0, 31.0])
def test_a_metric_wire_is_allowed_its_iec_60228_class_5_maximum_at_the_ambient(
    area: float, ohm_per_km: float, temp_c: float
) -> None:
    # a long, correctly sized flexible wire may read up to its standard's maximum, 13-16 % over
    # nominal copper (rho20 = 1/58, IEC 60028): nominal copper alone would fail it
    limit = path_limit([_row(f"{area:g} mm2", 12.0)], temp_c, Allowances(contact_ohm=0.0))
    factor = 1 + ALPHA20 * (temp_c - 20.0)  # alpha20 = 0.00393 /K, as stated above
    assert limit.max_ohm == pytest.approx(ohm_per_km * 12.0 / 1000 * factor, rel=1e-9)
    assert limit.conductor_ohm == pytest.approx(RHO20 * 12.0 / area * factor, rel=1e-9)
    assert 1.10 < limit.max_ohm / limit.conductor_ohm < 1.17


def test_an_awg_wire_gets_the_stated_margin_and_another_metric_size_nominal_copper() -> None:
    # 18 AWG solid, 20.95 ohm/km at 20 degC (handbook AWG table, SOURCES.md); the 10 % margin
    # for stranding is our figure (common practice, no published source).  0.35 mm2 is an
    # ISO 6722-1 size that IEC 60228 does not list: nominal copper, no standard maximum.
    awg = path_limit([_row("18 AWG", 10.0)], 20.0, Allowances(contact_ohm=0.0))
    assert awg.max_ohm == pytest.approx(0.2095 * 1.10, rel=2e-3)
    small = path_limit([_row("0.35 mm2", 10.0)], 20.0, Allowances(contact_ohm=0.0))
    assert small.max_ohm == pytest.approx(RHO20 * 10.0 / 0.35, rel=1e-9)


def test_two_wire_path_adds_the_stated_two_wire_allowance() -> None:
    allowances = Allowances(two_wire_ohm=0.2)
    four = path_limit([_row("18 AWG", 2.0)], 20.0, allowances, four_wire=True)
    two = path_limit([_row("18 AWG", 2.0)], 20.0, allowances, four_wire=False)
    assert two.max_ohm - four.max_ohm == pytest.approx(0.2)


def test_captured_row_moves_to_todays_ambient_with_the_copper_coefficient() -> None:
    row = WireRow(2, "C1", End("J1", "1"), End("J2", "1"), measured_ohm=0.050, measured_at_c=20.0)
    at_30 = row_resistance_ohm(row, 30.0)
    assert at_30 == pytest.approx(0.050 * (1 + ALPHA20 * 10.0), rel=1e-9)
    limit = path_limit([row], 30.0, Allowances(contact_ohm=0.005, captured_pct=10.0))
    assert limit.max_ohm == pytest.approx(at_30 * 1.10 + 0.005)
    assert copper_factor(20.0, 20.0) == 1.0
    assert math.isclose(copper_factor(20.0, 30.0) * copper_factor(30.0, 20.0), 1.0)


def test_a_captured_row_s_limit_adds_one_contact_for_the_spread_of_its_two() -> None:
    # A capture reads each path between fixture pins, so 0.050 ohm at 20 degC already holds the
    # two contacts of the harness captured.  At 30 degC the row may read its value moved with
    # copper's coefficient (alpha20 = 0.00393 /K, SOURCES.md, from memory), plus the 10 %
    # captured tolerance, plus one 5 mohm contact: another harness's two contacts may read 5 mohm
    # each where the captured ones read about half that.  By hand:
    # 0.050 x (1 + 0.00393 x 10) x 1.10 + 0.005 = 0.062162 ohm.  A drawing row on the same
    # path brings its own two contacts (2 x 5 mohm); a path of two captured rows, one each.
    captured = WireRow(
        2, "C1", End("J1", "1"), End("J2", "1"), measured_ohm=0.050, measured_at_c=20.0
    )
    allowances = Allowances(contact_ohm=0.005, captured_pct=10.0)
    alone = path_limit([captured], 30.0, allowances)
    assert alone.max_ohm == pytest.approx(0.062162, abs=1e-6)
    drawn = _row("18 AWG", 2.0)
    both = path_limit([captured, drawn], 30.0, allowances)
    assert both.allowance_ohm == pytest.approx(alone.allowance_ohm + 2 * 0.005)
    twice = path_limit([captured, captured], 30.0, allowances)
    assert twice.allowance_ohm == pytest.approx(2 * alone.allowance_ohm)


@pytest.mark.parametrize("at_c", [0.0, -5.0, 0.001])
def test_a_captured_row_measured_at_or_below_freezing_is_moved_from_its_own_temperature(
    at_c: float,
) -> None:
    # 0 degC is a temperature, not "unstated": 0.100 ohm at 0 degC, at 23 degC, is
    # 0.100 x [1 + a (23 - 20)] / [1 + a (0 - 20)] = 0.10981 ohm (alpha20 = 0.00393 /K, SOURCES.md,
    # from memory); taken as measured at 20 degC it was 0.10118 ohm
    row = WireRow(1, "W1", End("J1", "1"), End("J2", "1"), measured_ohm=0.100, measured_at_c=at_c)
    expected = 0.100 * (1 + ALPHA20 * (23 - 20)) / (1 + ALPHA20 * (at_c - 20))
    assert row_resistance_ohm(row, 23.0) == pytest.approx(expected, rel=1e-12)
    if at_c == 0.0:
        assert expected == pytest.approx(0.10981, abs=5e-6)
    # unstated, a captured row is taken as measured at 20 degC, as before
    unstated = WireRow(1, "W1", End("J1", "1"), End("J2", "1"), measured_ohm=0.100)
    assert row_resistance_ohm(unstated, 23.0) == pytest.approx(0.100 * (1 + ALPHA20 * 3))
