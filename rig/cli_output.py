"""The one place the command line writes to the terminal: tables, progress and verdicts."""

from __future__ import annotations

import json
import math
import os
import sys
import textwrap
import time
from collections.abc import Sequence
from typing import Any, TextIO

from rig.events import (
    CUT_SHORT,
    NONE_ALLOWED,
    NOT_RUN,
    Event,
    PromptShown,
    ReadingTaken,
    RunFinished,
    RunStarted,
    StepFinished,
    StepResult,
    allows_none,
    prompt_answer,
)
from rig.judge.decision import Limits, Verdict, tur_text
from rig.quantity import format_quantity, prefixed_unit
from rig.value_digits import digits_shown

TERMINAL_WIDTH = 80
"""The columns a table that may hold long text is wrapped to: the classic terminal's width
(common practice, no published source), so that it reads unbroken in the smallest usual one."""


class Output:
    """Writes human output to ``out`` and errors to ``err``; ``quiet`` silences progress."""

    def __init__(self, out: TextIO | None = None, err: TextIO | None = None) -> None:
        self.out = out or sys.stdout
        self.err = err or sys.stderr
        self.quiet = False
        self.show_readings = False
        """Print each reading once the store has committed it (``rig run --readings``)."""
        self._total = 0
        self._gone: set[TextIO] = set()
        self.no_stops_run = False
        """A no to the prompt being asked ends the run (``PromptShown.stops_run``): said as it
        is asked."""

    def line(self, text: str = "") -> None:
        if not self.quiet:
            self._write(self.out, text)

    def error(self, text: str) -> None:
        self._write(self.err, text)

    def json(self, data: Any) -> None:
        self._write(self.out, json.dumps(data, indent=2, default=str))

    def _write(self, stream: TextIO, text: str) -> None:
        """One line; once its reader has gone (``rig check ... | head``) the stream is quietly
        dropped and the command goes on: a run still ends safe and recorded."""
        if stream in self._gone:
            return
        try:
            print(text, file=stream, flush=True)
        except BrokenPipeError:
            self._gone.add(stream)
            _to_devnull(stream)

    def table(self, headers: Sequence[str], rows: Sequence[Sequence[str]]) -> None:
        widths = [len(h) for h in headers]
        for row in rows:
            widths = [max(w, len(c)) for w, c in zip(widths, row, strict=True)]
        self.line("  ".join(h.ljust(w) for h, w in zip(headers, widths, strict=True)))
        self.line("  ".join("-" * w for w in widths))
        for row in rows:
            self.line("  ".join(c.ljust(w) for c, w in zip(row, widths, strict=True)))

    def wrapped_table(
        self,
        headers: Sequence[str],
        rows: Sequence[Sequence[str]],
        under: Sequence[str],
        width: int = TERMINAL_WIDTH,
    ) -> None:
        """A table whose last column is wrapped to fit ``width``, each row followed by its text
        in ``under`` (a long description) on lines of its own, wrapped and indented beneath the
        last column: every word kept, and no line wider than ``width`` (a word longer than the
        room left stands whole on its own line)."""
        widths = [len(h) for h in headers[:-1]]
        for row in rows:
            widths = [max(w, len(c)) for w, c in zip(widths, row[:-1], strict=True)]
        indent = " " * sum(w + 2 for w in widths)
        room = max(width - len(indent), 20)
        body: list[str] = []
        for row, text in zip(rows, under, strict=True):
            lead = "  ".join(c.ljust(w) for c, w in zip(row[:-1], widths, strict=True)) + "  "
            last = _wrap(row[-1], room) or [""]
            body += [lead + last[0], *(indent + line for line in last[1:])]
            body += [indent + "  " + line for line in _wrap(text, room - 2)]
        rule = max([len(headers[-1]), *(len(line) - len(indent) for line in body)])
        self.line("  ".join(h.ljust(w) for h, w in zip(headers, [*widths, 0], strict=True)))
        self.line("  ".join("-" * w for w in [*widths, min(rule, room)]))
        for line in body:
            self.line(line.rstrip())

    # --- progress of a run --------------------------------------------------------------------

    def on_event(self, event: Event) -> None:
        if isinstance(event, RunStarted):
            self._total = len(event.steps)
            self.line(f"run {event.run_id}: {event.sequence} on unit {event.serial}")
        elif isinstance(event, StepFinished):
            r = event.result
            done = r.position
            bar = "#" * done + "." * max(0, self._total - done)
            self.line(f"  [{bar}] {r.step_id}: {r.verdict.value}")
        elif isinstance(event, PromptShown):
            self.no_stops_run = event.stops_run
        elif isinstance(event, ReadingTaken) and self.show_readings:
            why = f" ({event.note})" if event.note else ""
            self.line(f"    stored {event.step_id} {event.role} {event.value!r} {event.unit}{why}")
        elif isinstance(event, RunFinished) and not event.safe:
            self.error("WARNING: the bench could not be verified safe: " + "; ".join(event.notes))

    def warnings(self, texts: Sequence[str]) -> None:
        """A run's notes that a technician must act on (``RunSummary.warnings``), under its
        verdict: otherwise they would reach only the record and ``rig check``."""
        for text in texts:
            self.line(f"warning: {text}")

    def results(
        self,
        results: Sequence[StepResult],
        cut_short: str | None = None,
        not_run: Sequence[str] = (),
    ) -> None:
        """The judged steps, then the planned steps an ended run has no result for (so a reader
        of an aborted run sees what was never measured)."""
        rows = [[r.step_id, *_result_cells(r), r.verdict.value.upper()] for r in results]
        if cut_short is not None:
            rows.append([cut_short, "", "", "", "", CUT_SHORT.upper()])
        rows += [[step_id, "", "", "", "", NOT_RUN.upper()] for step_id in not_run]
        self.table(["step", "value", "limits", "U (k=2)", "TUR", "verdict"], rows)


