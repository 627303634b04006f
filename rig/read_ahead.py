"""Which of the next planned steps take the very reading the meter is set up for now.

When consecutive steps read the same route with the same meter setup and nothing moves between
them (no relay, no supply change), their readings can come from one query: the meter's sample
count set to all of them, one round trip instead of one each.  The readings are the same
integrations taken back to back, as the steps would take them one by one; only the controller's
round trips go.  Pure planning: no I/O here.
"""

from __future__ import annotations

from collections.abc import Collection, Sequence

from drivers.base import MeterFunction
from rig.plan import PlannedStep
from rig.steps import KINDS
from rig.steps.base import SupplyRequest

MAX_READINGS_AHEAD = 15
"""At most this many readings taken ahead in one query."""
MAX_SECONDS_AHEAD = 0.25
"""... and at most this much integration, so a stop or a listener waits no longer than that."""


def steps_ahead(
    steps: Sequence[PlannedStep],
    after: int,
    *,
    relays: frozenset[int],
    supply: SupplyRequest | None,
    function: MeterFunction,
    range_: float | None,
    nplc: float,
    line_hz: float,
    settle_s: float | None = None,
    skip: Collection[str] = (),
) -> list[str]:
    """Ids of the steps right after ``steps[after]`` that will each take one reading of
    ``function`` on ``relays`` at this range and NPLC with ``supply`` as it is, stating the same
    ``settle_s``, in order; the run stops at the first step that does anything else (or is in
    ``skip``: done already)."""
    found: list[str] = []
    seconds = 0.0
    per_reading = nplc / line_hz
    for planned in steps[after + 1 :]:
        spec = planned.spec
        kind = KINDS[spec.kind]
        if (
            kind.one_reading(spec) is None
            or spec.id in skip
            or len(planned.relay_sets) != 1
            or planned.relay_sets[0] != relays
            or spec.supply != supply
            or kind.meter_function(spec) is not function
            or planned.range_ != range_
            or spec.nplc != nplc
            or spec.settle_s != settle_s
            or len(found) + 1 >= MAX_READINGS_AHEAD
            or seconds + per_reading > MAX_SECONDS_AHEAD
        ):
            break
        found.append(spec.id)
        seconds += per_reading
    return found
