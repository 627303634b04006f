"""Proposed limits: the tail quantile against scipy, the false-reject rate on fresh good units, the
fault report against the predictor run on the sequence with the limits pasted in, bad input."""

from __future__ import annotations

import json
import math
import re
import tomllib
from dataclasses import replace
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from offline_station import offline_station_text
from scipy import stats

from rig.analysis.fault_set import DETECTING
from rig.analysis.limits import (
    EMPIRICAL,
    EXTRAPOLATED,
    NORMAL_FIT,
    fault_figures,
    present_limits,
    propose,
    round_out,
    study_limits,
    tail_quantile,
    toml_text,
)
from rig.analysis.montecarlo import SequenceMonteCarlo
from rig.analysis.predict import SequencePredictor
from rig.cli import main
from rig.commands.limits import load_station_or_virtual
from rig.config.sequence import load_sequence
from rig.config.unit_file import UnitModel, load_unit
from rig.plan import Plan, build_plan

SEQUENCES = Path(__file__).resolve().parent.parent / "sequences"
LIMIT_KEYS = ("low", "high", "nominal", "tolerance", "max")


def shipped_plan(sequence: str, unit_name: str) -> tuple[Plan, UnitModel]:
    unit = load_unit(SEQUENCES / "units" / f"{unit_name}.toml")
    station = load_station_or_virtual(None, unit)
    return build_plan(load_sequence(SEQUENCES / f"{sequence}.toml"), station), unit


# --- the tail quantile ------------------------------------------------------------------------


def test_extrapolated_tail_quantile_against_scipy_norm_ppf() -> None:
    """On normal data the tail line is the true one.  Tolerance 0.2 sd: the estimate's standard
    error is about 0.04 sd here, from the large-sample variance of a sample quantile,
    p(1 - p) / (N f(q)^2), at p = 0.002 and 0.02, carried along the line to p = 5e-5."""
    rng = np.random.default_rng(21)
    mean, sd, n = 3.0, 0.5, 100_000
    x = rng.normal(mean, sd, n)
    for p in (5e-5, 1 - 5e-5):
        q = tail_quantile(x, p)
        assert q.method == EXTRAPOLATED
        assert abs(q.value - stats.norm.ppf(p, mean, sd)) <= 0.2 * sd


def test_empirical_quantile_where_the_tail_is_well_filled() -> None:
    rng = np.random.default_rng(22)
    n, p = 100_000, 0.01
    x = rng.normal(0.0, 1.0, n)
    q = tail_quantile(x, p)
    assert q.method == EMPIRICAL
    z = stats.norm.ppf(p)
    se = math.sqrt(p * (1 - p) / n) / stats.norm.pdf(z)  # sample quantile standard error
    assert abs(q.value - z) <= 4 * se


def test_normal_fit_when_too_few_samples_for_a_tail() -> None:
    rng = np.random.default_rng(23)
    n, p = 1000, 1e-4
    x = rng.normal(10.0, 2.0, n)
    q = tail_quantile(x, p)
    assert q.method == NORMAL_FIT
    z = stats.norm.ppf(p)
    se = 2.0 * math.sqrt(1 / n + z**2 / (2 * n))  # of mean + z sd
    assert abs(q.value - stats.norm.ppf(p, 10.0, 2.0)) <= 4 * se


def test_bounded_tail_is_extrapolated_outward() -> None:
    """A bounded distribution (uniform) has a lighter tail than normal: the limit comes out a
    little beyond the true quantile, never inside it."""
    x = np.random.default_rng(24).uniform(0.0, 1.0, 100_000)
    q = tail_quantile(x, 1 - 5e-5)
    assert 1 - 5e-5 <= q.value <= 1.05


def test_quantile_refuses_a_probability_outside_zero_one() -> None:
    with pytest.raises(ValueError, match="strictly between 0 and 1"):
        tail_quantile(np.arange(10.0), 1.0)


