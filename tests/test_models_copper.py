"""Copper conductors: resistivity, AWG sizes, temperature and gauge strings."""

from __future__ import annotations

import numpy as np
import pytest

from rig.errors import RigError
from rig.models import (
    ModelInputError,
    area_from_gauge,
    awg_area_mm2,
    awg_diameter_mm,
    wire_resistance_ohm,
)


def test_annealed_copper_resistivity() -> None:
    # IEC 60028: rho = 1/58 ohm mm^2/m = 0.017241 at 20 degC, so 1 km of 1 mm^2 is 17.241 ohm
    assert wire_resistance_ohm(1000.0, 1.0) == pytest.approx(17.241, abs=5e-4)
    assert wire_resistance_ohm(1.0, 1.0) == pytest.approx(0.017241, abs=5e-7)


def test_awg_formula_anchor_points() -> None:
    # ASTM B258: 36 AWG is defined as 0.0050 in and 0000 AWG as 0.4600 in
    assert awg_diameter_mm(36) == pytest.approx(0.0050 * 25.4, rel=1e-12)
    assert awg_diameter_mm(-3) == pytest.approx(0.4600 * 25.4, rel=1e-12)


@pytest.mark.parametrize(
    ("gauge", "ohm_per_km"),
    # handbook AWG table; recomputed from the diameter and ρ: solid copper at 20 degC
    [(16, 13.17), (18, 20.95), (20, 33.30)],
)
def test_awg_resistance_per_km(gauge: int, ohm_per_km: float) -> None:
    # at 20 degC the temperature coefficient drops out, so no alpha is assumed here
    r = wire_resistance_ohm(1000.0, awg_area_mm2(gauge))
    assert r == pytest.approx(ohm_per_km, abs=0.01)
    assert wire_resistance_ohm(1000.0, area_from_gauge(f"{gauge} AWG")) == pytest.approx(r)


def test_temperature_correction_assumes_alpha_0_00393() -> None:
    # R_T = R20 [1 + alpha (T - 20)] (IEC 60028 form, SOURCES.md) with alpha20 = 0.00393 /K
    # (from memory, SOURCES.md): at 70 degC the factor is 1 + 0.00393 * 50 = 1.1965
    r20 = wire_resistance_ohm(10.0, 0.5)
    assert wire_resistance_ohm(10.0, 0.5, temp_c=70.0) == pytest.approx(r20 * 1.1965, rel=1e-12)
    # IEC 60228 Annex B correction factors fit about 0.004 /K: the caller can choose it
    assert wire_resistance_ohm(10.0, 0.5, temp_c=70.0, alpha20=0.004) == pytest.approx(r20 * 1.2)
    # a cold wire reads lower: at 0 degC the factor is 1 - 0.0786
    assert wire_resistance_ohm(10.0, 0.5, temp_c=0.0) == pytest.approx(r20 * 0.9214)


def test_resistance_is_vectorised() -> None:
    r = wire_resistance_ohm(np.array([1.0, 2.0, 4.0]), 1.0)
    assert isinstance(r, np.ndarray)
    # IEC 60028 resistivity, linear in length
    np.testing.assert_allclose(r, np.array([1.0, 2.0, 4.0]) / 58.0)
    assert type(wire_resistance_ohm(1.0, 1.0)) is float
    assert isinstance(awg_diameter_mm(np.array([16.0, 18.0])), np.ndarray)


@pytest.mark.parametrize(
    ("spec", "area"),
    [
        ("0.75 mm2", 0.75),
        ("0.75 mm²", 0.75),
        ("0.75mm2", 0.75),
        ("1.5 MM2", 1.5),
        (" 2.5 mm^2 ", 2.5),
    ],
)
def test_metric_gauges(spec: str, area: float) -> None:
    assert area_from_gauge(spec) == area


@pytest.mark.parametrize(("spec", "n"), [("18 AWG", 18), ("18AWG", 18), ("22 awg", 22)])
def test_awg_gauges(spec: str, n: int) -> None:
    assert area_from_gauge(spec) == pytest.approx(awg_area_mm2(n))


def test_aught_gauges() -> None:
    # ASTM B258: 0000 AWG = 0.4600 in; "4/0" and "0000" name the same size
    d_mm = 0.46 * 25.4
    assert area_from_gauge("4/0 AWG") == pytest.approx(np.pi / 4 * d_mm**2)
    assert area_from_gauge("0000 AWG") == area_from_gauge("4/0 AWG")
    assert area_from_gauge("1/0 AWG") == pytest.approx(awg_area_mm2(0))


@pytest.mark.parametrize(
    "spec", ["", "18", "eighteen AWG", "18 AWG 2", "0.75", "-1 mm2", "0 mm2", "5/0 AWG", "99 AWG"]
)
def test_bad_gauge_strings_are_clear_errors(spec: str) -> None:
    with pytest.raises(ModelInputError, match="wire gauge") as info:
        area_from_gauge(spec)
    assert isinstance(info.value, ValueError) and isinstance(info.value, RigError)


def test_gauge_not_text_is_a_clear_error() -> None:
    with pytest.raises(ModelInputError, match="not text"):
        area_from_gauge(18)  # type: ignore[arg-type]


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"length_m": -1.0, "area_mm2": 1.0}, "length_m"),
        ({"length_m": 1.0, "area_mm2": 0.0}, "area_mm2"),
        ({"length_m": 1.0, "area_mm2": 1.0, "temp_c": float("nan")}, "temp_c"),
        ({"length_m": 1.0, "area_mm2": 1.0, "rho20": 0.0}, "rho20"),
    ],
)
def test_bad_wire_arguments_are_clear_errors(kwargs: dict[str, float], match: str) -> None:
    with pytest.raises(ModelInputError, match=match):
        wire_resistance_ohm(**kwargs)


def test_gauge_out_of_formula_range_is_refused() -> None:
    with pytest.raises(ModelInputError, match="outside"):
        awg_diameter_mm(60)
