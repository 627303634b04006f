"""A reading the station's accuracy table cannot give an uncertainty never passes without a word.

The docs' complete example (station, fixture, unit and sequence pages) read its bench Pt100 at
about 109 ohm while the example station listed only a 100 ohm row for 4-wire ohms: the reading had
no uncertainty, the settle proof (two readings agreeing within half of it) could never agree, and
the step passed under the guarded rule with no U and no note.  Now ``rig check`` refuses such a
step under the guarded rule (a guard band needs U) and warns under the simple rule; a run notes
on the step that it was judged with no uncertainty, and that its settling was not proved.

Sources: ILAC-G8:09/2019 (a guarded decision rule sets its acceptance limits from the expanded
uncertainty U); IEC 60751 (a Pt100 reads 115.54 ohm at 40 degC, above a 100 ohm range; from
memory).  The example files are the pages' own (``doc_blocks``).
"""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import pytest
from doc_blocks import write_complete_examples

from rig.cli import main
from rig.config.fixture import load_fixture
from rig.config.unit_file import load_unit
from rig.engine import RunSummary
from rig.plan import NO_PROBE_WARNING
from rig.runner import load_plan, run_plan
from rig.sim.bench import VirtualBench

NO_REFERENCE_U_WARNING = (
    "step signal-vs-curve: its stated reference, 5 V, has no reference_u: the prediction's U "
    "leaves out how far the divider's reference may be from it"
)
"""The example states its divider's 5 V reference with no u (``rig.steps.model_steps``)."""

EXAMPLE_RESOURCES = (
    "TCPIP0::192.168.0.20::5025::SOCKET",
    "TCPIP0::192.168.0.21::5025::SOCKET",
    "/dev/ttyUSB0",
)
ONE_KOHM_ROW = '[[dmm.accuracy.res4w]]\nrange = "1 kohm"\nppm_reading = 100\nppm_range = 10\n'


@pytest.fixture
def example(tmp_path: Path) -> dict[str, Path]:
    return write_complete_examples(tmp_path)


def without_the_1_kohm_row(station: Path) -> Path:
    """The example station as it was: 4-wire ohms on a 100 ohm row alone."""
    text = station.read_text(encoding="utf-8")
    assert ONE_KOHM_ROW in text
    path = station.with_name("old-station.toml")
    path.write_text(text.replace(ONE_KOHM_ROW, ""), encoding="utf-8")
    return path


def simple_rule(sequence: Path) -> Path:
    text = sequence.read_text(encoding="utf-8")
    path = sequence.with_name("simple.toml")
    path.write_text(text.replace('decision_rule = "guarded"', 'decision_rule = "simple"', 1))
    return path


@pytest.fixture
def bench(example: dict[str, Path]) -> Iterator[VirtualBench]:
    unit = load_unit(example["unit.toml"])
    served = VirtualBench(unit, load_fixture(unit.fixture_path))
    served.start()
    try:
        yield served
    finally:
        served.stop()


def on_bench(station: Path, bench: VirtualBench) -> Path:
    """``station`` with its instruments' resources pointed at the virtual bench."""
    ep = bench.endpoints
    assert ep is not None
    text = station.read_text(encoding="utf-8")
    served = (ep.dmm_resource, ep.supply_resource, ep.relay_port)
    for resource, now in zip(EXAMPLE_RESOURCES, served, strict=True):
        text = text.replace(resource, now)
    path = station.with_name(f"bench-{station.name}")
    path.write_text(text, encoding="utf-8")
    return path


def run(sequence: Path, station: Path) -> RunSummary:
    return run_plan(load_plan(sequence, station), "D1", ask=lambda text: True)


def test_the_example_station_holds_the_pt100_on_a_range_it_lists(
    example: dict[str, Path], capsys: pytest.CaptureFixture[str]
) -> None:
    args = ["check", str(example["sequence.toml"]), "--station", str(example["station.toml"])]
    assert main(args) == 0
    out = capsys.readouterr().out
    ambient = next(line for line in out.splitlines() if line.startswith("ambient"))
    assert "1 kohm" in ambient and " auto " not in ambient
    # the example station states no reference probe: that is the one warning, none of ranges
    warnings = [line for line in out.splitlines() if line.startswith("warning")]
    assert warnings == [f"warning: {NO_REFERENCE_U_WARNING}", f"warning: {NO_PROBE_WARNING}"]


