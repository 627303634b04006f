"""The Monte Carlo of good units: against the GUM law of propagation, against full circuit solves,
and against the step kinds' own values."""

from __future__ import annotations

import dataclasses
import math
from pathlib import Path

import numpy as np
import pytest

from rig.analysis.bench_model import StaticBench
from rig.analysis.good_units import GoodUnitSampler, _ntc_r
from rig.analysis.montecarlo import SequenceMonteCarlo
from rig.analysis.predict import SequencePredictor
from rig.analysis.reading_model import (
    PortModel,
    circuit_ports,
    meter_shows,
    port_values,
    prepared_circuit,
)
from rig.circuit import solve_batch
from rig.commands.limits import load_station_or_virtual
from rig.config.sequence import load_sequence
from rig.config.unit_file import NtcSensor, RatiometricSensor, UnitModel, load_unit
from rig.judge.accuracy import AccuracySpec, AccuracyTable
from rig.models.ntc import BetaNtc
from rig.plan import Plan, build_plan

SEQUENCES = Path(__file__).resolve().parent.parent / "sequences"
SHIPPED = [
    ("temp-circuit-check", "temp-circuit"),
    ("pressure-circuit-check", "pressure-circuit"),
    ("ntc-sender-screen", "ntc-sender"),
]

DIVIDER_FIXTURE = """\
[fixture]
name = "divider-fixture"
relay_count = 4
max_closed = 4

[pins.SIG]
connector = "J1"
dmm_hi = 1

[pins.RET]
connector = "J1"
dmm_lo = 2
bench_ground = true
"""

DIVIDER_UNIT = """\
# A test divider; every value is invented for the test.
[unit]
name = "divider"
fixture = "fixture.toml"

[controller]
ground = "RET"

[controller.sources.reference]
node = "REF"
voltage = "5.0 V"
tolerance = "0.5 %"

[resistors.upper]
between = ["REF", "SIG"]
value = "2.49 kohm"
tolerance = "1 %"

[resistors.lower]
between = ["SIG", "RET"]
value = "2.0 kohm"
tolerance = "2 %"
"""

DIVIDER_SEQUENCE = """\
[sequence]
name = "divider-check"

[[steps]]
id = "divider"
kind = "volts"
hi = "SIG"
lo = "RET"
low = "0.6 V"
high = "4.8 V"
"""


def shipped_plan(sequence: str, unit_name: str) -> tuple[Plan, UnitModel]:
    unit = load_unit(SEQUENCES / "units" / f"{unit_name}.toml")
    station = load_station_or_virtual(None, unit)
    return build_plan(load_sequence(SEQUENCES / f"{sequence}.toml"), station), unit


def divider_plan(folder: Path) -> tuple[Plan, UnitModel]:
    (folder / "fixture.toml").write_text(DIVIDER_FIXTURE)
    (folder / "unit.toml").write_text(DIVIDER_UNIT)
    (folder / "sequence.toml").write_text(DIVIDER_SEQUENCE)
    unit = load_unit(folder / "unit.toml")
    station = load_station_or_virtual(None, unit)
    return build_plan(load_sequence(folder / "sequence.toml"), station), unit


