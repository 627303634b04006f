"""Sensor behind a pull-up: voltage, inverse and sensitivities."""

from __future__ import annotations

import math

import numpy as np
import pytest

from rig.models import (
    ModelInputError,
    divider_voltage,
    dv_dr_pull,
    dv_dr_sensor,
    dv_dv_ref,
    sensor_r_from_voltage,
)


def test_hand_calculation_without_load() -> None:
    # V = Vref R / (R + R_pull) (common practice, no published source): 5 V, 10 k over 2.2 k
    # gives 5 * 2200 / 12200 = 0.90164 V (hand calculation)
    assert divider_voltage(5.0, 10_000.0, 2_200.0) == pytest.approx(0.901639344, rel=1e-9)
    assert divider_voltage(5.0, 10_000.0, 10_000.0) == pytest.approx(2.5, rel=1e-15)


def test_hand_calculation_with_input_load() -> None:
    # 10 k sensor in parallel with a 100 k input = 9090.909 ohm; 5 * 9090.909 / 19090.909
    # = 2.380952 V (hand calculation)
    assert divider_voltage(5.0, 10_000.0, 10_000.0, 100_000.0) == pytest.approx(
        2.380952381, rel=1e-9
    )


def test_open_and_short() -> None:
    # common practice, no published source: an open sensor reads near the pull-up voltage,
    # a short to ground near 0 V
    assert divider_voltage(5.0, 2_200.0, math.inf) == 5.0
    assert divider_voltage(5.0, 2_200.0, 0.0) == 0.0
    # with a 1 M input load an open sensor reads 5 * 1e6 / (1e6 + 2200) (hand calculation)
    assert divider_voltage(5.0, 2_200.0, math.inf, 1e6) == pytest.approx(5e6 / 1.0022e6)


POINTS = [
    (5.0, 10_000.0, 2_200.0, math.inf),
    (5.0, 2_200.0, 50_000.0, math.inf),
    (3.3, 4_700.0, 1_000.0, 200_000.0),
]


@pytest.mark.parametrize(("v_ref", "r_pull", "r_sensor", "r_load"), POINTS)
def test_sensitivities_against_numerical_derivative(
    v_ref: float, r_pull: float, r_sensor: float, r_load: float
) -> None:
    # central differences of divider_voltage: an independent check of each partial derivative
    def v(vr: float, rp: float, rs: float) -> float:
        return divider_voltage(vr, rp, rs, r_load)

    h = 1e-6
    num_rs = (v(v_ref, r_pull, r_sensor * (1 + h)) - v(v_ref, r_pull, r_sensor * (1 - h))) / (
        2 * h * r_sensor
    )
    num_rp = (v(v_ref, r_pull * (1 + h), r_sensor) - v(v_ref, r_pull * (1 - h), r_sensor)) / (
        2 * h * r_pull
    )
    num_vr = (v(v_ref * (1 + h), r_pull, r_sensor) - v(v_ref * (1 - h), r_pull, r_sensor)) / (
        2 * h * v_ref
    )
    assert dv_dr_sensor(v_ref, r_pull, r_sensor, r_load) == pytest.approx(num_rs, rel=1e-6)
    assert dv_dr_pull(v_ref, r_pull, r_sensor, r_load) == pytest.approx(num_rp, rel=1e-6)
    assert dv_dv_ref(v_ref, r_pull, r_sensor, r_load) == pytest.approx(num_vr, rel=1e-6)


def test_sensitivity_hand_values() -> None:
    # hand derivation for no load: dV/dRs = Vref Rp / (Rs + Rp)^2, dV/dRp = -Vref Rs / (Rs + Rp)^2,
    # dV/dVref = Rs / (Rs + Rp); at 5 V, 10 k, 10 k: 1.25e-4 V/ohm, -1.25e-4 V/ohm, 0.5
    assert dv_dr_sensor(5.0, 1e4, 1e4) == pytest.approx(1.25e-4)
    assert dv_dr_pull(5.0, 1e4, 1e4) == pytest.approx(-1.25e-4)
    assert dv_dv_ref(5.0, 1e4, 1e4) == pytest.approx(0.5)


@pytest.mark.parametrize(("v_ref", "r_pull", "r_sensor", "r_load"), POINTS)
def test_inverse_round_trip(v_ref: float, r_pull: float, r_sensor: float, r_load: float) -> None:
    v = divider_voltage(v_ref, r_pull, r_sensor, r_load)
    assert sensor_r_from_voltage(v, v_ref, r_pull, r_load) == pytest.approx(r_sensor, rel=1e-9)


def test_inverse_edges() -> None:
    assert sensor_r_from_voltage(0.0, 5.0, 1e4) == 0.0
    assert sensor_r_from_voltage(5.0, 5.0, 1e4) == math.inf
    # no positive resistance explains a voltage below 0 or above the open level
    assert math.isnan(sensor_r_from_voltage(-0.01, 5.0, 1e4))
    assert math.isnan(sensor_r_from_voltage(5.01, 5.0, 1e4))
    assert math.isnan(sensor_r_from_voltage(4.99, 5.0, 1e4, 1e5))


def test_vectorised_over_the_sensor() -> None:
    rs = np.array([0.0, 1e3, 1e4, np.inf])
    v = divider_voltage(5.0, 1e4, rs)
    assert isinstance(v, np.ndarray) and v.shape == (4,)
    # hand calculation: 0, 5/11, 2.5, 5
    np.testing.assert_allclose(v, [0.0, 5.0 / 11.0, 2.5, 5.0])
    np.testing.assert_allclose(sensor_r_from_voltage(v, 5.0, 1e4), rs)
    assert type(divider_voltage(5.0, 1e4, 1e4)) is float


@pytest.mark.parametrize(
    ("args", "match"),
    [
        ((0.0, 1e4, 1e4), "v_ref"),
        ((5.0, -1.0, 1e4), "r_pull"),
        ((5.0, 1e4, -1.0), "r_sensor"),
        ((5.0, 1e4, float("nan")), "r_sensor"),
    ],
)
def test_bad_arguments_are_clear_errors(args: tuple[float, float, float], match: str) -> None:
    with pytest.raises(ModelInputError, match=match):
        divider_voltage(*args)
