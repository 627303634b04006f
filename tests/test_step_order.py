"""The fast step order picks exactly what the plain greedy nearest neighbour picks.

The reference below is the straightforward greedy (every pick looks at every pending step: the
cheapest ready step from the relays closed now, the earliest in file on a tie), as the planner
had it before; the indexed version must give the same order on random sequences with shared
routes, steps without routes, dependencies and barriers.
"""

from __future__ import annotations

import random
from pathlib import Path

import pytest
from bench_helpers import shipped_bench, shipped_plan

from rig.plan import PlannedStep
from rig.step_order import order_steps
from rig.steps import StepSpec


def reference_order(steps: list[PlannedStep]) -> list[PlannedStep]:
    ordered: list[PlannedStep] = []
    current: frozenset[int] = frozenset()
    done: set[str] = set()
    segment: list[PlannedStep] = []

    def cost(step: PlannedStep) -> int:
        return len(current ^ step.relay_sets[0]) if step.relay_sets else 0

    def flush() -> None:
        nonlocal current
        pending = list(segment)
        while pending:
            ready = [p for p in pending if all(d in done for d in p.spec.depends_on)]
            best = min(ready or pending[:1], key=cost)
            pending.remove(best)
            ordered.append(best)
            done.add(best.spec.id)
            if best.relay_sets:
                current = best.relay_sets[-1]
        segment.clear()

    for step in steps:
        if step.spec.barrier:
            flush()
            ordered.append(step)
            done.add(step.spec.id)
        else:
            segment.append(step)
    flush()
    return ordered


def random_steps(rng: random.Random, count: int) -> list[PlannedStep]:
    routes = [frozenset(rng.sample(range(1, 25), rng.randint(2, 4))) for _ in range(8)]
    steps: list[PlannedStep] = []
    for n in range(count):
        barrier = rng.random() < 0.05
        relay_sets = [] if barrier or rng.random() < 0.1 else rng.sample(routes, rng.randint(1, 3))
        earlier = [s.spec.id for s in steps if not s.spec.barrier]
        depends = tuple(rng.sample(earlier, 1)) if earlier and rng.random() < 0.15 else ()
        spec = StepSpec(f"s{n}", "volts", "", f"steps[{n}]", depends_on=depends, barrier=barrier)
        steps.append(PlannedStep(spec, relay_sets, None))
    return steps


@pytest.mark.parametrize("seed", range(40))
def test_fast_order_equals_the_plain_greedy(seed: int) -> None:
    rng = random.Random(seed)
    steps = random_steps(rng, rng.randint(1, 60))
    fast = [s.spec.id for s in order_steps(steps)]
    assert fast == [s.spec.id for s in reference_order(steps)]
    assert sorted(fast) == sorted(s.spec.id for s in steps)


def test_a_short_stretch_is_tried_from_every_first_step(tmp_path: Path) -> None:
    # Greedy from all open starts on the smallest route (signal-at-controller, 2 relays) and ends
    # at 28 relay operations, as file order does.  Starting on the Pt100 (relays 5-8), worked by
    # hand from the demo fixture: open -> {5,6,7,8} 4; -> {13,16} 6; curve on {13,16} 0;
    # -> {9,12} 4; wire drop {9,14} 2, {9,32} 2, {13,32} 2; -> {11,32} 2; open 2 = 24.
    with shipped_bench("temp-circuit", folder=tmp_path) as (_, station):
        plan = shipped_plan("temp-circuit-check", station)
    assert plan.relay_ops_file_order() == 28
    assert plan.relay_ops == 24
    assert [p.spec.id for p in plan.steps][:3] == [
        "ambient",
        "signal-at-controller",
        "signal-vs-curve",
    ]
