"""Diagnosis of runs taken on the virtual bench through the real drivers: each fault kind is named
first (fitted values close to the injected ones), and a good unit is not blamed on any fault.
The reference is the fault injected into the bench; no published source is involved."""

from __future__ import annotations

import json
import sqlite3
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from bench_helpers import SEQUENCES, shipped_bench, shipped_plan

from rig.analysis.diagnose import Diagnoser, diagnose_run
from rig.cli import main
from rig.config.fixture import load_fixture
from rig.config.station import load_station
from rig.config.unit_file import load_unit
from rig.faults import parse_faults
from rig.runner import load_plan, run_plan
from rig.sim.bench import VirtualBench
from rig.store import ResultStore

UNIT = SEQUENCES / "units" / "temp-circuit.toml"

CASES = [
    ("open:signal", None),
    ("short-ground:signal", None),
    ("short-ref:signal", None),
    ("short-feed:ground", None),
    ("short:signal,ground", None),
    ("series:ground=0.4ohm", 0.4),
    ("series:signal=120ohm", 120.0),
    ("drift:coolant=+6%", 6.0),
    ("drift:coolant=-12%", -12.0),
]


def test_each_fault_kind_ranks_first(tmp_path: Path) -> None:
    unit = load_unit(UNIT)
    with shipped_bench("temp-circuit", folder=tmp_path) as (bench, station):
        plan = shipped_plan("temp-circuit-check", station)
        diagnoser = Diagnoser(plan, unit)
        store = ResultStore(tmp_path / "runs.sqlite")
        for spec, value in CASES:
            bench.set_faults(parse_faults([spec], unit))
            run = run_plan(plan, "SN-D", ask=lambda t: True, store=store)
            found = diagnoser.diagnose(diagnoser.measurements(store.readings(run.run_id)))
            top = found.hypotheses[0]
            assert top.spec.split("=")[0] == spec.split("=")[0], (spec, found.hypotheses[:3])
            assert top.probability > 0.9, (spec, top)
            if value is not None:
                assert top.fitted == pytest.approx(value, rel=0.05), spec
            assert found.next_check is None or "DC volts" in found.next_check
        store.close()


def test_faults_one_reading_cannot_split_are_reported_as_a_group(tmp_path: Path) -> None:
    # The weak sequence reads only the controller signal: a series fault in the ground wire and
    # one in the signal wire can both explain that one reading, so neither may be hidden.
    unit = load_unit(UNIT)
    with shipped_bench("temp-circuit", ("series:ground=30ohm",), folder=tmp_path) as (_, station):
        plan = load_plan(Path(__file__).parent / "data" / "weak-temp-check.toml", station)
        store = ResultStore(tmp_path / "runs.sqlite")
        run = run_plan(plan, "SN-W", ask=lambda t: True, store=store)
        found = diagnose_run(store, run.run_id, unit, plan)
        store.close()
    top = found.hypotheses[0]
    group = [s.split("=")[0] for s in (top.spec, *top.same_as)]
    assert "series:ground" in group and len(group) > 1
    # the proposed extra reading splits the group: it names both members
    assert found.next_check is not None
    assert all(member in found.next_check for member in group[:2])


def test_ratiometric_sensor_drift_is_fitted(tmp_path: Path) -> None:
    # a ratiometric sensor's drift scales a gain, not a resistor: the other fitting path
    unit = load_unit(SEQUENCES / "units" / "pressure-circuit.toml")
    with shipped_bench("pressure-circuit", ("drift:map=-7%",), folder=tmp_path) as (_, station):
        plan = shipped_plan("pressure-circuit-check", station)
        store = ResultStore(tmp_path / "runs.sqlite")
        run = run_plan(plan, "SN-R", ask=lambda t: True, store=store)
        found = diagnose_run(store, run.run_id, unit, plan)
        store.close()
    assert found.hypotheses[0].spec.startswith("drift:map=")
    assert found.hypotheses[0].fitted == pytest.approx(-7.0, rel=0.02)


def test_good_unit_is_not_blamed_on_a_fault(tmp_path: Path) -> None:
    unit = load_unit(UNIT)
    with shipped_bench("temp-circuit", folder=tmp_path) as (_, station):
        plan = shipped_plan("temp-circuit-check", station)
        store = ResultStore(tmp_path / "runs.sqlite")
        run = run_plan(plan, "SN-G", ask=lambda t: True, store=store)
        found = diagnose_run(store, run.run_id, unit, plan)
        store.close()
    assert found.hypotheses[0].spec == "none"
    assert all(h.probability < 0.1 for h in found.hypotheses if h.spec != "none")


