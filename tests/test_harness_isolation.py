"""The group-testing planner against an outside reference: resistor networks solved with scipy's
graph Laplacian (Kirchhoff's laws), and the plain pair-by-pair method."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from scipy.sparse.csgraph import laplacian

from rig.harness.isolation import (
    Reader,
    budget,
    cut_count,
    cut_sides,
    discover_groups,
    isolate_by_groups,
    isolate_pairwise,
)

SHORT_OHM = 0.05
THRESHOLD_OHM = 1e6


def network_reader(conductance: np.ndarray) -> Reader:
    """R between two tied sets of nets, the rest floating: Kirchhoff on the network's Laplacian
    (scipy.sparse.csgraph.laplacian), 1 V on HI, LO at 0 V, floating nodes solved for."""
    lap = laplacian(conductance)
    n = len(conductance)

    def read(hi: frozenset[int], lo: frozenset[int]) -> float:
        fixed = np.zeros(n)
        known = np.zeros(n, dtype=bool)
        for i in hi:
            fixed[i], known[i] = 1.0, True
        for i in lo:
            known[i] = True
        free = ~known
        v = fixed.copy()
        if free.any():
            a = lap[np.ix_(free, free)]
            b = -lap[np.ix_(free, known)] @ fixed[known]
            v[free] = np.linalg.solve(a, b)
        current = float((lap @ v)[list(hi)].sum())
        return math.inf if current <= 0 else 1.0 / current

    return read


def harness_network(n: int, shorts: list[tuple[int, int]], leak_ohm: float = 1e12) -> np.ndarray:
    g = np.full((n, n), 1.0 / leak_ohm)
    np.fill_diagonal(g, 0.0)
    for a, b in shorts:
        g[a, b] = g[b, a] = 1.0 / SHORT_OHM
    return g


def components(n: int, shorts: list[tuple[int, int]]) -> list[frozenset[int]]:
    parent = list(range(n))

    def find(i: int) -> int:
        while parent[i] != i:
            i = parent[i]
        return i

    for a, b in shorts:
        parent[find(a)] = find(b)
    groups: dict[int, set[int]] = {}
    for i in range(n):
        groups.setdefault(find(i), set()).add(i)
    return sorted((frozenset(g) for g in groups.values() if len(g) > 1), key=min)


@pytest.mark.parametrize("n", [2, 3, 8, 31, 32, 33, 100, 128])
def test_binary_label_cuts_separate_every_pair(n: int) -> None:
    cuts = [cut_sides(n, j) for j in range(cut_count(n))]
    assert cut_count(n) == math.ceil(math.log2(n))
    for a, b in itertools.combinations(range(n), 2):
        assert any((a in hi) != (b in hi) for hi, _ in cuts), (a, b)


@pytest.mark.parametrize("n", [8, 16, 32, 64])
@pytest.mark.parametrize("seed", range(6))
def test_groups_and_pairs_agree_with_kirchhoff_on_random_shorts(n: int, seed: int) -> None:
    rng = np.random.default_rng(seed + 10 * n)
    k = int(rng.integers(0, 4))
    shorts = [tuple(int(x) for x in rng.choice(n, 2, replace=False)) for _ in range(k)]
    read = network_reader(harness_network(n, shorts))  # type: ignore[arg-type]
    groups = isolate_by_groups(n, read, THRESHOLD_OHM)
    pairs = isolate_pairwise(n, read, THRESHOLD_OHM)
    expected = components(n, shorts)  # type: ignore[arg-type]
    assert groups.groups == expected
    assert pairs.groups == expected
    assert len(pairs.readings) == n * (n - 1) // 2
    assert len(groups.readings) <= budget(n, k)


def test_disjoint_shorts_cost_at_most_four_log_n_each() -> None:
    n = 128
    rng = np.random.default_rng(5)
    for k in range(4):
        chosen = rng.choice(n, 2 * k, replace=False)
        shorts = [(int(chosen[2 * i]), int(chosen[2 * i + 1])) for i in range(k)]
        result = isolate_by_groups(n, network_reader(harness_network(n, shorts)), THRESHOLD_OHM)
        assert result.groups == components(n, shorts)
        assert len(result.readings) <= n + 7 + 4 * k * 7


def test_parallel_leakage_alone_is_split_until_proved_not_called_a_short() -> None:
    # 32 nets, every pair leaking 2 Gohm: a 16 x 16 cut holds 256 pairs in parallel (under 8 Mohm)
    # and fails a 20 Mohm requirement, but smaller parts pass: no join, and the isolation proved
    # per pair is at least the requirement and never more than the true pair resistance.
    n, leak = 32, 2e9
    read = network_reader(harness_network(n, [], leak_ohm=leak))
    threshold = 20e6
    first_cut = read(*cut_sides(n, 0))
    assert first_cut < threshold
    result = isolate_by_groups(n, read, threshold)
    assert result.joins == []
    assert len(result.readings) > cut_count(n)
    assert threshold <= result.proven_ohm <= leak
    assert not result.certain_fault


def test_a_reading_below_threshold_over_pairs_proves_a_fault() -> None:
    read = network_reader(harness_network(16, [(3, 12)]))
    result = isolate_by_groups(16, read, THRESHOLD_OHM)
    assert result.certain_fault
    assert result.groups == [frozenset({3, 12})]


def test_chained_shorts_show_as_one_group() -> None:
    shorts = [(1, 5), (5, 9)]
    read = network_reader(harness_network(16, shorts))
    assert isolate_by_groups(16, read, THRESHOLD_OHM).groups == [frozenset({1, 5, 9})]


@pytest.mark.parametrize("seed", range(4))
def test_discovery_finds_every_net_of_an_unknown_harness(seed: int) -> None:
    n = 40
    rng = np.random.default_rng(seed)
    order = rng.permutation(n)
    shorts = [(int(order[i]), int(order[i + 1])) for i in range(0, 30, 2)]  # 15 two-pin nets
    shorts.append((int(order[30]), int(order[31])))
    shorts.append((int(order[31]), int(order[32])))  # and one three-pin net
    result = discover_groups(n, network_reader(harness_network(n, shorts)), THRESHOLD_OHM)
    assert result.groups == components(n, shorts)
    assert len(result.readings) < n * (n - 1) // 2 / 2
