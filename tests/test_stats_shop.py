"""Shop statistics over real stores: the demo's 10 sensor runs and retests on the virtual bench;
each figure recomputed independently from the stored rows (plain Python and numpy)."""

from __future__ import annotations

import dataclasses
import datetime as dt
import io
import json
import re
import sys
from collections import Counter
from pathlib import Path

import numpy as np
import pytest
from bench_helpers import MIDWAY_STOP, SEQUENCES, shipped_bench, shipped_plan

from rig.cli import main
from rig.config.fixture import load_fixture
from rig.config.station import load_station
from rig.config.unit_file import load_unit
from rig.demo import CASES, HARNESS_CASES, run_demo
from rig.runner import load_plan, run_plan
from rig.sim.bench import VirtualBench
from rig.stats.filters import FilterError, RunFilter, make_filter
from rig.stats.from_store import model_step_stats, shop_stats
from rig.stats.yields import runs_frame, screen_outcomes, units_frame
from rig.store import ResultStore

PASSING = ("pass", "conditional pass")


@pytest.fixture(scope="module")
def demo_store(tmp_path_factory: pytest.TempPathFactory) -> Path:
    store_path, runs = run_demo(tmp_path_factory.mktemp("demo"), cases=CASES)
    assert len(runs) == 10
    return store_path


def test_yield_and_screens_match_the_stored_runs(demo_store: Path) -> None:
    # source: first-pass / final yield as shares of units (common practice, no published source),
    # recomputed here in plain Python from the run rows
    store = ResultStore(demo_store)
    try:
        runs = sorted(store.runs(limit=1000), key=lambda r: (r["started_at"], r["id"]))
        stats = shop_stats(store, RunFilter())
    finally:
        store.close()
    assert stats.runs == len(runs) == 10
    table = stats.by_sequence.set_index("sequence")
    for sequence in {r["sequence_name"] for r in runs}:
        mine = [r for r in runs if r["sequence_name"] == sequence]
        first: dict[str, bool] = {}
        last: dict[str, bool] = {}
        for r in mine:
            ok = r["status"] == "complete" and r["verdict"] in PASSING
            first.setdefault(r["serial"], ok)
            last[r["serial"]] = ok
        assert table.loc[sequence, "units"] == len(first)
        assert table.loc[sequence, "first_pass_yield"] == pytest.approx(
            sum(first.values()) / len(first)
        )
        assert table.loc[sequence, "final_yield"] == pytest.approx(sum(last.values()) / len(last))
        screens = stats.screens.set_index("sequence")
        last_verdicts = {r["serial"]: r["verdict"] for r in mine if r["status"] == "complete"}
        assert screens.loc[sequence, "no_fault_found"] == sum(
            v == "pass" for v in last_verdicts.values()
        )


def test_a_screen_confirms_only_beyond_the_uncertainty_and_calls_conditional_inconclusive() -> None:
    # ILAC-G8:2019 (guarded decision rules): a conditional pass or fail lies within the
    # measurement's uncertainty of a limit, so it decides neither way; a returned unit whose last
    # verdict is conditional is inconclusive, not a confirmed failure or no fault found.
    # the last three: what the run's steps show (rig.screening.EVIDENCE_SQL): a step failed
    # beyond its U, every step inside beyond its U, the bench's reference failed
    rows = [
        (1, "A", "screen", "2026-12-01", "complete", "fail", "", 1, 0, 0),
        (2, "B", "screen", "2026-12-01", "complete", "conditional fail", "", 0, 0, 0),
        (3, "C", "screen", "2026-12-01", "complete", "conditional pass", "", 0, 0, 0),
        (4, "D", "screen", "2026-12-01", "complete", "pass", "", 0, 1, 0),
        (5, "E", "screen", "2026-12-01", "aborted", "error", "instrument fault: DMM gone", 0, 1, 0),
        (6, "B", "screen", "2026-12-02", "complete", "fail", "", 1, 0, 0),  # B retested
    ]
    # no end cause stored, no claim, no "no" answer
    rows = [(*row[:7], None, "", 0, *row[7:]) for row in rows]
    screen = screen_outcomes(units_frame(runs_frame(rows))).iloc[0]
    assert (screen["units"], screen["confirmed_failure"], screen["no_fault_found"]) == (5, 2, 1)
    assert (screen["inconclusive"], screen["undecided"]) == (1, 1)
    assert screen["confirmed_share"] == pytest.approx(2 / 3)


