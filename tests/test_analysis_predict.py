"""The solver's prediction of a sequence against the virtual bench running it for real (pyvisa-py
over TCP, pyserial on a pty, instant timing): same verdicts, values within the meter's uncertainty.
The reference is the bench run itself; its meter noise is well inside the stated uncertainty."""

from __future__ import annotations

import math
from pathlib import Path

import pytest
from bench_helpers import SEQUENCES, shipped_bench, shipped_plan

from rig.analysis.predict import SequencePredictor
from rig.config.unit_file import load_unit
from rig.errors import ConfigError
from rig.faults import parse_faults
from rig.runner import run_plan
from rig.store import ResultStore

CASES = [
    (),
    ("open:signal",),
    ("short-ground:signal",),
    ("series:ground=0.15ohm",),
    ("drift:coolant=+8%",),
    ("short-feed:ground",),
    ("short:signal,ground",),
]


def test_prediction_matches_the_virtual_bench(tmp_path: Path) -> None:
    unit = load_unit(SEQUENCES / "units" / "temp-circuit.toml")
    with shipped_bench("temp-circuit", folder=tmp_path) as (bench, station):
        plan = shipped_plan("temp-circuit-check", station)
        predictor = SequencePredictor(plan, unit)
        store = ResultStore(tmp_path / "runs.sqlite")
        for specs in CASES:
            faults = parse_faults(list(specs), unit)
            bench.set_faults(faults)
            ran = run_plan(plan, "SN-P", ask=lambda t: True, store=store)
            predicted = predictor.predict(faults)
            assert [p.step_id for p in predicted] == [r.step_id for r in ran.results]
            for got, want in zip(predicted, ran.results, strict=True):
                assert got.verdict is want.verdict, (specs, got.step_id)
                if math.isinf(want.value):
                    assert got.value == want.value, (specs, got.step_id)
                    continue
                # the expanded uncertainty (k = 2, JCGM 100:2008 6.2) bounds the meter's noise
                assert got.value == pytest.approx(want.value, abs=want.expanded_u), (
                    specs,
                    got.step_id,
                )
                assert got.expanded_u == pytest.approx(want.expanded_u, rel=0.05)
        store.close()


def test_intermittent_faults_are_refused_with_a_clear_error(tmp_path: Path) -> None:
    unit = load_unit(SEQUENCES / "units" / "temp-circuit.toml")
    with shipped_bench("temp-circuit", folder=tmp_path) as (_, station):
        plan = shipped_plan("temp-circuit-check", station)
    with pytest.raises(ConfigError, match="intermittent"):
        SequencePredictor(plan, unit).predict(parse_faults(["intermittent:signal=0.3"], unit))
