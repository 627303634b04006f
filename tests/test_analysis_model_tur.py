"""The TUR of an ntc step, whose limits move with the prediction, at the ends of the unit file's
temperature range: checked against a hand calculation from published formulas.

The hand calculation, for the shipped demo's ``signal-vs-curve`` step (an NTC of R25 = 2 kohm,
beta = 3450 K behind a 2.49 kohm pull-up to a stated 5.0 V, read on the 10 V range) on the virtual
bench's station (its DMM figures and a class A Pt100 read 4-wire on the 1 kohm range):

- Pt100 R(T) = 100 ohm (1 + A T + B T^2), A = 3.9083e-3, B = -5.775e-7 (IEC 60751);
- the meter's u of a reading: (pct_reading x value + pct_range x range) / 100 / sqrt(3), a bound
  read as a rectangular distribution (GUM 4.3.7); the probe's class A bound (0.15 + 0.002 |t|)
  degC (IEC 60751) the same way; the two combined in quadrature (GUM 5.1.2);
- NTC R(T) = R25 exp(beta (1/T - 1/298.15 K)), dR/dT = -R beta / T^2 (beta model);
- divider V = Vref R / (R + Rpull), dV/dR = Vref Rpull / (R + Rpull)^2;
- u of the prediction = |dV/dR| |dR/dT| u(T) (GUM 5.1.2); the limits are V (1 +- tol), so the
  upper one carries it times its sensitivity coefficient (1 + tol) (GUM 5.1.2), the factor the
  step's one U takes; the meter's u at the upper limit V (1 + tol); U = 2 x the root sum of
  squares of the two; TUR = (limit span) / (2 U);
- LOW under 4:1 (common practice, no published source), as rig check and a run mark it.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest
from offline_station import offline_demo_station

from rig.analysis.model_tur import model_step_turs
from rig.cli import main
from rig.config.sequence import load_sequence
from rig.config.unit_file import load_unit
from rig.plan import build_plan

SEQUENCES = Path(__file__).resolve().parent.parent / "sequences"
SEQUENCE = SEQUENCES / "temp-circuit-check.toml"
UNIT = SEQUENCES / "units" / "temp-circuit.toml"
STEP = "signal-vs-curve"


def low_text(tur: float) -> str:
    """A TUR under 4:1 as rig shows it: rounded down to one decimal, so never 4.0."""
    return f"{math.floor(tur * 10) / 10:.1f}"


def hand_tur(temp_c: float, tol_pct: float) -> tuple[float, float]:
    """(U in V, TUR) of the demo's signal-vs-curve step at ``temp_c``, as the module says."""
    a, b = 3.9083e-3, -5.775e-7
    r_pt = 100.0 * (1 + a * temp_c + b * temp_c**2)
    dr_pt = 100.0 * (a + 2 * b * temp_c)
    u_meter_c = (0.010e-2 * r_pt + 0.001e-2 * 1000.0) / math.sqrt(3) / dr_pt  # res4w, 1 kohm
    u_probe_c = (0.15 + 0.002 * abs(temp_c)) / math.sqrt(3)
    u_t = math.hypot(u_meter_c, u_probe_c)
    kelvin = temp_c + 273.15
    r_ntc = 2000.0 * math.exp(3450.0 * (1 / kelvin - 1 / 298.15))
    dr_ntc = r_ntc * 3450.0 / kelvin**2
    v = 5.0 * r_ntc / (r_ntc + 2490.0)
    dv_dr = 5.0 * 2490.0 / (r_ntc + 2490.0) ** 2
    u_limit = (1 + tol_pct / 100) * dv_dr * dr_ntc * u_t
    v_high = v * (1 + tol_pct / 100)
    u_reading = (0.0035e-2 * v_high + 0.0005e-2 * 10.0) / math.sqrt(3)  # dcv, 10 V range
    expanded = 2.0 * math.hypot(u_reading, u_limit)
    return expanded, (2 * v * tol_pct / 100) / (2 * expanded)


