"""``rig limits``' Monte Carlo draws a stated temperature or pressure around its stated value with
its stated standard uncertainty (a Gaussian, JCGM 101:2008, GUM Supplement 1, 6.4.7, where only
an estimate and its standard uncertainty are known), one draw per unit, moving the sensor itself.

For a figure that is linear in the input near the stated value, an independent input with
standard uncertainty u(x) adds (df/dx)^2 u(x)^2 to the figure's variance (JCGM 100:2008, GUM,
5.1.2), so the figure's standard deviation grows from s_0 to sqrt(s_0^2 + (df/dx)^2 u(x)^2).  The
slopes are written out by hand here.

Sampling allowance: a sample standard deviation of N draws has a relative standard error of about
sqrt((kurtosis - 1) / (4 N)), 1/sqrt(2 N) for a normal shape and less for the flatter shapes of
sums of uniform tolerances: 0.35 % at N = 40,000, 0.5 % for the ratio of two independent runs.
The checks allow 2 % (four standard errors), while leaving the stated input out changes the
spread by 9 % or more in each case.
"""

from __future__ import annotations

import dataclasses
import math
from pathlib import Path

import numpy as np
from test_stated_inputs import NTC_STEP, RATIO_STEP

from rig.analysis.montecarlo import MonteCarloResult, SequenceMonteCarlo
from rig.analysis.predict import SequencePredictor
from rig.commands.limits import load_station_or_virtual
from rig.config.sequence import load_sequence
from rig.config.unit_file import UnitModel, load_unit
from rig.plan import build_plan

UNITS = Path(__file__).resolve().parent.parent / "sequences" / "units"
SAMPLES = 40_000
REL = 0.02
"""Allowed relative difference of standard deviations (four standard errors, module docstring)."""

# The demo pressure sensor's transfer (invented for the demo): 0.1 of supply at 0 kPa to 0.9 at
# 500 kPa, so d(fraction)/dp = 0.8 / 500 kPa.
SLOPE_PER_PA = 0.8 / 500e3
PRESSURE_U_PA = 1700.0

# The demo NTC sender (invented): Beta model R = R25 exp[B (1/T - 1/T25)] (SOURCES.md,
# Steinhart-Hart and Beta model), so dR/dT = -B R / T^2 and (dR/dT) / R = -B / T^2.
BETA_K = 3450.0
T_STATED_K = 23.0 + 273.15
TEMPERATURE_U_K = 0.5

PRESSURE_SEQUENCE = (
    RATIO_STEP
    + """
[[steps]]
id = "signal"
kind = "volts"
hi = "C_PSIG"
lo = "C_PGND"
low = "0.6 V"
high = "4.8 V"
"""
)
NTC_SEQUENCE = NTC_STEP


def _drawn(folder: Path, unit: UnitModel, text: str, seed: int) -> MonteCarloResult:
    folder.mkdir()
    path = folder / "sequence.toml"
    path.write_text(text, encoding="utf-8")
    plan = build_plan(load_sequence(path), load_station_or_virtual(None, unit))
    nominal = SequencePredictor(plan, unit).run()
    return SequenceMonteCarlo(plan, unit, nominal).run(SAMPLES, seed)


def _sd(result: MonteCarloResult, step_id: str) -> float:
    [dist] = [d for d in result.steps if d.spec.id == step_id]
    return float(np.std(dist.figure, ddof=1))


def test_a_stated_pressure_u_widens_the_fraction_by_the_transfer_slope(tmp_path: Path) -> None:
    unit = load_unit(UNITS / "pressure-circuit.toml")
    exact = _drawn(tmp_path / "exact", unit, PRESSURE_SEQUENCE.format(extra=""), 1)
    stated = _drawn(
        tmp_path / "stated", unit, PRESSURE_SEQUENCE.format(extra='pressure_u = "1.7 kPa"'), 2
    )
    added_pct = SLOPE_PER_PA * PRESSURE_U_PA * 100.0  # 0.272 percentage points of supply
    expected = math.hypot(_sd(exact, "map"), added_pct)
    assert math.isclose(_sd(stated, "map"), expected, rel_tol=REL)
    # the sensor itself moves: the signal read at the controller (about 5 V x the fraction) follows
    # it, though that step states nothing; its share is 5 V x 0.8 / 500 kPa x u(p), less the few
    # tenths of a per mille the 47 kohm pull-down takes behind the sensor's 100 ohm and the wire
    expected_v = math.hypot(_sd(exact, "signal"), 5.0 * SLOPE_PER_PA * PRESSURE_U_PA)
    assert math.isclose(_sd(stated, "signal"), expected_v, rel_tol=REL)
    [draw] = [d for d in stated.draws if d.distribution == "normal"]
    assert draw.what == "stated pressure (map)"
    assert draw.spread == "101.3 kPa, u = 1.7 kPa"


def test_a_stated_temperature_u_widens_an_ntc_by_the_beta_slope(tmp_path: Path) -> None:
    # one ambient, 23 degC: the stated temperature is then where the unit file puts the sender
    unit = dataclasses.replace(load_unit(UNITS / "ntc-sender.toml"), ambient_range_c=None)
    exact = _drawn(tmp_path / "exact", unit, NTC_SEQUENCE.format(extra=""), 1)
    stated = _drawn(
        tmp_path / "stated", unit, NTC_SEQUENCE.format(extra='temperature_u = "0.5 K"'), 2
    )
    added_pct = BETA_K / T_STATED_K**2 * TEMPERATURE_U_K * 100.0  # about 1.97 % of R
    expected = math.hypot(_sd(exact, "sender"), added_pct)
    assert math.isclose(_sd(stated, "sender"), expected, rel_tol=REL)
