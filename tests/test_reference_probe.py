"""The station's reference probe: its own uncertainty joins the meter's in a reference
temperature and, through it, in an NTC step's prediction; it is named in the run's record.

Real runs on the virtual bench (SCPI over TCP, relay box on a pty, a real SQLite file); the
expected figures are computed here from the standards' formulas, not from rig's code.
"""

from __future__ import annotations

import datetime as dt
import json
import math
import re
from pathlib import Path

import pytest
from bench_helpers import SEQUENCES, shipped_bench, shipped_plan

from rig.bench_open import CalibrationPastDue, check_calibration
from rig.cli import main
from rig.config.station import Station, load_station
from rig.errors import ConfigError
from rig.runner import run_plan
from rig.store import ResultStore

# IEC 60751 Callendar-Van Dusen coefficients above 0 degC (IEC 60751:2008, 4.2; well known,
# from memory): R(t) = R0 (1 + A t + B t^2).
CVD_A, CVD_B = 3.9083e-3, -5.775e-7
# IEC 60751 class A tolerance: +-(0.15 + 0.002 |t|) degC (IEC 60751:2008, Table 1; from memory).
CLASS_A_FIXED, CLASS_A_PER_DEGREE = 0.15, 0.002
# The res4w 1 kohm and res2w 10 kohm rows of the station file rig sim writes (its own invented
# figures): +-(0.010 % of reading + 0.001 % of range).
PCT_READING, PCT_RANGE = 0.010, 0.001
# The shipped NTC sender's curve and tolerance (sequences/ntc-sender-screen.toml, invented for
# the demo).
R25_OHM, BETA_K, TOLERANCE = 2000.0, 3450.0, 0.05

PROBE_TABLE = re.compile(r"\n\[reference_probe\].*", re.S)


def _meter_u(reading: float, range_: float) -> float:
    """A data-sheet bound read as a rectangular distribution, u = a / sqrt(3) (GUM 4.3.7)."""
    return (PCT_READING / 100 * abs(reading) + PCT_RANGE / 100 * range_) / math.sqrt(3)


def _with_probe(station: Station, table: str) -> Station:
    """The bench's station file with its ``[reference_probe]`` table replaced (or removed)."""
    text = PROBE_TABLE.sub("", station.path.read_text(encoding="utf-8"))
    station.path.write_text(text + table, encoding="utf-8")
    return load_station(station.path)


def _run_ntc_screen(tmp_path: Path, table: str) -> tuple[dict[str, dict], dict[str, dict], dict]:
    """One ntc-sender-screen run with the probe ``table``: its steps and readings by step id
    (as stored) and the run's row."""
    with shipped_bench("ntc-sender", folder=tmp_path) as (_bench, station):
        station = _with_probe(station, table)
        summary = run_plan(shipped_plan("ntc-sender-screen", station), "NTC-T1", ask=lambda t: 1)
    store = ResultStore(station.store_path)
    try:
        steps = {s["step_id"]: s for s in store.steps(summary.run_id)}
        readings = {r["step_id"]: r for r in store.readings(summary.run_id)}
        run = store.run(summary.run_id)
        run["instruments"] = json.loads(run["instruments"])
    finally:
        store.close()
    return steps, readings, run


def _expected_u(readings: dict[str, dict], probe_u: float | None) -> tuple[float, float, float]:
    """The well temperature, its standard uncertainty, and the NTC step's, from the raw readings
    by the standards' formulas (the probe's part ``probe_u``, None without one)."""
    pt = readings["well-temperature"]
    r_pt, range_pt = float(pt["value"]), float(pt["range"])
    # the quadratic's root near A t (IEC 60751's inverse for t >= 0)
    t = (-CVD_A + math.sqrt(CVD_A**2 - 4 * CVD_B * (1 - r_pt / 100.0))) / (2 * CVD_B)
    u_meter_c = _meter_u(r_pt, range_pt) / (100.0 * (CVD_A + 2 * CVD_B * t))
    parts = [u_meter_c] if probe_u is None else [u_meter_c, probe_u]
    u_t = math.sqrt(sum(p * p for p in parts))  # GUM 5.1.2, uncorrelated inputs
    # beta model: R(T) = R25 exp(B (1/T - 1/T25)), dR/dT = -B R / T^2 (T in kelvin)
    kelvin = t + 273.15
    r_pred = R25_OHM * math.exp(BETA_K * (1 / kelvin - 1 / 298.15))
    slope = BETA_K * r_pred / kelvin**2
    ntc = readings["sender-resistance"]
    # the limits are (1 +- t) R(T): the upper one moves (1 + t) times as far as R(T) with an
    # error in T, and that sensitivity coefficient is the one U carries (GUM 5.1.2)
    u_limit = (1 + TOLERANCE) * slope * u_t
    u_ntc = math.hypot(_meter_u(float(ntc["value"]), float(ntc["range"])), u_limit)
    return t, u_t, u_ntc