def test_pareto_and_capability_match_the_stored_steps(demo_store: Path) -> None:
    # source: counts of failed steps and numpy mean / std(ddof=1) of the stored step values
    store = ResultStore(demo_store)
    try:
        runs = store.runs(limit=1000)
        steps = [(r["sequence_name"], s) for r in runs for s in store.steps(r["id"])]
        stats = shop_stats(store, RunFilter())
    finally:
        store.close()
    # part failures: in runs that completed with no question answered no and no failed bench
    # reference, the bench's reference step left out (docs/reports-and-stats.md)
    undecided = {
        s["run_id"]
        for _, s in steps
        if s["verdict"] == "fail" and (s["unit"] == "" or s["kind"] == "reference-temperature")
    }
    complete = {r["id"] for r in runs if r["status"] == "complete"} - undecided
    failed = Counter(
        f"{seq} / {s['step_id']}"
        for seq, s in steps
        if s["verdict"] in ("fail", "conditional fail")
        and s["run_id"] in complete
        and s["kind"] != "reference-temperature"
    )
    assert dict(zip(stats.pareto_steps["step"], stats.pareto_steps["count"], strict=True)) == failed
    assert stats.pareto_steps["cumulative"].iloc[-1] == pytest.approx(1.0)
    assert list(stats.pareto_steps["count"]) == sorted(failed.values(), reverse=True)
    checked = 0
    for group in stats.steps:
        mine = [s for seq, s in steps if seq == group.sequence and s["step_id"] == group.step_id]
        if group.unit.endswith(" off prediction"):
            # judged around a prediction: each reading's deviation from it, whose limits stay
            # put while the step's move with the prediction (one group, not one per run)
            values = [s["value"] - s["predicted"] for s in mine if s["value"] is not None]
            assert group.low == pytest.approx(mine[0]["low"] - mine[0]["predicted"])
        elif group.unit == "% of prediction":
            values = [
                (s["value"] - s["predicted"]) / abs(s["predicted"]) * 100
                for s in mine
                if s["value"] is not None
            ]
        else:
            values = [
                s["value"]
                for s in mine
                if s["low"] == group.low and s["high"] == group.high and s["value"] is not None
            ]
        assert group.n == len(values)
        assert group.mean == pytest.approx(float(np.mean(values)), rel=1e-9, abs=1e-12)
        if len(values) > 1 and np.std(values) > 1e-9 * abs(np.mean(values)):
            s_dev = float(np.std(values, ddof=1))
            assert group.std == pytest.approx(s_dev, rel=1e-6)
            if group.low is not None and group.high is not None:
                assert group.cp == pytest.approx((group.high - group.low) / (6 * s_dev), rel=1e-6)
            checked += 1
    assert checked >= 3
    # a step judged around a prediction is one group, however its limits moved
    model_steps = {(seq, s["step_id"]) for seq, s in steps if s["predicted"] is not None}
    grouped = [
        (g.sequence, g.step_id) for g in stats.steps if (g.sequence, g.step_id) in model_steps
    ]
    assert model_steps and sorted(grouped) == sorted(model_steps)


def test_retested_unit_counts_in_final_but_not_first_pass_yield(tmp_path: Path) -> None:
    # a real retest on the virtual bench: the broken sender fails, the replacement passes
    for faults in (("open:lead_b",), ()):
        with shipped_bench("ntc-sender", faults, folder=tmp_path) as (_, station):
            run_plan(shipped_plan("ntc-sender-screen", station), "RET-1", ask=lambda t: True)
    store = ResultStore(station.store_path)
    try:
        stats = shop_stats(store, RunFilter())
    finally:
        store.close()
    row = stats.by_sequence.iloc[0]
    assert (row["units"], row["runs"]) == (1, 2)
    assert row["first_pass_yield"] == 0.0 and row["final_yield"] == 1.0
    screen = stats.screens.iloc[0]
    assert (screen["confirmed_failure"], screen["no_fault_found"]) == (0, 1)


def test_filters_select_runs(demo_store: Path) -> None:
    store = ResultStore(demo_store)
    try:
        assert shop_stats(store, make_filter(serial_prefix="NTC-")).runs == 3
        assert shop_stats(store, make_filter(sequence="temp-circuit-check")).runs == 4
        day = store.run(1)["started_at"][:10]
        assert shop_stats(store, make_filter(since=day, until=day)).runs == 10
        assert shop_stats(store, make_filter(until="2000-01-01")).runs == 0
        assert shop_stats(store, make_filter(station="elsewhere")).runs == 0
    finally:
        store.close()