def test_divider_against_gum_first_order_propagation(tmp_path: Path) -> None:
    """Mean and standard deviation of a divider voltage against the law of propagation of
    uncertainty, u_c^2 = sum (df/dx_i)^2 u^2(x_i) (JCGM 100:2008, GUM 5.1.2), with each ± bound
    taken as rectangular, u = a/sqrt(3) (GUM 4.3.7)."""
    plan, unit = divider_plan(tmp_path)
    predictor = SequencePredictor(plan, unit)
    n = 200_000
    result = SequenceMonteCarlo(plan, unit, predictor.run()).run(n, seed=7)
    values = result.steps[0].values

    # The reading: V = Vref Rp / (R1 + Rp), Rp = R2 parallel to the DMM's 10 Mohm input and the
    # 100 Gohm isolation of its HI bus (the virtual bench's front end); the two 0.05 ohm relay
    # contacts in series with 10 Mohm are below 1e-8 of the reading and left out.
    r_in = 1.0 / (1.0 / 10e6 + 1.0 / 1e11)

    def f(x: np.ndarray) -> float:
        v_ref, r1, r2 = x
        rp = r2 * r_in / (r2 + r_in)
        return float(v_ref * rp / (r1 + rp))

    x0 = np.array([5.0, 2490.0, 2000.0])
    u = x0 * np.array([0.005, 0.01, 0.02]) / math.sqrt(3.0)
    grad = np.zeros(3)
    curvature = 0.0
    for i in range(3):
        step = np.zeros(3)
        step[i] = x0[i] * 1e-4
        grad[i] = (f(x0 + step) - f(x0 - step)) / (2 * step[i])
        second = (f(x0 + step) - 2 * f(x0) + f(x0 - step)) / step[i] ** 2
        curvature += 0.5 * second * u[i] ** 2  # second-order term of the mean (Taylor)
    # the meter: the 10 V range the planner fixes, +-(0.0035 % of reading + 0.0005 % of range),
    # the virtual bench's figures, rectangular (GUM 4.3.7)
    a_meter = (0.0035 * f(x0) + 0.0005 * 10.0) / 100.0
    u_c = math.sqrt(float(np.sum((grad * u) ** 2)) + (a_meter / math.sqrt(3.0)) ** 2)

    mean, sd = float(np.mean(values)), float(np.std(values, ddof=1))
    kurtosis = float(np.mean((values - mean) ** 4) / sd**4)
    # sampling error of the mean: sd/sqrt(N); of the sd: sd sqrt((kurtosis - 1)/(4N))
    assert abs(mean - (f(x0) + curvature)) <= 4 * sd / math.sqrt(n)
    # first order neglects terms of relative size u_rel^2 ~ 1e-4 in the variance
    assert abs(sd - u_c) <= 4 * sd * math.sqrt((kurtosis - 1) / (4 * n)) + 1e-4 * u_c
    # and the check can fail: leaving out the 2 % resistor's share is far outside the band
    u_without = math.sqrt(float(np.sum((grad[:2] * u[:2]) ** 2)))
    assert abs(sd - u_without) > 0.05 * u_c


@pytest.mark.parametrize(("sequence", "unit_name"), SHIPPED)
def test_port_model_equals_full_solve(sequence: str, unit_name: str) -> None:
    """The Woodbury form of each reading against solve_batch on the whole circuit (the solver is
    itself checked against ngspice in test_circuit_ngspice.py)."""
    plan, unit = shipped_plan(sequence, unit_name)
    nominal = SequencePredictor(plan, unit).run()
    sampler = GoodUnitSampler(unit)
    drawn = sampler.sample(np.random.default_rng(3), 400)
    bench = StaticBench(unit, plan.station.fixture, [])
    checked = 0
    for reading in nominal.readings:
        function = reading.condition.function
        if function is None:
            continue
        circuit = prepared_circuit(bench, reading.condition)
        sources = [k for k in drawn.values if k.startswith("src:")]
        ports = circuit_ports(circuit, [k for k in drawn.values if k not in sources])
        model = PortModel.build(circuit, ports, sources, function, reading.condition.test_current_a)
        fast = model.evaluate(drawn.values, drawn.n)
        overrides = {}
        for name, values in drawn.values.items():
            if name in circuit.elements:
                overrides[name] = values
            elif name.startswith("wire:"):
                overrides[f"{name}:a"] = overrides[f"{name}:b"] = values / 2
        full = solve_batch(circuit, overrides)
        reference = meter_shows(full, function, reading.condition.test_current_a)
        assert abs(model.m0 - reading.value) <= 1e-9 * max(abs(reading.value), 1e-3)
        np.testing.assert_allclose(fast, reference, rtol=1e-9, atol=1e-12)
        # leaving negligible elements out stays far inside the meter's uncertainty
        pruned = model.pruned(drawn, 1e-4 * reading.u_std)
        assert np.max(np.abs(pruned.evaluate(drawn.values, drawn.n) - reference)) <= (
            3e-4 * reading.u_std + 1e-12
        )
        assert port_values(ports, drawn.values)[0].shape == (drawn.n,)
        checked += 1
    assert checked >= 3


