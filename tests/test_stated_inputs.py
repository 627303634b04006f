"""A model step's stated temperature or pressure with its own standard uncertainty: carried into
the prediction's u through the model's sensitivity (JCGM 100:2008, GUM, 5.1.2:
u_c^2 = u_reading^2 + (df/dx)^2 u(x)^2), checked here against a central finite difference of
the model written out by hand; kept with the step's model parameters; and ``rig check`` warns
where a stated value has none.  Runs on the virtual bench (SCPI over TCP, relay box on a pty, a
real SQLite file).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest
from bench_helpers import shipped_bench

from rig.cli import EXIT_BAD_INPUT, main
from rig.runner import load_plan, run_plan
from rig.store import ResultStore

# The demo NTC sender's curve (invented for the demo): Beta model R = R25 exp[B (1/T - 1/T25)]
# (SOURCES.md, NTC thermistors), T in kelvin.
R25_OHM, BETA_K, T25_K = 2000.0, 3450.0, 298.15
# The demo pressure sensor's transfer (invented): 0.1 of supply at 0 kPa to 0.9 at 500 kPa.
P_LOW, P_HIGH, F_LOW, F_HIGH = 0.0, 500e3, 0.1, 0.9


def _ntc_r(t_c: float) -> float:
    return R25_OHM * math.exp(BETA_K * (1 / (t_c + 273.15) - 1 / T25_K))


def _fraction_pct(p_pa: float) -> float:
    return 100.0 * (F_LOW + (p_pa - P_LOW) * (F_HIGH - F_LOW) / (P_HIGH - P_LOW))


def _central(f, x: float, h: float) -> float:  # type: ignore[no-untyped-def]
    return (f(x + h) - f(x - h)) / (2 * h)


NTC_STEP = """\
# A test sequence, invented for the test: the demo sender at a stated bench temperature.
[sequence]
name = "stated-ntc"

[[steps]]
id = "sender"
kind = "ntc"
hi = "T1"
lo = "T2"
r25 = "2.0 kohm"
beta = "3450 K"
temperature = "23 degC"
tolerance = "5 %"
{extra}
"""

RATIO_STEP = """\
# A test sequence, invented for the test: the demo pressure sensor at a stated pressure.
[sequence]
name = "stated-pressure"