def test_a_class_a_probe_widens_the_well_temperature_and_the_ntc_prediction(
    tmp_path: Path,
) -> None:
    table = '\n[reference_probe]\nidentity = "Pt100 WELL-7"\ncalibration_due = 2099-12-31\n'
    steps, readings, _run = _run_ntc_screen(tmp_path, table + 'tolerance_class = "A"\n')
    t, _u_meter_only, _ = _expected_u(readings, None)
    probe_u = (CLASS_A_FIXED + CLASS_A_PER_DEGREE * abs(t)) / math.sqrt(3)  # GUM 4.3.7
    t, u_t, u_ntc = _expected_u(readings, probe_u)
    well, ntc = steps["well-temperature"], steps["sender-resistance"]
    assert well["value"] == pytest.approx(t, abs=1e-9)
    assert well["u_std"] == pytest.approx(u_t, rel=1e-9)
    assert ntc["u_std"] == pytest.approx(u_ntc, rel=1e-9)
    # near 23 degC the class dominates: U (k = 2) about 0.23 degC, not the meter's 0.06 degC
    assert 2 * well["u_std"] == pytest.approx(0.235, abs=0.005)


def test_a_certificates_uncertainty_is_divided_by_its_coverage_factor(tmp_path: Path) -> None:
    table = (
        '\n[reference_probe]\nidentity = "Pt100 WELL-7"\ncalibration_due = 2099-12-31\n'
        'uncertainty = "0.06 degC"\ncoverage_factor = 3\n'
    )
    steps, readings, _run = _run_ntc_screen(tmp_path, table)
    _t, u_t, u_ntc = _expected_u(readings, 0.06 / 3)  # u = U / k (GUM 6.2.1)
    assert steps["well-temperature"]["u_std"] == pytest.approx(u_t, rel=1e-9)
    assert steps["sender-resistance"]["u_std"] == pytest.approx(u_ntc, rel=1e-9)


