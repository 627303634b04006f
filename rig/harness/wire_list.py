"""Wire lists: a harness as CSV rows (read with pandas), validated and joined to the fixture map.

One row is one wire: from connector and pin, to connector and pin, gauge (``18 AWG`` or
``0.5 mm2``), ``length_m``; optionally ``wire`` (an id), ``colour``, ``net``, and the
``measured_ohm`` / ``measured_at_c`` of a captured harness (then gauge and length may be empty).
Other columns (a CAD export's part number) are ignored and named, unless close to one of these.
An end whose pin is empty is a splice, named by its connector column; a net with a splice is
several rows that share it.  Lines starting with ``#`` are comments.  A fixture pin is joined by
the name ``CONNECTOR-PIN``.  Every problem names the file, the row (its line in the file), the
column and the value found.
"""

from __future__ import annotations

import csv
import io
import math
import re
from collections import deque
from collections.abc import Iterable
from dataclasses import dataclass, field, replace
from pathlib import Path

import pandas as pd

from rig.config.fixture import FixtureMap
from rig.config.reader import close_key
from rig.config.text_file import read_text
from rig.errors import ConfigError, Problem
from rig.models._common import ModelInputError
from rig.models.copper import area_from_gauge

REQUIRED = ("from_connector", "from_pin", "to_connector", "to_pin")
OPTIONAL = ("wire", "net", "gauge", "length_m", "colour", "measured_ohm", "measured_at_c")
COLUMNS = REQUIRED + OPTIONAL


@dataclass(frozen=True)
class End:
    connector: str
    pin: str
    """Empty for a splice (an inline joint that no fixture pin reaches)."""

    @property
    def name(self) -> str:
        return f"{self.connector}-{self.pin}" if self.pin else self.connector

    @property
    def is_splice(self) -> bool:
        return not self.pin


@dataclass(frozen=True)
class WireRow:
    line: int
    wire: str
    start: End
    end: End
    gauge: str = ""
    area_mm2: float | None = None
    length_m: float | None = None
    colour: str = ""
    net: str = ""
    measured_ohm: float | None = None
    measured_at_c: float | None = None

    @property
    def ends(self) -> tuple[End, End]:
        return self.start, self.end


@dataclass(frozen=True)
class Net:
    """Rows that share ends; ``pins`` are the fixture pins, first-seen order."""

    name: str
    rows: tuple[WireRow, ...]
    pins: tuple[str, ...]
    splices: tuple[str, ...]

    def _reach(
        self, a: str, without: WireRow | None = None
    ) -> dict[str, tuple[str, WireRow] | None]:
        """Every end reachable from end ``a`` (leaving out the row ``without``), each with the
        end and row it was first reached by (breadth first)."""
        links: dict[str, list[tuple[str, WireRow]]] = {}
        for row in self.rows:
            if row is without:
                continue
            s, e = row.start.name, row.end.name
            links.setdefault(s, []).append((e, row))
            links.setdefault(e, []).append((s, row))
        came: dict[str, tuple[str, WireRow] | None] = {a: None}
        queue = deque([a])
        while queue:
            here = queue.popleft()
            for there, row in links.get(here, []):
                if there not in came:
                    came[there] = (here, row)
                    queue.append(there)
        return came

    def path(self, a: str, b: str) -> tuple[WireRow, ...]:
        """The rows from end ``a`` to end ``b`` (breadth first: the fewest rows)."""
        came = self._reach(a)
        if b not in came:
            return ()
        rows: list[WireRow] = []
        step = came[b]
        while step is not None:
            rows.append(step[1])
            step = came[step[0]]
        return tuple(reversed(rows))

    def separating_rows(self, part: Iterable[str]) -> tuple[WireRow, ...]:
        """The rows each of which, open alone, cuts exactly the pins ``part`` off from the net's
        other pins: where ``part`` reaches none of the rest, the likely open is one of these
        (one row where the part hangs off a splice by its own segment; several in a chain with
        no branch between).  Empty where no single row does (the part is cut off in more than
        one place, or rows run in a loop)."""
        want = set(part)
        pins = set(self.pins)
        found = []
        for row in self.rows:
            side = self._reach(row.start.name, without=row)
            if row.end.name in side:
                continue  # a loop: this row alone cuts nothing off
            if pins & set(side) in (want, pins - want):
                found.append(row)
        return tuple(found)

    def splices_between(self, a: str, b: str) -> list[str]:
        ends = [e for row in self.path(a, b) for e in row.ends if e.is_splice]
        return list(dict.fromkeys(e.name for e in ends))