def test_check_refuses_a_guarded_step_that_may_read_beyond_the_table(
    example: dict[str, Path], capsys: pytest.CaptureFixture[str]
) -> None:
    old = without_the_1_kohm_row(example["station.toml"])
    assert main(["check", str(example["sequence.toml"]), "--station", str(old)]) == 2
    err = capsys.readouterr().err
    assert "sequence.toml:13 [steps[1]]: a passing unit may read up to 115.5 ohm" in err
    assert "(100 ohm)" in err and "guarded rule cannot be applied" in err
    assert "[[dmm.accuracy.res4w]]" in err and 'decision_rule = "simple"' in err


def test_check_warns_of_it_under_the_simple_rule(
    example: dict[str, Path], capsys: pytest.CaptureFixture[str]
) -> None:
    old = without_the_1_kohm_row(example["station.toml"])
    assert main(["check", str(simple_rule(example["sequence.toml"])), "--station", str(old)]) == 0
    warnings = [
        line
        for line in capsys.readouterr().out.splitlines()
        if "warning" in line
        and NO_PROBE_WARNING not in line  # the example states no probe
        and "has no reference_u" not in line  # nor its divider reference's u
    ]
    assert len(warnings) == 1
    assert warnings[0].startswith("warning: step ambient: a passing unit may read up to 115.5 ohm")
    assert "no uncertainty" in warnings[0]


def test_the_docs_example_runs_with_an_uncertainty_on_every_reading(
    example: dict[str, Path], bench: VirtualBench
) -> None:
    summary = run(example["sequence.toml"], on_bench(example["station.toml"], bench))
    assert summary.verdict.value == "pass"
    measured = [r for r in summary.results if r.kind != "prompt"]
    assert all(r.expanded_u > 0 for r in measured), [(r.step_id, r.expanded_u) for r in measured]
    assert [r.note for r in summary.results] == [""] * len(summary.results)


def test_a_run_notes_a_reading_it_judged_with_no_uncertainty(
    example: dict[str, Path], bench: VirtualBench
) -> None:
    old = on_bench(without_the_1_kohm_row(example["station.toml"]), bench)
    summary = run(simple_rule(example["sequence.toml"]), old)
    notes = {r.step_id: r.note for r in summary.results}
    # the Pt100 reads about 109 ohm: above the table, so no uncertainty and no settle proof
    assert "judged with no uncertainty: the res4w reading 10" in notes["ambient"]
    assert (
        "above the largest res4w range of the station's accuracy table (100 ohm)"
        in (notes["ambient"])
    )
    assert "settling not proved: 12 res4w readings (pt-4w)" in notes["ambient"]
    assert "it has none to agree by" in notes["ambient"]
    # the curve's prediction carries the temperature's uncertainty, which it has not
    assert notes["signal-vs-curve"] == "judged with no uncertainty: step ambient's value has none"
    assert notes["signal"] == "" and notes["return-drop"] == ""


def test_rig_run_prints_the_note_of_a_step_that_passed(
    example: dict[str, Path], bench: VirtualBench, capsys: pytest.CaptureFixture[str]
) -> None:
    old = on_bench(without_the_1_kohm_row(example["station.toml"]), bench)
    sequence = simple_rule(example["sequence.toml"])
    args = ["run", str(sequence), "--station", str(old), "--serial", "D2", "--yes"]
    assert main(args) == 0
    out = capsys.readouterr().out
    assert "  ambient: settling not proved" in out
    assert "  signal-vs-curve: judged with no uncertainty" in out


def test_an_unbounded_guarded_reading_beyond_the_table_is_noted_at_run_time(
    example: dict[str, Path], bench: VirtualBench, capsys: pytest.CaptureFixture[str]
) -> None:
    # no high limit: nothing bounds the Pt100's reading before the run, so rig check cannot tell
    text = example["sequence.toml"].read_text(encoding="utf-8")
    assert text.count('high = "40 degC"\n') == 1
    sequence = example["sequence.toml"].with_name("unbounded.toml")
    sequence.write_text(text.replace('high = "40 degC"\n', ""), encoding="utf-8")
    old = without_the_1_kohm_row(example["station.toml"])
    assert main(["check", str(sequence), "--station", str(old)]) == 0
    # the example states no reference probe (rig check says so); no other warning
    lines = capsys.readouterr().out.splitlines()
    assert [line for line in lines if "warning" in line] == [
        f"warning: {NO_REFERENCE_U_WARNING}",
        f"warning: {NO_PROBE_WARNING}",
    ]
    summary = run(sequence, on_bench(old, bench))
    ambient = next(r for r in summary.results if r.step_id == "ambient")
    assert ambient.note.startswith(
        "settling not proved: 12 res4w readings (pt-4w), no two in a row within 0.5 x the "
        "reading's standard uncertainty (it has none to agree by), the last one used; "
        "judged with no uncertainty, so without the guarded rule's guard band: the res4w reading "
    )
