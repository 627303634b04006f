"""Ratiometric pressure sensor."""

from __future__ import annotations

import numpy as np
import pytest

from rig.models import ModelInputError, Ratiometric

# common practice, no published source: 10 % to 90 % of supply over the span, so a 5 V
# sensor reads 0.5 V at its minimum and 4.5 V at its maximum
SENSOR = Ratiometric(p_min=0.0, p_max=100.0)


def test_span_end_points() -> None:
    # common practice, no published source: 0.5 V and 4.5 V at 5 V supply
    assert SENSOR.output_v(0.0, 5.0) == pytest.approx(0.5)
    assert SENSOR.output_v(100.0, 5.0) == pytest.approx(4.5)
    # hand calculation: mid-span is 50 % of supply
    assert SENSOR.fraction_at(50.0) == pytest.approx(0.5)


def test_output_follows_the_supply() -> None:
    # ratiometric: the same pressure at 4.8 V supply gives the same fraction (hand calculation)
    assert SENSOR.output_v(25.0, 4.8) == pytest.approx(0.3 * 4.8)
    assert SENSOR.pressure_at(0.3 * 4.8, 4.8) == pytest.approx(25.0)


def test_round_trip_vectorised() -> None:
    p = np.linspace(-10.0, 110.0, 25)
    v = SENSOR.output_v(p, 5.0)
    assert isinstance(v, np.ndarray) and v.shape == p.shape
    np.testing.assert_allclose(SENSOR.pressure_at(v, 5.0), p, atol=1e-12)
    assert type(SENSOR.output_v(1.0, 5.0)) is float


def test_inverted_output_sensor() -> None:
    s = Ratiometric(p_min=-1.0, p_max=1.0, frac_min=0.9, frac_max=0.1)
    assert s.fraction_at(1.0) == pytest.approx(0.1)
    assert s.pressure_at(0.5 * 5.0, 5.0) == pytest.approx(0.0)


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"p_min": 1.0, "p_max": 1.0}, "must differ"),
        ({"p_min": 0.0, "p_max": 1.0, "frac_min": -0.1}, "frac_min"),
        ({"p_min": 0.0, "p_max": 1.0, "frac_max": 1.5}, "frac_max"),
        ({"p_min": 0.0, "p_max": 1.0, "frac_min": 0.5, "frac_max": 0.5}, "must differ"),
        ({"p_min": float("nan"), "p_max": 1.0}, "p_min"),
    ],
)
def test_bad_parameters_are_clear_errors(kwargs: dict[str, float], match: str) -> None:
    with pytest.raises(ModelInputError, match=match):
        Ratiometric(**kwargs)


def test_bad_supply_is_a_clear_error() -> None:
    with pytest.raises(ModelInputError, match="v_supply"):
        SENSOR.pressure_at(2.5, 0.0)
