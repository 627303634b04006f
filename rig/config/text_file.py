"""Reading a data file as text, the same way for every kind (sequence, station, fixture, unit,
wire list): UTF-8, a leading byte-order mark dropped, and any other problem named in words.

TOML 1.0 says a TOML file must be a valid UTF-8 encoded Unicode document and says nothing about
a byte-order mark (U+FEFF) before the first line.  Windows editors (Notepad, Excel's "CSV UTF-8")
write one at the start of UTF-8 files, and Python's own ``utf-8-sig`` codec drops it; rig does
the same, since refusing it would refuse a file that holds exactly the text the user sees.  A
byte that is not UTF-8 is named by its line and column, so the user can find and fix it.
"""

from __future__ import annotations

import codecs
from pathlib import Path

from rig.errors import ConfigError, Problem

_UTF16_MARKS = (codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)


class FileUnreadable(ConfigError):
    """A file could not be read at all (not there, a folder, not allowed): nothing in it is
    wrong, so a file that named it can put the problem at the key that did (``named_at``)."""

    def __init__(self, path: Path, reason: str) -> None:
        self.path = path
        self.reason = reason
        super().__init__([Problem(str(path), "", reason)])


def read_text(path: Path, kind: str = "a text file") -> str:
    """The text of ``path``; raises ``FileUnreadable`` when it cannot be read, or ``ConfigError``
    when it is not UTF-8.  ``kind`` is what was expected there, for a folder given in its place
    ("a unit file (.toml)")."""
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise FileUnreadable(path, "file not found") from None
    except IsADirectoryError:
        raise FileUnreadable(path, f"is a folder; expected {kind}") from None
    except OSError as exc:
        raise FileUnreadable(path, f"cannot read the file: {exc}") from None
    return decode_text(data, str(path))


def decode_text(data: bytes, name: str) -> str:
    """The file ``name``'s bytes as text; raises ``ConfigError`` where they are not UTF-8."""
    problem = _not_utf8(data, name)
    if problem is not None:
        raise ConfigError([problem])
    return data.removeprefix(codecs.BOM_UTF8).decode("utf-8")


def _not_utf8(data: bytes, name: str) -> Problem | None:
    """Why ``data`` is not UTF-8 text (after a leading byte-order mark), or None."""
    if data.startswith(_UTF16_MARKS):
        return Problem(
            name,
            "",
            "cannot read the file: it is UTF-16 text (it starts with a UTF-16 byte-order "
            "mark); save it as UTF-8",
            line=1,
        )
    body = data.removeprefix(codecs.BOM_UTF8)
    try:
        body.decode("utf-8")
    except UnicodeDecodeError as exc:
        line_start = body.rfind(b"\n", 0, exc.start) + 1
        line = body.count(b"\n", 0, exc.start) + 1
        column = len(body[line_start : exc.start].decode("utf-8")) + 1
        return Problem(
            name,
            "",
            f"cannot read the file: the byte 0x{body[exc.start]:02x} at column {column} is not "
            "UTF-8; the file must be UTF-8 text (save it as UTF-8)",
            line=line,
        )
    return None