@dataclass
class WireList:
    path: Path
    rows: list[WireRow] = field(default_factory=list)
    nets: list[Net] = field(default_factory=list)
    ignored: tuple[str, ...] = ()
    """Header columns rig does not read (a part number, a note): kept in the file, unused."""

    def ignored_note(self) -> str:
        """The columns rig does not read, in words for a check's output (empty where none)."""
        if not self.ignored:
            return ""
        names = ", ".join(repr(c) for c in self.ignored)
        return f"wire list {self.path.name}: columns not read by rig, ignored: {names}"

    def net_of_pin(self) -> dict[str, Net]:
        return {pin: net for net in self.nets for pin in net.pins}

    @property
    def pins(self) -> list[str]:
        return [pin for net in self.nets for pin in net.pins]

    @property
    def connectors(self) -> list[str]:
        found = [e.connector for row in self.rows for e in row.ends if not e.is_splice]
        return list(dict.fromkeys(found))


def load_wire_list(path: Path | str, fixture: FixtureMap | None = None) -> WireList:
    """Read and validate a wire list (and its join to ``fixture``); raises ``ConfigError``."""
    path = Path(path)
    return parse_wire_list(read_text(path, "a wire list (.csv)"), path, fixture)


def parse_wire_list(text: str, path: Path, fixture: FixtureMap | None = None) -> WireList:
    problems: list[Problem] = []
    name = str(path)
    numbered = [
        (number, line)
        for number, line in enumerate(text.splitlines(), start=1)
        if line.strip() and not line.lstrip().startswith("#")
    ]
    if not numbered:
        raise ConfigError([Problem(name, "", "no header row; expected the columns " + _cols())])
    # the header first: a file that is no wire list (a sequence given by mistake) is named as
    # such, not as a CSV file that breaks on its second line
    header_line = numbered[0][0]
    written = [c.strip() for c in next(csv.reader([numbered[0][1]]))]
    if not set(written) & set(COLUMNS):  # not one column of a wire list: another kind of file
        first = numbered[0][1].strip()
        raise ConfigError(
            [
                Problem(
                    name,
                    "header",
                    f"not a wire list: its first line ({first[:40]!r}) names none of its "
                    f"columns; expected a CSV header row with {_cols()}",
                    line=header_line,
                )
            ]
        )
    ignored = _header_problems(written, Problem(name, "header", "", line=header_line), problems)
    if problems:
        raise ConfigError(problems)
    try:
        frame = pd.read_csv(
            io.StringIO("\n".join(line for _, line in numbered)),
            dtype=str,
            keep_default_na=False,
            skipinitialspace=True,
        )
    except (pd.errors.ParserError, ValueError) as exc:
        line = _csv_error_line(str(exc), [number for number, _ in numbered])
        words = _csv_words(str(exc), len(written))
        raise ConfigError([Problem(name, "", words, line=line)]) from None
    columns = [str(c).strip() for c in frame.columns]
    frame.columns = pd.Index(columns)
    wires = WireList(path, ignored=tuple(ignored))
    for index, record in enumerate(frame.to_dict("records")):
        line = numbered[index + 1][0]
        row = _row(record, line, name, problems)
        if row is not None:
            wires.rows.append(row)
    if not wires.rows and not problems:
        problems.append(Problem(name, "", "no wire rows after the header", line=header_line))
    _check_ids(wires, name, problems)
    wires.nets = _nets(wires.rows, name, problems)
    if fixture is not None:
        problems.extend(join_problems(wires, fixture))
    if problems:
        raise ConfigError(problems)
    return wires


def _csv_words(message: str, header_fields: int) -> str:
    """A pandas parse error in words of the file: a row with more fields than the header."""
    found = re.search(r"Expected \d+ fields in line \d+, saw (\d+)", message)
    if found is None:
        return f"not a valid CSV file: {message}"
    return (
        f"this row has {found.group(1)} comma-separated fields, the header {header_fields}; "
        "expected one field per header column (quote a field that holds a comma)"
    )


def _csv_error_line(message: str, numbers: list[int]) -> int:
    """The file line of a pandas parse error ("line 5" counts from 1, "row 0" from 0, both over
    the rows kept after comments); the header's line when pandas names none."""
    found = re.search(r"\b(line|row) (\d+)", message)
    if found is None:
        return numbers[0]
    index = int(found.group(2)) - (found.group(1) == "line")
    return numbers[min(max(index, 0), len(numbers) - 1)]


