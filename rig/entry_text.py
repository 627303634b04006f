"""Text typed or scanned at the start of a run (serial number, operator) made safe to keep.

Any Unicode text is kept exactly as given: HTML, quotes, control characters and very long strings
included (the store binds every value as a parameter, and front ends escape on output).  Bytes
that are not UTF-8 at all (a scanner set to another code page; Python hands them over as lone
surrogates) cannot be stored as text in SQLite or PostgreSQL.  Such a field is kept with each such
byte written as ``\\xNN`` (readable, and safe in every report), and the exact bytes go into the
run's notes as hex, so nothing entered is lost: ``entered_bytes`` gives them back.
"""

from __future__ import annotations


def undecodable_at(text: str) -> int | None:
    """Position of the first character that is an undecodable byte (a lone surrogate)."""
    for position, char in enumerate(text):
        if 0xD800 <= ord(char) <= 0xDFFF:
            return position
    return None


BYTES_NOTE = "{name} was entered as bytes that are not UTF-8 text: {hex} (hex); kept as {shown!r}"


def kept_entry_text(fields: dict[str, str]) -> tuple[dict[str, str], list[str]]:
    """Each field as it is stored, and a note with the exact bytes of every field that held bytes
    which are not UTF-8 (their text keeps those bytes as ``\\xNN``)."""
    kept: dict[str, str] = {}
    notes: list[str] = []
    for name, text in fields.items():
        if undecodable_at(text) is None:
            kept[name] = text
            continue
        raw = text.encode("utf-8", "surrogateescape")
        shown = raw.decode("utf-8", "backslashreplace")
        kept[name] = shown
        notes.append(BYTES_NOTE.format(name=name, hex=raw.hex(), shown=shown))
    return kept, notes


def entered_bytes(notes: list[str], name: str) -> bytes | None:
    """The exact bytes a field was entered as, from a run's notes (None when it was UTF-8)."""
    prefix = f"{name} was entered as bytes that are not UTF-8 text: "
    for note in notes:
        if note.startswith(prefix):
            return bytes.fromhex(note[len(prefix) :].split(" ", 1)[0])
    return None
