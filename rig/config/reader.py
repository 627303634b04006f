"""Typed, problem-collecting access to a parsed TOML file.

Loaders read every key through a ``Section``; a missing or wrong value is recorded as a ``Problem``
(file, key path, line where it can be found, expected versus found) and loading goes on, so that one
run of ``rig check`` lists every problem at once instead of the first.
"""

from __future__ import annotations

import difflib
import re
import tomllib
from collections.abc import Callable, Iterable, Iterator
from pathlib import Path
from typing import Any, TypeVar

from rig.config.key_lines import key_lines, parent_path
from rig.config.text_file import FileUnreadable, read_text
from rig.errors import ConfigError, Problem
from rig.quantity import QuantityError, parse_quantity

_MISSING: Any = object()
T = TypeVar("T")
_CLOSE = 0.75
"""How alike (difflib's ratio) an unknown key and a known one must be to name it as meant:
"guage" and "gauge" are 0.8 alike, "tolerence" and "tolerance" 0.89, "colour" and "value" 0.36."""


class TomlDoc:
    """One TOML file: its text, its data and the problems found while reading it."""

    def __init__(self, path: Path, text: str | None = None, *, kind: str = "a TOML file") -> None:
        self.path = Path(path)
        self.name = str(path)
        self.problems: list[Problem] = []
        if text is None:
            text = read_text(self.path, kind)
        self.text = text
        self._key_lines: dict[str, int] | None = None
        """Where each key is written, read from the text when a problem first needs it."""
        try:
            self.data: dict[str, Any] = tomllib.loads(text)
        except tomllib.TOMLDecodeError as exc:
            line = _line_from_decode_error(str(exc), text)
            raise ConfigError(
                [Problem(self.name, "", f"not valid TOML: {exc}", line=line)]
            ) from None

    @property
    def root(self) -> Section:
        return Section(self, self.data, "")

    def problem(self, key: str, message: str) -> Problem:
        found = Problem(self.name, key, message, line=self.line_of(key))
        self.problems.append(found)
        return found

    def line_of(self, key_path: str) -> int | None:
        """The line of a key path such as ``steps[3].low`` (1-based); for a key that is not
        written, the line of the nearest table it belongs in (a step's own ``[[steps]]``)."""
        if self._key_lines is None:
            self._key_lines = key_lines(self.text)
        path = key_path
        while path:
            if path in self._key_lines:
                return self._key_lines[path]
            path = parent_path(path)
        return None

    def raise_if_problems(self) -> None:
        if self.problems:
            raise ConfigError(self.problems)


def _line_from_decode_error(message: str, text: str) -> int | None:
    """The line tomllib names; "at end of document" is the last line (an unclosed string)."""
    found = re.search(r"line (\d+)", message)
    if found:
        return int(found.group(1))
    if "end of document" in message:
        return max(1, len(text.splitlines()))
    return None


def _describe(value: object) -> str:
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


