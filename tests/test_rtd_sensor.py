"""A platinum RTD as the sensor under test: the ``rtd`` step kind and the unit file's ``rtd``
sensor, on the virtual bench (pyvisa-py over TCP to the DMM, pyserial on a pty to the relay
box, a real SQLite store) and in ``rig limits``.

Outside references:
- IEC 60751:2008, the Callendar-Van Dusen equation R(t) = R0 (1 + A t + B t^2) for t >= 0 degC
  with A = 3.9083e-3, B = -5.775e-7, computed by hand in each test;
- its table of reference values: a Pt100 reads 138.51 ohm at 100 degC (so a Pt1000 1385.1 ohm;
  the table value from memory, and the equation gives 138.5055 ohm);
- its class tolerances: class B +-(0.30 + 0.005 |t|) degC, class A +-(0.15 + 0.002 |t|) degC.
The unit is invented for the test: a Pt1000 oil sender on the demo screening fixture.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from pt1000_sender import pt1000_files, pt_r, pt_slope

from rig.cli import EXIT_BAD_INPUT, main
from rig.config.fixture import load_fixture
from rig.config.sequence import load_sequence
from rig.config.unit_file import load_unit
from rig.errors import ConfigError
from rig.faults import parse_faults
from rig.runner import load_plan, run_plan
from rig.sim.bench import VirtualBench


def _run(folder: Path, faults: tuple[str, ...] = ()) -> dict[str, object]:
    unit_path, sequence = pt1000_files(folder)
    unit = load_unit(unit_path)
    fixture = load_fixture(unit.fixture_path)
    with VirtualBench(unit, fixture, faults=parse_faults(list(faults), unit)) as bench:
        station = bench.write_station(folder / "station.toml", data_dir=str(folder / "data"))
        summary = run_plan(load_plan(sequence, station), "PT-1")
    [result] = [r for r in summary.results if r.step_id == "element"]
    [well] = [r for r in summary.results if r.step_id == "well"]
    return {"summary": summary, "result": result, "well": well}


def test_a_good_pt1000_passes_against_its_curve_and_class_at_the_measured_temperature(
    tmp_path: Path,
) -> None:
    found = _run(tmp_path)
    result, well = found["result"], found["well"]
    t = well.value  # type: ignore[attr-defined]
    assert abs(t - 23.0) < 0.2  # the bench's probe at ambient
    predicted = pt_r(1000.0, t)
    assert result.predicted == pytest.approx(predicted, rel=1e-9)  # type: ignore[attr-defined]
    half = (0.30 + 0.005 * abs(t)) * pt_slope(1000.0, t)  # class B through the slope
    assert result.limits.low == pytest.approx(predicted - half, rel=1e-9)  # type: ignore[attr-defined]
    assert result.limits.high == pytest.approx(predicted + half, rel=1e-9)  # type: ignore[attr-defined]
    # the element sits on its curve at 23 degC; the meter reads it 4-wire
    assert result.value == pytest.approx(pt_r(1000.0, 23.0), abs=0.2)  # type: ignore[attr-defined]
    assert result.verdict.value == "pass"  # type: ignore[attr-defined]


def test_a_drifted_element_fails(tmp_path: Path) -> None:
    # +0.5 % is 5.4 ohm at 23 degC; class B allows (0.30 + 0.115) degC x 3.88 ohm/degC = 1.6 ohm
    found = _run(tmp_path, ("drift:element=+0.5%",))
    assert found["result"].verdict.value == "fail"  # type: ignore[attr-defined]


def test_the_curve_at_100_degc_matches_the_standards_table(tmp_path: Path) -> None:
    _, sequence = pt1000_files(tmp_path, 'tolerance = "0.1 %"')
    text = sequence.read_text().replace('temperature_from = "well"', 'temperature = "100 degC"')
    sequence.write_text(text, encoding="utf-8")
    from rig.steps.rtd_step import rtd_limits

    [spec] = [s for s in load_sequence(sequence).steps if s.id == "element"]
    limits = rtd_limits(spec, 100.0, pt_r(1000.0, 100.0))
    assert (limits.low + limits.high) / 2 == pytest.approx(1385.1, abs=0.05)  # IEC 60751 table
    assert limits.high - limits.low == pytest.approx(2 * 1.385055, rel=1e-6)


@pytest.mark.parametrize(
    ("tolerance", "expected"),
    [
        (
            "",
            "[steps[1].tolerance_class]: missing; expected an IEC 60751 class (AA, A, B), "
            "or tolerance in % or ohm",
        ),
        (
            'tolerance_class = "B"\ntolerance = "1 ohm"',
            "give either tolerance_class or tolerance, not both",
        ),
        ('tolerance_class = "C"', "tolerance_class"),
        ('tolerance = "1 V"', "expected a tolerance in % or in ohm"),
    ],
)
def test_a_step_without_one_clear_tolerance_is_refused_naming_the_key(
    tmp_path: Path, tolerance: str, expected: str
) -> None:
    _, sequence = pt1000_files(tmp_path, tolerance)
    with pytest.raises(ConfigError) as caught:
        load_sequence(sequence)
    text = "\n".join(str(p) for p in caught.value.problems)
    assert str(sequence) in text and expected in text


def test_a_stated_temperature_off_the_curve_is_refused(tmp_path: Path) -> None:
    _, sequence = pt1000_files(tmp_path)
    text = sequence.read_text().replace('temperature_from = "well"', 'temperature = "900 degC"')
    sequence.write_text(text, encoding="utf-8")
    with pytest.raises(ConfigError, match=r"-200 to 850 degC, found 900 degC"):
        load_sequence(sequence)


def test_limits_draws_the_element_class_and_proposes_a_tolerance_in_ohm(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """The deviation of good elements from the curve spreads over their class: the proposed
    +- tolerance (at 100 ppm) must at least reach class B at the coldest ambient (15 degC), and
    not exceed it at the hottest (35 degC) by more than the reference probe's class A and the
    meter can add."""
    unit, sequence = pt1000_files(tmp_path)
    code = main(["limits", str(sequence), "--unit", str(unit), "--samples", "20000", "--json"])
    assert code == 0
    found = json.loads(capsys.readouterr().out)
    [step] = [s for s in found["steps"] if s["id"] == "element"]
    assert (step["figure_unit"], step["form"]) == ("ohm", "tolerance")
    proposed = step["proposed"]["high"]
    assert proposed == pytest.approx(-step["proposed"]["low"], rel=1e-6)
    class_b_cold = (0.30 + 0.005 * 15) * pt_slope(1000.0, 15.0)
    class_b_hot = (0.30 + 0.005 * 35) * pt_slope(1000.0, 35.0)
    # the present class B at the well temperatures the drawn units read: 15 to 35 degC, give
    # or take the probe's class A and the meter (0.2 degC, 0.02 ohm/degC of class B: 0.004 ohm)
    present = step["present"]
    assert present["tolerance_class"] == "B"
    assert present["narrowest"] == pytest.approx(class_b_cold, abs=0.01)
    assert present["widest"] == pytest.approx(class_b_hot, abs=0.01)
    probe_a_hot = (0.15 + 0.002 * 35) * pt_slope(1000.0, 35.0)  # the probe's error moves R(T)
    meter = 0.5  # well above the virtual bench's 4-wire error at 1 kohm (its accuracy table)
    assert class_b_cold < proposed < class_b_hot + probe_a_hot + meter
    assert step["toml"] == {"tolerance": f"{proposed:g} ohm"}
    assert any("sensors.element" in d["what"] and "class B" in d["spread"] for d in found["draws"])


def test_a_unit_rtd_sensor_off_its_curve_is_refused(tmp_path: Path) -> None:
    unit, _ = pt1000_files(tmp_path)
    unit.write_text(
        unit.read_text().replace('tolerance_class = "B"', 'temperature = "900 degC"'), "utf-8"
    )
    code = main(["check", "--unit", str(unit)])
    assert code == EXIT_BAD_INPUT


def test_diagnosis_reads_an_element_inside_its_class_as_a_good_unit(tmp_path: Path) -> None:
    # +0.12 % is 1.3 ohm at 23 degC, inside class B's 1.61 ohm (computed above from IEC 60751):
    # a good part, whose run passes; the good unit must lead, not a fitted drift
    from rig.analysis.diagnose import diagnose_run
    from rig.store import ResultStore

    unit_path, sequence = pt1000_files(tmp_path)
    unit = load_unit(unit_path)
    faults = parse_faults(["drift:element=+0.12%"], unit)
    with VirtualBench(unit, load_fixture(unit.fixture_path), faults=faults) as bench:
        station = bench.write_station(tmp_path / "station.toml", data_dir=str(tmp_path / "data"))
        plan = load_plan(sequence, station)
        store = ResultStore(tmp_path / "runs.sqlite")
        run = run_plan(plan, "PT-2", store=store)
        assert run.verdict.value == "pass"
        found = diagnose_run(store, run.run_id, unit, plan)
        store.close()
    top = found.hypotheses[0]
    assert top.spec == "none" and top.probability > 0.5, found.hypotheses[:2]


def test_stats_sums_a_class_judged_step_in_percent_of_its_tolerance() -> None:
    """Class B limits at 15, 23 and 71.5 degC (IEC 60751, by hand above; a room and a hot well):
    their width in ohm moves with T, 1.7 times over these, so no offset or ratio holds; the runs
    make one row, in % of each run's own tolerance, with limits at -100 and 100, and each
    deviation over its own half-width."""
    from rig.stats.from_store import SHARE, model_step_stats

    rows = []
    for temp, off in ((15.0, 0.4), (23.0, -0.8), (71.5, 1.2)):
        predicted = pt_r(1000.0, temp)
        half = (0.30 + 0.005 * temp) * pt_slope(1000.0, temp)
        row = (predicted + off, predicted, predicted - half, predicted + half, 0.9, 1, "pass")
        rows.append(("pt1000-screen", "element", "ohm", *row, "complete", 0))
    [found] = model_step_stats(rows)
    assert (found.unit, found.low, found.high, found.n) == (SHARE, -100.0, 100.0, 3)
    shares = [
        off / ((0.30 + 0.005 * t) * pt_slope(1000.0, t)) * 100
        for t, off in ((15.0, 0.4), (23.0, -0.8), (71.5, 1.2))
    ]
    assert found.mean == pytest.approx(sum(shares) / 3, rel=1e-9)


def test_stats_of_runs_on_the_bench_give_one_row_for_the_class_judged_step(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    unit_path, sequence = pt1000_files(tmp_path)
    unit = load_unit(unit_path)
    with VirtualBench(unit, load_fixture(unit.fixture_path)) as bench:
        station = bench.write_station(tmp_path / "station.toml", data_dir=str(tmp_path / "data"))
        for serial in ("PT-1", "PT-2", "PT-3"):
            assert main(["run", str(sequence), "--station", str(station), "--serial", serial,
                         "--yes", "--json"]) == 0  # fmt: skip
    capsys.readouterr()
    assert main(["stats", "--station", str(station), "--json"]) == 0
    found = json.loads(capsys.readouterr().out)
    rows = [s for s in found["steps"] if s["step_id"] == "element"]
    assert [(r["unit"], r["n"]) for r in rows] == [("% of tolerance", 3)]


def test_check_warns_of_an_rtd_step_whose_r0_is_none_of_the_units_sensors(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """A Pt1000 judged with a Pt100's r0 (the step's default): the range held for R(T) of a
    Pt100 overloads on the Pt1000, and a good unit fails.  rig check with the unit says so."""
    unit_path, sequence = pt1000_files(tmp_path)
    unit = load_unit(unit_path)
    with VirtualBench(unit, load_fixture(unit.fixture_path)) as bench:
        station = bench.write_station(tmp_path / "station.toml", data_dir=str(tmp_path / "data"))
        check = ["check", str(sequence), "--station", str(station), "--unit", str(unit_path)]
        assert main(check) == 0
        assert "warning" not in capsys.readouterr().out
        sequence.write_text(sequence.read_text().replace('r0 = "1000 ohm"\n', ""), "utf-8")
        assert main(check) == 0
    out = capsys.readouterr().out
    line = f"{unit_path}:"
    assert "step element judges an RTD with r0 = 100 ohm" in out
    assert "[sensors.element] r0 = 1000 ohm at " + line in out


@pytest.mark.parametrize("drift", ["-0.5%", "+0.3%"])
def test_diagnosis_fits_an_rtd_drift_well_under_one_percent(tmp_path: Path, drift: str) -> None:
    """0.3 % on a Pt1000 at 23 degC is 3.3 ohm, twice class B's 1.61 ohm (by hand above): the run
    fails, and the diagnosis must offer the drift, not a good unit.  Read 4-wire at the fixture,
    a lead's series resistance reads as an upward drift, so upward it may share the lead."""
    from rig.analysis.diagnose import diagnose_run
    from rig.store import ResultStore

    unit_path, sequence = pt1000_files(tmp_path)
    unit = load_unit(unit_path)
    faults = parse_faults([f"drift:element={drift}"], unit)
    with VirtualBench(unit, load_fixture(unit.fixture_path), faults=faults) as bench:
        station = bench.write_station(tmp_path / "station.toml", data_dir=str(tmp_path / "data"))
        plan = load_plan(sequence, station)
        store = ResultStore(tmp_path / "runs.sqlite")
        run = run_plan(plan, "PT-3", store=store)
        assert run.verdict.value == "fail"
        found = diagnose_run(store, run.run_id, unit, plan)
        store.close()
    top = found.hypotheses[0]
    named = [top.spec.split("=")[0], *(s.split("=")[0] for s in top.same_as)]
    assert top.spec != "none" and "drift:element" in named, found.hypotheses[:3]


