"""The console's parts on their own: chart, block letters, words, NTC plot, worker plumbing."""

from __future__ import annotations

import math
import threading
from pathlib import Path

import pytest
from bench_helpers import shipped_bench, shipped_plan

from rig.bench_open import close_bench, open_bench
from rig.console.big_letters import ROWS, big_letters
from rig.console.chart import BrailleCanvas, Chart, Line, Mark, render
from rig.console.plots import ntc_chart, ntc_nominal, trend_chart
from rig.console.screens.start import operator_line, serial_problem
from rig.console.words import (
    VERDICT_WORDS,
    pins_text,
    quantity_cells,
    run_verdict,
    stored_run_word,
)
from rig.console.worker import (
    GuardedRelays,
    GuardedSupply,
    Inbox,
    PromptGate,
    SafeStateMade,
    StopSwitch,
)
from rig.engine import Bench, StopRequested
from rig.events import StepResult
from rig.judge.decision import DecisionRule, Limits, Verdict

# --- chart ------------------------------------------------------------------------------------


def test_braille_dots_follow_the_unicode_braille_patterns() -> None:
    # Unicode Standard, Braille Patterns block (U+2800-U+28FF): dot 1 (top left) is bit 0x01,
    # dot 4 (top right) 0x08, dot 7 (bottom left) 0x40, dot 8 (bottom right) 0x80.
    cases = {(0, 0): "\u2801", (1, 0): "\u2808", (0, 3): "\u2840", (1, 3): "\u2880"}
    for (px, py), char in cases.items():
        canvas = BrailleCanvas(1, 1)
        canvas.dot(px, py)
        assert canvas.row_text(0).plain == char


def test_a_rising_line_is_drawn_from_bottom_left_to_top_right_and_marks_are_characters() -> None:
    chart = Chart([Line([(0.0, 0.0), (10.0, 10.0)])], [Mark(5.0, 5.0, "*")], legend="key")
    lines = render(chart, 40, 12).plain.splitlines()
    plot = [line.split("│", 1)[1] for line in lines if "│" in line]
    top, bottom = plot[0], plot[-1]
    assert top.rstrip("\u2800")[-1] != "\u2800" and top.index(top.strip("\u2800")[0]) > 20
    assert bottom[0] != "\u2800"
    assert sum(row.count("*") for row in plot) == 1
    assert lines[-1] == "key"


def test_a_chart_with_nothing_to_draw_still_renders() -> None:
    assert "│" in render(Chart(), 30, 8).plain


# --- block letters and words ------------------------------------------------------------------


def test_every_verdict_word_has_block_letters_of_equal_height() -> None:
    words = [*VERDICT_WORDS.values(), "ABORTED"]
    for word in words:
        lines = big_letters(word)
        assert len(lines) == ROWS
        # every character has a glyph: no letter column is left blank
        for char in word.replace(".", "").replace(" ", ""):
            assert any(line.strip() for line in big_letters(char)), char


def test_verdicts_read_as_distinct_words() -> None:
    assert len(set(VERDICT_WORDS.values())) == len(Verdict)
    aborted = run_verdict("aborted", Verdict.ERROR, "stopped by the operator", True)
    assert aborted.word == "ABORTED" and "stopped by the operator" in aborted.line
    unsafe = run_verdict("complete", Verdict.FAIL, "", False)
    assert unsafe.word == "FAIL"
    # a bench left live is said first: a long reason after it may be cut by the panel
    assert unsafe.line.startswith("bench NOT made safe: check relays and supply by hand")
    live = run_verdict("aborted", Verdict.ERROR, "relay box lost " * 20, False)
    assert live.line.startswith("bench NOT made safe") and "relay box lost" in live.line


