"""Giving a unit's own circuit a reference so it can be solved on its own, as the bench does."""

from __future__ import annotations

from rig.circuit import GROUND, Circuit, Kind
from rig.config.fixture import load_fixture
from rig.config.unit_file import UnitModel


def ground_like_the_bench(unit: UnitModel, c: Circuit) -> Circuit:
    """Tie the fixture's bench-ground pin to node 0 (as the virtual bench does) and give every
    island still floating a 0 V reference at one of its nodes; changes ``c`` in place."""
    fixture = load_fixture(unit.fixture_path)
    for pin in fixture.pins.values():
        if pin.bench_ground and pin.name in c.nodes:
            c.vsource("test:bench-ground", pin.name, GROUND, 0.0)
    parent: dict[str, str] = {}

    def root(node: str) -> str:
        parent.setdefault(node, node)
        while parent[node] != node:
            node = parent[node]
        return node

    for element in c.elements.values():
        if element.kind is not Kind.ISOURCE:
            parent[root(element.nodes[0])] = root(element.nodes[1])
    islands: dict[str, str] = {}
    for node in c.nodes:
        if root(node) != root(GROUND):
            islands.setdefault(root(node), node)
    for number, node in enumerate(islands.values()):
        c.vsource(f"test:island-ref:{number}", node, GROUND, 0.0)
    return c
