"""Hostile and broken input for the fuzz tests and the reliability benchmark.

Two kinds of generated input: documents built from the real key vocabulary with wrong, odd or
hostile values, and shipped files mutated line by line (lines dropped, doubled, values swapped
for junk, junk lines inserted).  Each ``check_*`` function feeds one input to a parse path and
returns ``None`` when rig behaved (a clean parse, or a ``ConfigError`` whose every problem names
the file and a key or line) or a description of the misbehaviour (any other exception escaping,
which would reach the user as a traceback, or a problem that says not where it is).
"""

from __future__ import annotations

import contextlib
import functools
import io
import json
import math
import tempfile
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from hypothesis import strategies as st

from rig.config.fixture import FixtureMap
from rig.config.station import Station
from rig.config.unit_file import UnitModel
from rig.errors import ConfigError, Problem

ROOT = Path(__file__).resolve().parent.parent
SEQUENCES = ROOT / "sequences"
FIXTURE = SEQUENCES / "demo-fixture.toml"

HOSTILE_TEXT = [
    "<script>alert(1)</script>",
    "'; DROP TABLE runs; --",
    '" OR 1=1 --',
    '=HYPERLINK("http://x")',
    "+cmd|' /C calc'!A0",
    "\x00\x01\x07\x1b[31m",
    "\u202etxt.exe",
    "ü€😀",
    "__import__('os').system('false')",
    "{{7*7}}",
    "${HOME}",
    "a" * 5000,
]
UNITS = [
    "V",
    "mV",
    "kV",
    "ohm",
    "kohm",
    "Mohm",
    "mohm",
    "A",
    "mA",
    "uA",
    "degC",
    "K",
    "%",
    "s",
    "ms",
    "kPa",
    "Hz",
    "",
    "V V",
    "volts",
    "°C",
    "\t",
]
PINS = [
    "C_SIG",
    "C_GND",
    "S_SIG",
    "S_GND",
    "P_5V",
    "P_SIG",
    "P_GND",
    "CHASSIS",
    "PT_FH",
    "NOPE",
    "",
]
STEP_KEYS = [
    "id",
    "kind",
    "title",
    "hi",
    "lo",
    "pin",
    "ground",
    "from",
    "to",
    "reference",
    "low",
    "high",
    "max",
    "min",
    "nominal",
    "tolerance",
    "nplc",
    "range",
    "rule",
    "supply",
    "depends_on",
    "wires",
    "lead_zero",
    "settle",
    "duration",
    "text",
    "force_hi",
    "sense_hi",
    "force_lo",
    "sense_lo",
    "r0",
    "measure",
    "r25",
    "beta",
    "temperature_from",
    "reference_from",
    "pullup",
    "output",
    "power",
    "range_low",
    "range_high",
    "fraction_low",
    "fraction_high",
    "pressure",
    "nonsense",
]
KINDS = [
    "volts",
    "wire-drop",
    "ground-drop",
    "resistance",
    "supply-current",
    "reference-temperature",
    "ntc",
    "ratiometric",
    "prompt",
    "soak",
    "exec",
    "",
]

text_values = st.one_of(st.sampled_from(HOSTILE_TEXT), st.text(max_size=40))
numbers = st.one_of(
    st.integers(min_value=-(10**20), max_value=10**20),
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from([0, -1, 1e-300, 1e300, 9.9e37, -9.9e37, 9.91e37]),
)
quantities = st.builds(
    lambda n, u: f"{n} {u}".strip(),
    st.one_of(st.floats(allow_nan=True, allow_infinity=True), st.integers(), st.just("")),
    st.sampled_from(UNITS),
)
scalars = st.one_of(
    text_values, numbers, quantities, st.booleans(), st.sampled_from(PINS), st.sampled_from(KINDS)
)
values = st.recursive(
    scalars,
    lambda inner: st.one_of(
        st.lists(inner, max_size=4),
        st.dictionaries(
            st.sampled_from(["pos", "neg", "voltage", "limit", "x"]), inner, max_size=4
        ),
    ),
    max_leaves=6,
)