def _result_cells(r: StepResult) -> list[str]:
    """Value, limits, U and TUR of one step as a reader expects them: an operator's answer in
    words, a harness proof's count of faults against none allowed, a reading with its limits."""
    if r.kind == "prompt" and not math.isnan(r.value):
        return [prompt_answer(r.value), "", "", ""]
    if r.kind == "harness-proof" and r.unit == "faults" and not math.isnan(r.value):
        return [f"{r.value:g} fault(s) found", show_limits(r.limits, r.unit), "", ""]
    tur = "" if r.tur is None else tur_text(r.tur)
    if r.verdict is not Verdict.SKIPPED and (cells := u_digits_cells(r)) is not None:
        return [*cells, tur]
    digits = telling_digits(r.value, r.unit, r.limits)  # the value and its limits alike
    return [
        "not measured" if r.verdict is Verdict.SKIPPED else value_text(r.value, r.unit, r.limits),
        show_limits(r.limits, r.unit, digits),
        "" if math.isnan(r.expanded_u) else "±" + show(r.expanded_u, r.unit),
        tur,
    ]


def u_digits_cells(r: StepResult) -> tuple[str, str, str] | None:
    """Value, limits and ± U to the digits U supports, as the HTML report shows them
    (``rig.value_digits``, GUM 7.2.6: U to two significant digits, rounded up; the value,
    and its limits beside it, to the same decimal place, finer where the value would read as a
    limit it is not equal to), all in the prefix of the largest of value and limits.  None
    where there is no finite value, positive U or finite limits to say digits of."""
    low, high = (None, None) if r.limits is None else (r.limits.low, r.limits.high)
    sizes = [abs(x) for x in (r.value, low, high) if x is not None and math.isfinite(x)]
    shift, symbol = (0, r.unit) if r.unit in ("", "s") else prefixed_unit(max(sizes), r.unit)
    shown = digits_shown(r.value, r.expanded_u, low, high, shift)
    if shown is None:
        return None

    def text(x: str | None, missing: str) -> str:
        return missing if x is None else f"{x} {symbol}".rstrip()

    limits = show_limits(r.limits, r.unit)  # "(none)", "none allowed"
    if r.limits is not None and not allows_none(r.limits, r.unit):
        limits = f"{text(shown.low, '-inf')} .. {text(shown.high, '+inf')}"
    return text(shown.value, ""), limits, "±" + text(shown.u, "")


