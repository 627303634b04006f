"""The batched hypothesis circuit against the virtual bench's own circuit, and the one-parameter
closed form against the divider rule."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from bench_helpers import SEQUENCES, shipped_bench, shipped_plan

from rig.analysis.bench_model import Hypothesis, HypothesisBench, OneParameter
from rig.analysis.fault_set import single_faults
from rig.analysis.predict import SequencePredictor
from rig.config.unit_file import load_unit


def test_one_parameter_curve_is_the_divider_rule() -> None:
    # Divider rule (Ohm's law): V = Vs R2 / (R1 + R2); as a function of g1 = 1/R1 that is
    # Vs R2 g1 / (1 + R2 g1), which three samples must fix everywhere (handbook formula).
    vs, r2 = 5.0, 2490.0

    def volts(g1: np.ndarray) -> np.ndarray:
        return vs * r2 * g1 / (1 + r2 * g1)

    g = np.array([1 / 2000.0, 1 / 50.0, 1 / 1e5])
    y = volts(g)[:, None]
    curve = OneParameter.from_samples(g[0], y[0], g[1], y[1], g[2], y[2])
    others = 1 / np.array([0.01, 1.0, 330.0, 4.7e3, 1e6, 1e9])
    assert curve.readings(others)[:, 0] == pytest.approx(volts(others), rel=1e-9)


@pytest.mark.parametrize("unit_name", ["temp-circuit", "pressure-circuit"])
def test_batched_hypotheses_read_as_the_bench_circuit(tmp_path: Path, unit_name: str) -> None:
    # the reference is the virtual bench's circuit built for each fault on its own
    sequence = {"temp-circuit": "temp-circuit-check", "pressure-circuit": "pressure-circuit-check"}
    unit = load_unit(SEQUENCES / "units" / f"{unit_name}.toml")
    with shipped_bench(unit_name, folder=tmp_path) as (_, station):
        plan = shipped_plan(sequence[unit_name], station)
    faults = single_faults(unit, plan, series_ohm=7.5)
    predictor = SequencePredictor(plan, unit)
    conditions = [r.condition for r in predictor.run().readings]
    bench = HypothesisBench(
        unit, station.fixture, [f for f in faults if f.kind.startswith("short")]
    )
    batched = bench.readings([Hypothesis(f.kind, f.targets, f.value) for f in faults], conditions)
    for fault, row in zip(faults, batched, strict=True):
        alone = [r.value for r in predictor.run([fault]).readings]
        finite = np.isfinite(alone)
        # the bench's own readings go through the meter's overload; compare where it reads
        assert row[finite] == pytest.approx(np.array(alone)[finite], rel=1e-7, abs=1e-9), fault