class Section:
    """A table of a TOML file, read key by key with problems recorded in its document."""

    def __init__(self, doc: TomlDoc, data: dict[str, Any], prefix: str) -> None:
        self.doc = doc
        self.data = data
        self.prefix = prefix
        self._seen: set[str] = set()
        self._missing: dict[str, tuple[Problem, str]] = {}
        """Required keys found missing: their problem and what was expected."""
        self._refused: set[str] = set()
        """Keys reported as not belonging here: not unknown, and not among the keys expected."""

    def key(self, name: str) -> str:
        return f"{self.prefix}.{name}" if self.prefix else name

    def has(self, name: str) -> bool:
        return name in self.data

    def problem(self, name: str, message: str) -> Problem:
        return self.doc.problem(self.key(name) if name else self.prefix, message)

    def refuse(self, name: str, message: str) -> None:
        """A key that is known to rig but does not belong in this table, with why."""
        self._refused.add(name)
        self.problem(name, message)

    def missing(self, name: str, expected: str) -> None:
        """A required key is not there.  Where a key that is there looks like a misspelling of
        it, ``reject_unknown`` reports that key in its place: one mistake, one problem."""
        self._seen.add(name)
        self._missing[name] = (self.problem(name, f"missing; expected {expected}"), expected)

    def _get(self, name: str, default: Any, expected: str) -> Any:
        self._seen.add(name)
        if name not in self.data:
            if default is _MISSING:
                self.missing(name, expected)
            return default
        return self.data[name]

    def string(self, name: str, default: Any = _MISSING, choices: tuple[str, ...] = ()) -> Any:
        expected = "one of " + ", ".join(repr(c) for c in choices) if choices else "a string"
        value = self._get(name, default, expected)
        if value is _MISSING:
            return None
        if value is default:
            return value
        if not isinstance(value, str) or (choices and value not in choices):
            meant = _choice_meant(value, choices)
            hint = f"; did you mean {meant!r}?" if meant else ""
            self.problem(name, f"expected {expected}, found {_describe(value)}{hint}")
            return default if default is not _MISSING else None
        return value

    def named_file(self, name: str, what: str) -> tuple[str, Path] | None:
        """A required file name, as written and as a path beside this file; a blank name is a
        problem here (taken as it is, it would name this file's own folder)."""
        text = self.string(name)
        if text is None:
            return None
        if not text.strip():
            self.problem(
                name,
                f"names no file; expected the path of {what} (relative to this file), "
                f"found {text!r}",
            )
            return None
        return text, (self.doc.path.parent / text).resolve()

    def number(self, name: str, default: Any = _MISSING, *, minimum: float | None = None) -> Any:
        value = self._get(name, default, "a number")
        if value is _MISSING:
            return None
        if value is default:
            return value
        if isinstance(value, bool) or not isinstance(value, int | float):
            self.problem(name, f"expected a number, found {_describe(value)}")
            return default if default is not _MISSING else None
        if minimum is not None and value < minimum:
            self.problem(name, f"expected a number of at least {minimum}, found {value}")
            return default if default is not _MISSING else None
        return float(value)

    def integer(self, name: str, default: Any = _MISSING, *, minimum: int | None = None) -> Any:
        value = self._get(name, default, "a whole number")
        if value is _MISSING:
            return None
        if value is default:
            return value
        if isinstance(value, bool) or not isinstance(value, int):
            self.problem(name, f"expected a whole number, found {_describe(value)}")
            return default if default is not _MISSING else None
        if minimum is not None and value < minimum:
            self.problem(name, f"expected a whole number of at least {minimum}, found {value}")
            return default if default is not _MISSING else None
        return value

    def boolean(self, name: str, default: Any = _MISSING) -> Any:
        value = self._get(name, default, "true or false")
        if value is _MISSING:
            return None
        if value is default:
            return value
        if not isinstance(value, bool):
            self.problem(name, f"expected true or false, found {_describe(value)}")
            return default if default is not _MISSING else None
        return value

    def quantity(
        self,
        name: str,
        unit: str,
        default: Any = _MISSING,
        *,
        positive: bool = False,
        not_negative: bool = False,
    ) -> Any:
        """A value with its unit ("2.2 kohm"), returned in SI; ``positive`` refuses zero and
        below, ``not_negative`` below zero only (an allowance of none is one)."""
        value = self._get(name, default, f"a value in {unit} such as '1.5 {unit}'")
        if value is _MISSING:
            return None
        if value is default:
            return value
        try:
            result = parse_quantity(value, unit)
        except QuantityError as exc:
            self.problem(name, str(exc))
            return default if default is not _MISSING else None
        if positive and result <= 0:
            self.problem(name, f"expected a positive value in {unit}, found {value!r}")
            return default if default is not _MISSING else None
        if not_negative and result < 0:
            self.problem(name, f"expected zero or more in {unit}, found {value!r}")
            return default if default is not _MISSING else None
        return result

    def string_list(self, name: str, default: Any = _MISSING) -> Any:
        value = self._get(name, default, "a list of strings")
        if value is _MISSING:
            return None
        if value is default:
            return value
        if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
            self.problem(name, f"expected a list of strings, found {_describe(value)}")
            return default if default is not _MISSING else []
        return list(value)

    def int_list(self, name: str, default: Any = _MISSING) -> Any:
        value = self._get(name, default, "a list of whole numbers")
        if value is _MISSING:
            return None
        if value is default:
            return value
        if not isinstance(value, list) or not all(
            isinstance(v, int) and not isinstance(v, bool) for v in value
        ):
            self.problem(name, f"expected a list of whole numbers, found {_describe(value)}")
            return default if default is not _MISSING else []
        return list(value)

    def table(self, name: str, *, required: bool = False) -> Section | None:
        self._seen.add(name)
        value = self.data.get(name)
        if value is None:
            if required:
                self.missing(name, "a table")
            return None
        if not isinstance(value, dict):
            self.problem(name, f"expected a table, found {_describe(value)}")
            return None
        return Section(self.doc, value, self.key(name))

    def named_tables(self, name: str) -> Iterator[tuple[str, Section]]:
        """The sub-tables of table ``name`` (``[wires.signal]``, ``[wires.ground]`` ...)."""
        parent = self.table(name)
        if parent is None:
            return
        for child, value in parent.data.items():
            parent._seen.add(child)
            if not isinstance(value, dict):
                parent.problem(child, f"expected a table, found {_describe(value)}")
                continue
            yield child, Section(self.doc, value, parent.key(child))

    def table_list(self, name: str) -> Iterator[Section]:
        """An array of tables (``[[steps]]``)."""
        self._seen.add(name)
        value = self.data.get(name)
        if value is None:
            return
        if not isinstance(value, list):
            self.problem(name, f"expected an array of tables [[{name}]], found {_describe(value)}")
            return
        for index, item in enumerate(value):
            if not isinstance(item, dict):
                self.problem(f"{name}[{index}]", f"expected a table, found {_describe(item)}")
                continue
            yield Section(self.doc, item, f"{self.key(name)}[{index}]")

    def raw(self, name: str) -> Any:
        self._seen.add(name)
        return self.data.get(name)

    def reject_unknown(self, *also_allowed: str) -> None:
        """Every key not read is reported: a typo must not be silently ignored."""
        allowed = self._seen | set(also_allowed)
        for name in self.data:
            if name in allowed or name in self._refused:
                continue
            meant = close_key(name, self._missing)
            if meant:
                missing, expected = self._missing.pop(meant)
                self.doc.problems.remove(missing)
                self.problem(
                    name,
                    f"unknown key; a misspelt {meant!r}? That key is missing (expected {expected})",
                )
                continue
            known = ", ".join(sorted(allowed)) or "none"
            meant = close_key(name, allowed - set(self.data))  # not one written already
            if meant:
                self.problem(name, f"unknown key; did you mean {meant!r}? Expected one of: {known}")
            else:
                self.problem(name, f"unknown key; expected one of: {known}")


