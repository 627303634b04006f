"""How verdicts, readings and limits read on screen: always as words, one unit per row.

Colour only repeats what the words already say, so the console reads on a monochrome terminal.
A step's reading, limits and uncertainty share one engineering prefix, so the eye compares numbers
rather than prefixes.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass

from rig.events import NONE_ALLOWED, StepResult, allows_none
from rig.judge.decision import Limits, Verdict
from rig.value_digits import digits_shown
from rig.value_digits import u_text as digits_of_u

VERDICT_WORDS = {
    Verdict.PASS: "PASS",
    Verdict.CONDITIONAL_PASS: "COND. PASS",
    Verdict.CONDITIONAL_FAIL: "COND. FAIL",
    Verdict.FAIL: "FAIL",
    Verdict.ERROR: "ERROR",
    Verdict.SKIPPED: "SKIPPED",
}

VERDICT_STYLES = {
    Verdict.PASS: "bold green",
    Verdict.CONDITIONAL_PASS: "bold yellow",
    Verdict.CONDITIONAL_FAIL: "bold yellow",
    Verdict.FAIL: "bold red",
    Verdict.ERROR: "bold magenta",
    Verdict.SKIPPED: "dim",
}

_PREFIXES = {-9: "n", -6: "u", -3: "m", 0: "", 3: "k", 6: "M", 9: "G"}
_SYMBOLS = {"degC": "°C", "ohm": "ohm"}


VERDICT_VALUES = frozenset(v.value for v in Verdict)


def verdict_word(verdict: Verdict) -> str:
    return VERDICT_WORDS[verdict]


def stored_run_word(status: str, verdict: str | None) -> str:
    """A stored run's outcome in the word the run screen gave it: its verdict once complete,
    ABORTED (or INCOMPLETE) otherwise (the record's verdict of such a run is ``error``)."""
    if status == "complete" and verdict in VERDICT_VALUES:
        return verdict_word(Verdict(verdict))
    return status.upper() if status else "RUNNING"


@dataclass(frozen=True)
class RunVerdict:
    """The whole run's outcome as the operator must read it from across the bench."""

    word: str
    line: str
    style: str


NOT_SAFE = "bench NOT made safe: check relays and supply by hand"
"""Said first whenever a run ended with the bench not proven safe (relays open, supply off)."""


def run_verdict(status: str, verdict: Verdict, reason: str, safe: bool) -> RunVerdict:
    """``complete`` runs show their worst step verdict; anything else is ABORTED with its reason."""
    if status != "complete":
        why = f"run aborted: {reason or 'no reason given'}"
        # a bench left live comes first: the reason may be long, and the panel cuts what is long
        line = f"{NOT_SAFE}; {why}" if not safe else f"{why}; bench made safe"
        return RunVerdict("ABORTED", line, "bold magenta")
    words = {
        Verdict.PASS: "every step within its limits",
        Verdict.CONDITIONAL_PASS: "within limits, but inside the uncertainty of a limit",
        Verdict.CONDITIONAL_FAIL: "outside a limit, but within the uncertainty of it",
        Verdict.FAIL: "at least one step outside its limits",
        Verdict.ERROR: "at least one step could not measure",
        Verdict.SKIPPED: "no step was measured",
    }
    line = f"{NOT_SAFE}; {words[verdict]}" if not safe else f"{words[verdict]}; bench made safe"
    return RunVerdict(VERDICT_WORDS[verdict], line, VERDICT_STYLES[verdict])


def _scale(magnitude: float, unit: str) -> tuple[float, str]:
    """Factor and symbol that show ``magnitude`` with an engineering prefix."""
    symbol = _SYMBOLS.get(unit, unit)
    if unit in ("", "%", "degC", "K", "s") or not math.isfinite(magnitude) or magnitude == 0:
        return 1.0, symbol
    exponent = int(math.floor(math.log10(abs(magnitude)) / 3) * 3)
    exponent = max(-9, min(9, exponent))
    return 10.0**exponent, _PREFIXES[exponent] + symbol


def _number(value: float | None, factor: float) -> str:
    if value is None:
        return ""
    if math.isnan(value):
        return "no reading"
    if math.isinf(value):
        return "overload"
    return f"{value / factor:.5g}"


@dataclass(frozen=True)
class StepCells:
    """One step as the run table shows it."""

    reading: str
    unit: str
    limits: str
    uncertainty: str


def step_cells(result: StepResult) -> StepCells:
    return kind_cells(result.kind, result.value, result.unit, result.limits, result.expanded_u)


def kind_cells(
    kind: str, value: float, unit: str, limits: Limits | None, expanded_u: float | None
) -> StepCells:
    """A prompt's answer reads yes or no; everything else is a quantity."""
    if kind == "prompt":
        return StepCells("yes" if value >= 0.5 else "no", "", "answer yes", "")
    return quantity_cells(value, unit, limits, expanded_u)


def quantity_cells(
    value: float, unit: str, limits: Limits | None, expanded_u: float | None
) -> StepCells:
    """Reading, unit, limits and ± U (k = 2), scaled alike."""
    sizes = [abs(v) for v in (value, *_limit_values(limits)) if v is not None and math.isfinite(v)]
    factor, symbol = _scale(max(sizes) if sizes else math.nan, unit)
    if limits is None:
        limit_text = "-"
    elif allows_none(limits, unit):
        limit_text = NONE_ALLOWED
    else:
        low = "-inf" if limits.low is None else _number(limits.low, factor)
        high = "+inf" if limits.high is None else _number(limits.high, factor)
        limit_text = f"{low} .. {high}"
    u_text = ""
    if expanded_u is not None and math.isfinite(expanded_u) and expanded_u > 0:
        digits = _u_digits(value, expanded_u, limits, factor)
        if digits is not None:  # no limits, or none allowed: the limits' words stay
            stated = limit_text in ("-", NONE_ALLOWED)
            return StepCells(digits[0], symbol, limit_text if stated else digits[1], digits[2])
        u_text = f"±{digits_of_u(expanded_u, round(math.log10(factor)))}"
    return StepCells(_number(value, factor), symbol, limit_text, u_text)


def _u_digits(
    value: float, u: float, limits: Limits | None, factor: float
) -> tuple[str, str, str] | None:
    """Value, limits and ± U to the digits U supports, as ``rig run`` and the report show them
    (``rig.value_digits``, GUM 7.2.6), in the prefix of ``factor``; None where the value or a
    stated limit is not a finite number (no reading, an overload)."""
    low, high = _limit_values(limits)
    shown = digits_shown(value, u, low, high, round(math.log10(factor)))
    if shown is None:
        return None
    limit_text = f"{shown.low or '-inf'} .. {shown.high or '+inf'}"
    return shown.value, limit_text, f"±{shown.u}"


def _limit_values(limits: Limits | None) -> tuple[float | None, float | None]:
    if limits is None:
        return None, None
    return limits.low, limits.high


def pins_text(pins: dict[str, str]) -> str:
    """Pins as ``high-side - low-side``: ``T1-T2``, ``PT_FH/PT_SH-PT_FL/PT_SL``, a supply after."""
    high = _unique(p for r, p in pins.items() if r.endswith("hi") or r in ("from", "pin"))
    low = _unique(p for r, p in pins.items() if r.endswith("lo") or r == "to")
    supply = _unique(p for r, p in pins.items() if r.startswith("supply_"))
    rest = [f"{r}={p}" for r, p in pins.items() if p not in high + low + supply]
    text = "/".join(high) + ("-" + "/".join(low) if low else "")
    if supply:
        text += " supply " + "/".join(supply)
    return " ".join(part for part in (text, *rest) if part)


def _unique(pins: Iterable[str]) -> list[str]:
    return list(dict.fromkeys(pins))


NOTE_CELL_CHARS = 26
"""Widest step note a table cell shows; a longer one is cut there (``...``) and given in full
elsewhere on the screen, wrapped: a harness proof's findings run to hundreds of characters."""


def note_parts(note: str) -> list[str]:
    """A step's note split where the engine joined its parts (``; ``): a harness proof's
    findings, a step's problems and remarks, each to be read on a line of its own."""
    return [part for part in note.split("; ") if part.strip()]


def note_cell(note: str) -> str:
    """A step's note as a table cell: whole where it fits, else its first words and ``...``."""
    if len(note) <= NOTE_CELL_CHARS:
        return note
    start = note[: NOTE_CELL_CHARS - 3]
    if " " in start.strip():
        start = start.strip().rsplit(" ", 1)[0]
    return start.rstrip() + " ..."


RECORD_TEXT_SHOWN = 60
"""Characters of a remark shown under the verdict; the whole of it is in the run's record."""


def record_text_line(claim: str, remark: str) -> str:
    """The claim and remark a run was started with, on one line under its verdict (the remark's
    first line, shortened), so the inspector sees what the record was filed with; empty if none."""
    parts = [f"claim: {claim}"] if claim else []
    if remark:
        first = remark.strip().splitlines()[0]
        more = len(first) > RECORD_TEXT_SHOWN or first != remark.strip()
        parts.append(f"remark: {first[:RECORD_TEXT_SHOWN]}" + (" ..." if more else ""))
    return " · ".join(parts)


def live_text(value: float, unit: str) -> str:
    cells = quantity_cells(value, unit, None, None)
    return f"{cells.reading} {cells.unit}".strip()