def test_reading_limits_and_uncertainty_share_one_prefix() -> None:
    # as rig run and the report show them (GUM 7.2.6): U 5.3018 ohm to two significant digits,
    # rounded up (5.4), the reading and its limits to the same decimal place
    cells = quantity_cells(2162.7, "ohm", Limits(2055.0, 2271.3), 5.3018)
    assert (cells.reading, cells.unit, cells.limits, cells.uncertainty) == (
        "2.1627",
        "kohm",
        "2.055 .. 2.2713",
        "±0.0054",
    )
    # the reviewer's ambient: 23.00 beside ±0.24, a stated 10 to 40 degC without trailing zeros
    ambient = quantity_cells(23.00376, "degC", Limits(10.0, 40.0), 0.2347)
    assert (ambient.reading, ambient.limits, ambient.uncertainty) == ("23.00", "10 .. 40", "±0.24")
    # with no limits the same: U is never shown smaller than the U judged with
    bare = quantity_cells(23.00376, "degC", None, 0.2347)
    assert (bare.reading, bare.limits, bare.uncertainty) == ("23.00", "-", "±0.24")
    assert quantity_cells(math.inf, "V", Limits(None, 0.02), None).reading == "overload"
    assert quantity_cells(math.nan, "V", None, None).reading == "no reading"


def test_a_harness_proof_allows_no_fault_in_words_as_rig_check_and_rig_run_say() -> None:
    from rig.cli_output import show_limits

    none = Limits(None, 0.0)
    assert quantity_cells(2.0, "faults", none, None).limits == show_limits(none, "faults")
    assert show_limits(none, "faults") == "none allowed"
    assert quantity_cells(0.02, "V", Limits(None, 0.0), None).limits != "none allowed"


def test_pins_read_high_side_to_low_side() -> None:
    assert pins_text({"hi": "T1", "lo": "T2"}) == "T1-T2"
    four = {"force_hi": "A", "sense_hi": "B", "force_lo": "C", "sense_lo": "D"}
    assert pins_text(four) == "A/B-C/D"
    assert pins_text({"pin": "S_GND", "hi": "S_GND", "lo": "CHASSIS"}) == "S_GND-CHASSIS"


def test_a_serial_must_be_printable_and_not_empty() -> None:
    assert serial_problem("")
    assert serial_problem("AB\x1bC")
    assert serial_problem("X" * 65)
    assert serial_problem("HAR-0101") == ""


# --- the NTC plot against the published models ------------------------------------------------


def _ntc_result(
    step_id: str, unit: str, value: float, temp_c: float, **extras: float
) -> StepResult:
    return StepResult(
        position=1,
        step_id=step_id,
        kind="ntc",
        title="",
        pins={},
        value=value,
        unit=unit,
        limits=None,
        predicted=None,
        u_std=0.0,
        expanded_u=0.0,
        coverage_k=2.0,
        rule=DecisionRule.SIMPLE,
        verdict=Verdict.PASS,
        tur=None,
        tur_low=False,
        readings=1,
        settle_s=0.0,
        extras={"temperature_c": temp_c, **extras},
    )


def test_ntc_curve_follows_the_beta_model_and_the_divider(tmp_path: Path) -> None:
    with shipped_bench("ntc-sender", folder=tmp_path) as (_bench, station):
        sender = shipped_plan("ntc-sender-screen", station).sequence.step("sender-resistance")
        circuit = shipped_plan("temp-circuit-check", station).sequence.step("signal-vs-curve")
    # Beta model R = R25 exp[beta (1/T - 1/T25)] (thermistor Beta equation; see SOURCES, NTC
    # thermistors), R25 = 2.0 kohm and beta = 3450 K as the shipped sequence states.
    result = _ntc_result("sender-resistance", "ohm", 2000.0, 25.0)
    for temp in (10.0, 25.0, 40.0):
        expected = 2000.0 * math.exp(3450.0 * (1 / (temp + 273.15) - 1 / 298.15))
        assert math.isclose(ntc_nominal(sender, result, temp), expected, rel_tol=1e-9)
    # pull-up divider V = Vref R / (R + Rpull) (common practice, no published source)
    volts = _ntc_result("signal-vs-curve", "V", 2.3, 23.0, reference_v=5.0)
    r23 = 2000.0 * math.exp(3450.0 * (1 / (23.0 + 273.15) - 1 / 298.15))
    assert math.isclose(ntc_nominal(circuit, volts, 23.0), 5.0 * r23 / (r23 + 2490.0), rel_tol=1e-9)
    chart = ntc_chart(sender, result)
    assert chart is not None
    nominal, low, high = chart.lines
    # the band is the sequence's 5 % either side of the curve at every temperature
    for (t, r), (_, lo), (_, hi) in zip(nominal.points, low.points, high.points, strict=True):
        assert math.isclose(lo, r * 0.95) and math.isclose(hi, r * 1.05), t
    assert chart.marks[0].x == 25.0 and chart.marks[0].y == 2000.0