@pytest.mark.parametrize("tol_pct", [4.0, 0.5])
def test_ntc_tur_at_the_ends_of_the_temperature_range_matches_the_hand_calculation(
    tmp_path: Path, tol_pct: float
) -> None:
    unit = load_unit(UNIT)
    assert unit.ambient_range_c == (15.0, 35.0)
    plan = build_plan(load_sequence(SEQUENCE), offline_demo_station("tur", tmp_path))
    found = model_step_turs(plan, unit, {STEP: ("pct", tol_pct)})[STEP]
    assert [at.temp_c for at in found.at] == [15.0, 35.0]
    for at in found.at:
        expanded, tur = hand_tur(at.temp_c, tol_pct)
        # the solver's Pt100 reads the ambient through relays and the meter's 4-wire current:
        # agreement to 1e-4 leaves room for that and nothing else
        assert at.expanded == pytest.approx(expanded, rel=1e-4)
        assert at.tur == pytest.approx(tur, rel=1e-4)
    # warmer, the NTC's curve is flatter in V but the class A bound wider and the window
    # narrower: 35 degC is the worse end (6.3:1 at 4 %, 0.81:1 at 0.5 %)
    assert found.worst.temp_c == 35.0
    assert found.worst.tur == pytest.approx(hand_tur(35.0, tol_pct)[1], rel=1e-4)