def toml_value(value: object) -> str:
    """A value as TOML text (strings as JSON-escaped basic strings, which TOML mostly shares)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        if math.isinf(value):
            return "inf" if value > 0 else "-inf"
        return repr(value)
    if isinstance(value, list):
        return "[" + ", ".join(toml_value(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{" + ", ".join(f"{k} = {toml_value(v)}" for k, v in value.items()) + "}"
    return json.dumps(str(value), ensure_ascii=False)


@st.composite
def sequence_documents(draw: st.DrawFn) -> str:
    """A sequence file from the real vocabulary with odd values."""
    head = {
        "name": draw(st.one_of(st.just("fuzz"), values)),
        "decision_rule": draw(st.one_of(st.sampled_from(["simple", "guarded"]), values)),
        "reorder": draw(st.one_of(st.booleans(), values)),
    }
    lines = ["[sequence]"] + [f"{k} = {toml_value(v)}" for k, v in head.items()]
    for _ in range(draw(st.integers(0, 4))):
        lines.append("[[steps]]")
        keys = draw(st.lists(st.sampled_from(STEP_KEYS), max_size=8, unique=True))
        for key in ["id", "kind", *keys]:
            if key == "kind":
                value: object = draw(st.one_of(st.sampled_from(KINDS), values))
            elif key in ("hi", "lo", "pin", "from", "to", "reference"):
                value = draw(st.one_of(st.sampled_from(PINS), values))
            else:
                value = draw(values)
            lines.append(f'"{key}" = {toml_value(value)}')
    return "\n".join(dict.fromkeys(lines)) + "\n"


@st.composite
def mutated(draw: st.DrawFn, text: str) -> str:
    """``text`` with a few lines dropped, doubled, given junk values, or junk lines inserted."""
    lines = text.splitlines()
    for _ in range(draw(st.integers(1, 4))):
        if not lines:
            break
        i = draw(st.integers(0, len(lines) - 1))
        op = draw(st.sampled_from(["drop", "double", "value", "insert", "chars", "mark"]))
        if op == "drop":
            del lines[i]
        elif op == "double":
            lines.insert(i, lines[i])
        elif op == "value" and "=" in lines[i]:
            key = lines[i].split("=", 1)[0]
            lines[i] = f"{key}= {toml_value(draw(values))}"
        elif op == "insert":
            key = draw(st.sampled_from([*STEP_KEYS, "fixture", "relay_count", "max_closed"]))
            lines.insert(i, f"{key} = {toml_value(draw(values))}")
        elif op == "mark":  # a byte-order mark, where editors put it or anywhere
            at = i if draw(st.booleans()) else 0
            lines[at] = "\ufeff" + lines[at]
        else:  # \udcf4 stands for the byte 0xf4 alone, which is not UTF-8 (see ``as_read``)
            junk = draw(st.text(alphabet="[]{}=\"'#.,\\\n\x00 é\udcf4", min_size=1, max_size=6))
            at = draw(st.integers(0, len(lines[i])))
            lines[i] = lines[i][:at] + junk + lines[i][at:]
    return "\n".join(lines) + "\n"


def problem_is_located(problem: Problem, name: str) -> str | None:
    """A problem of the file itself names a key or a line; one of a file it refers to (a fixture,
    a wire list, an instrument's settings) names that file."""
    if not problem.file.strip():
        return f"problem names no file: {problem}"
    whole_file = ("file not found", "cannot read the file", "no header row")
    located = problem.key or problem.line is not None or problem.message.startswith(whole_file)
    if problem.file == name and not located:
        return f"problem in {name} names neither key nor line: {problem}"
    return None


def outcome_of(action: Callable[[], object], name: str) -> str | None:
    """None if ``action`` parsed or raised a located ``ConfigError``; else what went wrong."""
    try:
        action()
    except ConfigError as exc:
        for problem in exc.problems:
            bad = problem_is_located(problem, name)
            if bad:
                return bad
        return None
    except Exception as exc:  # exactly what must never happen: it would be a traceback
        return f"{type(exc).__name__} escaped: {exc}"
    return None


def file_bytes(text: str) -> bytes:
    """``text`` as a file holds it: UTF-8, where ``\udc80``-``\udcff`` stand for single bytes
    that are not UTF-8 (Python's surrogateescape)."""
    try:
        return text.encode("utf-8", "surrogateescape")
    except UnicodeEncodeError:  # other lone surrogates: bytes that are not UTF-8 either
        return text.encode("utf-8", "surrogatepass")


def as_read(text: str, path: Path) -> str:
    """``text`` through the reader every file kind shares (mark dropped, bad bytes refused)."""
    from rig.config.text_file import decode_text

    return decode_text(file_bytes(text), str(path))


_SCRATCH = Path(tempfile.mkdtemp(prefix="rig-fuzz-"))


@functools.cache
def _offline_station(fixture: Path) -> Station:
    from offline_station import offline_station_text

    from rig.config.station import load_station

    folder = Path(tempfile.mkdtemp(dir=_SCRATCH))
    path = folder / "station.toml"
    path.write_text(offline_station_text("fuzz", fixture, folder / "data"), encoding="utf-8")
    return load_station(path)


def check_sequence_text(text: str, path: Path = Path("fuzz/sequence.toml")) -> str | None:
    """Read and, where the file is well formed, plan: a model asked for a step's largest
    reading, a pin, an interlock are found there."""
    from rig.config.reader import TomlDoc
    from rig.config.sequence import parse_sequence
    from rig.plan import build_plan

    fixture = SEQUENCES / "harness" / "fixture.toml" if path.parent.name == "harness" else FIXTURE

    def parse() -> None:
        doc = TomlDoc(path, as_read(text, path))
        sequence = parse_sequence(doc)
        doc.raise_if_problems()
        build_plan(sequence, _offline_station(fixture))

    return outcome_of(parse, str(path))


def check_fixture_text(text: str) -> str | None:
    from rig.config.fixture import parse_fixture
    from rig.config.reader import TomlDoc

    def parse() -> None:
        doc = TomlDoc(FIXTURE, as_read(text, FIXTURE))
        parse_fixture(doc)
        doc.raise_if_problems()

    return outcome_of(parse, str(FIXTURE))


def check_unit_text(text: str, path: Path) -> str | None:
    from rig.config.reader import TomlDoc
    from rig.config.unit_file import parse_unit

    def parse() -> None:
        doc = TomlDoc(path, as_read(text, path))
        parse_unit(doc)
        doc.raise_if_problems()

    return outcome_of(parse, str(path))


def check_station_text(text: str) -> str | None:
    from rig.config.station import load_station

    path = _SCRATCH / "station.toml"
    path.write_bytes(file_bytes(text))
    return outcome_of(lambda: load_station(path), str(path))


@functools.cache
def _harness_fixture() -> FixtureMap:
    from rig.config.fixture import load_fixture

    return load_fixture(SEQUENCES / "harness" / "fixture.toml")


@functools.cache
def _temp_unit() -> UnitModel:
    from rig.config.unit_file import load_unit

    return load_unit(SEQUENCES / "units" / "temp-circuit.toml")


def check_wire_list_text(text: str) -> str | None:
    from rig.harness.wire_list import parse_wire_list

    fixture = _harness_fixture()
    path = Path("fuzz/wires.csv")
    return outcome_of(lambda: parse_wire_list(as_read(text, path), path, fixture), str(path))


def check_fault_specs(specs: list[str]) -> str | None:
    from rig.faults import parse_faults

    unit = _temp_unit()
    try:
        parse_faults(specs, unit, source="--fault")
    except ConfigError as exc:  # a spec's problem names its source and the spec as its key
        bad = [p for p in exc.problems if p.file != "--fault" or not (p.key or p.key in specs)]
        return f"problems not naming --fault and the spec: {bad}" if bad else None
    except Exception as exc:
        return f"{type(exc).__name__} escaped: {exc}"
    return None


def station_template() -> str:
    """A valid station file (the virtual bench's template) pointing at the demo fixture."""
    from offline_station import offline_station_text

    return offline_station_text("fuzz", FIXTURE, _SCRATCH / "data")


SAFE_COMMANDS = ["run", "check", "continue", "report", "diagnose", "stats", "limits", "coverage"]
"""Commands the CLI fuzzing may call: those that open no bench, server or screen on bad input."""


def check_cli(argv: list[str]) -> str | None:
    """``rig.cli.main`` in-process: an exit code 0-3, and never a traceback on stderr."""
    from rig.cli import main

    out, err = io.StringIO(), io.StringIO()
    try:
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            code: object = main(argv)
    except SystemExit as exc:  # argparse: usage error, exit 2 with a message
        code = exc.code
    except Exception as exc:
        return f"{type(exc).__name__} escaped main({argv!r}): {exc}"
    if code not in (0, 1, 2, 3):
        return f"main({argv!r}) returned {code!r}"
    if "Traceback" in err.getvalue():
        return f"main({argv!r}) printed a traceback: {err.getvalue()[-500:]}"
    if code == 2 and not err.getvalue().strip():
        return f"main({argv!r}) failed with no message"
    return None


# --- one mistake each: a newcomer's sequence, broken in the ways a trial found -----------------

TRIAL = """\
# One step of each common kind on the demo fixture; each case of MALFORMED breaks one thing.
[sequence]
name = "trial"
decision_rule = "guarded"

[[steps]]  # connect
id = "connect"
kind = "prompt"
text = "Connect the unit."

[[steps]]  # ambient
id = "ambient"
kind = "reference-temperature"
force_hi = "PT_FH"
sense_hi = "PT_SH"
force_lo = "PT_FL"
sense_lo = "PT_SL"
low = "15 degC"
high = "35 degC"

[[steps]]  # signal
id = "signal"
kind = "volts"
hi = "C_SIG"
lo = "C_GND"
low = "1.0 V"
high = "4.0 V"

[[steps]]  # drop
id = "drop"
kind = "ground-drop"
pin = "C_GND"
ground = "CHASSIS"
max = "30 mV"

[[steps]]  # curve
id = "curve"
kind = "ntc"
hi = "C_SIG"
lo = "C_GND"
r25 = "2.0 kohm"
beta = "3450 K"
temperature_from = "ambient"
tolerance = "5 %"

[[steps]]  # pressure
id = "pressure"
kind = "ratiometric"
output = "P_SIG"
power = "P_5V"
ground = "P_GND"
range_low = "0 bar"
range_high = "5 bar"
tolerance = "2 %"
"""


@dataclass(frozen=True)
class Mistake:
    """``TRIAL`` with ``old`` replaced by ``new``: ``rig check`` must print exactly one problem,
    at ``key`` (None: the file is fine) on the line holding ``at``, and exit 2."""

    name: str
    old: str
    new: str
    key: str | None
    at: str = ""


MALFORMED = [
    Mistake("byte-order mark", "# One", "\ufeff# One", None),
    Mistake(
        "negative percent", 'tolerance = "5 %"', 'tolerance = "-5 %"', "steps[4].tolerance", "-5 %"
    ),
    Mistake("zero percent", 'tolerance = "5 %"', 'tolerance = "0 %"', "steps[4].tolerance", "0 %"),
    Mistake("empty span", 'high = "5 bar"', 'high = "0 bar"', "steps[5].range_high", "range_high"),
    Mistake(
        "fraction above 1",
        'tolerance = "2 %"',
        "tolerance = '2 %'\nfraction_low = 1.5",
        "steps[5].fraction_low",
        "1.5",
    ),
    Mistake("no id", 'id = "signal"\n', "", "steps[2].id", "# signal"),
    Mistake("no unit", 'max = "30 mV"', 'max = "30"', "steps[3].max", 'max = "30"'),
    Mistake(
        "misspelt key", "temperature_from", "temperature_frm", "steps[4].temperature_frm", "frm"
    ),
    Mistake("misspelt table", "[sequence]", "[sequense]", "sequense", "sequense"),
    Mistake(
        "pin not in the fixture", 'pin = "C_GND"', 'pin = "C_GROUND"', "steps[3].pin", "C_GROUND"
    ),
    Mistake(
        "colder than absolute zero",
        'temperature_from = "ambient"',
        'temperature = "-300 degC"',
        "steps[4].temperature",
        "-300",
    ),
    Mistake("off the Pt100 curve", 'high = "35 degC"', 'high = "900 degC"', "steps[1].high", "900"),
    Mistake("byte not UTF-8", "Connect the", "Conn\udcf4ct the", "", "Conn"),
]
"""The mistakes of a newcomer's trial of ``rig check``, each alone."""


def check_mistake(mistake: Mistake) -> str | None:
    """None if ``rig check`` reports ``mistake`` as its one problem, where it is, with exit 2."""
    from rig.cli import main

    assert TRIAL.count(mistake.old) == 1, mistake.old
    text = TRIAL.replace(mistake.old, mistake.new)
    path = Path(tempfile.mkdtemp(dir=_SCRATCH)) / "trial.toml"
    path.write_bytes(file_bytes(text))
    station = _offline_station(FIXTURE).path
    err = io.StringIO()
    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(err):
        code = main(["check", str(path), "--station", str(station)])
    printed = err.getvalue().splitlines()[1:]
    if mistake.key is None:
        return None if code == 0 else f"{mistake.name}: exit {code}, {printed}"
    lines = [n for n, line in enumerate(text.splitlines(), 1) if mistake.at in line]
    where = f"{path}:{lines[0]}" + (f" [{mistake.key}]" if mistake.key else "") + ": "
    if code != 2 or len(printed) != 1 or not printed[0].strip().startswith(where):
        return f"{mistake.name}: exit {code}, expected one problem at {where!r}, got {printed}"
    return None


# --- the targets: a strategy and the check it feeds, by name -----------------------------------

SHIPPED_SEQUENCES = [
    p
    for p in sorted(SEQUENCES.glob("*.toml")) + sorted(SEQUENCES.glob("harness/*.toml"))
    if "[sequence]" in p.read_text(encoding="utf-8")
]
UNIT_FILES = sorted((SEQUENCES / "units").glob("*.toml"))
WIRE_HEADER = "from_connector,from_pin,to_connector,to_pin,wire,gauge,length_m,colour"
csv_field = st.one_of(
    st.sampled_from(PINS), text_values, st.sampled_from(["J1", "J2", "1", "20 AWG"])
)


def _with_path(paths: list[Path]) -> st.SearchStrategy[tuple[Path, str]]:
    return st.sampled_from(paths).flatmap(
        lambda p: st.tuples(st.just(p), mutated(p.read_text("utf-8")))
    )


@st.composite
def wire_lists(draw: st.DrawFn) -> str:
    shipped = (SEQUENCES / "harness" / "wire-list.csv").read_text(encoding="utf-8")
    if draw(st.booleans()):
        return draw(mutated(shipped))
    rows = [
        ",".join(draw(csv_field).replace("\n", " ") for _ in range(draw(st.integers(1, 9))))
        for _ in range(draw(st.integers(0, 5)))
    ]
    return "\n".join([WIRE_HEADER, *rows]) + "\n"


fault_spec = st.one_of(
    st.text(max_size=30),
    st.sampled_from(HOSTILE_TEXT),
    st.builds(
        lambda verb, target, value: f"{verb}:{target}{value}",
        st.sampled_from(["open", "short-ground", "series", "drift", "short", "swap", "x"]),
        st.sampled_from(["signal", "ground", "sender", "supply", "nothing", ""]),
        st.sampled_from(["", "=0.15ohm", "=+18%", "=-5 %", "=nan", "=1e999", "=abc", "=="]),
    ),
)
cli_word = st.one_of(
    st.sampled_from(
        [
            "--station",
            "--serial",
            "--operator",
            "--yes",
            "--json",
            "--readings",
            "-v",
            "--help",
            "1",
            "-1",
            "0",
            "nope.toml",
            str(FIXTURE),
            "--",
            "--fault",
        ]
    ),
    text_values.filter(lambda t: "\x00" not in t),
)

TARGETS: dict[str, tuple[st.SearchStrategy[Any], Callable[[Any], str | None]]] = {
    "sequence_documents": (sequence_documents(), check_sequence_text),
    "sequence_mutations": (
        _with_path(SHIPPED_SEQUENCES),
        lambda c: check_sequence_text(c[1], c[0]),
    ),
    "fixture": (mutated(FIXTURE.read_text("utf-8")), check_fixture_text),
    "unit": (_with_path(UNIT_FILES), lambda c: check_unit_text(c[1], c[0])),
    "station": (mutated(station_template()), check_station_text),
    "wire_list": (wire_lists(), check_wire_list_text),
    "fault_specs": (st.lists(fault_spec, max_size=4), check_fault_specs),
    "cli": (
        st.tuples(st.sampled_from(SAFE_COMMANDS), st.lists(cli_word, max_size=6)),
        lambda c: check_cli([c[0], *c[1]]),
    ),
}
"""Name -> (what to generate, the check that must return None for every generated case)."""
