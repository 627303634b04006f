"""An ntc step read as a divider voltage with a stated reference and its standard uncertainty
``reference_u``: carried into the prediction's u through the divider's sensitivity to its
reference (JCGM 100:2008, GUM, 5.1.2: u_c^2 = u_reading^2 + (dV/dVref)^2 u(Vref)^2), where the
divider is V = Vref R / (R + R_pull) (SOURCES.md, sensor circuits, common practice), so
dV/dVref = R / (R + R_pull) = V / Vref; checked against the formula written out by hand and a
central finite difference of it.  Kept with the model parameters, warned of by ``rig check``
where missing, refused with ``reference_from``.  Runs on the virtual bench.
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

# The demo NTC (invented for the demo): Beta model R = R25 exp[B (1/T - 1/T25)]
# (SOURCES.md, NTC thermistors), T in kelvin; behind the demo controller's 2.49 kohm pull-up.
R25_OHM, BETA_K, T25_K, PULL_OHM = 2000.0, 3450.0, 298.15, 2490.0


def _divider_v(v_ref: float, t_c: float) -> float:
    """V = Vref R / (R + R_pull) (SOURCES.md, sensor circuits, common practice)."""
    r = R25_OHM * math.exp(BETA_K * (1 / (t_c + 273.15) - 1 / T25_K))
    return v_ref * r / (r + PULL_OHM)


STEP = """\
# A test sequence, invented for the test: the demo divider at a stated temperature and reference.
[sequence]
name = "stated-reference"

[[steps]]
id = "signal"
kind = "ntc"
hi = "C_SIG"
lo = "C_GND"
measure = "voltage"
r25 = "2.0 kohm"
beta = "3450 K"
temperature = "23 degC"
temperature_u = "0 K"
pullup = "2.49 kohm"
reference = "5.0 V"
tolerance = "4 %"
{extra}
"""


def _run(folder: Path, text: str) -> tuple[dict, dict]:  # type: ignore[type-arg]
    """One run of ``text`` on the demo temperature circuit: the step's row and its reading."""
    folder.mkdir()
    path = folder / "sequence.toml"
    path.write_text(text, encoding="utf-8")
    with shipped_bench("temp-circuit", folder=folder) as (_, station):
        summary = run_plan(load_plan(path, station), "SN-1", operator="test", ask=lambda t: True)
    store = ResultStore(station.store_path)
    try:
        [step] = [s for s in store.steps(summary.run_id) if s["step_id"] == "signal"]
        reading = {r["role"]: r for r in store.readings(summary.run_id, "signal")}["signal"]
    finally:
        store.close()
    return step, reading


def test_a_stated_reference_s_uncertainty_joins_the_divider_prediction_s(tmp_path: Path) -> None:
    step, reading = _run(tmp_path / "a", STEP.format(extra='reference_u = "0.05 V"'))
    v_pred = _divider_v(5.0, 23.0)
    h = 1e-4
    slope = (_divider_v(5.0 + h, 23.0) - _divider_v(5.0 - h, 23.0)) / (2 * h)
    assert slope == pytest.approx(v_pred / 5.0, rel=1e-9)  # the prediction scales with Vref
    u_reading = float(reading["u_std"])
    # the limits are V (1 +- 4 %): the upper one moves 1.04 times as far as V (GUM 5.1.2)
    part = 1.04 * slope * 0.05
    assert step["u_std"] == pytest.approx(math.hypot(u_reading, part), rel=1e-6)
    # the reference's part, some 1 % of V, is well above the reading's
    assert part > 5 * u_reading
    params = json.loads(step["model_params"])
    assert params["reference"] == "5 V" and params["reference_u"] == "50 mV"
    # with none stated the reference is taken as exact: the reading's u alone, as before
    bare, reading = _run(tmp_path / "b", STEP.format(extra=""))
    assert bare["u_std"] == pytest.approx(float(reading["u_std"]), rel=1e-9)
    assert "reference_u" not in json.loads(bare["model_params"])