def test_bad_filter_arguments_are_named(
    demo_store: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    with pytest.raises(FilterError, match="--since: expected a date as YYYY-MM-DD"):
        make_filter(since="1/3/2026")
    with pytest.raises(FilterError, match="--until 2026-01-01 is before --since 2026-02-01"):
        make_filter(since="2026-02-01", until="2026-01-01")
    assert main(["stats", "--store", str(demo_store), "--since", "yesterday"]) == 2
    assert "--since: expected a date as YYYY-MM-DD" in capsys.readouterr().err
    assert main(["stats", "--store", str(demo_store.parent / "none.sqlite")]) == 2
    assert "no such results store file" in capsys.readouterr().err
    assert main(["stats"]) == 2
    assert "give --station STATION or --store PATH" in capsys.readouterr().err


def test_stats_json_and_tables(demo_store: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["stats", "--store", str(demo_store), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["runs"] == 10
    assert {r["sequence"] for r in data["yield_by_sequence"]} == {
        "ntc-sender-screen",
        "temp-circuit-check",
        "pressure-circuit-check",
    }
    assert data["pareto_by_fault_kind"] is None and "no diagnosis" in data["fault_kind_note"]
    assert all("cpk" in s for s in data["steps"])
    # an operator's answer (the sensor screen's prompt "place") is no measurement to take a
    # capability of; a declined prompt would still count in the Pareto
    assert "place" not in {s["step_id"] for s in data["steps"]}
    assert main(["stats", "--store", str(demo_store), "--serial-prefix", "HAR-"]) == 0
    text = capsys.readouterr().out
    assert "4 production runs" in text and "Failure Pareto by step" in text
    assert "Cp and Cpk from fewer than 30 values are rough" in text  # 4 runs a step here


def test_a_filter_that_matches_no_run_says_so_and_names_what_there_is(
    demo_store: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # a misspelt sequence or station name is refused with the names the store holds, rather
    # than reported as a shop with no production (0 runs and empty tables, exit 0)
    store = ResultStore(demo_store)
    try:
        stations = sorted({r["station"] for r in store.runs(limit=1000)})
    finally:
        store.close()
    base = ["stats", "--store", str(demo_store)]
    assert main([*base, "--sequence", "nosuch"]) == 2
    err = capsys.readouterr().err
    assert "--sequence 'nosuch': no production run has that sequence name" in err
    assert "known: ntc-sender-screen, pressure-circuit-check, temp-circuit-check" in err
    assert main([*base, "--station-name", "bench-9", "--json"]) == 2
    assert f"known: {', '.join(stations)}" in capsys.readouterr().err
    # names the store holds, a day it holds none: said in words, with what each part shuts out
    args = [*base, "--sequence", "temp-circuit-check", "--until", "2000-01-01"]
    assert main(args) == 0
    text = capsys.readouterr().out
    assert text.startswith("no production run matches --sequence temp-circuit-check --until 2000")
    assert "without --sequence: 0; without --until: 4; the store's 10 runs were started" in text
    assert "Yield per sequence" not in text
    assert main([*args, "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["runs"] == 0 and data["no_match"].startswith("no production run matches")
    # the filter's study flag is a JSON boolean, not the text "False"
    assert data["filter"]["study"] is False and data["filter"]["until"] == "2000-01-01"


def test_stats_page_has_tables_and_charts(
    demo_store: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    page = tmp_path / "stats.html"
    args = ["stats", "--store", str(demo_store), "--sequence", "ntc-sender-screen"]
    assert main([*args, "--html", str(page)]) == 0
    html = page.read_text(encoding="utf-8")
    assert 'id="yield"' in html and 'id="pareto-steps"' in html
    # column heads in words, not the JSON's keys
    assert "<th>first pass yield</th>" in html and "first_pass_yield" not in html
    # one histogram and one trend chart per numeric step group, and the Pareto chart
    assert html.count("<svg") >= 2 * 3 + 1
    # self-contained: the only addresses are the XML namespace names of SVG (never fetched)
    assert set(re.findall(r"https?://[^\"' ]+", html)) <= {
        "http://www.w3.org/2000/svg",
        "http://www.w3.org/1999/xlink",
    }
    assert main([*args, "--html"]) == 0  # default place: beside the store
    assert (demo_store.parent / "reports" / "stats.html").is_file()
    assert main([*args, "--html", str(SEQUENCES / "stats.html")]) == 2
    assert "not written into the source tree" in capsys.readouterr().err


def test_fault_kind_pareto_names_the_faults_the_bench_injected(
    demo_store: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    station_file = demo_store.parent / "station-pressure-circuit.toml"  # written by the demo
    assert main(["stats", "--station", str(station_file), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    try:
        import rig.analysis.diagnose  # noqa: F401
    except ImportError:
        assert data["pareto_by_fault_kind"] is None
        return
    store = ResultStore(demo_store)
    try:
        injected = Counter(
            json.loads(r["faults"])[0].split(":")[0]
            for r in store.runs(limit=100)
            if r["verdict"] in ("fail", "conditional fail")
        )
    finally:
        store.close()
    found = {r["fault_kind"]: r["count"] for r in data["pareto_by_fault_kind"]}
    assert found == dict(injected)


def _screen_senders_at(
    ambients: tuple[float, ...],
    folder: Path,
    store: ResultStore,
    sequence: Path = SEQUENCES / "ntc-sender-screen.toml",
    first: int = 0,
) -> None:
    """A good NTC sender screened once at each bench temperature, as units ``T-0``, ``T-1``...
    (numbered from ``first``), with the shipped screen or ``sequence``."""
    unit = load_unit(SEQUENCES / "units" / "ntc-sender.toml")
    for n, ambient in enumerate(ambients, start=first):
        bench_unit = dataclasses.replace(unit, ambient_c=ambient)
        with VirtualBench(bench_unit, load_fixture(unit.fixture_path)) as bench:
            station = load_station(bench.write_station(folder / f"s{n}" / "station.toml"))
            run_plan(load_plan(sequence, station), f"T-{n}", ask=lambda t: True, store=store)


def test_an_ntc_step_at_several_temperatures_is_one_capability_row(tmp_path: Path) -> None:
    # An NTC's limits follow its curve at the measured temperature (Beta model, SOURCES.md), so
    # every bench temperature gives other limits; its capability is that of the deviation from
    # the curve, against the 5 % tolerance that does not move (docs/reports-and-stats.md).
    store = ResultStore(tmp_path / "runs.sqlite")
    try:
        _screen_senders_at((18.0, 23.0, 28.0), tmp_path, store)
        limits = {
            (s["low"], s["high"])
            for r in store.runs(limit=10)
            for s in store.steps(r["id"])
            if s["step_id"] == "sender-resistance"
        }
        stats = shop_stats(store, RunFilter())
    finally:
        store.close()
    assert len(limits) == 3  # the step's limits moved with the temperature
    rows = [g for g in stats.steps if g.step_id == "sender-resistance"]
    assert len(rows) == 1 and rows[0].n == 3
    assert rows[0].unit == "% of prediction" and (rows[0].low, rows[0].high) == pytest.approx(
        (-5, 5)
    )
    assert abs(rows[0].mean) < 1.0  # good senders: within a fraction of a per cent of the curve


def test_a_harness_proofs_own_findings_fill_their_own_pareto(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # the proof names its faults in the wire list's words; the findings Pareto takes their kind
    # from it, with or without a station, instead of calling the run "not diagnosed" (the demo
    # builds W4 and W5 swapped); the diagnosed-fault Pareto, one fault per run, leaves it out
    _, runs = run_demo(tmp_path, cases=HARNESS_CASES)
    assert [r.summary.verdict.value for r in runs] == ["pass", "fail"]
    for where in (["--station", str(tmp_path / "station-harness.toml")],
                  ["--store", str(tmp_path / "results.sqlite")]):  # fmt: skip
        assert main(["stats", *where, "--json"]) == 0
        data = json.loads(capsys.readouterr().out)
        found = {r["finding_kind"]: r["count"] for r in data["harness_findings_by_kind"]}
        assert found == {"swap": 1}
        assert not data["pareto_by_fault_kind"]  # None without a station, else no rows
    # a harness proof ships or rejects a harness: it is no returned-unit screen
    assert data["screen_outcomes"] == []


def test_a_model_step_whose_tolerance_changed_gets_a_row_per_tolerance() -> None:
    # rows as ResultStore.model_step_rows gives them: the tolerance went from 5 % to 10 % of the
    # prediction between runs, so no one offset or ratio holds for all; a row per tolerance, each
    # in % of the prediction (never one row in ohm per run), and both failures still count (for
    # the Pareto).  Deviations by hand: (2100 - 2000) / 20 = 5 %, (2300 - 2100) / 21 = 9.52 %,
    # (2600 - 2200) / 22 = 18.18 %.
    rows = [
        ("s", "ntc", "ohm", 2100.0, 2000.0, 1900.0, 2100.0, 5.0, 3, "pass", "complete", 0),
        ("s", "ntc", "ohm", 2300.0, 2100.0, 1995.0, 2205.0, 5.0, 3, "fail", "complete", 1),
        ("s", "ntc", "ohm", 2600.0, 2200.0, 1980.0, 2420.0, 5.0, 3, "fail", "complete", 1),
    ]
    found = model_step_stats(rows)
    assert sum(s.failures for s in found) == 2
    assert [s.unit for s in found] == ["% of prediction"] * 2
    assert [(s.low, s.high, s.n) for s in found] == [
        pytest.approx((-5.0, 5.0, 2)),
        pytest.approx((-10.0, 10.0, 1)),
    ]
    assert found[0].mean == pytest.approx((5.0 + 200 / 21) / 2)
    assert found[1].mean == pytest.approx(400 / 22)
    # a tolerance in ohm that changed: grouped by offset, a row per tolerance in ohm off the
    # prediction (offsets 100, 100 and 150 ohm: two groups; ratios give three)
    offsets = [
        (*r[:5], r[4] - t, r[4] + t, *r[7:]) for r, t in zip(rows, (100, 100, 150), strict=True)
    ]
    assert [(s.unit, s.low, s.high, s.n) for s in model_step_stats(offsets)] == [
        ("ohm off prediction", -100.0, 100.0, 2),
        ("ohm off prediction", -150.0, 150.0, 1),
    ]
    # and where they do hold (5 % each time), one row in % of the prediction
    same = [(*r[:5], r[4] * 0.95, r[4] * 1.05, *r[7:]) for r in rows]
    (one,) = model_step_stats(same)
    assert one.unit == "% of prediction" and (one.low, one.high) == pytest.approx((-5.0, 5.0))
    assert one.failures == 2


def test_a_model_steps_guard_band_is_in_the_unit_of_its_limits(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # The guard band of a step judged as a deviation in % of its prediction is drawn against
    # limits in % of the prediction: each run's stored U (ohm) is turned into % of that run's
    # own prediction before the mean (a relative uncertainty U / |y| x 100, as the GUM writes
    # relative uncertainties; the clause, 5.1.6, from memory).
    # Two bench temperatures give two predictions, so the mean of U/prediction differs from
    # the mean U over the mean prediction.  Recomputed here from the stored step rows.
    store_path = tmp_path / "runs.sqlite"
    store = ResultStore(store_path)
    try:
        _screen_senders_at((15.0, 30.0), tmp_path, store)
        stored = [
            s
            for r in store.runs(limit=10)
            for s in store.steps(r["id"])
            if s["step_id"] == "sender-resistance"
        ]
    finally:
        store.close()
    assert len(stored) == 2 and stored[0]["predicted"] != stored[1]["predicted"]
    expected = float(np.mean([s["expanded_u"] / abs(s["predicted"]) * 100 for s in stored]))
    assert expected < 5.0  # inside the 5 % tolerance: a guard band the limits can hold
    args = ["stats", "--store", str(store_path)]
    assert main([*args, "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    (row,) = [s for s in data["steps"] if s["step_id"] == "sender-resistance"]
    assert row["unit"] == "% of prediction"
    assert row["mean_expanded_u"] == pytest.approx(expected, rel=1e-9)
    page = tmp_path / "stats.html"
    assert main([*args, "--html", str(page)]) == 0
    text = capsys.readouterr().out
    assert re.search(r"sender-resistance\s+% of prediction\s+-5\s+5\s", text)
    html = page.read_text(encoding="utf-8")
    section = html.split("/ sender-resistance (limits")[1].split("<h3>")[0]
    assert "-5 .. 5 % of prediction" in section
    assert f"<td>{expected:.4g}</td>" in section.replace(' class="num"', "")


FAILS_THEN_ASKS = MIDWAY_STOP.replace('high = "4 kohm"', 'high = "2 kohm"', 1)
"""The sequence of ``MIDWAY_STOP`` with a first step whose limits a good sender (about 2.2 kohm
at the bench's ambient) fails: then its question."""


def test_the_pareto_counts_part_failures_and_keeps_stopped_runs_apart(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    # the screen rule (rig.screening; ILAC-G8 vocabulary): a run that did not complete decides
    # nothing about the part, so its failed step is no failure cause of the part
    sequence = tmp_path / "sequence.toml"
    sequence.write_text(FAILS_THEN_ASKS, encoding="utf-8")
    with shipped_bench("ntc-sender", folder=tmp_path / "bench") as (_, station):
        run = ["run", str(sequence), "--station", str(station.path)]
        assert main([*run, "--serial", "Q-1", "--yes"]) == 1  # complete: a part failure
        monkeypatch.setattr(sys, "stdin", io.StringIO(""))  # nobody answers the question
        assert main([*run, "--serial", "Q-2"]) == 3  # aborted after the same failure
        store = ResultStore(station.store_path)
        try:
            verdicts = [
                (r["status"], [s["verdict"] for s in store.steps(r["id"])][:1])
                for r in sorted(store.runs(), key=lambda r: r["id"])
            ]
            stats = shop_stats(store, RunFilter())
        finally:
            store.close()
        assert verdicts == [("complete", ["fail"]), ("aborted", ["fail"])]
        pareto = dict(zip(stats.pareto_steps["step"], stats.pareto_steps["count"], strict=True))
        assert pareto == {"stops-midway / lead-check": 1}
        (step,) = [g for g in stats.steps if g.step_id == "lead-check"]
        assert step.failures == 1 and step.n == 2  # both readings still in the capability
        assert stats.undecided.to_dict(orient="records") == [
            {"cause": "a question got no answer", "runs": 1}
        ]
        capsys.readouterr()
        assert main(["stats", "--store", str(station.store_path)]) == 0
        text = capsys.readouterr().out
        assert "Runs not decided (not counted as part failures)" in text
        assert re.search(r"a question got no answer\s+1", text)
        assert re.search(r"stops-midway / lead-check\s+1\s+100.0 %", text)


def test_an_edited_sequence_shows_its_versions_and_each_tolerance_keeps_its_row(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # The same screen, then an edited copy of it (same name, tolerance 5 % -> 8 %): the records
    # keep each version's content hash, so the statistics say two versions merged, give the
    # NTC step a row per tolerance in % of its prediction, and --sequence-hash picks one.
    edited = tmp_path / "edited.toml"
    text = (SEQUENCES / "ntc-sender-screen.toml").read_text(encoding="utf-8")
    assert text.count('tolerance = "5 %"') == 1
    edited.write_text(text.replace('tolerance = "5 %"', 'tolerance = "8 %"'), encoding="utf-8")
    store_path = tmp_path / "runs.sqlite"
    store = ResultStore(store_path)
    try:
        _screen_senders_at((18.0, 28.0), tmp_path, store)
        _screen_senders_at((20.0, 26.0), tmp_path, store, sequence=edited, first=2)
        hashes = [r["sequence_hash"] for r in reversed(store.runs(limit=10))]
    finally:
        store.close()
    assert len(set(hashes)) == 2 and hashes[0] == hashes[1] != hashes[2] == hashes[3]
    old, new = hashes[0][:12], hashes[2][:12]
    args = ["stats", "--store", str(store_path)]
    assert main(args) == 0
    out = capsys.readouterr().out
    day = dt.datetime.now(dt.UTC).date().isoformat()
    assert (
        f"  ntc-sender-screen: 2 versions of this sequence: {old} (2 runs, from {day}), "
        f"{new} (2 runs, from {day})"
    ) in out
    rows = re.findall(r"sender-resistance\s+% of prediction\s+(-?\d+)\s+(\d+)\s+(\d+)\s", out)
    assert rows == [("-5", "5", "2"), ("-8", "8", "2")]
    assert main([*args, "--sequence-hash", new[:7], "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["runs"] == 2
    assert [v["sequence_hash"] for v in data["sequence_versions"]] == [hashes[2]]
    (row,) = [s for s in data["steps"] if s["step_id"] == "sender-resistance"]
    assert (row["low"], row["high"], row["n"]) == (pytest.approx(-8.0), pytest.approx(8.0), 2)
    assert main([*args, "--sequence-hash", "not-hex"]) == 2
    assert "--sequence-hash: expected the start of a version's hash" in capsys.readouterr().err
    # the page's charts of each row draw that row's runs only
    from reports.stats_html import series_from_rows

    store = ResultStore(store_path)
    try:
        stats = shop_stats(store, RunFilter())
        for step in (s for s in stats.steps if s.step_id == "sender-resistance"):
            found = store.step_series(RunFilter(), step.sequence, step.step_id)
            assert len(series_from_rows(found, step)) == step.n == 2
    finally:
        store.close()
