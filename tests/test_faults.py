"""Fault specs: parsing, the errors for bad specs and unknown targets, and what each fault does to
the shipped temperature circuit (``sequences/units/temp-circuit.toml``) once solved.

The unit circuit is solved as the bench sees it with every relay open: the fixture's bench-ground
pin tied to node 0 as ``rig.sim.circuit_probe`` ties it, and an island with no path to node 0
(the reference Pt100) referenced to node 0 at one of its nodes.  No current can flow through that
reference, so no voltage inside the island or elsewhere changes.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from grounding import ground_like_the_bench

from rig.circuit import GROUND, Circuit, Solution, solve
from rig.config.unit_file import NtcSensor, UnitModel, load_unit
from rig.errors import CircuitError, ConfigError
from rig.faults import KINDS, Fault, parse_fault, parse_faults
from rig.unit_circuit import R_OPEN_OHM, R_SHORT_OHM, UnitCircuit, build_unit_circuit

UNITS = Path(__file__).resolve().parent.parent / "sequences" / "units"
TEMP_UNIT = UNITS / "temp-circuit.toml"
SENDER_UNIT = UNITS / "ntc-sender.toml"

# Check values for a 5 V sensor signal: healthy between about 0.6 V and 4.8 V, 0.5 V or below a
# low-circuit fault, above 4.8 V a high or open-circuit fault (common practice, no published
# source).
HEALTHY = (0.6, 4.8)
LOW_FAULT_V = 0.5
HIGH_FAULT_V = 4.8


@pytest.fixture(scope="module")
def unit() -> UnitModel:
    return load_unit(TEMP_UNIT)


def on_bench(unit: UnitModel, circuit: Circuit) -> Circuit:
    """A copy of ``circuit`` with a defined reference, as described in the module docstring."""
    c = circuit.copy()
    return ground_like_the_bench(unit, c)


def solved(unit: UnitModel, faults: list[str] | None = None) -> tuple[UnitCircuit, Solution]:
    built = build_unit_circuit(unit, parse_faults(faults or [], unit))
    return built, solve(on_bench(unit, built.circuit))


def signal_v(sol: Solution) -> float:
    """What the controller sees: its signal pin against its own ground."""
    return sol.vdiff("C_SIG", "C_GND")


def value(built: UnitCircuit, element: str) -> float:
    return built.circuit.elements[element].value


# ---- parsing -----------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("spec", "expected"),
    [
        ("open:signal", Fault("open", ("signal",))),
        ("short-ground:signal", Fault("short-ground", ("signal",))),
        ("short-ref:signal", Fault("short-ref", ("signal",))),
        ("short-feed:signal", Fault("short-feed", ("signal",))),
        ("short:signal,ground", Fault("short", ("signal", "ground"))),
        ("series:ground=15ohm", Fault("series", ("ground",), 15.0)),
        ("series:ground=1.5kohm", Fault("series", ("ground",), 1500.0)),
        ("series:ground=250 mohm", Fault("series", ("ground",), 0.25)),
        ("drift:coolant=+8%", Fault("drift", ("coolant",), 8.0)),
        ("drift:coolant=-12.5%", Fault("drift", ("coolant",), -12.5)),
        ("intermittent:signal=0.3", Fault("intermittent", ("signal",), 0.3)),
        ("intermittent:signal", Fault("intermittent", ("signal",), 0.5)),
        ("  open:signal  ", Fault("open", ("signal",))),
    ],
)
def test_parse_every_kind(spec: str, expected: Fault) -> None:
    fault = parse_fault(spec)
    assert fault.kind == expected.kind
    assert fault.targets == expected.targets
    if expected.value is None:
        assert fault.value is None
    else:
        assert fault.value == pytest.approx(expected.value, rel=1e-12)
    assert parse_fault(fault.spec) == fault  # the canonical spec reads back the same


def test_every_kind_is_covered_above() -> None:
    assert set(KINDS) == {
        "open",
        "short-ground",
        "short-ref",
        "short-feed",
        "short",
        "series",
        "drift",
        "intermittent",
    }


@pytest.mark.parametrize(
    ("spec", "fragment"),
    [
        ("open", "expected KIND:TARGET"),
        ("open:", "expected KIND:TARGET"),
        ("OPEN:signal", "expected KIND:TARGET"),
        ("open: signal", "expected KIND:TARGET"),
        ("snap:signal", "unknown fault kind 'snap'"),
        ("short:signal", "two different wires"),
        ("short:signal,signal", "two different wires"),
        ("short:a,b,c", "two different wires"),
        ("open:signal,ground", "one target, found 2"),
        ("open:signal=3", "takes no value"),
        ("short-ground:signal=1ohm", "takes no value"),
        ("series:ground", "needs the added resistance"),
        ("series:ground=-5ohm", "must be positive"),
        ("series:ground=0ohm", "must be positive"),
        ("series:ground=15V", "expected a value in ohm"),
        ("series:ground=15", "no unit"),
        ("drift:coolant", "needs a percentage"),
        ("drift:coolant=-100%", "above -100 %"),
        ("drift:coolant=8ohm", "expected a value in %"),
        ("intermittent:signal=0", "above 0 and at most 1"),
        ("intermittent:signal=1.5", "above 0 and at most 1"),
        ("intermittent:signal=nan", "above 0 and at most 1"),
        ("intermittent:signal=often", "often"),
    ],
)
def test_malformed_specs(spec: str, fragment: str) -> None:
    with pytest.raises(ConfigError) as caught:
        parse_fault(spec, source="--fault")
    (problem,) = caught.value.problems
    assert problem.file == "--fault"
    assert problem.key == spec
    assert fragment in problem.message
    assert spec in str(caught.value)


def test_intermittent_at_one_is_always_open() -> None:
    assert parse_fault("intermittent:signal=1").value == 1.0


def test_unknown_wire_lists_the_wires(unit: UnitModel) -> None:
    with pytest.raises(ConfigError) as caught:
        parse_faults(["open:sig"], unit)
    (problem,) = caught.value.problems
    assert "'sig'" in problem.message
    assert "temp-circuit.toml" in problem.message
    assert "wires are ground, signal" in problem.message


def test_unknown_sensor_lists_the_sensors(unit: UnitModel) -> None:
    with pytest.raises(ConfigError) as caught:
        parse_faults(["drift:signal=+5%"], unit)  # a wire, not a sensor
    (problem,) = caught.value.problems
    assert "no sensor 'signal'" in problem.message
    assert "sensors are coolant" in problem.message


def test_a_short_names_both_wires_when_both_are_unknown(unit: UnitModel) -> None:
    with pytest.raises(ConfigError) as caught:
        parse_faults(["short:sig,gnd"], unit)
    messages = [p.message for p in caught.value.problems]
    assert len(messages) == 2
    assert "'sig'" in messages[0] and "'gnd'" in messages[1]


def test_short_to_a_source_the_unit_lacks() -> None:
    sender = load_unit(SENDER_UNIT)  # no controller at all
    with pytest.raises(ConfigError) as caught:
        parse_faults(["short-ref:lead_a", "short-feed:lead_b"], sender)
    messages = [p.message for p in caught.value.problems]
    assert any("no controller source 'reference'" in m for m in messages)
    assert any("no controller source 'feed'" in m for m in messages)


def test_every_bad_target_is_reported_at_once(unit: UnitModel) -> None:
    with pytest.raises(ConfigError) as caught:
        parse_faults(["open:sig", "series:gnd=5ohm", "drift:ntc=+3%", "open:signal"], unit)
    assert [p.key for p in caught.value.problems] == [
        "open:sig",
        "series:gnd=5ohm",
        "drift:ntc=+3%",
    ]


def test_every_malformed_spec_is_reported_at_once(unit: UnitModel) -> None:
    with pytest.raises(ConfigError) as caught:
        parse_faults(["open", "snap:signal", "open:signal"], unit)
    assert [p.key for p in caught.value.problems] == ["open", "snap:signal"]


def test_malformed_and_unknown_target_reported_together(unit: UnitModel) -> None:
    with pytest.raises(ConfigError) as caught:
        parse_faults(["snap:signal", "open:sig"], unit)
    assert [p.key for p in caught.value.problems] == ["snap:signal", "open:sig"]


# ---- effects on the solved circuit -------------------------------------------------------------


def test_the_healthy_circuit_reads_in_the_window(unit: UnitModel) -> None:
    _, sol = solved(unit)
    assert HEALTHY[0] < signal_v(sol) < HEALTHY[1]
    # a good wire: no measurable difference between its two ends (common practice)
    assert abs(sol.vdiff("S_SIG", "C_SIG")) < 1e-3


def test_unit_circuit_is_floating_without_the_bench(unit: UnitModel) -> None:
    # what the module docstring's on_bench() is for: the unit alone has no node 0
    with pytest.raises(CircuitError) as caught:
        solve(build_unit_circuit(unit).circuit)
    assert "floating" in str(caught.value)


def test_unit_circuit_is_left_for_the_caller_to_ground(unit: UnitModel) -> None:
    # documented: the fixture's bench-ground pin ties the unit to node 0, not the builder
    with pytest.raises(CircuitError, match="float"):
        solve(build_unit_circuit(unit).circuit)


def test_open_wire_is_the_leakage_resistance(unit: UnitModel) -> None:
    good, _ = solved(unit)
    built, sol = solved(unit, ["open:signal"])
    assert value(built, "wire:signal:a") == R_OPEN_OHM
    assert value(built, "wire:signal:b") == value(good, "wire:signal:b")  # other half untouched
    # an open signal wire reads near the pull-up voltage, a high/open-circuit fault
    assert signal_v(sol) > HIGH_FAULT_V
    ref = sol.vdiff("REF5", "C_GND")
    assert signal_v(sol) == pytest.approx(ref, abs=ref * 2490.0 / R_OPEN_OHM * 2)


def test_short_to_ground_pulls_the_midpoint_to_zero(unit: UnitModel) -> None:
    built, sol = solved(unit, ["short-ground:signal"])
    short = built.circuit.elements["fault:0"]
    assert short.value == R_SHORT_OHM
    assert set(short.nodes) == {"mid:signal", GROUND}
    # at most 5 V / 2.49 kohm flows into the 0.01 ohm short: under 0.1 mV
    assert abs(sol.v("mid:signal")) < 1e-4
    assert signal_v(sol) <= LOW_FAULT_V


def test_short_to_reference_pulls_the_midpoint_to_the_reference(unit: UnitModel) -> None:
    _, sol = solved(unit, ["short-ref:signal"])
    assert sol.vdiff("mid:signal", "REF5") == pytest.approx(0.0, abs=1e-4)
    assert signal_v(sol) > HIGH_FAULT_V


def test_short_to_feed_pulls_the_midpoint_to_the_feed(unit: UnitModel) -> None:
    _, sol = solved(unit, ["short-feed:signal"])
    # 12 V into the NTC (about 2.2 kohm) and back through the pull-up: some mA into 0.01 ohm
    assert sol.vdiff("mid:signal", "FEED12") == pytest.approx(0.0, abs=1e-3)
    assert signal_v(sol) == pytest.approx(12.0, abs=0.01)


def test_short_between_wires_joins_their_midpoints(unit: UnitModel) -> None:
    built, sol = solved(unit, ["short:signal,ground"])
    short = built.circuit.elements["fault:0"]
    assert set(short.nodes) == {"mid:signal", "mid:ground"}
    assert sol.vdiff("mid:signal", "mid:ground") == pytest.approx(0.0, abs=1e-4)
    assert signal_v(sol) <= LOW_FAULT_V


def test_series_adds_exactly_its_value(unit: UnitModel) -> None:
    good, good_sol = solved(unit)
    built, sol = solved(unit, ["series:ground=15ohm"])
    assert value(built, "wire:ground:a") - value(good, "wire:ground:a") == pytest.approx(
        15.0, rel=1e-12
    )
    assert value(built, "wire:ground:b") == value(good, "wire:ground:b")
    # seen from its ends, the wire is now its copper plus 15 ohm
    current = sol.i_resistor("wire:ground:a")
    assert sol.i_resistor("wire:ground:b") == pytest.approx(current, rel=1e-9)
    copper = value(good, "wire:ground:a") + value(good, "wire:ground:b")
    assert sol.vdiff("S_GND", "C_GND") / current == pytest.approx(copper + 15.0, rel=1e-9)
    # the shared load's return current now lifts the sensor ground by volts, not millivolts
    assert good_sol.vdiff("S_GND", "C_GND") < 0.02
    assert sol.vdiff("S_GND", "C_GND") > 1.0


def test_drift_scales_the_ntc_resistance(unit: UnitModel) -> None:
    good, good_sol = solved(unit)
    built, sol = solved(unit, ["drift:coolant=+8%"])
    sensor = unit.sensors["coolant"]
    assert isinstance(sensor, NtcSensor)
    assert sensor.r25_ohm is not None and sensor.beta_k is not None
    # Beta model R = R25 exp[beta (1/T - 1/T25)] (SOURCES.md, NTC thermistors), at the unit's
    # ambient of 23 degC
    t = unit.ambient_c + 273.15
    r_nominal = sensor.r25_ohm * math.exp(sensor.beta_k * (1 / t - 1 / 298.15))
    assert value(good, "ntc:coolant") == pytest.approx(r_nominal, rel=1e-12)
    assert value(built, "ntc:coolant") == pytest.approx(1.08 * r_nominal, rel=1e-12)
    assert signal_v(sol) > signal_v(good_sol)  # more resistance, a higher divider voltage


def test_negative_drift_lowers_the_signal(unit: UnitModel) -> None:
    good, good_sol = solved(unit)
    built, sol = solved(unit, ["drift:coolant=-20%"])
    assert value(built, "ntc:coolant") == pytest.approx(0.8 * value(good, "ntc:coolant"))
    assert signal_v(sol) < signal_v(good_sol)


def test_intermittent_opens_for_its_fraction_of_readings(unit: UnitModel) -> None:
    built, _ = solved(unit, ["intermittent:signal=0.3"])
    good_half = value(built, "wire:signal:a")
    assert built.intermittent == {"wire:signal:a": (0.3, good_half)}
    rng = np.random.default_rng(20240611)
    rolls = 4000
    opened = 0
    for _ in range(rolls):
        built.reroll_intermittent(rng)
        now = value(built, "wire:signal:a")
        assert now in (R_OPEN_OHM, good_half)
        opened += now == R_OPEN_OHM
    # binomial: 4 standard deviations of sqrt(p(1-p)/n) is about 0.029 here
    assert opened / rolls == pytest.approx(0.3, abs=4 * math.sqrt(0.3 * 0.7 / rolls))


def test_several_faults_at_once(unit: UnitModel) -> None:
    good, _ = solved(unit)
    built, sol = solved(unit, ["open:signal", "series:ground=15ohm", "drift:coolant=+8%"])
    assert value(built, "wire:signal:a") == R_OPEN_OHM
    assert value(built, "wire:ground:a") == pytest.approx(value(good, "wire:ground:a") + 15.0)
    assert value(built, "ntc:coolant") == pytest.approx(1.08 * value(good, "ntc:coolant"))
    assert signal_v(sol) > HIGH_FAULT_V


def test_faults_leave_the_unit_model_alone(unit: UnitModel) -> None:
    before, before_sol = solved(unit)
    solved(unit, ["open:signal", "short-ground:ground", "drift:coolant=+8%"])
    after, after_sol = solved(unit)
    assert dict(after.circuit.elements) == dict(before.circuit.elements)
    assert after_sol.voltages == before_sol.voltages
