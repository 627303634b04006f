"""Text typed or scanned at the start of a run (serial number, operator) checked before it is kept.

Any Unicode text is kept exactly as given: HTML, quotes, control characters and very long strings
included (the store binds every value as a parameter, and front ends escape on output).  Bytes
that are not UTF-8 at all (a scanner set to another code page; Python hands them over as lone
surrogates) cannot be stored as text in SQLite or PostgreSQL, so they are refused here, naming the
field and the position, before anything is measured, rather than failing half-way.
"""

from __future__ import annotations

from rig.errors import ConfigError, Problem


def undecodable_at(text: str) -> int | None:
    """Position of the first character that is an undecodable byte (a lone surrogate)."""
    for position, char in enumerate(text):
        if 0xD800 <= ord(char) <= 0xDFFF:
            return position
    return None


def check_entry_text(source: str, fields: dict[str, str]) -> None:
    """Raise ``ConfigError`` naming every field that holds bytes which are not UTF-8 text."""
    problems = []
    for name, text in fields.items():
        position = undecodable_at(text)
        if position is not None:
            try:
                raw = text[position].encode("utf-8", "surrogateescape")
            except UnicodeEncodeError:
                raw = text[position].encode("utf-8", "surrogatepass")
            problems.append(
                Problem(
                    source,
                    name,
                    f"holds a byte that is not UTF-8 text (0x{raw.hex()} at character "
                    f"{position}); set the scanner or keyboard to UTF-8 and enter it again",
                )
            )
    if problems:
        raise ConfigError(problems)
