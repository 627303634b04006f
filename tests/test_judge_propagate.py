"""Law of propagation of uncertainty, checked by hand and by seeded Monte Carlo."""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np
import pytest

from rig.judge import combine, expanded, u_difference, u_quotient, u_temperature_from_resistance
from rig.models import PT100, BetaNtc, ModelInputError

N = 400_000  # relative standard error of a standard deviation ~ 1/sqrt(2N) = 0.11 %


def _correlated_pair(
    rng: np.random.Generator, u_a: float, u_b: float, r: float
) -> tuple[np.ndarray, np.ndarray]:
    """Two normal errors with standard deviations u_a, u_b and correlation r."""
    z0, z1 = rng.standard_normal((2, N))
    a = u_a * z0
    b = u_b * (r * z0 + math.sqrt(1.0 - r * r) * z1)
    return a, b


def test_combine_uncorrelated_hand_derivation() -> None:
    # JCGM 100:2008, 5.1-5.2: u_c^2 = sum (c_i u_i)^2; (2*3)^2 + (1*4)^2 = 52
    assert combine([2.0, 1.0], [3.0, 4.0]) == pytest.approx(math.sqrt(52.0))


def test_combine_with_correlation_hand_derivation() -> None:
    # JCGM 100:2008, 5.1-5.2: covariance term 2 c1 c2 r u1 u2 = 2 * 2 * 1 * 0.5 * 3 * 4 = 24
    assert combine([2.0, 1.0], [3.0, 4.0], [[1.0, 0.5], [0.5, 1.0]]) == pytest.approx(
        math.sqrt(76.0)
    )


@pytest.mark.parametrize("r", [0.0, 0.5, 0.9, 1.0, -0.5])
def test_difference_against_monte_carlo(r: float) -> None:
    # JCGM 100:2008, 5.1-5.2: u(a - b)^2 = u_a^2 + u_b^2 - 2 r u_a u_b, exact for a linear f,
    # checked on a seeded sample; tolerance 2 % of the larger u is > 15 standard errors
    u_a, u_b = 3e-4, 2e-4
    rng = np.random.default_rng(51)
    a, b = _correlated_pair(rng, u_a, u_b, r)
    mc = float(np.std(a - b))
    assert u_difference(u_a, u_b, r) == pytest.approx(mc, abs=0.02 * u_a)


def test_fully_correlated_equal_readings_cancel() -> None:
    # JCGM 100:2008, 5.2: r = 1 and equal u: the shared error cancels in a difference
    assert u_difference(1e-4, 1e-4, 1.0) == pytest.approx(0.0, abs=1e-18)
    # independent: sqrt(2) u (hand derivation)
    assert u_difference(1e-4, 1e-4) == pytest.approx(math.sqrt(2) * 1e-4)


def test_quotient_against_monte_carlo() -> None:
    # JCGM 100:2008, 5.1-5.2 with c_V = 1/I and c_I = -V/I^2; first order holds for 0.1 %
    # uncertainties to far better than the 2 % tolerance
    v, i, u_v, u_i = 1.0, 1e-3, 1e-3, 2e-6
    rng = np.random.default_rng(52)
    dv, di = _correlated_pair(rng, u_v, u_i, 0.0)
    mc = float(np.std((v + dv) / (i + di)))
    assert u_quotient(v, i, u_v, u_i) == pytest.approx(mc, rel=0.02)
    # hand derivation: R = 1000 ohm, relative u = sqrt(0.001^2 + 0.002^2)
    assert u_quotient(v, i, u_v, u_i) == pytest.approx(1000 * math.sqrt(1e-6 + 4e-6))


def test_temperature_from_resistance_through_the_model_slope() -> None:
    # u_T = u_R / |dR/dT|; IEC 60751 Pt100 slope at 0 degC is R0 A = 0.39083 ohm/K
    assert u_temperature_from_resistance(PT100, 100.0, 0.01) == pytest.approx(0.01 / 0.39083)
    ntc = BetaNtc(10_000.0, 3950.0)
    # Beta model slope at 25 degC: beta R / T^2 = 3950 * 1e4 / 298.15^2 (recomputed)
    assert u_temperature_from_resistance(ntc, 10_000.0, 5.0) == pytest.approx(
        5.0 * 298.15**2 / (3950 * 1e4)
    )


def test_expanded_uncertainty() -> None:
    # JCGM 100:2008, GUM, 4.3.7 and 6.2: U = k u, k = 2 for about 95 %
    assert expanded(0.01) == pytest.approx(0.02)
    assert expanded(0.01, k=3.0) == pytest.approx(0.03)


@pytest.mark.parametrize(
    ("call", "match"),
    [
        (lambda: combine([1.0], [1.0, 2.0]), "1 sensitivities but 2 uncertainties"),
        (lambda: combine([1.0], [-1.0]), "0 or above"),
        (lambda: combine([1.0, 1.0], [1.0, 1.0], [[1.0, 0.0]]), "expected 2 x 2"),
        (lambda: combine([1.0, 1.0], [1.0, 1.0], [[1.0, 0.2], [0.3, 1.0]]), "symmetric"),
        (lambda: combine([1.0, 1.0], [1.0, 1.0], [[1.0, 2.0], [2.0, 1.0]]), "-1 to 1"),
        (lambda: u_difference(1.0, 1.0, 1.5), "correlation"),
        (lambda: u_quotient(1.0, 0.0, 0.1, 0.1), "i = 0"),
        (lambda: expanded(0.1, k=0.0), "coverage factor"),
    ],
)
def test_bad_input_is_a_clear_error(call: Callable[[], object], match: str) -> None:
    with pytest.raises(ModelInputError, match=match):
        call()