def _header_problems(written: list[str], at: Problem, problems: list[Problem]) -> list[str]:
    """Check the header's column names; return those rig does not use (in file order).  A CAD
    export's part number or note column is ignored, but a name close to a column rig reads
    (difflib, as for a file's keys) is taken for its misspelling and refused: ignored, it would
    leave that column's values unread without a word."""

    def problem(message: str) -> None:
        problems.append(replace(at, message=message))

    named = [c or f"(column {k}, no name)" for k, c in enumerate(written, start=1)]
    ignored: list[str] = []
    misspelt: set[str] = set()
    for column in dict.fromkeys(named):
        if column in COLUMNS:
            if named.count(column) > 1:
                problem(f"column {column!r} is given {named.count(column)} times")
            continue
        meant = close_key(column, [c for c in COLUMNS if c not in named])
        if meant:
            misspelt.add(meant)  # one mistake, one problem: not also a missing column
            problem(
                f"unknown column {column!r}; did you mean {meant!r}? Columns rig reads: {_cols()}"
            )
        else:
            ignored.append(column)
    for column in REQUIRED:
        if column not in named and column not in misspelt:
            problem(f"missing column {column!r}; expected {_cols()}")
    return ignored


def _cols() -> str:
    return ", ".join(REQUIRED) + " (and optionally " + ", ".join(OPTIONAL) + ")"


def _cell(file: str, line: int, column: str, message: str) -> Problem:
    """A problem in one cell: the file, its line, the row and column, and what was wrong."""
    return Problem(file, _where(line, column), message, line=line)


def _where(line: int, column: str) -> str:
    return f"row {line}, column {column}"


def _row(record: dict[str, str], line: int, name: str, problems: list[Problem]) -> WireRow | None:
    cell = {k: str(v).strip() for k, v in record.items()}
    bad = len(problems)

    def problem(column: str, message: str) -> None:
        problems.append(_cell(name, line, column, message))

    def number(column: str, *, positive: bool) -> float | None:
        raw = cell.get(column, "")
        if not raw:
            return None
        try:
            value = float(raw)
        except ValueError:
            value = math.nan
        if not math.isfinite(value) or value < 0 or (positive and value == 0):
            kind = "above 0" if positive else "0 or above"
            problem(
                column, f"expected a number {kind} (the unit is in the column name), found {raw!r}"
            )
            return None
        return value

    ends = []
    for side in ("from", "to"):
        connector = cell.get(f"{side}_connector", "")
        pin = cell.get(f"{side}_pin", "")
        if not connector:
            problem(
                f"{side}_connector", f"empty; expected a connector or splice name (pin {pin!r})"
            )
        elif any(ch.isspace() for ch in connector + pin) or "-" in connector:
            column = f"{side}_connector" if "-" in connector or " " in connector else f"{side}_pin"
            problem(column, f"expected a name without spaces or '-', found {connector!r} / {pin!r}")
        ends.append(End(connector, pin))
    if len(ends) == 2 and ends[0] == ends[1] and ends[0].connector:
        problem("to_pin", f"the wire starts and ends at {ends[0].name}")
    gauge = cell.get("gauge", "")
    area = None
    if gauge:
        try:
            area = area_from_gauge(gauge)
        except ModelInputError as exc:
            problem("gauge", str(exc))
    length = number("length_m", positive=True)
    measured = number("measured_ohm", positive=False)
    measured_at = None
    raw_at = cell.get("measured_at_c", "")
    if raw_at:
        try:
            measured_at = float(raw_at)
        except ValueError:
            problem("measured_at_c", f"expected a temperature in degC, found {raw_at!r}")
    if measured is None and len(problems) == bad:
        if area is None:
            problem(
                "gauge", "empty; expected a gauge such as '18 AWG' or '0.5 mm2' (or measured_ohm)"
            )
        if length is None:
            problem("length_m", "empty; expected the length in metres (or measured_ohm)")
    if measured is not None and measured_at is None and len(problems) == bad:
        problem(
            "measured_at_c", "empty; a measured resistance needs the temperature it was taken at"
        )
    if len(problems) > bad:
        return None
    return WireRow(
        line=line,
        wire=cell.get("wire", "") or f"row {line}",
        start=ends[0],
        end=ends[1],
        gauge=gauge,
        area_mm2=area,
        length_m=length,
        colour=cell.get("colour", ""),
        net=cell.get("net", ""),
        measured_ohm=measured,
        measured_at_c=measured_at,
    )


def _check_ids(wires: WireList, name: str, problems: list[Problem]) -> None:
    seen: dict[str, int] = {}
    for row in wires.rows:
        if row.wire in seen:
            problems.append(
                _cell(
                    name,
                    row.line,
                    "wire",
                    f"wire id {row.wire!r} is also used on row {seen[row.wire]}",
                )
            )
        seen.setdefault(row.wire, row.line)