def test_without_a_probe_the_meter_alone_and_rig_check_warns_once(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    steps, readings, run = _run_ntc_screen(tmp_path, "")
    _t, u_t, u_ntc = _expected_u(readings, None)
    assert steps["well-temperature"]["u_std"] == pytest.approx(u_t, rel=1e-9)
    assert steps["sender-resistance"]["u_std"] == pytest.approx(u_ntc, rel=1e-9)
    assert [i["role"] for i in run["instruments"]] == ["dmm", "supply", "relay_box"]
    code = main(
        [
            "check",
            str(SEQUENCES / "ntc-sender-screen.toml"),
            "--station",
            str(tmp_path / "station.toml"),
        ]
    )
    out = capsys.readouterr().out
    assert code == 0
    assert out.count("warning: the station states no [reference_probe]") == 1
    assert "reference probe:" not in out


def test_the_probe_is_named_in_the_record_in_the_report_and_by_rig_check(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    table = (
        '\n[reference_probe]\nidentity = "Pt100 WELL-7"\ncalibration_due = 2098-03-31\n'
        'tolerance_class = "AA"\n'
    )
    _steps, _readings, run = _run_ntc_screen(tmp_path, table)
    probe = run["instruments"][-1]
    assert probe["role"] == "reference_probe"
    assert probe["identity"] == "Pt100 WELL-7" and probe["calibration_due"] == "2098-03-31"
    station = str(tmp_path / "station.toml")
    args = ["report", str(run["id"]), "--station", station, "--format", "csv", "--out", "-"]
    assert main(args) == 0
    report = capsys.readouterr().out
    assert "reference_probe: Pt100 WELL-7 (calibration due 2098-03-31)" in report
    code = main(["check", str(SEQUENCES / "ntc-sender-screen.toml"), "--station", station])
    out = capsys.readouterr().out
    assert code == 0
    assert "reference probe: Pt100 WELL-7, class AA (IEC 60751), calibration due 2098-03-31" in out
    assert "[reference_probe]" not in out  # no warning


def _station_file(tmp_path: Path, table: str) -> Path:
    """The complete example station of docs/station-file.md with ``table`` appended."""
    examples = Path(__file__).parent / "data" / "doc-examples"
    (tmp_path / "fixture.toml").write_text(
        (examples / "fixture.toml").read_text(encoding="utf-8"), encoding="utf-8"
    )
    text = (examples / "station.toml").read_text(encoding="utf-8")
    path = tmp_path / "station.toml"
    path.write_text(text + table, encoding="utf-8")
    return path


def _problems(path: Path) -> list[str]:
    with pytest.raises(ConfigError) as caught:
        load_station(path)
    return [str(p) for p in caught.value.problems]


def test_a_wrong_probe_table_is_named_by_file_line_and_key(tmp_path: Path) -> None:
    path = _station_file(
        tmp_path,
        '\n[reference_probe]\nidentity = "P1"\ncalibration_due = "2027-01-01"\n'
        'tolerance_class = "C"\ncoverage_factor = 2\nwell = 1\n',
    )
    first = path.read_text(encoding="utf-8").splitlines().index('identity = "P1"') + 1
    problems = _problems(path)
    name = str(path)
    assert problems == [
        f"{name}:{first + 1} [reference_probe.calibration_due]: expected a TOML date such as "
        "2027-06-30, found '2027-01-01'",
        f"{name}:{first + 2} [reference_probe.tolerance_class]: expected one of 'AA', 'A', 'B', "
        "found 'C'",
        f"{name}:{first + 3} [reference_probe.coverage_factor]: belongs with uncertainty "
        "(a certificate's k)",
        f"{name}:{first + 4} [reference_probe.well]: unknown key; expected one of: "
        "allow_past_due, calibration_due, coverage_factor, identity, tolerance_class, uncertainty",
    ]


def test_a_probe_states_one_accuracy_and_its_identity(tmp_path: Path) -> None:
    both = _station_file(
        tmp_path,
        '\n[reference_probe]\nidentity = "P1"\ncalibration_due = 2027-01-01\n'
        'tolerance_class = "A"\nuncertainty = "0.05 degC"\n',
    )
    assert [p.split(" ", 1)[1] for p in _problems(both)] == [
        "[reference_probe.uncertainty]: give either tolerance_class or uncertainty, not both"
    ]
    neither = _station_file(tmp_path, "\n[reference_probe]\ncalibration_due = 2027-01-01\n")
    assert [p.split(" ", 1)[1] for p in _problems(neither)] == [
        "[reference_probe.identity]: missing; expected a string",
        "[reference_probe.tolerance_class]: missing; expected tolerance_class ('AA', 'A', 'B', "
        "IEC 60751) or uncertainty (a certificate's expanded uncertainty, such as '0.05 degC')",
    ]


def test_a_past_due_probe_is_refused_unless_allowed(tmp_path: Path) -> None:
    table = '\n[reference_probe]\nidentity = "P1"\ncalibration_due = 2027-01-01\n'
    path = _station_file(tmp_path, table + 'tolerance_class = "A"\n')
    today = dt.date(2027, 1, 2)
    with pytest.raises(CalibrationPastDue, match=r"reference_probe \(P1\) was due .* 2027-01-01"):
        check_calibration(load_station(path), today)
    allowed = _station_file(tmp_path, table + 'tolerance_class = "A"\nallow_past_due = true\n')
    assert check_calibration(load_station(allowed), today) == [
        "reference_probe calibration past due since 2027-01-01 (allowed by station)"
    ]
    assert check_calibration(load_station(allowed), dt.date(2027, 1, 1)) == []


def test_every_past_due_item_is_named_at_once(tmp_path: Path) -> None:
    # Met one at a time, each refusal would cost a trip to the bench (common practice, no
    # published source: a station's calibration is checked as a whole).
    table = '\n[reference_probe]\nidentity = "P1"\ncalibration_due = 2027-01-01\n'
    path = _station_file(tmp_path, table + 'tolerance_class = "A"\n')
    station = load_station(path)
    station.instruments["dmm"].calibration_due = dt.date(2026, 12, 1)
    station.instruments["supply"].calibration_due = dt.date(2026, 11, 1)
    with pytest.raises(CalibrationPastDue) as refused:
        check_calibration(station, dt.date(2027, 1, 2))
    text = str(refused.value)
    for named in (
        "dmm (",
        "supply (",
        "reference_probe (P1)",
        "[dmm], [supply], [reference_probe]",
    ):
        assert named in text, text
    assert "have them recalibrated" in text


def test_a_past_due_probe_does_not_stop_a_sequence_that_never_reads_it(tmp_path: Path) -> None:
    past_due = '\n[reference_probe]\nidentity = "P1"\ntolerance_class = "A"\n'
    past_due += "calibration_due = 2020-01-31\n"
    with shipped_bench("pressure-circuit", folder=tmp_path / "p") as (_bench, station):
        station = _with_probe(station, past_due)
        plan = shipped_plan("pressure-circuit-check", station)
        assert not plan.reads_reference_probe
        summary = run_plan(plan, "PR-1")
    assert summary.status == "complete", summary.reason
    with shipped_bench("ntc-sender", folder=tmp_path / "n") as (_bench, station):
        station = _with_probe(station, past_due)
        plan = shipped_plan("ntc-sender-screen", station)
        with pytest.raises(CalibrationPastDue, match=r"reference_probe \(P1\)"):
            run_plan(plan, "NTC-1", ask=lambda t: True)
