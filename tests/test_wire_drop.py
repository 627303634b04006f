"""The wire-drop step's computed drop: its uncertainty from two readings on one range of one
meter, and the note where it and the direct drop disagree, on the virtual bench."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from bench_helpers import shipped_bench

from rig.judge.accuracy import AccuracySpec
from rig.judge.decision import Verdict
from rig.judge.propagate import u_difference, u_difference_one_range
from rig.runner import load_plan, run_plan
from rig.store import ResultStore

# The virtual bench's 10 V DC range: +-(0.0035 % of reading + 0.0005 % of range), an invented
# spec (rig/sim/bench.py).
TEN_V = AccuracySpec(0.0035, 0.0005)


def test_u_of_a_difference_on_one_range_against_a_meter_drawn_at_random() -> None:
    # The model the step states, drawn by Monte Carlo (JCGM 101:2008 style, our own draw): one
    # gain error common to both readings, uniform within +-p %; a range part drawn afresh for
    # each reading, uniform within +-q % of range (GUM 4.3.7 reads a bound as rectangular).
    a, b, range_ = 4.998, 4.994, 10.0
    rng = np.random.default_rng(7)
    n = 400_000
    gain = rng.uniform(-1.0, 1.0, n) * TEN_V.pct_reading / 100.0
    part = TEN_V.pct_range / 100.0 * range_
    drop = (
        a * (1 + gain)
        + rng.uniform(-part, part, n)
        - (b * (1 + gain) + rng.uniform(-part, part, n))
    )
    u = u_difference_one_range(a, b, TEN_V, range_)
    assert u == pytest.approx(float(drop.std()), rel=0.01)
    # By hand (GUM 5.1.2 with the gain as one shared input): the gain part is p % of the 4 mV
    # drop, 8.1e-8 V; the range parts 5e-5 V / sqrt 3 each, in quadrature.
    by_hand = math.hypot(0.0035e-2 * 0.004 / math.sqrt(3), math.sqrt(2) * 5e-5 / math.sqrt(3))
    assert u == pytest.approx(by_hand, rel=1e-12)
    assert u == pytest.approx(4.08e-5, rel=0.01)
    # readings of opposite sign: the common gain error no longer cancels, it adds (a - b)
    assert u_difference_one_range(1.0, -1.0, TEN_V, range_) == pytest.approx(
        math.hypot(0.0035e-2 * 2.0 / math.sqrt(3), math.sqrt(2) * 5e-5 / math.sqrt(3))
    )


SEQUENCE = """\
# A test sequence, invented for the test: the signal wire's drop on the 1 V range.
[sequence]
name = "one-drop"
reorder = false

[[steps]]
id = "drop"
kind = "wire-drop"
from = "P_SIG"
to = "C_PSIG"
reference = "CHASSIS"
max = "50 mV"
"""


def test_a_corroded_pin_shows_as_a_disagreement_the_meter_cannot_explain(tmp_path: Path) -> None:
    # The pressure demo unit (invented values): the sensor drives P_SIG through 100 ohm, the
    # controller end C_PSIG has a 47 kohm pull-down.  A 740 ohm contact at the signal wire's
    # sensor end drops about 20 mV (within the 50 mV limit: the direct reading passes).  Reading
    # the controller end against chassis, the meter's 10 Mohm input draws about 0.13 uA back
    # through the contact, some 0.1 mV the direct reading across the wire does not see (the
    # bench reads 99 uV).  The two reference readings are near 1.3 V on the 10 V range, so the
    # computed drop's u is nearly the range parts' alone, 5e-5 V / sqrt 3 * sqrt 2 = 4.1e-5 V,
    # and U with the direct reading's 8.2e-5 V: the note is given.  The correlation of 0.5
    # assumed before gave u = 5.5e-5 V, U = 1.1e-4 V, and no note.
    path = tmp_path / "one-drop.toml"
    path.write_text(SEQUENCE)
    faults = ("series:signal=740ohm",)
    with shipped_bench("pressure-circuit", faults, folder=tmp_path) as (_, station):
        summary = run_plan(load_plan(path, station), "SN-1", operator="test", ask=lambda t: True)
    result = summary.results[0]
    direct, computed = result.value, result.extras["computed_drop_v"]
    u_computed = result.extras["computed_drop_u_v"]
    store = ResultStore(station.store_path)
    try:
        kept = {r["role"]: r for r in store.readings(summary.run_id, "drop")}
    finally:
        store.close()
    at_from, at_to = kept["from-reference"], kept["to-reference"]
    assert at_from["range"] == at_to["range"] == 10.0
    assert computed == pytest.approx(at_from["value"] - at_to["value"], abs=1e-12)
    gain_part = 0.0035e-2 * abs(computed) / math.sqrt(3)
    assert u_computed == pytest.approx(
        math.hypot(gain_part, math.sqrt(2) * 5e-5 / math.sqrt(3)), rel=1e-9
    )
    new_expanded = 2.0 * math.hypot(result.u_std, u_computed)
    old_u = u_difference(at_from["u_std"], at_to["u_std"], correlation=0.5)
    old_expanded = 2.0 * math.hypot(result.u_std, old_u)
    assert new_expanded < abs(direct - computed) < old_expanded
    assert result.verdict is Verdict.PASS
    assert result.note.startswith("direct and computed drops disagree"), result.note
