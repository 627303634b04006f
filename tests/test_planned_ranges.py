"""The range the planner holds for steps whose limits are not in the meter's unit.

A reference-temperature step is judged in degC and an NTC step against its curve, but the file
still bounds what the meter can read on a passing unit; the planner holds the smallest listed
range that holds that bound, so no reading pays for autorange.  The bounds are checked against
published figures, not against rig's own models:

- Pt100 (R0 = 100 ohm) at 40 degC: 115.54 ohm, IEC 60751:2008 table of reference values (from
  memory);
- NTC B-parameter equation R(T) = R25 exp(B (1/T - 1/298.15 K)), written out here (the usual
  published form of the beta model);
- a divider's output V = Vref R / (R + Rpull) (Ohm's law).
"""

from __future__ import annotations

import math
from pathlib import Path

import pytest
from offline_station import offline_demo_station

from rig.cli import main
from rig.config.reader import TomlDoc
from rig.config.sequence import parse_sequence
from rig.config.station import Station
from rig.plan import Plan, build_plan
from rig.steps import KINDS


@pytest.fixture(scope="module")
def station(tmp_path_factory: pytest.TempPathFactory) -> Station:
    return offline_demo_station("range-test", tmp_path_factory.mktemp("station"))


def plan_of(tmp_path: Path, station: Station, steps: str) -> Plan:
    text = '[sequence]\nname = "ranges"\nreorder = false\n' + steps
    doc = TomlDoc(tmp_path / "ranges.toml", text=text)
    sequence = parse_sequence(doc)
    doc.raise_if_problems()
    return build_plan(sequence, station)


def pt100(limits: str = 'low = "10 degC"\nhigh = "40 degC"\n') -> str:
    return (
        '[[steps]]\nid = "ambient"\nkind = "reference-temperature"\nforce_hi = "PT_FH"\n'
        'sense_hi = "PT_SH"\nforce_lo = "PT_FL"\nsense_lo = "PT_SL"\n' + limits
    )


NTC = (
    '[[steps]]\nid = "curve"\nkind = "ntc"\nhi = "T1"\nlo = "T2"\nr25 = "2.0 kohm"\n'
    'beta = "3450 K"\ntemperature_from = "ambient"\ntolerance = "5 %"\n'
)

NTC_VOLTAGE = (
    '[[steps]]\nid = "divider"\nkind = "ntc"\nhi = "C_SIG"\nlo = "C_GND"\nmeasure = "voltage"\n'
    'r25 = "2.0 kohm"\nbeta = "3450 K"\ntemperature_from = "ambient"\npullup = "2.49 kohm"\n'
    'reference = "5.0 V"\ntolerance = "4 %"\n'
)


def beta_ntc_ohm(temp_c: float, r25: float = 2000.0, beta: float = 3450.0) -> float:
    return r25 * math.exp(beta * (1.0 / (temp_c + 273.15) - 1.0 / 298.15))


def largest(plan: Plan, step_id: str) -> float | None:
    step = next(s for s in plan.steps if s.spec.id == step_id)
    by_id = {s.spec.id: s.spec for s in plan.steps}
    return KINDS[step.spec.kind].largest_reading(step.spec, by_id.get)


def test_pt100_is_held_on_the_range_of_its_high_limit(tmp_path: Path, station: Station) -> None:
    plan = plan_of(tmp_path, station, pt100())
    assert largest(plan, "ambient") == pytest.approx(115.54, abs=0.01)  # IEC 60751 at 40 degC
    assert plan.steps[0].range_ == 1000.0  # 100 ohm cannot hold it; the next listed range can
    assert plan.physical_limit().autoranged == 0


def test_pt100_without_a_high_limit_autoranges(tmp_path: Path, station: Station) -> None:
    plan = plan_of(tmp_path, station, pt100('low = "10 degC"\n'))
    assert plan.steps[0].range_ is None
    assert plan.physical_limit().autoranged == 1


def test_ntc_resistance_is_bounded_at_the_reference_steps_low_limit(
    tmp_path: Path, station: Station
) -> None:
    plan = plan_of(tmp_path, station, pt100() + NTC)
    # coldest passing reference 10 degC: 3.69 kohm, +5 % tolerance
    assert largest(plan, "curve") == pytest.approx(beta_ntc_ohm(10.0) * 1.05, rel=1e-9)
    assert plan.steps[1].range_ == 10_000.0
    assert plan.physical_limit().autoranged == 0


def test_ntc_divider_voltage_is_bounded_at_the_coldest_temperature(
    tmp_path: Path, station: Station
) -> None:
    plan = plan_of(tmp_path, station, pt100() + NTC_VOLTAGE)
    r = beta_ntc_ohm(10.0)
    assert largest(plan, "divider") == pytest.approx(5.0 * r / (r + 2490.0) * 1.04, rel=1e-9)
    assert plan.steps[1].range_ == 10.0


def test_ntc_after_an_unbounded_reference_autoranges(tmp_path: Path, station: Station) -> None:
    # No low limit on the reference: nothing bounds how cold, so how high the NTC can read.
    plan = plan_of(tmp_path, station, pt100('high = "40 degC"\n') + NTC)
    assert plan.steps[1].range_ is None


def test_ntc_at_a_stated_temperature(tmp_path: Path, station: Station) -> None:
    stated = NTC.replace('temperature_from = "ambient"', 'temperature = "25 degC"')
    plan = plan_of(tmp_path, station, stated)
    assert largest(plan, "curve") == pytest.approx(2000.0 * 1.05)
    assert plan.steps[0].range_ == 10_000.0


def test_rig_check_shows_the_held_range_and_the_reference_temperatures_u_in_degc(
    tmp_path: Path, station: Station, capsys: pytest.CaptureFixture[str]
) -> None:
    """The range in ohm, and the U a run takes at the upper limit, 40 degC: the meter's u of
    the Pt100's 115.54 ohm (IEC 60751 table, from memory) on the 1 kohm range, 0.010 % of
    reading + 0.001 % of range (the station's table) read as rectangular (GUM 4.3.7), through
    the curve's slope 100 (A + 2 B t) ohm/degC (IEC 60751), with the station probe's class A,
    +-(0.15 + 0.002 |t|) degC, rectangular too; combined root-sum-square (GUM 5.1.2), k = 2."""
    sequence = tmp_path / "seq.toml"
    sequence.write_text('[sequence]\nname = "ranges"\n' + pt100(), encoding="utf-8")
    assert main(["check", str(sequence), "--station", str(station.path)]) == 0
    row = next(line for line in capsys.readouterr().out.splitlines() if line.startswith("ambient"))
    assert "1 kohm" in row
    u_meter = (0.010e-2 * 115.54 + 0.001e-2 * 1000.0) / math.sqrt(3.0)
    slope = 100.0 * (3.9083e-3 + 2 * -5.775e-7 * 40.0)
    u_probe = (0.15 + 0.002 * 40.0) / math.sqrt(3.0)
    expanded = 2.0 * math.hypot(u_meter / slope, u_probe)  # 0.2733 degC
    value, unit, tur = row.split()[-3:]
    assert (unit, float(value)) == ("°C", pytest.approx(expanded, abs=5e-5))
    assert tur == f"{30.0 / (2.0 * expanded):.0f}:1"  # the span over 2 U
