"""Isolation by group testing: which nets of a harness are joined, in few readings (pure).

Nets are numbered 0..n-1.  One reading ties a set of nets to DMM HI and another set to DMM LO
(the rest float) and returns the resistance between the two sets; ``read(hi, lo)`` is supplied by
the caller (the bench, or a circuit model), so this module does no I/O.

Why a reading proves anything: the conductance between two tied sets is at least the sum of the
direct pair conductances across them (Rayleigh monotonicity: removing every other path can only
lower it), so a reading ``R`` proves every pair it separates is isolated by at least ``R``.  The
leakage of many pairs in parallel therefore only ever makes a reading *lower*: the pass test
``R >= threshold`` stays sound however many pairs one reading holds, and where the parallel leakage
alone drags a reading below the threshold, splitting the sets (fewer pairs per reading) proves the
parts.  A reading below ``threshold / pairs`` proves at least one pair below the threshold.

The plan: net ``i`` is on HI in cut ``j`` when bit ``j`` of ``i`` is 1; ``ceil(log2 n)`` cuts
separate every pair.  A cut that fails is split (both halves read) down to one net on HI and one
net on LO; each such pair is a join, the two nets are merged into one group (which then always sits
on one side), and the cut is read again until it passes.  Every located join costs at most
``4 ceil(log2 n)`` readings.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field

import numpy as np

Reader = Callable[[frozenset[int], frozenset[int]], float]
"""``read(hi_nets, lo_nets) -> ohm``; ``math.inf`` for an overload (above the meter's range)."""


@dataclass(frozen=True)
class IsolationReading:
    hi: frozenset[int]
    lo: frozenset[int]
    r_ohm: float
    purpose: str
    """``cut 2``, ``split``, ``pair``: why the reading was taken."""


@dataclass(frozen=True)
class Join:
    """Two nets found joined: the reading with one on HI and the other on LO (others floating)."""

    a: int
    b: int
    r_ohm: float


@dataclass
class IsolationResult:
    n: int
    threshold_ohm: float
    readings: list[IsolationReading] = field(default_factory=list)
    joins: list[Join] = field(default_factory=list)
    groups: list[frozenset[int]] = field(default_factory=list)
    """Sets of two or more nets found electrically joined (connected through the joins)."""
    proven_ohm: float = math.inf
    """Every pair of nets in different groups is isolated by at least this much."""
    certain_fault: bool = False
    """Some reading was below threshold / pairs: a fault is proven even before locating."""

    @property
    def passed(self) -> bool:
        return not self.joins


def cut_count(n: int) -> int:
    """ceil(log2 n): the cuts that binary labels need so that every pair is separated."""
    return max(0, math.ceil(math.log2(n))) if n > 1 else 0


def cut_sides(n: int, j: int) -> tuple[frozenset[int], frozenset[int]]:
    """Cut ``j``: nets with bit ``j`` set on HI, the others on LO."""
    hi = frozenset(i for i in range(n) if (i >> j) & 1)
    return hi, frozenset(range(n)) - hi


class _Groups:
    """Union-find over nets; a group's label is its smallest net, so labels stay distinct."""

    def __init__(self, n: int) -> None:
        self.parent = list(range(n))

    def find(self, i: int) -> int:
        while self.parent[i] != i:
            self.parent[i] = self.parent[self.parent[i]]
            i = self.parent[i]
        return i

    def union(self, a: int, b: int) -> bool:
        ra, rb = self.find(a), self.find(b)
        if ra == rb:
            return False
        self.parent[max(ra, rb)] = min(ra, rb)
        return True

    def members(self) -> dict[int, list[int]]:
        found: dict[int, list[int]] = {}
        for i in range(len(self.parent)):
            found.setdefault(self.find(i), []).append(i)
        return found


def isolate_by_groups(
    n: int, read: Reader, threshold_ohm: float, *, ceiling_ohm: float = math.inf
) -> IsolationResult:
    """Find every join among ``n`` nets with about ``ceil(log2 n)`` readings when there is none.

    ``ceiling_ohm`` is what an overload reading proves (the meter range's full scale).
    """
    result = IsolationResult(n, threshold_ohm)
    groups = _Groups(n)

    def take(hi: Iterable[int], lo: Iterable[int], purpose: str) -> float:
        hi_set, lo_set = frozenset(hi), frozenset(lo)
        r = float(read(hi_set, lo_set))
        result.readings.append(IsolationReading(hi_set, lo_set, r, purpose))
        if r < threshold_ohm / max(1, len(hi_set) * len(lo_set)):
            result.certain_fault = True
        return r

    def cut(j: int) -> tuple[list[list[int]], list[list[int]]]:
        members = groups.members()
        hi = [g for rep, g in members.items() if (rep >> j) & 1]
        lo = [g for rep, g in members.items() if not (rep >> j) & 1]
        return hi, lo

    def flat(parts: Sequence[list[int]]) -> list[int]:
        return [i for g in parts for i in g]

    def resolve(hi: list[list[int]], lo: list[list[int]], r: float, found: list[Join]) -> None:
        """``hi`` against ``lo`` read ``r`` < threshold: split until every part passes or is a
        single pair of groups (a join)."""
        if len(hi) == 1 and len(lo) == 1:
            found.append(Join(min(hi[0]), min(lo[0]), r))
            return
        split_hi = len(hi) > 1
        whole = hi if split_hi else lo
        half = len(whole) // 2
        for part in (whole[:half], whole[half:]):
            pair = (part, lo) if split_hi else (hi, part)
            r_part = take(flat(pair[0]), flat(pair[1]), "split")
            if r_part < threshold_ohm:
                resolve(pair[0], pair[1], r_part, found)

    failing: list[tuple[int, float]] = []
    for j in range(cut_count(n)):
        hi, lo = cut(j)
        r = take(flat(hi), flat(lo), f"cut {j + 1}")
        if r < threshold_ohm:
            failing.append((j, r))
    merged_since: set[int] = set()
    for j, r in failing:
        fresh = j not in merged_since
        while True:
            hi, lo = cut(j)
            if not hi or not lo:
                break
            if not fresh:
                r = take(flat(hi), flat(lo), f"cut {j + 1} again")
                if r >= threshold_ohm:
                    break
            found: list[Join] = []
            resolve(hi, lo, r, found)
            fresh = False
            if not found:
                break  # only parallel leakage: every part passed on its own
            for join in found:
                groups.union(join.a, join.b)
            result.joins.extend(found)
            merged_since = set(range(cut_count(n)))
    _finish(result, groups, ceiling_ohm)
    return result


def isolate_pairwise(
    n: int, read: Reader, threshold_ohm: float, *, ceiling_ohm: float = math.inf
) -> IsolationResult:
    """The plain way: every pair on its own, n(n-1)/2 readings."""
    result = IsolationResult(n, threshold_ohm)
    groups = _Groups(n)
    for a in range(n):
        for b in range(a + 1, n):
            hi, lo = frozenset({a}), frozenset({b})
            r = float(read(hi, lo))
            result.readings.append(IsolationReading(hi, lo, r, "pair"))
            if r < threshold_ohm:
                result.certain_fault = True
                result.joins.append(Join(a, b, r))
                groups.union(a, b)
    _finish(result, groups, ceiling_ohm)
    return result


def discover_groups(
    n: int, read: Reader, threshold_ohm: float, *, ceiling_ohm: float = math.inf
) -> IsolationResult:
    """Which of ``n`` pins are joined, when nothing is known (capturing a harness).

    Each pin not yet placed is read against all the others still unplaced; when that reading
    fails, the others are split (both halves read) down to every single partner.  A two-pin net
    costs about ``1 + 2 log2 n`` readings, against ``n - 1`` pair by pair.
    """
    result = IsolationResult(n, threshold_ohm)
    groups = _Groups(n)

    def take(hi: list[int], lo: list[int], purpose: str) -> float:
        r = float(read(frozenset(hi), frozenset(lo)))
        result.readings.append(IsolationReading(frozenset(hi), frozenset(lo), r, purpose))
        return r

    def partners(pin: int, candidates: list[int], r: float) -> list[Join]:
        if len(candidates) == 1:
            return [Join(pin, candidates[0], r)]
        half = len(candidates) // 2
        found = []
        for part in (candidates[:half], candidates[half:]):
            r_part = take([pin], part, "split")
            if r_part < threshold_ohm:
                found += partners(pin, part, r_part)
        return found

    unplaced = list(range(n))
    while len(unplaced) > 1:
        pin = unplaced.pop(0)
        r = take([pin], unplaced, f"pin {pin}")
        if r >= threshold_ohm:
            continue
        for join in partners(pin, unplaced, r):
            result.joins.append(join)
            groups.union(join.a, join.b)
            unplaced.remove(join.b)
    _finish(result, groups, ceiling_ohm)
    return result


def _finish(result: IsolationResult, groups: _Groups, ceiling_ohm: float) -> None:
    result.groups = sorted((frozenset(g) for g in groups.members().values() if len(g) > 1), key=min)
    result.proven_ohm = proven_isolation(result.n, result.readings, groups.find, ceiling_ohm)


def proven_isolation(
    n: int,
    readings: Sequence[IsolationReading],
    group_of: Callable[[int], int],
    ceiling_ohm: float = math.inf,
) -> float:
    """The least, over pairs of nets in different groups, of the best bound any reading gives."""
    if n < 2:
        return math.inf
    best = np.zeros((n, n))
    for reading in readings:
        if not reading.hi or not reading.lo:
            continue
        hi = np.zeros(n, dtype=bool)
        lo = np.zeros(n, dtype=bool)
        hi[list(reading.hi)] = True
        lo[list(reading.lo)] = True
        r = min(reading.r_ohm, ceiling_ohm)
        across = np.outer(hi, lo) | np.outer(lo, hi)
        best = np.where(across, np.maximum(best, r), best)
    label = np.array([group_of(i) for i in range(n)])
    different = label[:, None] != label[None, :]
    if not different.any():
        return math.inf
    return float(best[different].min())


def budget(n: int, shorts: int) -> int:
    """The reading budget the plan keeps: n + ceil(log2 n) + 4 k ceil(log2 n)."""
    m = cut_count(n)
    return n + m + 4 * shorts * m
