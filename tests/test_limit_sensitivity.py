"""Limits around a prediction carry the prediction's error into U through their sensitivity to it.

A step judged against limits of (1 - t) P and (1 + t) P around a prediction P (a tolerance of
t in %) compares the reading with a limit that moves (1 + t) times as far as P: its sensitivity
coefficient to P (JCGM 100:2008, GUM, 5.1.2, the law of propagation written for the reading's
distance from the limit, u^2 = u_reading^2 + (dL/dP)^2 u(P)^2).  A step keeps one U, so the
larger, upper side's factor (1 + t) is the one it is given.  A tolerance in the step's own unit
moves both limits one for one (factor 1), as does a ratiometric step's (percentage points).

Each figure is written out here by hand from published formulas: the Beta model
R = R25 exp[beta (1/T - 1/T25)], dR/dT = -beta R / T^2 (SOURCES.md, NTC thermistors), and the
IEC 60751 curve R = R0 (1 + A t + B t^2) for t >= 0 degC.  The NTC runs are real runs on the
virtual bench (SCPI over TCP, the relay box on a pty, a real SQLite file).
"""

from __future__ import annotations

import math
from pathlib import Path

import pytest
from bench_helpers import SEQUENCES, shipped_bench

from rig.analysis.model_tur import model_step_turs
from rig.config.sequence import load_sequence
from rig.config.unit_file import load_unit
from rig.plan import build_plan
from rig.runner import load_plan, run_plan
from rig.steps.limits import apply_tolerance, limit_sensitivity
from rig.steps.rtd_step import rtd_window
from rig.store import ResultStore

# The demo sender's curve (sequences/units/ntc-sender.toml, invented for the demo).
R25_OHM, BETA_K, T25_K = 2000.0, 3450.0, 298.15
# IEC 60751 coefficients above 0 degC (IEC 60751:2008, 4.2).
CVD_A, CVD_B = 3.9083e-3, -5.775e-7

NTC_STEP = """\
# A test sequence, invented for the test: the demo sender at a stated temperature.
[sequence]
name = "stated-sender"

[[steps]]
id = "sender"
kind = "ntc"
hi = "T1"
lo = "T2"
measure = "resistance"
r25 = "2.0 kohm"
beta = "3450 K"
temperature = "23 degC"
temperature_u = "0.3 K"
tolerance = "{tolerance}"
"""


def _ntc_slope(t_c: float) -> float:
    """|dR/dT| of the Beta model at ``t_c``, ohm per kelvin."""
    kelvin = t_c + 273.15
    r = R25_OHM * math.exp(BETA_K * (1 / kelvin - 1 / T25_K))
    return BETA_K * r / kelvin**2


def test_the_sensitivity_is_the_upper_limit_s_derivative_by_the_prediction() -> None:
    # dL/dP by a central difference of the limits rig draws around P: the definition of the
    # sensitivity coefficient (GUM 5.1.3), taken on the side that moves most
    for tolerance, expected in ((("pct", 5.0), 1.05), (("abs", 100.0), 1.0)):
        p, h = 2000.0, 1e-3
        upper = [apply_tolerance(x, tolerance).high for x in (p + h, p - h)]
        lower = [apply_tolerance(x, tolerance).low for x in (p + h, p - h)]
        d_upper = (upper[0] - upper[1]) / (2 * h)  # type: ignore[operator]
        d_lower = (lower[0] - lower[1]) / (2 * h)  # type: ignore[operator]
        assert max(abs(d_upper), abs(d_lower)) == pytest.approx(expected, rel=1e-9)
        assert limit_sensitivity(tolerance) == pytest.approx(expected, rel=1e-12)
    assert limit_sensitivity(None) == 1.0  # an rtd class: not a tolerance around P


def _run_sender(folder: Path, tolerance: str) -> tuple[dict, dict]:  # type: ignore[type-arg]
    """One run of the stated-temperature step on the demo sender: its row and its reading."""
    folder.mkdir()
    path = folder / "sequence.toml"
    path.write_text(NTC_STEP.format(tolerance=tolerance), encoding="utf-8")
    with shipped_bench("ntc-sender", folder=folder) as (_, station):
        summary = run_plan(load_plan(path, station), "SN-1", operator="test", ask=lambda t: True)
    store = ResultStore(station.store_path)
    try:
        [step] = store.steps(summary.run_id)
        reading = {r["role"]: r for r in store.readings(summary.run_id, "sender")}["ntc"]
    finally:
        store.close()
    return step, reading


