"""How long each route of a plan takes to settle on a unit model, against the settle it states.

A first-order RC circuit is within ``exp(-t / tau)`` of its final value ``t`` after a step
(textbook RC settling); 1 ppm of the swing takes ``ln(1e6) = 13.8`` time constants.  The time
constant of a route is the slowest R*C of the unit's capacitors with R the resistance each one
sees through the closed relays and the meter's input (``CircuitProbe.time_constant``).  This is
what an engineer states ``settle`` from, and what ``rig check --unit`` prints.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from drivers.base import MeterFunction
from rig.analysis.bench_model import StaticBench
from rig.config.unit_file import UnitModel
from rig.plan import Plan
from rig.steps import KINDS

PPM_TIME_CONSTANTS = math.log(1e6)
"""Time constants to settle within 1 ppm of the swing (mathematics)."""


@dataclass(frozen=True)
class RouteSettling:
    step_id: str
    relays: frozenset[int]
    function: MeterFunction
    tau_s: float
    stated_s: float | None
    """The step's ``settle`` (None: not stated, so proved at run time)."""

    @property
    def needed_s(self) -> float:
        """Settled to 1 ppm of the swing."""
        return PPM_TIME_CONSTANTS * self.tau_s

    @property
    def short(self) -> bool:
        """A stated settle shorter than the circuit needs: readings would be taken too early."""
        return self.stated_s is not None and self.stated_s < self.needed_s


def route_settling(plan: Plan, unit: UnitModel) -> list[RouteSettling]:
    """Every meter route of the plan, in planned order, with its time constant on ``unit``."""
    bench = StaticBench(unit, plan.station.fixture, [])
    found = []
    for planned in plan.steps:
        spec = planned.spec
        function = KINDS[spec.kind].meter_function(spec)
        if function is None:
            continue
        for relays in planned.relay_sets:
            tau = bench.probe.time_constant(relays, function)
            found.append(RouteSettling(spec.id, relays, function, tau, spec.settle_s))
    return found