def test_check_gives_an_rtd_step_its_tur_before_any_run(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """At a stated 23 degC (taken as exact) the U is the meter's alone, at the upper limit on the
    10 kohm range the plan holds: the virtual station's 4-wire row is 0.010 % of reading + 0.001 %
    of range, a rectangular bound (GUM 4.3.7: u = a / sqrt(3)), k = 2; the window is class B
    through the slope (IEC 60751), and TUR = span / (2 U)."""
    unit_path, sequence = pt1000_files(tmp_path)
    text = sequence.read_text().replace('temperature_from = "well"', 'temperature = "23 degC"')
    sequence.write_text(text, encoding="utf-8")
    unit = load_unit(unit_path)
    with VirtualBench(unit, load_fixture(unit.fixture_path)) as bench:
        station = bench.write_station(tmp_path / "station.toml", data_dir=str(tmp_path / "data"))
        check = ["check", str(sequence), "--station", str(station), "--unit", str(unit_path)]
        assert main(check) == 0
    out = capsys.readouterr().out
    predicted = pt_r(1000.0, 23.0)
    half = (0.30 + 0.005 * 23.0) * pt_slope(1000.0, 23.0)
    high = predicted + half
    expanded = 2 * (0.010e-2 * high + 0.001e-2 * 10_000) / 3**0.5
    tur = 2 * half / (2 * expanded)
    row = next(line for line in out.splitlines() if line.startswith("element "))
    assert f"{expanded * 1000:.4g} mohm" in row, (row, expanded)
    assert f"{tur:.1f}:1" in row, (row, tur)


def test_a_class_written_in_lower_case_is_refused_with_the_spelling_meant(tmp_path: Path) -> None:
    # IEC 60751 writes its classes in capitals (AA, A, B); 'b' is a slip of 'B'
    _, sequence = pt1000_files(tmp_path, 'tolerance_class = "b"')
    with pytest.raises(ConfigError) as caught:
        load_sequence(sequence)
    [problem] = caught.value.problems
    assert str(problem).endswith("expected one of 'AA', 'A', 'B', found 'b'; did you mean 'B'?")


# The temperatures IEC 60751:2008 (Table 1) gives each tolerance class for (from memory, not
# confirmed in the document): wire-wound AA -50..+250, A -100..+450, B -196..+600 degC; film
# AA 0..+150, A -30..+300, B -50..+500 degC.  rig knows no element's construction, so it holds
# the wider (wire-wound) span against the class and says the film one is narrower.
AA_WIRE_WOUND, AA_FILM = "-50 to 250 degC", "0 to 150 degC"


def _probe_class_aa(station: Path) -> None:
    text = station.read_text(encoding="utf-8")
    station.write_text(text.replace('tolerance_class = "A"', 'tolerance_class = "AA"'), "utf-8")


def test_check_warns_of_a_class_applied_outside_its_span(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """Class AA at a stated 400 degC, and the station's class AA probe in a well whose limits
    reach -60 degC: both outside what IEC 60751 gives class AA for; warned, not refused.  Class B
    at 400 degC is within its span: nothing said of it."""
    unit_path, sequence = pt1000_files(tmp_path, 'tolerance_class = "AA"')
    text = sequence.read_text().replace('temperature_from = "well"', 'temperature = "400 degC"')
    sequence.write_text(text.replace('low = "10 degC"', 'low = "-60 degC"'), encoding="utf-8")
    unit = load_unit(unit_path)
    with VirtualBench(unit, load_fixture(unit.fixture_path)) as bench:
        station = bench.write_station(tmp_path / "station.toml", data_dir=str(tmp_path / "data"))
        _probe_class_aa(station)
        check = ["check", str(sequence), "--station", str(station)]
        assert main(check) == 0
        out = capsys.readouterr().out.splitlines()
        warned = [line for line in out if line.startswith("warning:") and "class AA" in line]
        sequence.write_text(text.replace('"AA"', '"B"'), encoding="utf-8")
        station.write_text(station.read_text().replace('"AA"', '"A"'), encoding="utf-8")
        assert main(check) == 0
        assert "is judged at" not in capsys.readouterr().out
    element = next(line for line in warned if line.startswith("warning: step element:"))
    assert "class AA is judged at 400 degC" in element
    assert AA_WIRE_WOUND in element and f"film element's span is narrower, {AA_FILM}" in element
    well = next(line for line in warned if line.startswith("warning: step well:"))
    assert "the station's reference probe: class AA is judged at -60 degC" in well
    assert "40 degC" not in well  # the upper limit is within the span
    assert len(warned) == 2


def test_a_run_notes_a_class_judged_outside_its_span_at_the_measured_temperature(
    tmp_path: Path,
) -> None:
    """The bench at -60 degC (the invented unit's ambient moved there): the well reads about
    -60 degC with the station's class AA probe, and the element is judged by class AA there.
    Both steps say so in their notes, with the temperature measured."""
    unit_path, sequence = pt1000_files(tmp_path, 'tolerance_class = "AA"')
    unit_text = unit_path.read_text().replace('"23 degC"', '"-60 degC"')
    unit_path.write_text(unit_text.replace('["15 degC", "35 degC"]', '["-70 degC", "-50 degC"]'))
    sequence.write_text(sequence.read_text().replace('low = "10 degC"', 'low = "-70 degC"'))
    unit = load_unit(unit_path)
    with VirtualBench(unit, load_fixture(unit.fixture_path)) as bench:
        station = bench.write_station(tmp_path / "station.toml", data_dir=str(tmp_path / "data"))
        _probe_class_aa(station)
        summary = run_plan(load_plan(sequence, station), "PT-4")
    by_id = {r.step_id: r for r in summary.results}
    well, element = by_id["well"], by_id["element"]
    assert well.value == pytest.approx(-60.0, abs=0.3)
    measured = f"{well.value:g} degC"
    assert f"the station's reference probe: class AA is judged at {measured}" in well.note
    assert f"class AA is judged at {measured}" in element.note
    assert AA_WIRE_WOUND in element.note and AA_FILM in element.note


def test_check_without_a_unit_names_the_class_as_the_limits(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """Without a unit file the prediction is made at run time, as for an ntc step's % (shown
    `model ± 5 %`): the cell names the class the step is judged by instead of `-`."""
    from offline_station import offline_demo_station

    _, sequence = pt1000_files(tmp_path)
    offline_demo_station("bench", tmp_path)
    assert main(["check", str(sequence), "--station", str(tmp_path / "station.toml")]) == 0
    [row] = [line for line in capsys.readouterr().out.splitlines() if line.startswith("element ")]
    assert "model ± class B" in row
    sequence.write_text(sequence.read_text().replace('_class = "B"', ' = "0.1 %"'), "utf-8")
    assert main(["check", str(sequence), "--station", str(tmp_path / "station.toml")]) == 0
    [row] = [line for line in capsys.readouterr().out.splitlines() if line.startswith("element ")]
    assert "model ± 0.1 %" in row and "class" not in row
