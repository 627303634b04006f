"""Every kind of file rig reads (sequence, station, fixture, unit, wire list) is read the same way:
UTF-8 text, a leading byte-order mark accepted, and a byte that is not UTF-8 named by its line and
column.

Sources: TOML 1.0 ("a TOML file must be a valid UTF-8 encoded Unicode document"); the Unicode
Standard, 23.8 (U+FEFF at the start of a file is a byte order mark, EF BB BF in UTF-8) and 3.9
(0xF4 must be followed by continuation bytes 0x80 to 0x8F, RFC 3629 likewise); that Windows editors
write the mark is common practice, no published source.
"""

from __future__ import annotations

import codecs
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pytest
from offline_station import offline_station_text

from rig.config.fixture import load_fixture
from rig.config.sequence import load_sequence
from rig.config.station import load_station
from rig.config.unit_file import load_unit
from rig.errors import ConfigError
from rig.harness.wire_list import load_wire_list

SEQUENCES = Path(__file__).resolve().parent.parent / "sequences"
FIXTURE = SEQUENCES / "demo-fixture.toml"
HARNESS_FIXTURE = SEQUENCES / "harness" / "fixture.toml"


def _unit_text(tmp_path: Path) -> str:
    text = (SEQUENCES / "units" / "temp-circuit.toml").read_text(encoding="utf-8")
    return text.replace('"../demo-fixture.toml"', f'"{FIXTURE}"')


KINDS: dict[str, tuple[str, Callable[[Path], str], Callable[[Path], Any]]] = {
    "sequence": (
        "seq.toml",
        lambda _: (SEQUENCES / "temp-circuit-check.toml").read_text(encoding="utf-8"),
        load_sequence,
    ),
    "station": (
        "station.toml",
        lambda tmp: offline_station_text("encoding", FIXTURE, tmp / "data"),
        load_station,
    ),
    "fixture": ("fixture.toml", lambda _: FIXTURE.read_text(encoding="utf-8"), load_fixture),
    "unit": ("unit.toml", _unit_text, load_unit),
    "wire list": (
        "wires.csv",
        lambda _: (SEQUENCES / "harness" / "wire-list.csv").read_text(encoding="utf-8"),
        lambda path: load_wire_list(path, load_fixture(HARNESS_FIXTURE)),
    ),
}


def _write(folder: Path, kind: str, data: bytes) -> Path:
    folder.mkdir(exist_ok=True)
    path = folder / KINDS[kind][0]
    path.write_bytes(data)
    return path


def _problem(load: Callable[[Path], Any], path: Path) -> Any:
    with pytest.raises(ConfigError) as caught:
        load(path)
    (problem,) = caught.value.problems
    assert problem.file == str(path)
    return problem


@pytest.mark.parametrize("kind", sorted(KINDS))
def test_a_leading_byte_order_mark_is_accepted(tmp_path: Path, kind: str) -> None:
    _, text_of, load = KINDS[kind]
    data = text_of(tmp_path).encode("utf-8")
    plain = load(_write(tmp_path / "plain", kind, data))
    marked = load(_write(tmp_path / "marked", kind, codecs.BOM_UTF8 + data))
    assert type(marked) is type(plain)


def test_a_marked_sequence_is_the_same_sequence(tmp_path: Path) -> None:
    data = (SEQUENCES / "temp-circuit-check.toml").read_bytes()
    plain = load_sequence(_write(tmp_path / "plain", "sequence", data))
    marked = load_sequence(_write(tmp_path / "marked", "sequence", codecs.BOM_UTF8 + data))
    assert marked.content_hash == plain.content_hash  # the text, not how it was saved
    assert [s.id for s in marked.steps] == [s.id for s in plain.steps]


def test_after_a_byte_order_mark_problems_keep_their_lines(tmp_path: Path) -> None:
    text = '[sequence]\nname = "marked"\n\n[[steps]]\nid = "a"\nkind = "voltz"\n'
    path = _write(tmp_path, "sequence", codecs.BOM_UTF8 + text.encode("utf-8"))
    problem = _problem(load_sequence, path)
    assert (problem.key, problem.line) == ("steps[0].kind", 6)


@pytest.mark.parametrize("kind", sorted(KINDS))
def test_a_byte_that_is_not_utf8_is_named_by_line_and_column(tmp_path: Path, kind: str) -> None:
    _, text_of, load = KINDS[kind]
    lines = text_of(tmp_path).splitlines(keepends=True)
    number = next(n for n, line in enumerate(lines) if n > 2 and len(line) > 8)
    bad = lines[number][:6].encode("utf-8") + b"\xf4" + lines[number][7:].encode("utf-8")
    data = b"".join(line.encode("utf-8") for line in lines[:number]) + bad
    data += b"".join(line.encode("utf-8") for line in lines[number + 1 :])
    problem = _problem(load, _write(tmp_path, kind, data))
    assert problem.line == number + 1
    assert "0xf4" in problem.message and "column 7" in problem.message
    assert "must be UTF-8" in problem.message
    assert "codec" not in problem.message and "position" not in problem.message


@pytest.mark.parametrize("kind", sorted(KINDS))
def test_a_utf16_file_is_called_utf16(tmp_path: Path, kind: str) -> None:
    _, text_of, load = KINDS[kind]
    problem = _problem(load, _write(tmp_path, kind, text_of(tmp_path).encode("utf-16")))
    assert "UTF-16" in problem.message and "save it as UTF-8" in problem.message
