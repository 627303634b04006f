"""``rig stats`` counts every finding of a harness proof from its stored record; a damaged record
is counted as such instead of stopping the statistics (never a traceback)."""

from __future__ import annotations

from rig.stats.pareto import UNREADABLE, harness_findings


def test_findings_are_counted_by_kind_and_a_damaged_record_is_named() -> None:
    steps = [
        {"kind": "harness-proof", "extras": '{"found swap": 2, "found open splice": 1}'},
        {"kind": "harness-proof", "extras": '{"found swap": 1'},  # cut short on disk
        {"kind": "volts", "extras": "not json either, and not a proof"},
    ]
    assert harness_findings(steps) == {"swap": 2, "open splice": 1, UNREADABLE: 1}