def test_diagnose_command_after_a_failed_run(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    sequence = SEQUENCES / "temp-circuit-check.toml"
    with shipped_bench("temp-circuit", ("open:ground",), folder=tmp_path) as (_, station):
        code = main(["run", str(sequence), "--station", str(station.path), "--serial", "SN-C"])
        assert code == 1
        text = capsys.readouterr().out
        assert "to rank the likely faults: rig diagnose" in text and "--unit UNIT_FILE" in text
    run_id = next(int(w) for w in text.split("record: run ")[1].split()[:1])
    args = ["diagnose", str(run_id), "--station", str(station.path), "--unit", str(UNIT)]
    assert main([*args, "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["hypotheses"][0]["spec"] == "open:ground"
    assert "S_GND" in data["hypotheses"][0]["where"]
    assert main(args) == 0
    assert "open:ground" in capsys.readouterr().out


def test_a_unit_recorded_by_rig_run_is_found_by_diagnose(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    sequence = SEQUENCES / "temp-circuit-check.toml"
    with shipped_bench("temp-circuit", ("open:ground",), folder=tmp_path) as (_, station):
        args = ["run", str(sequence), "--station", str(station.path), "--serial", "SN-U"]
        assert main([*args, "--unit", str(UNIT)]) == 1
        suggested = capsys.readouterr().out
        assert "rig diagnose 1" in suggested and "UNIT_FILE" not in suggested  # it is recorded
        assert main(["diagnose", "1", "--station", str(station.path), "--json"]) == 0
        assert json.loads(capsys.readouterr().out)["hypotheses"][0]["spec"] == "open:ground"
        # the run's record finds it too (it looked for a unit *named* by the recorded path)
        report = ["report", "1", "--station", str(station.path), "--format", "json"]
        assert main([*report, "--out", "-"]) == 0
        diagnosis = json.loads(capsys.readouterr().out)["diagnosis"]
        assert diagnosis["available"], diagnosis["message"]
        assert diagnosis["hypotheses"][0]["spec"] == "open:ground"
        # another unit's model given by hand is diagnosed with, but not without a word
        other = SEQUENCES / "units" / "ntc-sender.toml"
        diagnose = ["diagnose", "1", "--station", str(station.path), "--unit", str(other)]
        main([*diagnose, "--json"])
        assert "was recorded with unit" in capsys.readouterr().err
        # a unit file that does not load is named before anything moves
        assert main([*args, "--unit", str(tmp_path / "missing.toml")]) == 2
        assert "missing.toml" in capsys.readouterr().err


def test_diagnose_names_what_is_missing(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    sequence = SEQUENCES / "temp-circuit-check.toml"
    with shipped_bench("temp-circuit", folder=tmp_path) as (_, station):
        main(["run", str(sequence), "--station", str(station.path), "--serial", "SN-M"])
    capsys.readouterr()
    # `rig run` without --unit records no unit, so the unit file must be given
    assert main(["diagnose", "1", "--station", str(station.path)]) == 2
    assert "--unit" in capsys.readouterr().err
    assert main(["diagnose", "99", "--station", str(station.path), "--unit", str(UNIT)]) == 2
    assert "no run 99" in capsys.readouterr().err


def test_diagnosis_follows_the_ambient_the_run_measured(tmp_path: Path) -> None:
    # The bench is at 30 degC, the unit file says 23 degC: the NTC then reads about 25 % lower
    # (Beta model, SOURCES.md), which a model at 23 degC would blame on drift.  The run's own
    # Pt100 reading puts the model at the bench's temperature.
    unit = load_unit(UNIT)
    warm = replace(unit, ambient_c=30.0)
    with VirtualBench(warm, load_fixture(unit.fixture_path)) as bench:
        station = load_station(bench.write_station(tmp_path / "station.toml"))
        plan = shipped_plan("temp-circuit-check", station)
        store = ResultStore(tmp_path / "runs.sqlite")
        run = run_plan(plan, "SN-A", ask=lambda t: True, store=store)
        fixed = Diagnoser(plan, unit)  # at the unit file's 23 degC
        at_file_ambient = fixed.diagnose(fixed.measurements(store.readings(run.run_id)))
        found = diagnose_run(store, run.run_id, unit, plan)
        store.close()
    assert at_file_ambient.hypotheses[0].spec.startswith("drift:coolant=-")
    assert found.hypotheses[0].spec == "none"


def test_diagnose_names_the_faults_it_cannot_tell_apart_with_the_first(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # An open sender lead reads the same whichever lead it is (series circuit, Kirchhoff): the
    # probability printed is the group's, so every member is named on the same row.
    sequence = SEQUENCES / "ntc-sender-screen.toml"
    unit = SEQUENCES / "units" / "ntc-sender.toml"
    with shipped_bench("ntc-sender", ("open:lead_b",), folder=tmp_path) as (_, station):
        args = ["run", str(sequence), "--station", str(station.path), "--serial", "SN-L"]
        assert main([*args, "--unit", str(unit), "--yes"]) == 1
        capsys.readouterr()
        assert main(["diagnose", "1", "--station", str(station.path)]) == 0
    first = next(line for line in capsys.readouterr().out.splitlines() if line.startswith("1 "))
    assert "open:lead_a" in first and "open:lead_b" in first and "(or " in first


def test_a_run_started_with_a_relative_sequence_is_diagnosed_from_another_folder(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    # The technician runs `rig run sequence.toml ...` in the sequence's folder and diagnoses
    # from elsewhere: the run records the sequence in full, as it does the unit file.
    work = tmp_path / "work"
    work.mkdir()
    (work / "sequence.toml").write_bytes((SEQUENCES / "temp-circuit-check.toml").read_bytes())
    with shipped_bench("temp-circuit", ("open:ground",), folder=tmp_path) as (_, station):
        monkeypatch.chdir(work)
        args = ["run", "sequence.toml", "--station", str(station.path), "--serial", "SN-P"]
        assert main([*args, "--unit", str(UNIT)]) == 1
        monkeypatch.chdir(tmp_path)
        capsys.readouterr()
        assert main(["diagnose", "1", "--station", str(station.path), "--json"]) == 0
        assert json.loads(capsys.readouterr().out)["hypotheses"][0]["spec"] == "open:ground"
        # a run recorded before paths were kept in full holds the path as typed: the error
        # names it and the option that gives the file
        with sqlite3.connect(station.store_path) as db:
            db.execute("UPDATE runs SET sequence_path = 'sequence.toml' WHERE id = 1")
        db.close()
        assert main(["diagnose", "1", "--station", str(station.path)]) == 2
        err = capsys.readouterr().err
        assert "'sequence.toml'" in err and "--sequence FILE" in err and "Traceback" not in err
        given = ["--sequence", str(work / "sequence.toml"), "--json"]
        assert main(["diagnose", "1", "--station", str(station.path), *given]) == 0
        assert json.loads(capsys.readouterr().out)["hypotheses"][0]["spec"] == "open:ground"
        # its report is still written, and says the same instead of a bare "file not found"
        report = ["report", "1", "--station", str(station.path), "--format", "json", "--out", "-"]
        assert main(report) == 0
        message = json.loads(capsys.readouterr().out)["diagnosis"]["message"]
        assert "'sequence.toml'" in message and "--sequence FILE to rig diagnose" in message


def test_the_next_check_says_which_faults_it_tells_apart(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # The weak sequence reads the signal only: a series fault in the ground wire and one in the
    # signal wire read alike, so entry 1 holds both and the next check splits them, not entry 1
    # from entry 2.  With the full sequence an open ground wire stands alone in entry 1.
    weak = Path(__file__).parent / "data" / "weak-temp-check.toml"
    full = SEQUENCES / "temp-circuit-check.toml"
    for folder, sequence, fault in (
        ("weak", weak, "series:ground=30ohm"),
        ("full", full, "open:ground"),
    ):
        with shipped_bench("temp-circuit", (fault,), folder=tmp_path / folder) as (_, station):
            run = ["run", str(sequence), "--station", str(station.path), "--serial", "SN-N"]
            # the weak sequence lets the series fault through (a pass): diagnosed all the same
            assert main([*run, "--unit", str(UNIT)]) == (0 if folder == "weak" else 1)
            capsys.readouterr()
            assert main(["diagnose", "1", "--station", str(station.path), "--json"]) == 0
            found = json.loads(capsys.readouterr().out)
            assert main(["diagnose", "1", "--station", str(station.path)]) == 0
            said = capsys.readouterr().out.splitlines()[-1]
        first = found["hypotheses"][0]
        assert found["next_check"] is not None and said.endswith(found["next_check"])
        if folder == "weak":
            assert first["same_as"], first
            pair = f"{first['spec']} from {first['same_as'][0]}"
            assert said.startswith(f"to tell {pair} (both in entry 1), measure DC volts")
        else:
            assert not first["same_as"] and first["spec"] == "open:ground"
            assert said.startswith("to tell entry 1 from entry 2, measure DC volts")
            second = found["hypotheses"][1]["spec"]
            assert f"if {first['spec']}," in said and said.endswith(f"if {second}")


def test_an_overload_where_no_overload_level_is_known_costs_the_mismatch_without_a_warning() -> (
    None
):
    # A reading with no meter range behind it (its overload level unknown, infinite) read over
    # while a hypothesis predicts a finite value: the misfit is the stated mismatch, not NaN
    # (which numpy warned about on the terminal and which rejected the hypothesis outright).
    import math
    import warnings

    import numpy as np

    from rig.analysis.diagnose import MISMATCH_CHI2, _chi2

    with warnings.catch_warnings():
        warnings.simplefilter("error")
        chi2 = _chi2(np.array([math.inf]), np.array([1.0]), [math.inf], np.array([[2.0]]))
    assert chi2.tolist() == [MISMATCH_CHI2]


def test_a_passing_unit_with_a_drift_inside_its_tolerance_reads_as_a_good_unit(
    tmp_path: Path,
) -> None:
    # the sender's R25 tolerance is 2 % (the demo unit file, invented): a sender 1.5 % off its
    # curve is a good part, and its run passes; the good unit must lead, not a fitted drift
    unit = load_unit(SEQUENCES / "units" / "ntc-sender.toml")
    with shipped_bench("ntc-sender", ("drift:sender=+1.5%",), folder=tmp_path) as (_, station):
        plan = shipped_plan("ntc-sender-screen", station)
        store = ResultStore(tmp_path / "runs.sqlite")
        run = run_plan(plan, "SN-G", ask=lambda t: True, store=store)
        assert run.verdict.value == "pass"
        found = diagnose_run(store, run.run_id, unit, plan)
        store.close()
    top = found.hypotheses[0]
    assert top.spec == "none" and top.probability > 0.5, found.hypotheses[:2]


def test_the_good_units_score_is_its_marginal_likelihood() -> None:
    # source: scipy.stats.multivariate_normal (independent of rig): scored against diag(u^2),
    # the good unit's -chi2/2 + log Occam is log N(r; 0, D + J J^T) - log N(0; 0, D), the
    # normalisation a hypothesis scored as -chi2/2 on D alone leaves out
    from scipy.stats import multivariate_normal

    from rig.analysis.good_spread import good_unit_misfit

    rng = np.random.default_rng(7)
    u = rng.uniform(0.5, 2.0, size=6)
    spread = rng.normal(size=(6, 3)) * 3.0
    residual = rng.normal(size=6) * 4.0
    chi2, occam = good_unit_misfit(residual, u, spread)
    d = np.diag(u**2)
    expected = multivariate_normal(np.zeros(6), d + spread @ spread.T).logpdf(residual)
    expected -= multivariate_normal(np.zeros(6), d).logpdf(np.zeros(6))
    assert -chi2 / 2 + occam == pytest.approx(expected, rel=1e-9)


def test_hypotheses_are_ranked_by_their_groups_summed_probability(tmp_path: Path) -> None:
    # a passing sender 3.5 % off its curve: a drift and a group of faults the readings cannot
    # tell apart compete; whatever leads, the list must be in order of probability (a ranking,
    # common practice, no published source)
    unit = load_unit(SEQUENCES / "units" / "ntc-sender.toml")
    with shipped_bench("ntc-sender", ("drift:sender=-3.5%",), folder=tmp_path) as (_, station):
        plan = shipped_plan("ntc-sender-screen", station)
        store = ResultStore(tmp_path / "runs.sqlite")
        run = run_plan(plan, "SN-R", ask=lambda t: True, store=store)
        found = diagnose_run(store, run.run_id, unit, plan)
        store.close()
    probabilities = [h.probability for h in found.hypotheses]
    assert len(probabilities) >= 2
    assert probabilities == sorted(probabilities, reverse=True), found.hypotheses[:3]
