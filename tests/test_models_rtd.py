"""Platinum RTD model against IEC 60751."""

from __future__ import annotations

import numpy as np
import pytest

from rig.errors import RigError
from rig.models import PT100, PT1000, ModelInputError, Rtd, ToleranceClass, tolerance_c

# (temp_c, table value to 0.01 ohm, value recomputed to 0.0001 ohm)
# Source: IEC 60751 table; recomputed from the coefficients (SOURCES.md).
PT100_TABLE = [
    (-100.0, 60.26, 60.2558),
    (0.0, 100.00, 100.0000),
    (100.0, 138.51, 138.5055),
    (200.0, 175.86, 175.8560),
]


@pytest.mark.parametrize(("temp_c", "table_ohm", "exact_ohm"), PT100_TABLE)
def test_pt100_forward_matches_iec_table(temp_c: float, table_ohm: float, exact_ohm: float) -> None:
    r = PT100.r_at(temp_c)
    # IEC 60751 table; recomputed from the coefficients: rounds to the table's 0.01 ohm
    assert round(r, 2) == pytest.approx(table_ohm, abs=1e-9)
    assert r == pytest.approx(exact_ohm, abs=1e-4)


@pytest.mark.parametrize(("temp_c", "table_ohm", "exact_ohm"), PT100_TABLE)
def test_pt100_inverse_matches_iec_table(temp_c: float, table_ohm: float, exact_ohm: float) -> None:
    # IEC 60751 table; recomputed from the coefficients: inverse to 0.001 degC
    assert PT100.t_at(exact_ohm) == pytest.approx(temp_c, abs=1e-3)
    # the 0.01 ohm table value itself, one rounding step away: within 0.015 degC at 0.39 ohm/K
    assert PT100.t_at(table_ohm) == pytest.approx(temp_c, abs=0.015)


@pytest.mark.parametrize(("temp_c", "table_ohm", "exact_ohm"), PT100_TABLE)
def test_pt1000_is_ten_times_pt100(temp_c: float, table_ohm: float, exact_ohm: float) -> None:
    # IEC 60751: the same curve scaled by R0 = 1000 ohm; recomputed from the coefficients
    assert PT1000.r_at(temp_c) == pytest.approx(10.0 * exact_ohm, abs=1e-3)
    assert PT1000.t_at(10.0 * exact_ohm) == pytest.approx(temp_c, abs=1e-3)


def test_round_trip_over_the_whole_standard_span() -> None:
    # IEC 60751 defines the curve from -200 to 850 degC; the inverse must undo the forward on
    # both sides of 0 degC (closed form above, Newton below)
    t = np.linspace(-200.0, 850.0, 2101)
    back = PT100.t_at(PT100.r_at(t))
    assert isinstance(back, np.ndarray) and back.shape == t.shape
    np.testing.assert_allclose(back, t, atol=1e-9)


def test_c_term_acts_only_below_zero() -> None:
    # IEC 60751: C used only below 0 degC; the quadratic alone above
    a, b, c = 3.9083e-3, -5.775e-7, -4.183e-12
    t = -150.0
    assert PT100.r_at(t) == pytest.approx(100 * (1 + a * t + b * t**2 + c * (t - 100) * t**3))
    t = 300.0
    assert PT100.r_at(t) == pytest.approx(100 * (1 + a * t + b * t**2))


@pytest.mark.parametrize("temp_c", [-180.0, -50.0, -0.5, 0.5, 150.0, 600.0])
def test_slope_against_numerical_derivative(temp_c: float) -> None:
    # central difference of the forward curve: an independent check of dr_dt
    h = 1e-4
    numeric = (PT100.r_at(temp_c + h) - PT100.r_at(temp_c - h)) / (2 * h)
    assert PT100.dr_dt(temp_c) == pytest.approx(numeric, rel=1e-7)


@pytest.mark.parametrize(
    ("cls", "temp_c", "expected"),
    [
        # IEC 60751: AA +-(0.10 + 0.0017|t|), A +-(0.15 + 0.002|t|), B +-(0.30 + 0.005|t|)
        ("AA", 0.0, 0.10),
        ("AA", 100.0, 0.27),
        ("A", 0.0, 0.15),
        ("A", -100.0, 0.35),
        ("A", 200.0, 0.55),
        ("B", 0.0, 0.30),
        ("B", 100.0, 0.80),
        ("B", -196.0, 1.28),
    ],
)
def test_class_tolerances(cls: ToleranceClass, temp_c: float, expected: float) -> None:
    assert tolerance_c(temp_c, cls) == pytest.approx(expected, abs=1e-12)
    assert PT100.tolerance_c(temp_c, cls) == pytest.approx(expected, abs=1e-12)


def test_tolerance_vectorised() -> None:
    # IEC 60751 class A at -100, 0, 100 degC
    out = tolerance_c(np.array([-100.0, 0.0, 100.0]), "A")
    np.testing.assert_allclose(out, [0.35, 0.15, 0.35])


def test_unknown_class_is_a_clear_error() -> None:
    with pytest.raises(ModelInputError, match=r"'C'.*AA, A, B"):
        tolerance_c(20.0, "C")  # type: ignore[arg-type]


@pytest.mark.parametrize("temp_c", [-200.1, 850.5, float("nan")])
def test_temperature_outside_standard_is_refused(temp_c: float) -> None:
    with pytest.raises(ModelInputError, match="outside the valid range -200 to 850 degC"):
        PT100.r_at(temp_c)


@pytest.mark.parametrize("r_ohm", [10.0, 500.0, -1.0])
def test_resistance_outside_standard_is_refused(r_ohm: float) -> None:
    with pytest.raises(ModelInputError, match="r_ohm"):
        PT100.t_at(r_ohm)


def test_bad_parameters_are_rig_errors_and_value_errors() -> None:
    with pytest.raises(ValueError, match="r0_ohm must be greater than zero"):
        Rtd(r0_ohm=0.0)
    with pytest.raises(RigError):
        Rtd(r0_ohm=-100.0)


def test_float_in_float_out() -> None:
    assert type(PT100.r_at(25.0)) is float
    assert type(PT100.t_at(110.0)) is float


@pytest.mark.parametrize(("temp_c", "cls", "sign"), [(-200.0, "A", -1.0), (850.0, "B", 1.0)])
def test_element_at_a_span_end_may_deviate_past_it_by_its_class(
    temp_c: float, cls: ToleranceClass, sign: float
) -> None:
    # IEC 60751 states a class tolerance as a deviation in degC from the curve: an element at
    # -200 degC (class A: 0.55 degC) or 850 degC (class B: 4.55 degC) reads as the curve just past
    # the span.  The value is the Callendar-Van Dusen polynomial with the IEC 60751 coefficients
    # at temp + deviation, recomputed here; the element's own temperature stays inside the span.
    a, b, c = 3.9083e-3, -5.775e-7, -4.183e-12
    dev = sign * tolerance_c(temp_c, cls)
    t = temp_c + dev
    expected = 100 * (1 + a * t + b * t**2 + (c * (t - 100) * t**3 if t < 0 else 0.0))
    got = PT100.r_of_element(np.array([temp_c]), np.array([dev]))
    np.testing.assert_allclose(got, [expected], rtol=1e-12)
    with pytest.raises(ModelInputError, match="outside the valid range -200 to 850 degC"):
        PT100.r_of_element(np.array([temp_c + sign * 0.01]), np.array([0.0]))