def test_limits_are_rounded_outward_and_read_back() -> None:
    assert round_out(1.23456, "V", up=True) == (pytest.approx(1.235), "1.235 V")
    assert round_out(1.23456, "V", up=False) == (pytest.approx(1.234), "1.234 V")
    assert round_out(1.5, "V", up=True)[1] == "1.5 V"
    value, text = round_out(-8.21593e-5, "V", up=False)
    assert text == "-82.16 uV" and value == pytest.approx(-82.16e-6)
    assert round_out(14.4567, "degC", up=False)[1] == "14.45 degC"
    assert round_out(2.96512, "%", up=True)[1] == "2.966 %"
    assert round_out(2491.2, "ohm", up=True)[1] == "2.492 kohm"


# --- the false-reject rate --------------------------------------------------------------------


@pytest.mark.parametrize(
    ("sequence", "unit_name"),
    [("temp-circuit-check", "temp-circuit"), ("pressure-circuit-check", "pressure-circuit")],
)
def test_proposed_limits_hold_the_false_reject_rate_on_fresh_good_units(
    sequence: str, unit_name: str
) -> None:
    plan, unit = shipped_plan(sequence, unit_name)
    mc = SequenceMonteCarlo(plan, unit, SequencePredictor(plan, unit).run())
    target_ppm = 100.0
    proposals = {d.spec.id: propose(d, target_ppm) for d in mc.run(100_000, seed=11).steps}
    fresh_n = 300_000
    fresh = mc.run(fresh_n, seed=12)  # another seed: an independent stream of good units
    # at most the 99.9th percentile of the rejects a rate of exactly the target would give
    allowed = stats.binom.ppf(0.999, fresh_n, target_ppm / 1e6)
    for dist in fresh.steps:
        rejects = proposals[dist.spec.id].limits.outside(dist.figure).sum()
        assert rejects <= allowed, (dist.spec.id, rejects, allowed)


def test_loose_target_is_met_from_both_sides() -> None:
    """At 2 % the quantiles are empirical, so the fresh rate must come out near 2 %, not only
    under it: the bound is 5 standard errors of the two samples' binomial counts, plus the
    outward rounding to 4 digits (under 0.1 % of good units here)."""
    plan, unit = shipped_plan("temp-circuit-check", "temp-circuit")
    mc = SequenceMonteCarlo(plan, unit, SequencePredictor(plan, unit).run())
    n1, n2, p = 100_000, 100_000, 0.02
    proposals = {d.spec.id: propose(d, p * 1e6) for d in mc.run(n1, seed=31).steps}
    assert all(pr.method == EMPIRICAL for pr in proposals.values())
    se = math.sqrt(p * (1 - p) * (1 / n1 + 1 / n2))
    for dist in mc.run(n2, seed=32).steps:
        rate = proposals[dist.spec.id].limits.outside(dist.figure).mean()
        assert p - 5 * se - 0.001 <= rate <= p + 5 * se, (dist.spec.id, rate)


# --- the fault report against the predictor ----------------------------------------------------


def _toml_value(value: Any) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return json.dumps(value)
    if isinstance(value, int | float):
        return repr(value)
    if isinstance(value, list):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{ " + ", ".join(f"{k} = {_toml_value(v)}" for k, v in value.items()) + " }"
    raise TypeError(value)


def paste_limits(sequence_path: Path, pasted: dict[str, dict[str, str]], out: Path) -> Path:
    """The sequence with each step's limit keys replaced by the pasted ones (a test helper: a
    person does this in an editor)."""
    doc = tomllib.loads(sequence_path.read_text(encoding="utf-8"))
    lines = ["[sequence]"]
    lines += [f"{k} = {_toml_value(v)}" for k, v in doc["sequence"].items()]
    for step in doc["steps"]:
        if step["id"] in pasted:
            step = {k: v for k, v in step.items() if k not in LIMIT_KEYS} | pasted[step["id"]]
        lines += ["", "[[steps]]"] + [f"{k} = {_toml_value(v)}" for k, v in step.items()]
    out.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return out