def _without_tolerances(unit: UnitModel) -> UnitModel:
    bare = dataclasses.replace(unit, ambient_range_c=None)
    bare.wires = {
        k: dataclasses.replace(w, length_tolerance_pct=0.0, area_tolerance_pct=0.0)
        for k, w in unit.wires.items()
    }
    bare.resistors = {
        k: dataclasses.replace(r, tolerance_pct=0.0) for k, r in unit.resistors.items()
    }
    bare.sensors = {}
    for name, sensor in unit.sensors.items():
        if isinstance(sensor, NtcSensor):
            sensor = dataclasses.replace(sensor, r25_tolerance_pct=0.0, beta_tolerance_pct=0.0)
        elif isinstance(sensor, RatiometricSensor):
            sensor = dataclasses.replace(sensor, fraction_tolerance_pct=0.0)
        bare.sensors[name] = sensor
    if unit.probe is not None:
        bare.probe = dataclasses.replace(unit.probe, tolerance_class=None)
    if unit.controller is not None:
        bare.controller = dataclasses.replace(
            unit.controller,
            sources=[dataclasses.replace(s, tolerance_pct=0.0) for s in unit.controller.sources],
        )
    return bare


@pytest.mark.parametrize(("sequence", "unit_name"), SHIPPED)
def test_step_values_equal_the_step_kinds_on_a_unit_without_spread(
    sequence: str, unit_name: str
) -> None:
    """With no tolerance and an exact meter every drawn unit is the nominal one, so each step's
    value must be what the step kind itself computes for it (the predictor runs the kinds)."""
    plan, unit = shipped_plan(sequence, unit_name)
    exact = AccuracyTable(
        {
            f: [(r, AccuracySpec(0.0, 0.0)) for r in plan.station.dmm_accuracy.ranges(f)]
            for f in ("dcv", "res2w", "res4w", "dci")
        }
    )
    plan.station = dataclasses.replace(plan.station, dmm_accuracy=exact)
    for planned in plan.steps:  # a stated temperature or pressure taken as exact, too
        planned.spec.params.pop("pressure_u_pa", None)
        planned.spec.params.pop("temperature_u_k", None)
    bare = _without_tolerances(unit)
    nominal = SequencePredictor(plan, bare).run()
    result = SequenceMonteCarlo(plan, bare, nominal).run(50, seed=1)
    by_id = {p.step_id: p.value for p in nominal.steps}
    assert result.steps
    for dist in result.steps:
        np.testing.assert_allclose(dist.values, by_id[dist.spec.id], rtol=1e-9, atol=1e-12)


def test_drawn_parts_stay_inside_their_tolerance_and_spread_as_uniform() -> None:
    """A uniform draw on ±a has standard deviation a/sqrt(3) (GUM 4.3.7)."""
    unit = load_unit(SEQUENCES / "units" / "temp-circuit.toml")
    n = 100_000
    drawn = GoodUnitSampler(unit).sample(np.random.default_rng(5), n)
    pullup = drawn.values["res:pullup"]
    assert pullup.min() >= 2490 * 0.99 and pullup.max() <= 2490 * 1.01
    expected_sd = 2490 * 0.01 / math.sqrt(3)
    # sd of a sample sd for a uniform (kurtosis 1.8): sd sqrt(0.8 / (4N))
    assert abs(np.std(pullup) - expected_sd) <= 4 * expected_sd * math.sqrt(0.8 / (4 * n))
    assert drawn.ambient_c.min() >= 15.0 and drawn.ambient_c.max() <= 35.0


def test_drawn_ntc_is_the_beta_model_with_the_drawn_r25_and_beta() -> None:
    unit = load_unit(SEQUENCES / "units" / "temp-circuit.toml")
    sensor = unit.sensors["coolant"]
    temps = np.array([-20.0, 0.0, 25.0, 60.0, 110.0])

    def spread(pct: float) -> np.ndarray:
        return np.full(len(temps), 1 + pct / 100)

    drawn = _ntc_r(sensor, temps, spread)  # type: ignore[arg-type]
    # r25 +2 %, beta +1 % (the unit file's tolerances) through the model itself
    reference = BetaNtc(2000.0 * 1.02, 3450.0 * 1.01).r_at(temps)
    np.testing.assert_allclose(drawn, reference, rtol=1e-12)
