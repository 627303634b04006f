"""Step order for fewest relay operations: greedy nearest neighbour, in time that stays flat.

Inside each stretch between barriers (operator prompts, soaks), the next step is the ready one
(its dependencies done) whose first route is reached from the relays closed now with the fewest
relay operations; ties go to the step that comes first in the file.  Done naively, every pick looks
at every pending step, which makes planning 5,000 steps take minutes.  Here ready steps are grouped
by their first relay set, groups are indexed by the relays they hold and by size, and a pick looks
only at the groups that share a relay with the present route, plus the smallest other group: a
group sharing nothing costs ``len(current) + len(group)``, so the smallest is the best of them.

Greedy is myopic about where it starts (from all open, the smallest route wins), so a short
stretch (up to ``MULTI_START`` steps) is ordered once from each ready step and the cheapest order
by the caller's cost is kept.
"""

from __future__ import annotations

import heapq
from collections import defaultdict
from collections.abc import Callable, Iterable
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from rig.plan import PlannedStep

NO_RELAYS: frozenset[int] = frozenset()
MULTI_START = 32
"""Stretches up to this many steps are tried from every possible first step."""

Cost = Callable[[list["PlannedStep"], frozenset[int]], tuple[int, float]]
"""The cost of an order from the relays closed before it: (relay operations, switching time)."""


class _ReadySteps:
    """Ready steps grouped by first relay set, each group in file order."""

    def __init__(self) -> None:
        self.groups: dict[frozenset[int], list[tuple[int, PlannedStep]]] = {}
        self.by_relay: dict[int, set[frozenset[int]]] = defaultdict(set)
        self.by_size: list[tuple[int, int, tuple[int, ...]]] = []
        """(size, earliest position, sorted relays): lazily pruned."""

    def __bool__(self) -> bool:
        return bool(self.groups)

    def add(self, position: int, step: PlannedStep) -> None:
        key = step.relay_sets[0] if step.relay_sets else NO_RELAYS
        group = self.groups.setdefault(key, [])
        heapq.heappush(group, (position, step))
        for relay in key:
            self.by_relay[relay].add(key)
        if group[0][0] == position:
            heapq.heappush(self.by_size, (len(key), position, tuple(sorted(key))))

    def pick(self, current: frozenset[int]) -> PlannedStep:
        """Take the ready step cheapest to reach from ``current`` (earliest in file on a tie)."""
        best: tuple[int, int, frozenset[int]] | None = None
        shared = {key for relay in current for key in self.by_relay.get(relay, ())}
        if NO_RELAYS in self.groups:
            shared.add(NO_RELAYS)  # a step with no route costs nothing
        smallest = self._smallest()
        for key in shared if smallest is None else shared | {smallest}:
            cost = len(current ^ key) if key else 0
            candidate = (cost, self.groups[key][0][0], key)
            best = candidate if best is None or candidate < best else best
        assert best is not None, "pick() on no ready steps"
        return self._take(best[2])

    def take(self, step: PlannedStep) -> PlannedStep:
        """Take this ready step, whatever it costs."""
        key = step.relay_sets[0] if step.relay_sets else NO_RELAYS
        group = self.groups[key]
        group.remove(next(e for e in group if e[1] is step))
        heapq.heapify(group)
        self._settle_group(key)
        return step

    def _smallest(self) -> frozenset[int] | None:
        while self.by_size:
            _, position, relays = self.by_size[0]
            key = frozenset(relays)
            group = self.groups.get(key)
            if group and group[0][0] == position:
                return key
            heapq.heappop(self.by_size)  # stale: the group moved on or is empty
        return None

    def _take(self, key: frozenset[int]) -> PlannedStep:
        _, step = heapq.heappop(self.groups[key])
        self._settle_group(key)
        return step

    def _settle_group(self, key: frozenset[int]) -> None:
        """After a step left the group: index its new first step, or drop the empty group."""
        group = self.groups[key]
        if group:
            heapq.heappush(self.by_size, (len(key), group[0][0], tuple(sorted(key))))
        else:
            del self.groups[key]
            for relay in key:
                self.by_relay[relay].discard(key)


def order_segment(
    segment: list[PlannedStep],
    current: frozenset[int],
    done: set[str],
    first: PlannedStep | None = None,
) -> tuple[list[PlannedStep], frozenset[int]]:
    """Order one stretch between barriers (starting with ``first`` when given, which must be
    ready); returns it and the relays closed at its end."""
    position = {id(step): n for n, step in enumerate(segment)}
    ids = {step.spec.id for step in segment}
    waiting: dict[str, int] = {}
    dependents: dict[str, list[PlannedStep]] = defaultdict(list)
    ready = _ReadySteps()
    for step in segment:
        unmet = [d for d in step.spec.depends_on if d not in done and d in ids]
        for dependency in unmet:
            dependents[dependency].append(step)
        if unmet:
            waiting[step.spec.id] = len(unmet)
        else:
            ready.add(position[id(step)], step)
    ordered: list[PlannedStep] = []
    while len(ordered) < len(segment):
        if not ready:  # cannot happen after validation; keep file order
            first = min((s for s in segment if s.spec.id in waiting), key=lambda s: position[id(s)])
            del waiting[first.spec.id]
            ready.add(position[id(first)], first)
        step = ready.take(first) if first is not None and not ordered else ready.pick(current)
        ordered.append(step)
        done.add(step.spec.id)
        if step.relay_sets:
            current = step.relay_sets[-1]
        for later in dependents.pop(step.spec.id, ()):
            if later.spec.id in waiting:
                waiting[later.spec.id] -= 1
                if waiting[later.spec.id] == 0:
                    del waiting[later.spec.id]
                    ready.add(position[id(later)], later)
    return ordered, current


def best_of_starts(
    segment: list[PlannedStep], current: frozenset[int], done: set[str], cost: Cost
) -> tuple[list[PlannedStep], frozenset[int]]:
    """The cheapest of the greedy orders from each possible first step (file order on a tie)."""
    ids = {s.spec.id for s in segment}
    starts = [s for s in segment if all(d in done or d not in ids for d in s.spec.depends_on)]
    best: tuple[tuple[int, float], list[PlannedStep], frozenset[int]] | None = None
    for start in starts:
        trial, end = order_segment(segment, current, set(done), first=start)
        price = cost(trial, current)
        if best is None or price < best[0]:
            best = (price, trial, end)
    if best is None:
        return order_segment(segment, current, done)
    done.update(ids)
    return best[1], best[2]


def order_steps(steps: Iterable[PlannedStep], cost: Cost | None = None) -> list[PlannedStep]:
    """Reorder within each stretch between barriers; barriers stay where they are.  With
    ``cost``, short stretches are tried from every first step (see ``MULTI_START``)."""
    ordered: list[PlannedStep] = []
    current: frozenset[int] = frozenset()
    done: set[str] = set()
    segment: list[PlannedStep] = []

    def order(part: list[PlannedStep]) -> tuple[list[PlannedStep], frozenset[int]]:
        if cost is not None and 1 < len(part) <= MULTI_START:
            return best_of_starts(part, current, done, cost)
        return order_segment(part, current, done)

    for step in steps:
        if step.spec.barrier:
            part, current = order(segment)
            ordered += [*part, step]
            done.add(step.spec.id)
            segment = []
        else:
            segment.append(step)
    part, _ = order(segment)
    return ordered + part
