"""Seeded random faults on invented harnesses of 8 to 128 nets: every open, short, swap,
misplaced end, missing splice and high-resistance wire found and named, nothing else reported.

These run the whole check (continuity, isolation, naming) on the virtual bench's own circuit
through the direct port (``rig.sim.harness_bench.ProbePort``); ``test_harness_on_bench.py`` runs
the same check through the real pyvisa and pty stack."""

from __future__ import annotations

from pathlib import Path

import pytest
from harness_helpers import one_blas_thread, plant_faults, unmatched

from rig.harness.scan import HarnessSettings, scan_harness, spare_pins
from rig.sim.harness_bench import ProbePort, write_invented

one_blas_thread()

CASES = [(8, 0), (8, 1), (16, 2), (24, 3), (32, 4), (48, 5), (64, 6), (128, 7)]


@pytest.mark.parametrize(("nets", "seed"), CASES)
def test_every_planted_fault_is_named(tmp_path: Path, nets: int, seed: int) -> None:
    wires, fixture = write_invented(tmp_path, nets, seed=seed, splices=1, spare=2)
    planted = plant_faults(nets, 1, spare_pins(wires, fixture), seed)
    port = ProbePort(wires, fixture, [p.fault for p in planted], ambient_c=26.0, seed=seed)
    report = scan_harness(port, wires, fixture, HarnessSettings(temp_c=26.0))
    assert unmatched(planted, report.findings) == []
    assert report.isolation is not None
    assert report.isolation.proven_ohm >= 1e6


def test_a_good_harness_passes_and_states_the_isolation_it_proves(tmp_path: Path) -> None:
    wires, fixture = write_invented(tmp_path, 32, seed=3, splices=2, spare=2)
    report = scan_harness(ProbePort(wires, fixture), wires, fixture, HarnessSettings(temp_c=21.0))
    assert report.passed, [f.text for f in report.findings]
    assert report.isolation is not None
    assert report.isolation_readings == 6  # ceil(log2 36 islands): 32 nets and 2 + 2 spare pins
    assert report.isolation.proven_ohm >= 1e6


@pytest.mark.parametrize("seed", range(3))
def test_groups_and_pairs_name_the_same_faults(tmp_path: Path, seed: int) -> None:
    wires, fixture = write_invented(tmp_path, 12, seed=seed, splices=1, spare=2)
    planted = plant_faults(12, 1, spare_pins(wires, fixture), seed + 40)
    texts = {}
    for method in ("groups", "pairs"):
        port = ProbePort(wires, fixture, [p.fault for p in planted], seed=seed)
        report = scan_harness(port, wires, fixture, HarnessSettings(temp_c=23.0, method=method))
        texts[method] = sorted((f.kind, f.pins) for f in report.findings)
        assert unmatched(planted, report.findings) == []
    assert texts["groups"] == texts["pairs"]