def test_trend_marks_failing_runs_with_x() -> None:
    rows = [
        {"value": 2.0, "verdict": "pass", "low": 1.0, "high": 3.0, "unit": "V", "serial": "A"},
        {"value": 3.5, "verdict": "fail", "low": 1.0, "high": 3.0, "unit": "V", "serial": "B"},
        {"value": None, "verdict": "error", "low": 1.0, "high": 3.0, "unit": "V", "serial": "C"},
    ]
    chart = trend_chart(rows, "s1")
    assert chart is not None
    assert [m.char for m in chart.marks] == ["o", "x"]
    assert "2 of 3" in chart.legend and "C ERROR" in chart.legend
    assert trend_chart([], "s1") is None


# --- worker plumbing --------------------------------------------------------------------------


def test_the_inbox_hands_out_bounded_batches_in_order() -> None:
    inbox = Inbox()
    for n in range(10):
        inbox.put(StopRequested(str(n)))  # type: ignore[arg-type]
    first = inbox.take(4)
    assert [str(x) for x in first] == ["0", "1", "2", "3"]
    assert len(inbox) == 6 and len(inbox.take(100)) == 6 and inbox.take(5) == []


def test_a_prompt_waits_for_the_answer_and_a_stop_answers_no() -> None:
    stop = StopSwitch(Inbox())

    def answer_later(step_id: str, text: str, answer: object) -> None:
        assert callable(answer)
        threading.Timer(0.01, answer, args=(True,)).start()

    assert PromptGate(answer_later, stop).ask("connect") is True

    def never(step_id: str, text: str, answer: object) -> None:
        threading.Timer(0.01, stop.throw).start()

    assert PromptGate(never, stop).ask("connect") is False


def test_after_a_stop_the_real_relay_box_and_supply_refuse_to_close_or_switch_on(
    tmp_path: Path,
) -> None:
    with shipped_bench("pressure-circuit", folder=tmp_path) as (bench, station):
        real = open_bench(station)
        try:
            stop = threading.Event()
            relays = GuardedRelays(real.relays, stop)
            supply = GuardedSupply(real.supply, stop)
            relays.apply({1})
            assert bench.state()["closed_relays"] == [1]
            stop.set()
            with pytest.raises(StopRequested):
                relays.apply({1, 2})
            with pytest.raises(StopRequested):
                supply.set_output(True)
            relays.apply(set())  # opening is always allowed
            supply.set_output(False)
            assert bench.state()["closed_relays"] == [] and bench.state()["outputs_on"] == []
        finally:
            close_bench(real)


class _HeldRelays:
    """The real relay box driver, with a closing held just after the guard let it through: the
    moment a stop can come between the guard's check and the command reaching the box."""

    def __init__(self, real: object) -> None:
        self._real = real
        self.reached = threading.Event()
        self.go = threading.Event()

    def apply(self, closed: object) -> None:
        self.reached.set()
        assert self.go.wait(5)
        self._real.apply(closed)  # type: ignore[attr-defined]

    def __getattr__(self, name: str) -> object:
        return getattr(self._real, name)