def _nets(rows: list[WireRow], name: str, problems: list[Problem]) -> list[Net]:
    """Group rows that share an end; a ``net`` column must agree with that grouping."""
    parent: dict[str, str] = {}

    def find(x: str) -> str:
        parent.setdefault(x, x)
        while parent[x] != x:
            parent[x] = parent[parent[x]]
            x = parent[x]
        return x

    for row in rows:
        parent[find(row.start.name)] = find(row.end.name)
    grouped: dict[str, list[WireRow]] = {}
    for row in rows:
        grouped.setdefault(find(row.start.name), []).append(row)
    nets = []
    named: dict[str, int] = {}
    for members in grouped.values():
        labels = {r.net for r in members if r.net}
        if len(labels) > 1:
            row = next(r for r in members if r.net and r.net != members[0].net)
            problems.append(
                _cell(
                    name,
                    row.line,
                    "net",
                    f"rows that share ends are one net, but they name {sorted(labels)}",
                )
            )
        ends = [e for r in members for e in r.ends]
        pins = tuple(dict.fromkeys(e.name for e in ends if not e.is_splice))
        splices = tuple(dict.fromkeys(e.name for e in ends if e.is_splice))
        net_name = sorted(labels)[0] if labels else (pins[0] if pins else splices[0])
        if labels and net_name in named:
            row = next(r for r in members if r.net == net_name)
            problems.append(
                _cell(
                    name,
                    row.line,
                    "net",
                    f"net {net_name!r} is not connected to its rows near line {named[net_name]}",
                )
            )
        named.setdefault(net_name, members[0].line)
        if len(pins) < 2:
            problems.append(
                Problem(
                    name,
                    _where(members[0].line, "to_pin"),
                    f"net {net_name!r} reaches {len(pins)} fixture pin(s); a net needs two to test",
                    line=members[0].line,
                )
            )
        nets.append(Net(net_name, tuple(members), pins, splices))
    return nets


def join_problems(wires: WireList, fixture: FixtureMap) -> list[Problem]:
    """Every end with a pin must be a fixture pin; splice names must not be pins."""
    problems = []
    name = str(wires.path)
    for row in wires.rows:
        for side, end in zip(("from", "to"), row.ends, strict=True):
            pin = fixture.pins.get(end.name)
            column = f"{side}_pin" if end.pin else f"{side}_connector"
            if end.is_splice and end.name in fixture.pins:
                problems.append(
                    _cell(
                        name,
                        row.line,
                        column,
                        f"splice {end.name!r} has the name of a fixture pin; give its pin",
                    )
                )
            elif not end.is_splice and pin is None:
                problems.append(
                    _cell(
                        name,
                        row.line,
                        column,
                        f"{end.name} is not a pin of fixture {fixture.name!r} "
                        f"({fixture.path.name}); expected a pin named CONNECTOR-PIN",
                    )
                )
            elif pin is not None and pin.connector and pin.connector != end.connector:
                problems.append(
                    _cell(
                        name,
                        row.line,
                        f"{side}_connector",
                        f"fixture pin {end.name} belongs to connector {pin.connector!r}, "
                        f"not {end.connector!r}",
                    )
                )
    return problems


def write_wire_list(path: Path, rows: list[WireRow], comments: list[str]) -> Path:
    """Write rows as a wire list this module reads back; ``comments`` go first as ``#`` lines."""
    records = [
        {
            "wire": row.wire,
            "net": row.net,
            "from_connector": row.start.connector,
            "from_pin": row.start.pin,
            "to_connector": row.end.connector,
            "to_pin": row.end.pin,
            "gauge": row.gauge,
            "length_m": "" if row.length_m is None else f"{row.length_m:g}",
            "colour": row.colour,
            "measured_ohm": "" if row.measured_ohm is None else f"{row.measured_ohm:.6g}",
            "measured_at_c": "" if row.measured_at_c is None else f"{row.measured_at_c:.2f}",
        }
        for row in rows
    ]
    frame = pd.DataFrame.from_records(
        records, columns=list(OPTIONAL[:2]) + list(REQUIRED) + list(OPTIONAL[2:])
    )
    path.parent.mkdir(parents=True, exist_ok=True)
    with path.open("w", encoding="utf-8", newline="") as handle:
        for comment in comments:
            handle.write(f"# {comment}\n")
        frame.to_csv(handle, index=False)
    return path
