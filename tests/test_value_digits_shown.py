"""What ``rig run``, ``rig check`` and ``rig limits`` show must not contradict the verdict or
the flag beside it: a TUR under the usual 4:1 minimum (common practice, no published source)
never reads 4.0:1, and a value judged outside (or inside) a limit by less than its display step
is shown with the digits that tell it from that limit.  The worked values are the review's:
4.80001 V and 4.79999 V against 0.6 .. 4.8 V."""

from __future__ import annotations

import io
import re

import pytest

from rig.cli_output import Output, value_text
from rig.events import StepResult
from rig.judge.decision import COVERAGE_K, DecisionRule, Limits, Verdict, tur_text
from rig.value_digits import limit_at_place

WINDOW = Limits(0.6, 4.8)


@pytest.mark.parametrize(
    ("tur", "shown"),
    [
        (3.96, "3.9:1 LOW"),
        (3.9999, "3.9:1 LOW"),
        (3.6, "3.6:1 LOW"),
        (1.39, "1.3:1 LOW"),
        (4.0, "4.0:1"),
        (4.04, "4.0:1"),
        (12.4, "12:1"),
    ],
)
def test_a_low_tur_never_reads_as_the_minimum(tur: float, shown: str) -> None:
    assert tur_text(tur) == shown


def number(text: str) -> float:
    """The number of a shown value in volts (prefixes as rig.quantity writes them)."""
    value, unit = text.split()
    return float(value) * {"V": 1.0, "mV": 1e-3, "uV": 1e-6}[unit]


@pytest.mark.parametrize("value", [4.80001, 4.79999, 0.599999, 0.6000004, 4.8 + 1e-9])
def test_a_value_near_a_limit_is_told_from_it(value: float) -> None:
    text = value_text(value, "V", WINDOW)
    assert text not in ("4.8 V", "600 mV")
    # on the same side of each limit as the value itself
    for limit in (0.6, 4.8):
        assert (number(text) > limit) == (value > limit)
        assert (number(text) < limit) == (value < limit)


def test_a_value_clear_of_its_limits_keeps_four_digits() -> None:
    assert value_text(2.2345678, "V", WINDOW) == "2.235 V"
    assert value_text(4.8, "V", WINDOW) == "4.8 V"  # on the limit: the same text is right


def result(value: float, verdict: Verdict, tur: float) -> StepResult:
    return StepResult(
        position=1,
        step_id="signal",
        kind="volts",
        title="signal",
        pins={},
        value=value,
        unit="V",
        limits=WINDOW,
        predicted=None,
        u_std=0.000126,
        expanded_u=COVERAGE_K * 0.000126,
        coverage_k=COVERAGE_K,
        rule=DecisionRule.SIMPLE,
        verdict=verdict,
        tur=tur,
        tur_low=tur < 4,
        readings=1,
        settle_s=0.0,
    )


def test_the_run_table_agrees_with_its_verdict_and_flag() -> None:
    buffer = io.StringIO()
    out = Output(buffer)
    out.results([result(4.80001, Verdict.FAIL, 3.96), result(4.79999, Verdict.PASS, 8333.0)])
    lines = buffer.getvalue().splitlines()
    fail = next(line for line in lines if line.endswith("FAIL") or "FAIL " in line)
    passed = next(line for line in lines if "PASS" in line)
    assert re.search(r"\b4\.80001 V\b", fail) and "3.9:1 LOW" in fail
    assert re.search(r"\b4\.79999 V\b", passed)


def test_limits_beside_a_value_are_shown_to_its_digits() -> None:
    # A limit rounded to four digits must not read on the other side of the value it judged:
    # 28.2083 % failed against a high limit of 28.20823 %, which reads 28.21 % to four digits.
    # U 0.000252 % reads 0.00026 % (two significant digits, rounded up: GUM 7.2.6), so the
    # value and its limits are shown to five decimals, the limits' digits kept (a stated limit
    # that five decimals hold exactly without trailing zeros).
    from dataclasses import replace

    buffer = io.StringIO()
    row = replace(result(28.2083, Verdict.FAIL, 8.0), unit="%", limits=Limits(24.21, 28.20823))
    Output(buffer).results([row])
    line = next(line for line in buffer.getvalue().splitlines() if "FAIL" in line)
    assert "28.20830 %" in line and "28.20823 %" in line and "28.21 %" not in line, line
    assert "24.21 % .. 28.20823 %" in line and "±0.00026 %" in line, line  # 24.21 as stated


def test_the_html_report_shows_a_low_tur_as_the_terminal_does() -> None:
    from reports.run_html import _ratio

    assert _ratio(3.96) == tur_text(3.96) == "3.9:1 LOW"
    assert _ratio(64.2) == "64:1" and _ratio(None) == ""


def test_a_stated_limit_drops_trailing_zeros_and_a_computed_one_keeps_the_values_digits() -> None:
    # 4.8 V stated, beside a value read to five decimals: the place holds it exactly
    assert limit_at_place(4.8, 5) == "4.8" and limit_at_place(10.0, 2) == "10"
    # a limit computed from a model (2269.996 ohm), rounded to the ohm and written in kohm,
    # keeps the value's digits: its last zero is a rounded digit, not a stated one
    assert limit_at_place(2269.996, 0, 3) == "2.270" and limit_at_place(2270.0, 0, 3) == "2.27"


def test_a_stated_limit_with_more_digits_than_the_value_is_shown_as_stated() -> None:
    # a sequence's 4.125 V beside a reading whose U (0.24 V) gives two decimals: the limit is a
    # specification, shown as written, not rounded to 4.12 (GUM 7.2.6 rounds the result)
    assert limit_at_place(4.125, 2) == "4.125"
    # a computed copper limit keeps only the reading's digits
    assert limit_at_place(0.05735177, 4) == "0.0574"