@pytest.mark.parametrize(
    ("sequence", "unit_name"),
    [("temp-circuit-check", "temp-circuit"), ("ntc-sender-screen", "ntc-sender")],
)
def test_fault_report_agrees_with_the_predictor(
    sequence: str, unit_name: str, tmp_path: Path
) -> None:
    plan, unit = shipped_plan(sequence, unit_name)
    study = study_limits(plan, unit, samples=20_000, seed=3)
    assert study.faults and study.proposals

    # present limits: the figure judged in figure space gives the predictor's own verdicts
    by_id = {p.spec.id: p.spec for p in plan.steps}
    predictor = SequencePredictor(plan, unit)
    for index, fault in enumerate(study.faults):
        verdicts = {p.step_id: p.verdict for p in predictor.predict([fault])}
        for step_id, checks in study.checks.items():
            check = checks[index]
            limits = present_limits(by_id[step_id])
            assert limits is not None
            if verdicts[step_id].value not in ("error", "skipped"):
                outside = bool(limits.outside(np.array([check.figure]))[0])
                assert outside == check.present == (verdicts[step_id] in DETECTING)

    # proposed limits: paste the TOML into the sequence and predict again
    pasted = tomllib.loads(toml_text(study, plan.sequence.name, unit.name))
    assert set(pasted) == {p.step_id for p in study.proposals}
    path = paste_limits(SEQUENCES / f"{sequence}.toml", pasted, tmp_path / "pasted.toml")
    new_plan = build_plan(load_sequence(path), plan.station)
    new_predictor = SequencePredictor(new_plan, unit)
    assert all(v.verdict.value == "pass" for v in new_predictor.predict([]))
    caught_somewhere = False
    for index, fault in enumerate(study.faults):
        verdicts = {p.step_id: p.verdict for p in new_predictor.predict([fault])}
        for step_id, checks in study.checks.items():
            assert checks[index].proposed == (verdicts[step_id] in DETECTING), (step_id, fault)
            caught_somewhere |= checks[index].proposed
    assert caught_somewhere


def test_warns_when_no_limit_can_hold_the_target_and_catch_a_fault() -> None:
    """A sender drifted 1 % sits inside the spread of good senders (R25 ±2 %): no tolerance that
    holds 100 ppm can catch it, and the study says so for the step whose 5 % never would either;
    with a target of 50 %, half the good units rejected, some limit would."""
    from rig.faults import Fault

    plan, unit = shipped_plan("ntc-sender-screen", "ntc-sender")
    drift = Fault("drift", ("sender",), 1.0)
    strict = study_limits(plan, unit, samples=20_000, seed=4, faults=[drift])
    check = strict.checks["sender-resistance"][0]
    assert not check.catchable and not check.proposed
    assert any("sender-resistance" in w and "no limit" in w for w in strict.warnings)
    loose = study_limits(plan, unit, samples=20_000, seed=4, faults=[drift], false_reject_ppm=5e5)
    assert loose.checks["sender-resistance"][0].catchable


# --- the command ------------------------------------------------------------------------------


