"""Where each key of a TOML file is written, so that a problem can point at its line.

``tomllib`` gives the data but not where it came from.  This reads the text once more, after
``tomllib`` has accepted it (so it is valid TOML and the reading can stay simple), and notes the
line of every table header, every key and every array element under the paths the loaders name
problems by: ``steps[3]`` for the fourth ``[[steps]]`` header, ``steps[3].supply.pos`` for a key
of an inline table, ``dmm.accuracy.dcv[1].range``.  A path is only ever looked up, never trusted:
a key that is not found falls back to the line of the table it belongs in (``TomlDoc.line_of``).
"""

from __future__ import annotations

import json

_BARE = frozenset("ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789_-")
_SCALAR_END = frozenset(",]}\n#")


def key_lines(text: str) -> dict[str, int]:
    """Key path -> 1-based line, for every header, key and array element of valid TOML ``text``."""
    scan = _Scan(text)
    scan.document()
    return scan.lines


def parent_path(path: str) -> str:
    """The table a key path belongs in: ``steps[3].low`` -> ``steps[3]`` -> ``steps`` -> ``""``."""
    if path.endswith("]"):
        return path[: path.rindex("[")]
    return path.rpartition(".")[0]


def _join(table: str, key: str) -> str:
    return f"{table}.{key}" if table else key


class _Scan:
    """One pass over the text, by character, keeping the line number."""

    def __init__(self, text: str) -> None:
        self.text = text
        self.pos = 0
        self.line = 1
        self.lines: dict[str, int] = {}
        self._arrays: dict[str, int] = {}
        """Arrays of tables seen so far (resolved path -> elements), to resolve later headers."""

    def _peek(self, ahead: int = 0) -> str:
        at = self.pos + ahead
        return self.text[at] if at < len(self.text) else ""

    def _advance(self, count: int = 1) -> None:
        for _ in range(count):
            if self._peek() == "\n":
                self.line += 1
            self.pos += 1

    def _note(self, path: str, line: int) -> None:
        self.lines.setdefault(path, line)

    def _blank(self, newlines: bool) -> None:
        """Skip spaces, tabs and comments, and line ends where ``newlines``."""
        spaces = " \t\r\n" if newlines else " \t\r"
        while True:
            char = self._peek()
            if char and char in spaces:
                self._advance()
            elif char == "#":
                while self._peek() not in ("\n", ""):
                    self._advance()
            else:
                return

    def document(self) -> None:
        table = ""
        while True:
            self._blank(newlines=True)
            if not self._peek():
                return
            if self._peek() == "[":
                table = self._header()
            else:
                self._key_value(table)

    def _header(self) -> str:
        line = self.line
        array = self._peek(1) == "["
        self._advance(2 if array else 1)
        self._blank(newlines=False)
        parts = self._key()
        self._advance(2 if array else 1)
        resolved = ""
        for number, part in enumerate(parts, start=1):
            resolved = _join(resolved, part)
            if array and number == len(parts):
                count = self._arrays.get(resolved, 0) + 1
                self._arrays[resolved] = count
                self._note(resolved, line)
                resolved = f"{resolved}[{count - 1}]"
            elif resolved in self._arrays:
                resolved = f"{resolved}[{self._arrays[resolved] - 1}]"
            self._note(resolved, line)
        return resolved

    def _key_value(self, table: str) -> None:
        line = self.line
        path = table
        for part in self._key():
            path = _join(path, part)
        self._note(path, line)
        self._advance()  # the "="
        self._blank(newlines=False)
        self._value(path)

    def _key(self) -> list[str]:
        """A dotted key, up to (not over) the "=" or the "]" that ends it."""
        parts = []
        while True:
            self._blank(newlines=False)
            parts.append(self._simple_key())
            self._blank(newlines=False)
            if self._peek() != ".":
                return parts
            self._advance()

    def _simple_key(self) -> str:
        if self._peek() in ('"', "'"):
            start = self.pos
            self._string()
            raw = self.text[start : self.pos]
            if raw.startswith("'"):
                return raw[1:-1]
            try:
                return str(json.loads(raw))
            except ValueError:  # a TOML escape JSON lacks (\U0001F600, \e): the key as written
                return raw[1:-1]
        start = self.pos
        while self._peek() in _BARE:
            self._advance()
        return self.text[start : self.pos]

    def _value(self, path: str) -> None:
        char = self._peek()
        if char in ('"', "'"):
            self._string()
        elif char == "[":
            self._array(path)
        elif char == "{":
            self._inline_table(path)
        else:
            while self._peek() not in _SCALAR_END and self._peek():
                self._advance()

    def _string(self) -> None:
        quote = self._peek()
        if self.text.startswith(quote * 3, self.pos):
            self._advance(3)
            while not self.text.startswith(quote * 3, self.pos) and self._peek():
                self._advance(2 if quote == '"' and self._peek() == "\\" else 1)
            self._advance(3)
            for _ in range(2):  # up to two quotes may close the content itself
                if self._peek() == quote:
                    self._advance()
            return
        self._advance()
        while self._peek() not in (quote, "") and self._peek() != "\n":
            self._advance(2 if quote == '"' and self._peek() == "\\" else 1)
        self._advance()

    def _array(self, path: str) -> None:
        self._advance()
        index = 0
        while self._item_follows("]"):
            element = f"{path}[{index}]"
            self._note(element, self.line)
            before = self.pos
            self._value(element)
            if self.pos == before:  # only text tomllib refuses; the scan must still end
                self._advance()
            index += 1

    def _inline_table(self, path: str) -> None:
        self._advance()
        while self._item_follows("}"):
            self._key_value(path)

    def _item_follows(self, closing: str) -> bool:
        """Past blanks and commas: True before an item, False (and past it) at ``closing``."""
        while True:
            self._blank(newlines=True)
            if self._peek() == ",":
                self._advance()
            elif self._peek() in (closing, ""):
                self._advance()
                return False
            else:
                return True