def _closing_held_past_the_guard(
    real: Bench,
) -> tuple[Inbox, StopSwitch, _HeldRelays, threading.Thread]:
    """A stop switch over the guarded bench, and a closing of relays 1 and 2 in a thread of its
    own, held past the guard's check and not yet at the box."""
    inbox = Inbox()
    stop = StopSwitch(inbox)
    held = _HeldRelays(real.relays)
    guarded = Bench(
        real.dmm,
        GuardedSupply(real.supply, stop.event),
        GuardedRelays(held, stop.event),  # type: ignore[arg-type]
    )
    stop.attach(guarded)
    closing = threading.Thread(target=guarded.relays.apply, args=({1, 2},))
    closing.start()
    assert held.reached.wait(5)
    return inbox, stop, held, closing


def _safe_state_made(inbox: Inbox, within_s: float) -> bool:
    waited = threading.Event()
    for _ in range(int(within_s / 0.01)):
        if any(isinstance(item, SafeStateMade) for item in inbox.take(100)):
            return True
        waited.wait(0.01)
    return False


def test_a_closing_let_through_just_before_a_stop_is_undone_by_the_stop(tmp_path: Path) -> None:
    # Safety property of the stop switch (common practice, no published source): once the stop's
    # make-safe has finished, no relay is closed, even when a closing passed the guard's check
    # just before the stop and reached the box after it.
    with shipped_bench("pressure-circuit", folder=tmp_path) as (bench, station):
        real = open_bench(station)
        try:
            inbox, stop, held, closing = _closing_held_past_the_guard(real)
            stop.throw()
            made_early = _safe_state_made(inbox, within_s=0.3)
            held.go.set()
            closing.join(5)
            assert made_early or _safe_state_made(inbox, within_s=5)
            assert not made_early, "the stop's make-safe finished before an allowed closing"
            assert bench.state()["closed_relays"] == []
        finally:
            close_bench(real)


def test_the_bench_is_not_closed_under_the_stops_make_safe(tmp_path: Path) -> None:
    # The worker closes the instruments once the run returns; the stop's make-safe may still be
    # waiting its turn then (here behind a closing held on its way to the box). Closing the
    # ports under it would turn a safe bench into "could not make safe".
    with shipped_bench("pressure-circuit", folder=tmp_path) as (bench, station):
        real = open_bench(station)
        inbox, stop, held, closing = _closing_held_past_the_guard(real)
        stop.throw()
        detached = threading.Event()
        threading.Thread(target=lambda: (stop.detach(), detached.set())).start()
        assert not detached.wait(0.3)  # the make-safe is not done: detach waits for it
        held.go.set()
        closing.join(5)
        assert detached.wait(5)
        close_bench(real)  # what the worker does next
        made = [i for i in inbox.take(100) if isinstance(i, SafeStateMade)]
        assert made and made[0].failures == ()
        assert bench.state()["closed_relays"] == []


def test_a_stored_run_reads_as_the_run_screen_said_it() -> None:
    # an aborted run's record verdict is "error" (docs/sequence-file.md): the history still says
    # ABORTED, as the run screen did when it ended
    assert stored_run_word("aborted", "error") == "ABORTED"
    assert stored_run_word("incomplete", None) == "INCOMPLETE"
    assert stored_run_word("running", None) == "RUNNING"
    assert (
        stored_run_word("complete", "conditional fail") == VERDICT_WORDS[Verdict.CONDITIONAL_FAIL]
    )


def test_the_start_screen_says_who_runs_are_recorded_as() -> None:
    # a QA or shop record names who tested (common practice, no published source): its absence
    # is said where every run starts
    assert operator_line("A. Tester").startswith("Operator: A. Tester")
    assert "not given" in operator_line("") and "--operator" in operator_line("")
