"""A Pt1000 read with a Pt100's r0, or the reverse: the run says so and names the sequence's key,
and ``rig check --unit`` warns before anything moves where the unit file states the probe's r0.

IEC 60751 gives one curve for both, scaled by R0 (100 or 1000 ohm): 107.79 ohm for a Pt100 at
20 degC (its table), so 1077.9 ohm for a Pt1000; a Pt100's curve spans 18.52 ohm (-200 degC) to
390.48 ohm (850 degC).  The bench is the virtual one over real sockets and a pty, with the docs'
complete unit example (an invented circuit) at 20 degC and its probe's r0 changed.
"""

from __future__ import annotations

import re
import sqlite3
from pathlib import Path

import pytest
from doc_blocks import write_complete_examples

from rig.cli import main
from rig.config.fixture import load_fixture
from rig.config.station import load_station
from rig.config.unit_file import load_unit
from rig.models.rtd import r0_it_fits
from rig.runner import load_plan, run_plan
from rig.sim.bench import VirtualBench

SEQUENCE = """\
# One reading of the bench probe (invented for the test)
[sequence]
name = "probe-only"

[[steps]]
id = "well"
kind = "reference-temperature"
force_hi = "PT_FH"
sense_hi = "PT_SH"
force_lo = "PT_FL"
sense_lo = "PT_SL"
{r0}
"""


@pytest.mark.parametrize(
    ("r_ohm", "r0_ohm", "fits"),
    [
        (1077.9, 100.0, 1000.0),  # a Pt1000 at 20 degC read as a Pt100
        (107.79, 1000.0, 100.0),  # a Pt100 at 20 degC read as a Pt1000
        (107.79, 100.0, None),  # on its own curve
        (5000.0, 100.0, None),  # beyond a Pt1000's 3904.8 ohm at 850 degC too: no probe's
        (10.0, 1000.0, None),  # below a Pt100's 18.52 ohm at -200 degC too
    ],
)
def test_a_reading_off_the_curve_fits_the_probe_ten_times_the_r0(
    r_ohm: float, r0_ohm: float, fits: float | None
) -> None:
    assert r0_it_fits(r_ohm, r0_ohm) == fits


def _bench_files(tmp_path: Path, unit_r0: str, step_r0: str) -> dict[str, Path]:
    paths = write_complete_examples(tmp_path)
    text = paths["unit.toml"].read_text(encoding="utf-8")
    changes = (('r0 = "100 ohm"', unit_r0), ('temperature = "23 degC"', 'temperature = "20 degC"'))
    for old, new in changes:
        assert text.count(old) == 1
        text = text.replace(old, new)
    paths["unit.toml"].write_text(text, encoding="utf-8")
    paths["probe.toml"] = tmp_path / "probe.toml"
    paths["probe.toml"].write_text(SEQUENCE.format(r0=step_r0), encoding="utf-8")
    return paths


@pytest.mark.parametrize(
    ("unit_r0", "step_r0", "reading_ohm", "says"),
    [
        (
            'r0 = "1000 ohm"',
            "",
            1077.9,
            "inside what one with r0 = 1000 ohm reads: the probe looks like a Pt1000 where the "
            "sequence says Pt100; check the sequence's r0 (steps[0].r0, 100 ohm when it is not "
            "written)",
        ),
        (
            'r0 = "100 ohm"',
            'r0 = "1000 ohm"',
            107.79,
            "the probe looks like a Pt100 where the sequence says Pt1000; check the sequence's "
            "r0 (steps[0].r0",
        ),
    ],
    ids=["pt1000-as-pt100", "pt100-as-pt1000"],
)
def test_a_run_names_the_mixed_up_r0(
    tmp_path: Path, unit_r0: str, step_r0: str, reading_ohm: float, says: str
) -> None:
    paths = _bench_files(tmp_path, unit_r0, step_r0)
    unit = load_unit(paths["unit.toml"])
    bench = VirtualBench(unit, load_fixture(unit.fixture_path))
    bench.start()
    try:
        station = bench.write_station(tmp_path / "bench.toml", data_dir=str(tmp_path / "data"))
        summary = run_plan(load_plan(paths["probe.toml"], station), "PROBE-1")
    finally:
        bench.stop()
    assert summary.status == "aborted"
    assert summary.reason.startswith("step well: the reading ")
    assert says in summary.reason
    shown = re.search(r"the reading ([\d.]+) (k?)ohm", summary.reason)
    assert shown is not None
    value = float(shown.group(1)) * (1000.0 if shown.group(2) else 1.0)
    assert value == pytest.approx(reading_ohm, rel=1e-4)  # IEC 60751 at 20 degC, 4-wire
    # a setting of the sequence to correct, stored as such with the run (rig.end_cause): a QA
    # tally keeps it apart from steps that could not measure
    assert summary.end_cause == "configuration"
    with sqlite3.connect(load_station(station).store_path) as db:
        assert db.execute("SELECT end_cause FROM runs").fetchall() == [("configuration",)]


def _checked(paths: dict[str, Path], capsys: pytest.CaptureFixture[str]) -> str:
    """What ``rig check`` prints for the probe sequence on the docs' station with the unit."""
    args = [paths["probe.toml"], "--station", paths["station.toml"], "--unit", paths["unit.toml"]]
    assert main(["check", *(str(a) for a in args)]) == 0
    return capsys.readouterr().out


def test_rig_check_warns_where_the_unit_files_probe_has_another_r0(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    paths = _bench_files(tmp_path, 'r0 = "1000 ohm"', "")
    out = _checked(paths, capsys)
    unit_line = next(
        n
        for n, line in enumerate(paths["unit.toml"].read_text().splitlines(), start=1)
        if line.startswith("r0 =")
    )
    assert (
        f"warning: {paths['probe.toml']}:5 [steps[0].r0]: step well reads the probe with "
        f"r0 = 100 ohm, but the unit file states r0 = 1000 ohm for it "
        f"({paths['unit.toml']}:{unit_line} [reference_probe.r0])"
    ) in out


def test_rig_check_is_quiet_where_the_r0_agree(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    paths = _bench_files(tmp_path, 'r0 = "1000 ohm"', 'r0 = "1000 ohm"')
    assert "[steps[0].r0]" not in _checked(paths, capsys)