def test_cli_prints_toml_to_paste_and_json(capsys: pytest.CaptureFixture[str]) -> None:
    args = [
        "limits",
        str(SEQUENCES / "ntc-sender-screen.toml"),
        "--unit",
        str(SEQUENCES / "units" / "ntc-sender.toml"),
        "--samples",
        "5000",
    ]
    assert main([*args, "--toml"]) == 0
    pasted = tomllib.loads(capsys.readouterr().out)
    assert set(pasted) == {"sender-resistance", "sender-4wire"}  # not the bench's own Pt100
    assert set(pasted["sender-resistance"]) == {"tolerance"}
    assert set(pasted["sender-4wire"]) == {"low", "high"}

    assert main([*args, "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["samples"] == 5000
    assert [s["id"] for s in data["skipped"]] == ["place", "well-temperature"]
    assert data["skipped"][0]["reason"] == "an operator prompt: nothing is measured"
    assert {d["what"] for d in data["draws"]} >= {"ambient", "sensors.sender.r25"}

    assert main(args) == 0
    text = capsys.readouterr().out
    assert "skipped place: an operator prompt" in text
    assert "How each tolerance is drawn" in text


def test_a_drop_gets_a_bound_on_its_size_only(capsys: pytest.CaptureFixture[str]) -> None:
    # A drop along a wire or to ground is good when small (common practice, no published
    # source): a window around the sampled drops would exclude zero and fail a better harness.
    args = ["limits", str(SEQUENCES / "temp-circuit-check.toml"), "--samples", "5000"]
    unit = SEQUENCES / "units" / "temp-circuit.toml"
    assert main([*args, "--unit", str(unit), "--toml"]) == 0
    pasted = tomllib.loads(capsys.readouterr().out)
    for drop in ("signal-wire-drop", "sensor-ground-drop"):
        assert set(pasted[drop]) == {"max"}, pasted[drop]
    assert set(pasted["signal-at-controller"]) == {"low", "high"}


def test_cli_unknown_step_names_the_file_and_option(capsys: pytest.CaptureFixture[str]) -> None:
    sequence = SEQUENCES / "temp-circuit-check.toml"
    unit = SEQUENCES / "units" / "temp-circuit.toml"
    assert main(["limits", str(sequence), "--unit", str(unit), "--step", "nope"]) == 2
    err = capsys.readouterr().err
    assert f"{sequence} [--step]: no step 'nope' in this sequence; its steps: ambient," in err
    assert main(["limits", str(sequence), "--unit", str(unit), "--samples", "10"]) == 2
    assert "--samples [10]: expected at least 1000 samples" in capsys.readouterr().err


def test_a_study_narrowed_by_step_says_which_steps_it_left_out(
    capsys: pytest.CaptureFixture[str],
) -> None:
    # --step ambient studies only the bench's reference probe, which takes no proposed limits:
    # the faults it does not catch must not read as faults the whole sequence lets through.
    sequence = SEQUENCES / "temp-circuit-check.toml"
    unit = SEQUENCES / "units" / "temp-circuit.toml"
    args = ["limits", str(sequence), "--unit", str(unit), "--samples", "1000", "--step", "ambient"]
    assert main([*args, "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    ids = {s.id for s in load_sequence(sequence).steps}
    assert set(data["not_studied"]) == ids - {"ambient"}  # in the order the plan runs them
    assert data["caught_by_none"] == data["faults"]
    left_out = ", ".join(data["not_studied"])
    assert main(args) == 0
    text = capsys.readouterr().out
    assert f"not studied (--step leaves them out): {left_out}" in text
    assert "no limits proposed: no studied step takes limits from this study" in text
    assert "  faults no studied step catches (other steps not studied): open:signal," in text
    assert "  by no step:" not in text
    assert main([*args, "--toml"]) == 0
    assert f"# Not studied (--step leaves them out): {left_out}." in capsys.readouterr().out


@pytest.mark.parametrize(
    ("old", "new", "expected"),
    [
        (
            'value = "2.49 kohm"\ntolerance = "1 %"',
            'value = "2.49 kohm"\ntolerance = "-1 %"',
            "[resistors.pullup.tolerance]: expected a tolerance from 0 % to under 100 %, "
            "found -1 %",
        ),
        (
            'length_tolerance = "5 %"\narea_tolerance = "3 %"\n\n[wires.ground]',
            'length_tolerance = "5 m"\narea_tolerance = "3 %"\n\n[wires.ground]',
            "[wires.signal.length_tolerance]: expected a value in %, found '5 m' (a value in m)",
        ),
        (
            'r25_tolerance = "2 %"',
            'r25_tolerence = "2 %"',
            "[sensors.coolant.r25_tolerence]: unknown key; did you mean 'r25_tolerance'?",
        ),
        (
            'temperature_range = ["15 degC", "35 degC"]',
            'temperature_range = ["35 degC", "15 degC"]',
            "[ambient.temperature_range]: expected the lower temperature first",
        ),
        (
            'temperature_range = ["15 degC", "35 degC"]',
            'temperature_range = ["25 degC", "35 degC"]',
            "[ambient.temperature_range]: the temperature (23 degC) must lie inside",
        ),
        (
            'tolerance_class = "A"',
            'tolerance_class = "C"',
            "[reference_probe.tolerance_class]: expected one of 'AA', 'A', 'B', found 'C'",
        ),
    ],
)
def test_bad_tolerance_in_a_unit_file_names_file_and_key(
    old: str, new: str, expected: str, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    text = (SEQUENCES / "units" / "temp-circuit.toml").read_text(encoding="utf-8")
    assert text.count(old) == 1
    fixture = json.dumps(str(SEQUENCES / "demo-fixture.toml"))
    text = text.replace(old, new).replace('"../demo-fixture.toml"', fixture)
    unit = tmp_path / "unit.toml"
    unit.write_text(text, encoding="utf-8")
    sequence = SEQUENCES / "temp-circuit-check.toml"
    assert main(["limits", str(sequence), "--unit", str(unit)]) == 2
    err = capsys.readouterr().err
    assert str(unit) in err and expected in err, err
    assert "Traceback" not in err


@pytest.mark.parametrize(
    ("sequence", "unit_name"),
    [("temp-circuit-check", "temp-circuit"), ("ntc-sender-screen", "ntc-sender")],
)
@pytest.mark.parametrize(("low", "high"), [(-200, -199), (849, 850)])
def test_an_ambient_range_out_to_the_reference_curves_ends_is_studied(
    sequence: str,
    unit_name: str,
    low: int,
    high: int,
    tmp_path: Path,
    capsys: pytest.CaptureFixture[str],
) -> None:
    # -200 and 850 degC are the ends of the Pt100 curve (IEC 60751) and the unit file accepts
    # them; a class A probe there may read as the curve 0.55 or 1.85 degC further out.  Units
    # whose probe then reads off the curve count as no reading, as on the bench; the study runs.
    # A range 1 degC wide puts many draws within a tolerance of the end.
    text = (SEQUENCES / "units" / f"{unit_name}.toml").read_text(encoding="utf-8")
    stated = ('temperature = "23 degC"', 'temperature_range = ["15 degC", "35 degC"]')
    assert all(text.count(old) == 1 for old in stated)
    end = low if low == -200 else high
    text = text.replace(stated[0], f'temperature = "{end} degC"')
    text = text.replace(stated[1], f'temperature_range = ["{low} degC", "{high} degC"]')
    fixture = json.dumps(str(SEQUENCES / "demo-fixture.toml"))
    unit = tmp_path / "unit.toml"
    unit.write_text(text.replace('"../demo-fixture.toml"', fixture), encoding="utf-8")
    args = ["limits", str(SEQUENCES / f"{sequence}.toml"), "--unit", str(unit), "--json"]
    assert main([*args, "--samples", "2000"]) == 0, capsys.readouterr().err
    data = json.loads(capsys.readouterr().out)
    assert data["draws"][0] == {
        "what": "ambient",
        "spread": f"{low} to {high} degC",
        "distribution": "uniform",
        "why": "uniform over the stated range: a unit may be tested anywhere in it",
    }
    # every step has limits or a reason why not (an NTC at -200 degC is all but open)
    ids = [s.id for s in load_sequence(SEQUENCES / f"{sequence}.toml").steps]
    assert sorted(s["id"] for s in data["steps"] + data["skipped"]) == sorted(ids)


# --- what the proposed limits leave to the meter and to the room --------------------------------


def test_each_proposal_reports_the_tur_rig_check_shows_once_pasted(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """The drop along the pressure circuit's signal wire carries almost no current: good units
    read a few microvolts, and limits that hold 100 ppm are about as tight as the meter's own
    uncertainty on its smallest range.  The study says so, with the TUR that ``rig check`` then
    shows for the pasted limits (its LOW mark under 4:1 is common practice, no published
    source)."""
    plan, unit = shipped_plan("pressure-circuit-check", "pressure-circuit")
    study = study_limits(plan, unit, samples=20_000, seed=1)
    turs = {p.step_id: p.tur for p in study.proposals}
    # a tolerance around the prediction: its TUR at the step's stated pressure, as rig check
    # --unit shows it (tests/test_analysis_model_tur.py checks it against a hand calculation);
    # the stated pressure's u (1.7 kPa) is most of both the good units' spread and the step's U,
    # so it is LOW, and the warning says whose uncertainty that is
    fraction = turs["output-fraction"]
    assert fraction is not None and 2 < fraction < 4
    fraction_low = f"step output-fraction: TUR {math.floor(fraction * 10) / 10:.1f}:1 LOW at "
    [warned] = [w for w in study.warnings if w.startswith(fraction_low)]
    assert "the uncertainty of the meter and of the stated pressure is about as wide" in warned
    drop = turs["signal-wire-drop"]
    assert drop is not None and drop < 4
    low = f"TUR {math.floor(drop * 10) / 10:.1f}:1 LOW"  # one decimal, rounded down under 4:1
    assert any(w.startswith(f"step signal-wire-drop: {low}") for w in study.warnings)
    assert not any("TUR" in w and "signal-at-controller" in w for w in study.warnings)

    pasted = tomllib.loads(toml_text(study, plan.sequence.name, unit.name))
    sequence = paste_limits(SEQUENCES / "pressure-circuit-check.toml", pasted, tmp_path / "p.toml")
    station = tmp_path / "station.toml"
    station.write_text(
        offline_station_text("virtual-bench", unit.fixture_path, tmp_path), encoding="utf-8"
    )
    assert main(["check", str(sequence), "--station", str(station), "--unit", str(unit.path)]) == 0
    rows: dict[str, str] = {}
    for line in capsys.readouterr().out.splitlines():  # the plan's table: the first of each step
        if line:
            rows.setdefault(line.split()[0], line)
    for step_id, tur in turs.items():
        shown = rows[step_id].rstrip()
        shown_tur = "-" if tur is None else f"{tur:.1f}" if tur < 10 else f"{tur:.0f}"
        expected = "-" if tur is None else f"{shown_tur}:1" + (" LOW" if tur < 4 else "")
        assert shown.endswith(expected), (step_id, shown, expected)


def test_the_toml_to_paste_carries_the_warnings(capsys: pytest.CaptureFixture[str]) -> None:
    args = ["limits", str(SEQUENCES / "pressure-circuit-check.toml"), "--seed", "1", "--toml"]
    unit = SEQUENCES / "units" / "pressure-circuit.toml"
    assert main([*args, "--unit", str(unit), "--samples", "20000"]) == 0
    text = capsys.readouterr().out
    table = text.split("[signal-wire-drop]\n", 1)[1].splitlines()
    assert re.fullmatch(r"# TUR [0-3]\.\d:1 LOW \(under 4:1\): see the warnings", table[0]), table[
        0
    ]
    assert re.search(
        r"# - step signal-wire-drop: TUR [0-3]\.\d:1 LOW with the proposed limits", text
    )
    assert "max" in tomllib.loads(text)["signal-wire-drop"]


def unit_at_one_ambient(tmp_path: Path) -> Path:
    """The shipped temperature circuit without its ``temperature_range``."""
    text = (SEQUENCES / "units" / "temp-circuit.toml").read_text(encoding="utf-8")
    stated = 'temperature_range = ["15 degC", "35 degC"]\n'
    assert text.count(stated) == 1
    fixture = json.dumps(str(SEQUENCES / "demo-fixture.toml"))
    text = text.replace(stated, "").replace('"../demo-fixture.toml"', fixture)
    path = tmp_path / "one-ambient.toml"
    path.write_text(text, encoding="utf-8")
    return path


def test_a_unit_at_one_ambient_is_warned_of(tmp_path: Path) -> None:
    """Copper gains about 0.39 %/K (IEC 60028) and an NTC's divider voltage moves with its
    temperature: limits drawn at 23 degC alone reject good units in a room 5 degC away."""
    path = unit_at_one_ambient(tmp_path)
    unit = load_unit(path)
    ranged, _ = shipped_plan("temp-circuit-check", "temp-circuit")
    plan = build_plan(load_sequence(SEQUENCES / "temp-circuit-check.toml"), ranged.station)
    study = study_limits(plan, unit, samples=5000, seed=2)
    warning = study.warnings[0]
    assert warning.startswith(f"{path} states no temperature_range under [ambient]")
    assert "drawn at 23 degC" in warning and f"under [ambient] in {path}" in warning
    assert "signal-at-controller" in warning and "5 degC cooler or warmer" in warning
    # the claim holds: the nominal unit in a room 5 degC cooler is outside those limits
    cooler = SequencePredictor(plan, replace(unit, ambient_c=18.0)).predict()
    figure = fault_figures(plan, cooler)["signal-at-controller"][0]
    proposal = next(p for p in study.proposals if p.step_id == "signal-at-controller")
    assert proposal.limits.outside(np.array([figure]))[0]

    with_range = study_limits(
        ranged, load_unit(SEQUENCES / "units" / "temp-circuit.toml"), samples=5000, seed=2
    )
    assert not any("temperature_range" in w for w in with_range.warnings)