def test_rig_check_with_a_unit_shows_the_worst_tur_of_an_ntc_step_and_marks_it_low(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    station = offline_demo_station("tur", tmp_path)
    tight = tmp_path / "tight.toml"
    text = SEQUENCE.read_text(encoding="utf-8")
    assert text.count('tolerance = "4 %"') == 1
    tight.write_text(text.replace('tolerance = "4 %"', 'tolerance = "1 %"'), encoding="utf-8")
    assert main(["check", str(tight), "--station", str(station.path), "--unit", str(UNIT)]) == 0
    out = capsys.readouterr().out
    row = next(line for line in out.splitlines() if line.startswith(STEP))
    expanded, tur = hand_tur(35.0, 1.0)
    assert tur < 4.0  # 1.6:1 by hand
    assert f"{expanded * 1000:.4g} mV" in row and row.rstrip().endswith(f"{low_text(tur)}:1 LOW")
    at_15 = hand_tur(15.0, 1.0)[1]
    assert (
        f"{STEP}: limits around the prediction: U and TUR at 35 degC, the worst end of "
        f"{UNIT.name}'s temperature_range (15 degC: {low_text(at_15)}:1 LOW)"
    ) in out
    # without a unit file the temperatures are unknown: no TUR, as before
    assert main(["check", str(tight), "--station", str(station.path)]) == 0
    row = next(line for line in capsys.readouterr().out.splitlines() if line.startswith(STEP))
    assert row.split()[-2:] == ["-", "-"]


def test_rig_limits_gives_the_proposed_ntc_tolerance_its_tur_and_warns_when_low(
    capsys: pytest.CaptureFixture[str],
) -> None:
    # a false-reject target of 30 % (far above any floor's: only to make the window narrow)
    # proposes a tolerance under 1 %, whose TUR at 35 degC is under 4:1 by the hand calculation
    args = ["limits", str(SEQUENCE), "--unit", str(UNIT), "--samples", "2000", "--seed", "1"]
    # (10 ppm proposes about 2.8 %, 4.4:1; 100 ppm about 2.5 %, just under 4:1 since U takes the
    # upper limit's sensitivity to the prediction)
    for ppm, low in (("10", False), ("100", True), ("300000", True)):
        assert main([*args, "--false-reject-ppm", ppm, "--json"]) == 0
        data = json.loads(capsys.readouterr().out)
        step = next(s for s in data["steps"] if s["id"] == STEP)
        tol = step["proposed"]["high"]
        assert step["tur_at_c"] == 35.0
        assert step["tur"] == pytest.approx(hand_tur(35.0, tol)[1], rel=1e-4)
        assert (step["tur"] < 4.0) is low
        warned = [w for w in data["warnings"] if w.startswith(f"step {STEP}: TUR ")]
        assert warned == (
            [
                f"step {STEP}: TUR {low_text(step['tur'])}:1 LOW at 35 degC with the proposed "
                "limits (rig check marks a TUR under 4:1 LOW): the meter's uncertainty "
                "is about as wide as the limits, so it decides verdicts near them; "
                "widen them where the faults allow, or measure with a smaller "
                "uncertainty"
            ]
            if low
            else []
        )


# --- a ratiometric step, judged around its transfer at the pressure it states -----------------

PRESSURE_SEQUENCE = SEQUENCES / "pressure-circuit-check.toml"
PRESSURE_UNIT = SEQUENCES / "units" / "pressure-circuit.toml"
FRACTION_STEP = "output-fraction"


def hand_ratiometric(tol_pts: float, v_sup: float = 5.0) -> tuple[float, float]:
    """(U in % of supply, TUR) of the shipped pressure check's output-fraction step, by hand.

    - the transfer: fraction = 0.1 + 0.8 p / 500 kPa (the step's fraction_low/high over its
      range), at the stated 101.3 kPa: 26.208 % of supply; the window that ± ``tol_pts``;
    - the supply read at the controller's stated 5.0 V (the sensor's few mA drop microvolts in
      the harness: well inside the 1e-4 the check allows), the output at the window's upper
      limit of it, both on the 10 V range (over 1.2 V, the 1 V range's top);
    - the meter's u of each: (0.0035 % of reading + 0.0005 % of range) / sqrt(3), the virtual
      station's DCV figures read as a rectangular distribution (GUM 4.3.7);
    - u of the ratio r = Vout / Vsup: sqrt((u_out / Vsup)^2 + (Vout u_sup / Vsup^2)^2), the law
      of propagation with the two readings uncorrelated (JCGM 100:2008, 5.1.2), in % x 100;
    - the stated pressure's own u (the file's ``pressure_u``, 1.7 kPa) through the transfer's
      slope, 0.8 / 500 kPa x 100 % (JCGM 100:2008, 5.1.2), combined with the ratio's in
      quadrature;
    - U = 2 u; TUR = span / (2 U) (common practice, no published source).
    """
    predicted = (0.1 + 0.8 * 101.3 / 500.0) * 100.0
    v_out = (predicted + tol_pts) / 100.0 * v_sup
    u_out = (0.0035e-2 * v_out + 0.0005e-2 * 10.0) / math.sqrt(3)
    u_sup = (0.0035e-2 * v_sup + 0.0005e-2 * 10.0) / math.sqrt(3)
    u_ratio = math.hypot(u_out / v_sup, v_out * u_sup / v_sup**2) * 100.0
    u_pressure = 0.8 / 500.0 * 1.7 * 100.0
    expanded = 2.0 * math.hypot(u_ratio, u_pressure)
    return expanded, (2.0 * tol_pts) / (2.0 * expanded)


@pytest.mark.parametrize("tol_pts", [2.0, 0.25])
def test_ratiometric_tur_at_its_stated_pressure_matches_the_hand_calculation(
    tmp_path: Path, tol_pts: float
) -> None:
    unit = load_unit(PRESSURE_UNIT)
    plan = build_plan(load_sequence(PRESSURE_SEQUENCE), offline_demo_station("tur", tmp_path))
    found = model_step_turs(plan, unit, {FRACTION_STEP: ("abs", tol_pts)})[FRACTION_STEP]
    assert found.pressure_pa == pytest.approx(101_300.0)
    assert [at.temp_c for at in found.at] == [15.0, 35.0]
    expanded, tur = hand_ratiometric(tol_pts)
    for at in found.at:
        assert at.expanded == pytest.approx(expanded, rel=1e-4)
        assert at.tur == pytest.approx(tur, rel=1e-4)


def test_rig_check_with_a_unit_shows_a_ratiometric_steps_tur_at_its_stated_pressure(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    station = offline_demo_station("tur", tmp_path)
    args = ["check", str(PRESSURE_SEQUENCE), "--station", str(station.path)]
    assert main([*args, "--unit", str(PRESSURE_UNIT)]) == 0
    out = capsys.readouterr().out
    row = next(line for line in out.splitlines() if line.startswith(FRACTION_STEP))
    expanded, tur = hand_ratiometric(2.0)  # the step's own 2 %: 3.7:1 by hand
    u_cell, unit_cell, tur_cell, low_cell = row.split()[-4:]
    assert (float(u_cell), unit_cell) == (pytest.approx(expanded, rel=1e-3), "%")
    # one decimal, rounded down, under 4:1 (common practice, no published source)
    assert tur_cell == f"{math.floor(tur * 10) / 10:.1f}:1" and low_cell == "LOW"
    assert (
        f"{FRACTION_STEP}: limits around the prediction at its stated pressure, 101.3 kPa: U and "
        f"TUR at "
    ) in out
    # without a unit file the supply is unknown: no TUR, as before
    assert main(args) == 0
    row = next(
        line for line in capsys.readouterr().out.splitlines() if line.startswith(FRACTION_STEP)
    )
    assert row.split()[-2:] == ["-", "-"]