[[steps]]
id = "map"
kind = "ratiometric"
output = "P_SIG"
power = "P_5V"
ground = "P_GND"
range_low = "0 kPa"
range_high = "500 kPa"
fraction_low = 0.1
fraction_high = 0.9
pressure = "101.3 kPa"
tolerance = "2 %"
{extra}
"""


def _run(tmp_path: Path, unit: str, text: str, step_id: str) -> tuple[dict, dict]:  # type: ignore[type-arg]
    """One run of ``text`` on the unit's bench: the step's stored row and its readings by role."""
    tmp_path.mkdir()
    path = tmp_path / "sequence.toml"
    path.write_text(text, encoding="utf-8")
    with shipped_bench(unit, folder=tmp_path) as (_, station):
        summary = run_plan(load_plan(path, station), "SN-1", operator="test", ask=lambda t: True)
    store = ResultStore(station.store_path)
    try:
        [step] = [s for s in store.steps(summary.run_id) if s["step_id"] == step_id]
        readings = {r["role"]: r for r in store.readings(summary.run_id, step_id)}
    finally:
        store.close()
    return step, readings


def test_a_stated_temperature_s_uncertainty_joins_the_ntc_prediction_s(tmp_path: Path) -> None:
    # 0.5 K at 23 degC through dR/dT of about -86 ohm/K: 43 ohm, some 2 % of R, beside a
    # reading's u of well under 1 ohm; the upper limit, 1.05 R, moves 1.05 times as far
    # (its sensitivity coefficient to R, GUM 5.1.2).
    step, readings = _run(
        tmp_path / "a", "ntc-sender", NTC_STEP.format(extra='temperature_u = "0.5 K"'), "sender"
    )
    u_reading = float(readings["ntc"]["u_std"])
    slope = _central(_ntc_r, 23.0, 1e-3)
    assert step["u_std"] == pytest.approx(math.hypot(u_reading, 1.05 * slope * 0.5), rel=1e-6)
    assert abs(slope) * 0.5 / _ntc_r(23.0) == pytest.approx(0.02, abs=0.003)
    params = json.loads(step["model_params"])
    assert params["temperature"] == "23 °C" and params["temperature_u"] == "0.5 K"
    # with none stated the temperature is taken as exact: the reading's u alone, as before
    bare, readings = _run(tmp_path / "b", "ntc-sender", NTC_STEP.format(extra=""), "sender")
    assert bare["u_std"] == pytest.approx(float(readings["ntc"]["u_std"]), rel=1e-9)
    assert "temperature_u" not in json.loads(bare["model_params"])


def test_a_stated_pressure_s_uncertainty_joins_the_ratiometric_prediction_s(tmp_path: Path) -> None:
    # 1 kPa through the transfer's slope, 0.8 / 500 kPa: 0.16 percentage points of supply.
    text = RATIO_STEP.format(extra='pressure_u = "1 kPa"')
    step, readings = _run(tmp_path / "a", "pressure-circuit", text, "map")
    out, sup = readings["output"], readings["supply"]
    v_out, v_sup = float(out["value"]), float(sup["value"])
    # the fraction's own u, V_out / V_sup with sensitivities 1/V_sup and -V_out/V_sup^2
    # (GUM 5.1.2, uncorrelated readings), in percent
    u_fraction = 100.0 * math.hypot(
        float(out["u_std"]) / v_sup, v_out / v_sup**2 * float(sup["u_std"])
    )
    slope = _central(_fraction_pct, 101.3e3, 10.0)
    assert slope * 1e3 == pytest.approx(0.16, rel=1e-9)
    assert step["u_std"] == pytest.approx(math.hypot(u_fraction, slope * 1e3), rel=1e-6)
    assert json.loads(step["model_params"])["pressure_u"] == "1 kPa"


def test_check_warns_of_a_stated_temperature_or_pressure_with_no_uncertainty(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    with shipped_bench("ntc-sender", folder=tmp_path) as (_, station):
        for text, expected in (
            (
                NTC_STEP.format(extra=""),
                "step sender: its stated temperature, 23 °C, has no temperature_u",
            ),
            (NTC_STEP.format(extra='temperature_u = "0.5 K"'), None),
            (
                RATIO_STEP.format(extra=""),
                "step map: the pressure it is judged at, 101.3 kPa, has no pressure_u",
            ),
            (RATIO_STEP.format(extra='pressure_u = "1 kPa"'), None),
        ):
            path = tmp_path / "sequence.toml"
            path.write_text(text, encoding="utf-8")
            assert main(["check", str(path), "--station", str(station.path)]) == 0
            warned = [
                line
                for line in capsys.readouterr().out.splitlines()
                if "_u:" in line or "_u " in line
            ]
            if expected is None:
                assert warned == [], warned
            else:
                assert len(warned) == 1 and warned[0].startswith(f"warning: {expected}"), warned


def test_a_stated_uncertainty_where_none_belongs_is_refused_at_its_key(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    text = NTC_STEP.format(extra="").replace(
        'temperature = "23 degC"', 'temperature_from = "well"\ntemperature_u = "0.5 K"'
    )
    text = text.replace(
        "[[steps]]",
        '[[steps]]\nid = "well"\nkind = "reference-temperature"\nforce_hi = "PT_FH"\n'
        'sense_hi = "PT_SH"\nforce_lo = "PT_FL"\nsense_lo = "PT_SL"\n\n[[steps]]',
        1,
    )
    negative = NTC_STEP.format(extra='temperature_u = "-1 K"')
    in_degc = NTC_STEP.format(extra='temperature_u = "0.5 degC"')
    with shipped_bench("ntc-sender", folder=tmp_path) as (_, station):
        for body, said in (
            (text, "temperature_u]: goes with a stated temperature"),
            (negative, "temperature_u]"),
            (in_degc, "expected a value in K"),
        ):
            path = tmp_path / "sequence.toml"
            path.write_text(body, encoding="utf-8")
            assert main(["check", str(path), "--station", str(station.path)]) == EXIT_BAD_INPUT
            err = capsys.readouterr().err
            assert said in err and "Traceback" not in err, err