MOST_DIGITS = 10
"""The most significant digits a value is shown to, telling it from a limit."""
SHOWN_DIGITS = 4
"""The significant digits a value or limit is shown to where nothing needs more."""


def value_text(value: float, unit: str, limits: Limits | None) -> str:
    """A judged value as ``rig run`` shows it: four significant digits, or as many more as it
    takes to tell it from a limit it is not equal to, so that 4.80001 V judged against a high
    limit of 4.8 V never reads 4.8 V beside its fail (rounding is monotone: once the two texts
    differ, the shown value lies on the same side of the limit as the reading)."""
    if unit in ("", "s") or not math.isfinite(value) or limits is None:
        return show(value, unit)
    return format_quantity(value, unit, telling_digits(value, unit, limits))


def telling_digits(value: float, unit: str, limits: Limits | None) -> int:
    """The significant digits that tell ``value`` from each limit it is not equal to (at least
    four): the value and its limits are shown to these digits together, so that a limit
    rounded to fewer never reads on the other side of the value."""
    if unit in ("", "s") or not math.isfinite(value) or limits is None:
        return SHOWN_DIGITS
    near = [x for x in (limits.low, limits.high) if x is not None and x != value]
    for digits in range(SHOWN_DIGITS, MOST_DIGITS + 1):
        text = format_quantity(value, unit, digits)
        if all(text != format_quantity(x, unit, digits) for x in near):
            return digits
    return MOST_DIGITS


def serve_bench(out: Output, title: str, rows: Sequence[tuple[str, str]], station: object) -> None:
    """Say where a virtual bench is served, then wait for Ctrl-C or SIGTERM (the caller stops
    the bench)."""
    out.line(title)
    for label, value in rows:
        out.line(f"  {label:<10} {value}")
    out.line(f"station file written to {station}")
    try:  # said inside: a SIGTERM sent the moment the line is read stops the bench as any other
        out.line("Ctrl-C or SIGTERM stops the bench.")
        while True:
            time.sleep(0.2)
    except KeyboardInterrupt:
        out.line("stopping the virtual bench")


def show(value: float | None, unit: str, digits: int | None = None) -> str:
    if value is None:
        return ""
    if unit in ("", "s"):
        return f"{value:g}{' s' if unit else ''}"
    return format_quantity(value, unit, digits or SHOWN_DIGITS)


def show_limits(limits: Limits | None, unit: str, digits: int | None = None) -> str:
    """Limits as ``rig check`` and ``rig run`` show them (to ``digits`` where a value beside
    them needs more than four to be told from them); a count of faults whose limit is 0 (a
    harness proof) reads ``none allowed``."""
    if limits is None:
        return "(none)"
    if allows_none(limits, unit):
        return NONE_ALLOWED
    low = "-inf" if limits.low is None else show(limits.low, unit, digits)
    high = "+inf" if limits.high is None else show(limits.high, unit, digits)
    return f"{low} .. {high}"


def _wrap(text: str, width: int) -> list[str]:
    """``text`` in lines of at most ``width`` characters, broken only at spaces: a fault spec
    (``short-ground:lead_a``) or a pin name is never split."""
    return textwrap.wrap(text, width, break_long_words=False, break_on_hyphens=False)


def _to_devnull(stream: TextIO) -> None:
    """Point ``stream``'s file descriptor at the null device, so that what is still buffered
    and the interpreter's flush at exit do not fail again (the Python documentation's recipe,
    ``signal`` module, "Note on SIGPIPE")."""
    try:
        descriptor = stream.fileno()
    except (OSError, ValueError):  # not a file (a test's buffer): nothing more to do
        return
    devnull = os.open(os.devnull, os.O_WRONLY)
    try:
        os.dup2(devnull, descriptor)
    finally:
        os.close(devnull)