def test_a_percent_tolerance_gives_the_prediction_s_u_its_upper_limit_s_factor(
    tmp_path: Path,
) -> None:
    """The QA inspector's hand calculation: u = sqrt(u_reading^2 + ((1 + t) |dR/dT| u(T))^2)
    (GUM 5.1.2); the old figure left out (1 + t), and U came out short by t times the
    prediction's part (19.97 ohm for 20.97 ohm on the shipped screen)."""
    step, reading = _run_sender(tmp_path / "pct", "5 %")
    u_reading, u_pred = float(reading["u_std"]), _ntc_slope(23.0) * 0.3
    # R(23 degC) = 2162.6 ohm, dR/dT = 3450 K x 2162.6 ohm / (296.15 K)^2 = 85.07 ohm/K
    assert u_pred == pytest.approx(85.07 * 0.3, rel=1e-4)
    assert step["u_std"] == pytest.approx(math.hypot(u_reading, 1.05 * u_pred), rel=1e-9)
    assert step["expanded_u"] == pytest.approx(2 * step["u_std"], rel=1e-12)
    # and not the old figure, the prediction's u with no factor: 1 ohm apart in U here
    old = 2 * math.hypot(u_reading, u_pred)
    assert step["expanded_u"] - old == pytest.approx(2 * 0.05 * u_pred, rel=0.01)
    # a tolerance in ohm moves both limits one for one: the prediction's u itself
    step, reading = _run_sender(tmp_path / "abs", "100 ohm")
    u_reading = float(reading["u_std"])
    assert step["u_std"] == pytest.approx(math.hypot(u_reading, u_pred), rel=1e-9)


def test_rig_check_s_tur_takes_the_same_part_of_u_as_the_run(tmp_path: Path) -> None:
    """``rig check --unit`` and ``rig limits`` weigh the same prediction's part as the run
    above: (1 + t) |dR/dT| u(T), by hand."""
    from rig.commands.limits import load_station_or_virtual

    unit = load_unit(SEQUENCES / "units" / "ntc-sender.toml")
    path = tmp_path / "sequence.toml"
    path.write_text(NTC_STEP.format(tolerance="5 %"), encoding="utf-8")
    plan = build_plan(load_sequence(path), load_station_or_virtual(None, unit))
    for tolerance, factor in ((None, 1.05), (("pct", 2.0), 1.02), (("abs", 50.0), 1.0)):
        proposed = None if tolerance is None else {"sender": tolerance}
        worst = model_step_turs(plan, unit, proposed)["sender"].worst
        part = dict(worst.stated_parts)["temperature"]
        assert part == pytest.approx(factor * _ntc_slope(23.0) * 0.3, rel=1e-9)


RTD_STEP = """\
# A test sequence, invented for the test: a Pt1000 element at a stated temperature.
[sequence]
name = "stated-element"

[[steps]]
id = "element"
kind = "rtd"
hi = "T1"
lo = "T2"
wires = 4
r0 = "1000 ohm"
temperature = "50 degC"
temperature_u = "0.2 K"
{tolerance}
"""


@pytest.mark.parametrize(
    ("tolerance", "factor"),
    [('tolerance = "0.5 %"', 1.005), ('tolerance = "2 ohm"', 1.0)],
)
def test_an_rtd_s_tolerance_around_its_prediction_takes_the_same_factor(
    tmp_path: Path, tolerance: str, factor: float
) -> None:
    path = tmp_path / "sequence.toml"
    path.write_text(RTD_STEP.format(tolerance=tolerance), encoding="utf-8")
    spec = load_sequence(path).step("element")
    window = rtd_window(spec, (50.0, 0.2))
    slope = 1000.0 * (CVD_A + 2 * CVD_B * 50.0)  # dR/dt of IEC 60751's curve, by hand
    assert window.u_std == pytest.approx(slope * 0.2, rel=1e-12)
    assert window.u_limits == pytest.approx(factor * slope * 0.2, rel=1e-12)