def test_check_warns_of_a_stated_reference_with_no_uncertainty(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    with shipped_bench("temp-circuit", folder=tmp_path) as (_, station):
        for extra, warned in (("", True), ('reference_u = "0.05 V"', False)):
            path = tmp_path / "sequence.toml"
            path.write_text(STEP.format(extra=extra), encoding="utf-8")
            assert main(["check", str(path), "--station", str(station.path)]) == 0
            lines = [x for x in capsys.readouterr().out.splitlines() if "reference_u" in x]
            if warned:
                assert len(lines) == 1, lines
                assert lines[0].startswith(
                    "warning: step signal: its stated reference, 5 V, has no reference_u"
                ), lines
            else:
                assert lines == [], lines


def test_reference_u_with_reference_from_or_below_zero_is_refused_at_its_key(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    measured = STEP.format(extra='reference_u = "0.05 V"').replace(
        'reference = "5.0 V"', 'reference_from = "ref"'
    )
    measured = measured.replace(
        "[[steps]]",
        '[[steps]]\nid = "ref"\nkind = "volts"\nhi = "C_SIG"\nlo = "C_GND"\n'
        'low = "4.9 V"\nhigh = "5.1 V"\n\n[[steps]]',
        1,
    )
    negative = STEP.format(extra='reference_u = "-0.05 V"')
    with shipped_bench("temp-circuit", folder=tmp_path) as (_, station):
        for body, said in (
            (measured, "reference_u]: goes with a stated reference"),
            (negative, "reference_u]"),
        ):
            path = tmp_path / "sequence.toml"
            path.write_text(body, encoding="utf-8")
            assert main(["check", str(path), "--station", str(station.path)]) == EXIT_BAD_INPUT
            err = capsys.readouterr().err
            assert said in err and "Traceback" not in err, err


# --- the low-TUR advice where a stated input's u makes up most of U ----------------------------

SEQUENCES = Path(__file__).resolve().parent.parent / "sequences"


def test_a_tur_dominated_by_a_stated_reference_names_it(tmp_path: Path) -> None:
    """``rig check --unit``'s and ``rig limits``' TUR of a divider step: with u(Vref) = 0.1 V the
    reference's part, V / Vref x 0.1 V times the upper limit's sensitivity to V, 1 + 4 %
    (GUM 5.1.2, the divider of SOURCES.md), is written out here and is most of U's variance;
    with u(Vref) = 1 uV, under the meter's, it is not."""
    from rig.analysis.model_tur import model_step_turs
    from rig.commands.limits import load_station_or_virtual
    from rig.config.sequence import load_sequence
    from rig.config.unit_file import load_unit
    from rig.judge.decision import COVERAGE_K
    from rig.plan import build_plan

    unit = load_unit(SEQUENCES / "units" / "temp-circuit.toml")
    for u_ref, dominant in ((0.1, "reference"), (1e-6, None)):
        path = tmp_path / f"seq-{u_ref:g}.toml"
        path.write_text(STEP.format(extra=f'reference_u = "{u_ref:g} V"'), encoding="utf-8")
        plan = build_plan(load_sequence(path), load_station_or_virtual(None, unit))
        worst = model_step_turs(plan, unit)["signal"].worst
        part = 1.04 * _divider_v(5.0, 23.0) / 5.0 * u_ref
        assert dict(worst.stated_parts)["reference"] == pytest.approx(part, rel=1e-9)
        share = part**2 / (worst.expanded / COVERAGE_K) ** 2
        assert (share > 0.5) is (dominant is not None), share
        assert worst.dominant_stated == dominant


def test_low_tur_advice_names_the_stated_input_that_makes_up_most_of_u(
    capsys: pytest.CaptureFixture[str],
) -> None:
    # The shipped pressure check's output fraction: u(p) = 1.7 kPa through 0.8 / 500 kPa is
    # 0.272 percentage points (GUM 5.1.2), against a U of 2 x 1.842 % / (2 x 3.3) = 0.56 %,
    # u_c = 0.28 %: the pressure is 95 % of the variance.  The signal wire's drop has no stated
    # input: the meter's uncertainty is the advice there.
    seq = str(SEQUENCES / "pressure-circuit-check.toml")
    unit = str(SEQUENCES / "units" / "pressure-circuit.toml")
    assert main(["limits", seq, "--unit", unit, "--seed", "1", "--samples", "20000"]) == 0
    out = " ".join(capsys.readouterr().out.split())
    fraction = out.split("step output-fraction: TUR", 1)[1].split("step ", 1)[0]
    assert "or state the pressure with a smaller u (pressure_u; measure it at the bench)" in (
        fraction
    ), fraction
    assert "measure with a smaller uncertainty" not in fraction
    wire = out.split("step signal-wire-drop: TUR", 1)[1].split("step ", 1)[0]
    assert "or measure with a smaller uncertainty" in wire and "state the" not in wire, wire
