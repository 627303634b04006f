"""NTC thermistor models: Beta, Steinhart-Hart, their fits and the error conversion."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import linalg, optimize

from rig.models import (
    KELVIN_OFFSET,
    BetaNtc,
    ModelInputError,
    SteinhartHart,
    beta_as_steinhart_hart,
    steinhart_hart_fit,
    steinhart_hart_from_points,
    temp_error_from_r_error,
)

# Coefficients of the magnitude usually quoted for a 10 kohm NTC (from memory; used only as a
# known "true" curve, never as a check value in themselves).
TRUE_SH = SteinhartHart(a=1.009249522e-3, b=2.378405444e-4, c=2.019202697e-7)
BETA = BetaNtc(r25_ohm=10_000.0, beta_k=3950.0)
SPAN_C = np.linspace(-40.0, 150.0, 191)


def test_steinhart_hart_with_c_zero_is_the_beta_model() -> None:
    # Steinhart and Hart, Deep-Sea Research 15, 1968: C = 0 with B = 1/beta and
    # A = 1/T0 - ln(R0)/beta is exactly the Beta model (invariant, SOURCES.md)
    sh = beta_as_steinhart_hart(BETA)
    assert sh.c == 0.0
    assert sh.b == pytest.approx(1.0 / 3950.0, rel=1e-15)
    assert sh.a == pytest.approx(1.0 / 298.15 - math.log(10_000.0) / 3950.0, rel=1e-15)
    np.testing.assert_allclose(sh.r_at(SPAN_C), BETA.r_at(SPAN_C), rtol=1e-12)
    r = BETA.r_at(SPAN_C)
    np.testing.assert_allclose(sh.t_at(r), BETA.t_at(r), atol=1e-9)
    np.testing.assert_allclose(sh.dr_dt(SPAN_C), BETA.dr_dt(SPAN_C), rtol=1e-12)


def test_beta_model_passes_through_its_reference_point() -> None:
    # Beta model R = R0 exp[beta (1/T - 1/T0)] (SOURCES.md): R(T0) = R0, and the hand value
    # R(0 degC) = 10 k exp(3950 (1/273.15 - 1/298.15)) = 33 620.6 ohm (recomputed)
    assert BETA.r_at(25.0) == pytest.approx(10_000.0, rel=1e-14)
    assert BETA.r_at(0.0) == pytest.approx(10_000 * math.exp(3950 * (1 / 273.15 - 1 / 298.15)))
    assert BETA.r_at(0.0) == pytest.approx(33_620.6, abs=0.1)


def test_cubic_inverse_matches_a_root_finder() -> None:
    # scipy.optimize.brentq on 1/T = A + B ln R + C ln^3 R as an independent solver
    for temp_c in (-40.0, 0.0, 25.0, 85.0, 150.0):
        inv_t = 1.0 / (temp_c + KELVIN_OFFSET)

        def equation(x: float, inv_t: float = inv_t) -> float:
            return TRUE_SH.a + TRUE_SH.b * x + TRUE_SH.c * x**3 - inv_t

        root = optimize.brentq(equation, -5.0, 25.0, xtol=1e-14)
        assert TRUE_SH.r_at(temp_c) == pytest.approx(math.exp(root), rel=1e-11)


@pytest.mark.parametrize("c", [2.0e-7, 1.0e-12, -2.0e-7])
def test_cubic_inverse_round_trips_for_either_sign_of_c(c: float) -> None:
    # a fit may give a small negative C: the cubic then has three real roots and the model must
    # pick the one on the thermistor's branch (t_at is the equation itself, so it is the check)
    sh = SteinhartHart(a=1.2e-3, b=2.5e-4, c=c)
    np.testing.assert_allclose(sh.t_at(sh.r_at(SPAN_C)), SPAN_C, atol=1e-9)


def test_three_point_fit_round_trip() -> None:
    # SOURCES.md: a 3x3 solve in (1, ln R, ln^3 R); the fitted curve reproduces the points to
    # rounding error
    pts = [(0.0, 32_650.0), (25.0, 10_000.0), (85.0, 1_070.0)]
    sh = steinhart_hart_from_points(pts)
    for temp_c, r_ohm in pts:
        assert sh.t_at(r_ohm) == pytest.approx(temp_c, abs=1e-9)
        assert sh.r_at(temp_c) == pytest.approx(r_ohm, rel=1e-10)


def test_least_squares_fit_agrees_with_scipy() -> None:
    # scipy.linalg.lstsq and scipy.optimize.least_squares on the same table as reference tools
    rng = np.random.default_rng(20240611)
    temps = np.linspace(-20.0, 120.0, 29)
    r = TRUE_SH.r_at(temps) * (1.0 + 1e-3 * rng.standard_normal(temps.size))
    ours = steinhart_hart_fit(temps, r)

    x = np.log(r)
    design = np.column_stack([np.ones_like(x), x, x**3])
    y = 1.0 / (temps + KELVIN_OFFSET)
    ref, *_ = linalg.lstsq(design, y)
    scale = np.array([1e-3, 1e-4, 1e-7])  # keep the solver's parameters near 1
    ls = optimize.least_squares(
        lambda p: (design @ (p * scale) - y) * 1e4, ref / scale, xtol=1e-15, ftol=1e-15
    )
    for got, want_lstsq, want_ls in zip((ours.a, ours.b, ours.c), ref, ls.x * scale, strict=True):
        assert got == pytest.approx(want_lstsq, rel=1e-7)
        assert got == pytest.approx(want_ls, rel=1e-6)


def test_least_squares_recovers_an_exact_curve() -> None:
    # the table generated from a known Steinhart-Hart curve is fitted back to that curve
    temps = np.linspace(0.0, 100.0, 11)
    sh = steinhart_hart_fit(temps, TRUE_SH.r_at(temps))
    assert (sh.a, sh.b, sh.c) == pytest.approx((TRUE_SH.a, TRUE_SH.b, TRUE_SH.c), rel=1e-6)


def test_steinhart_hart_within_two_hundredths_over_100_c_and_beta_errs_near_50() -> None:
    # SOURCES.md: Steinhart-Hart over ~100 degC with a mid-range middle point stays within about
    # +-0.02 degC (published in thermistor linearisation literature); a Beta model fitted at the
    # two ends of 0-100 degC errs by the better part of a degree near 50 degC (recomputed).
    # The "true" curve is a known Steinhart-Hart; its table is rounded to four significant
    # figures, as a printed table would be, so the fit is not handed exact values.
    temps = np.arange(0.0, 100.5, 0.5)
    r_true = TRUE_SH.r_at(temps)

    def printed(temp_c: float) -> float:
        return float(f"{TRUE_SH.r_at(temp_c):.4g}")

    sh = steinhart_hart_from_points([(t, printed(t)) for t in (0.0, 50.0, 100.0)])
    assert np.max(np.abs(sh.t_at(r_true) - temps)) < 0.02

    beta = BetaNtc.from_points((0.0, printed(0.0)), (100.0, printed(100.0)))
    err = beta.t_at(r_true) - temps
    worst = float(np.max(np.abs(err)))
    # recomputed for these coefficients: about 1.6 degC; the claim is only "large near mid-span"
    assert 0.5 < worst < 2.5
    assert 40.0 <= temps[np.argmax(np.abs(err))] <= 60.0
    assert abs(err[0]) < 0.01 and abs(err[-1]) < 0.01


@pytest.mark.parametrize("model", [BETA, TRUE_SH], ids=["beta", "steinhart-hart"])
@pytest.mark.parametrize("temp_c", [-30.0, 25.0, 100.0])
def test_slope_against_numerical_derivative(model: BetaNtc | SteinhartHart, temp_c: float) -> None:
    h = 1e-3
    numeric = (model.r_at(temp_c + h) - model.r_at(temp_c - h)) / (2 * h)
    assert model.dr_dt(temp_c) == pytest.approx(numeric, rel=1e-6)
    assert model.dr_dt(temp_c) < 0.0


@pytest.mark.parametrize("model", [BETA, TRUE_SH], ids=["beta", "steinhart-hart"])
def test_temperature_error_from_resistance_error(model: BetaNtc | SteinhartHart) -> None:
    # first order dT = dR / (dR/dT), against the exact change through the inverse
    r = 10_000.0
    dr = 1.0  # 0.01 %: small enough for first order to hold to 1e-4
    exact = model.t_at(r + dr) - model.t_at(r)
    assert temp_error_from_r_error(model, r, dr) == pytest.approx(exact, rel=1e-4)
    # Beta model slope at 25 degC is -beta R / T^2 = -444.3 ohm/K: 1 ohm is -2.25 mK (recomputed)
    if model is BETA:
        assert temp_error_from_r_error(model, r, dr) == pytest.approx(-(298.15**2) / 3950 / 1e4)


def test_models_are_vectorised_and_keep_the_shape() -> None:
    grid = np.linspace(0.0, 50.0, 6).reshape(2, 3)
    for model in (BETA, TRUE_SH):
        out = model.r_at(grid)
        assert isinstance(out, np.ndarray) and out.shape == (2, 3)
        assert type(model.r_at(25.0)) is float
        assert type(model.t_at(10_000.0)) is float


@pytest.mark.parametrize("r_ohm", [0.0, -5.0, float("nan"), float("inf")])
def test_impossible_resistance_is_a_clear_error(r_ohm: float) -> None:
    with pytest.raises(ModelInputError, match="finite and above 0"):
        BETA.t_at(r_ohm)
    with pytest.raises(ModelInputError, match="finite and above 0"):
        TRUE_SH.t_at(r_ohm)


def test_below_absolute_zero_is_a_clear_error() -> None:
    with pytest.raises(ModelInputError, match="absolute zero"):
        BETA.r_at(-300.0)
    with pytest.raises(ModelInputError, match="absolute zero"):
        TRUE_SH.r_at(np.array([20.0, -274.0]))


def test_bad_fit_inputs_are_clear_errors() -> None:
    with pytest.raises(ModelInputError, match="exactly three"):
        steinhart_hart_from_points([(0.0, 30_000.0), (25.0, 10_000.0)])
    with pytest.raises(ModelInputError, match="different temperatures"):
        steinhart_hart_from_points([(25.0, 30_000.0), (25.0, 10_000.0), (50.0, 4_000.0)])
    with pytest.raises(ModelInputError, match="same length"):
        steinhart_hart_fit(np.array([0.0, 25.0, 50.0]), np.array([30e3, 10e3]))
    with pytest.raises(ModelInputError, match="at least three"):
        steinhart_hart_fit(np.array([0.0, 25.0]), np.array([30e3, 10e3]))
    with pytest.raises(ModelInputError, match="NTC"):
        BetaNtc.from_points((0.0, 1_000.0), (100.0, 2_000.0))
    with pytest.raises(ModelInputError, match="beta_k must be greater than zero"):
        BetaNtc(10_000.0, -3950.0)
