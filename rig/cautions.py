"""The cautions said before bench work, and which of them a run of given sequences needs.

One decision for every front end: ``rig run``, ``rig harness check|capture`` and the console all
ask ``cautions_for`` what to show, so a harness sequence gets the harness caution and a screen of
a sensor in a hot well gets the well's wherever it is started.  Pure: no I/O here.
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # the command line imports the texts at start; the plan's modules when asked
    from rig.plan import Plan

CAUTION = (
    "Caution: bench work on vehicle and machine electrics can burn, shock or start fires. "
    "Disconnect batteries and supplies before changing connections, keep supply current limits "
    "low, never probe mains, and follow local codes and licensed practice."
)
HARNESS_CAUTION = (
    "Caution: test harnesses off the vehicle or machine, never on live circuits: disconnect "
    "batteries and supplies first, and never probe mains; bench work on vehicle and machine "
    "electrics can burn, shock or start fires. The DMM's ohms test current is small (about 1 mA "
    "or less); keep it that way, and follow local codes and licensed practice."
)
"""The general caution (``CAUTION``) with what a harness adds, so that the two are not said
back to back."""
WELL_CAUTION = (
    "Caution: a heated well or liquid bath burns: let the sensor cool, or lift it with tongs and "
    "heat-resistant gloves; keep water away from hot oil and the bath's own cut-out working."
)
"""Said too before a screen that reads a temperature reference (a sensor in a well or bath)."""


def proves_a_harness(plan: Plan) -> bool:
    """Whether the sequence proves or captures a harness rather than screening a unit."""
    from rig.screening import is_screen
    from rig.steps import KINDS

    return not is_screen(KINDS[p.spec.kind].unit for p in plan.steps)


def reads_a_well(plan: Plan) -> bool:
    """Whether a screen judges a sensor at a temperature its reference reads: the sensor may
    sit in a heated well or bath (a harness proof reads only the room's)."""
    sensor = any(p.spec.kind in ("ntc", "rtd") for p in plan.steps)
    return sensor and plan.reads_reference_probe and not proves_a_harness(plan)


def cautions_for(plans: Iterable[Plan]) -> list[str]:
    """The cautions to say before runs of ``plans`` (one sequence for ``rig run``, every
    sequence offered for the console): the harness caution where any proves a harness (it holds
    the general one), else the general; then the well's where any screen reads a well."""
    plans = list(plans)
    first = HARNESS_CAUTION if any(proves_a_harness(p) for p in plans) else CAUTION
    return [first, WELL_CAUTION] if any(reads_a_well(p) for p in plans) else [first]