def _choice_meant(value: object, choices: tuple[str, ...]) -> str | None:
    """The one choice ``value`` differs from in letter case alone ('b' for 'B'), if any."""
    if not isinstance(value, str):
        return None
    same = [c for c in choices if c.lower() == value.lower()]
    return same[0] if len(same) == 1 else None


def close_key(name: str, keys: Iterable[str]) -> str | None:
    """The one key ``name`` looks like a misspelling of, if one is close enough to say so."""
    meant = difflib.get_close_matches(name, sorted(keys), n=1, cutoff=_CLOSE)
    return meant[0] if meant else None


def load_named(
    load: Callable[[Path], T], path: Path, written: str, problem: Callable[[str], Problem]
) -> T:
    """``load(path)`` for a file another file names (a unit file's ``[unit].fixture``): where
    ``path`` cannot be read at all, the one problem is put at the key that named it (through
    ``problem``, which gives its file and line), since that key is what to fix."""
    try:
        return load(path)
    except FileUnreadable as exc:
        if exc.path != path:
            raise
        raise ConfigError([problem(named_unreadable(written, exc))]) from None


def named_unreadable(written: str, exc: FileUnreadable) -> str:
    """What to say at the key that named a file that cannot be read: the name as written there,
    the file it was taken as (relative names are beside the naming file) and why."""
    return f"{written!r} ({exc.path}): {exc.reason}"
