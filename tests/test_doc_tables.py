"""Every table in the documentation pages renders as one: a block of ``|`` lines starts with its
header row and the ``|---|`` line under it, and every row has as many cells as the header.

A paragraph left between two rows splits a table, and the rows after it show as raw ``| ... |``
text (GitHub-flavoured Markdown's table extension: a table is a header row, a delimiter row, and
rows up to the first line that is not one; common practice of Markdown renderers).
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from doc_blocks import DOCS, ROOT

PAGES = [
    *sorted(DOCS.glob("*.md")),
    ROOT / "README.md",
    ROOT / "DEVELOPERS.md",
    ROOT / "CHANGELOG.md",
]
DELIMITER = re.compile(r"^\|(\s*:?-+:?\s*\|)+\s*$")


def cells(row: str) -> int:
    """The cells of a table row: pipes outside inline code and not escaped, less the two ends."""
    prose = re.sub(r"`[^`]*`", "``", row).replace("\\|", "")
    return prose.strip().strip("|").count("|") + 1


def tables(text: str) -> list[tuple[int, list[str]]]:
    """Each block of consecutive ``|`` lines outside fenced blocks, with its first line number."""
    found: list[tuple[int, list[str]]] = []
    fenced, start = False, 0
    block: list[str] = []
    for number, line in enumerate(text.splitlines(), 1):
        if line.startswith("```"):
            fenced = not fenced
        if not fenced and line.startswith("|"):
            if not block:
                start = number
            block.append(line)
            continue
        if block:
            found.append((start, block))
            block = []
    if block:
        found.append((start, block))
    return found


def test_a_split_table_is_found() -> None:
    page = "| a | b |\n|---|---|\n| 1 | 2 |\n\nA paragraph.\n| 3 | 4 |\n"
    (_, whole), (line, split) = tables(page)
    assert whole == ["| a | b |", "|---|---|", "| 1 | 2 |"]
    assert (line, split) == (6, ["| 3 | 4 |"])


def test_cells_leave_pipes_in_code_alone() -> None:
    assert cells("| `a | b` | c |") == 2
    assert cells("|---:|:-:|") == 2 and DELIMITER.match("|---:|:-:|")


@pytest.mark.parametrize("page", PAGES, ids=lambda p: p.name)
def test_every_table_has_its_header_and_even_rows(page: Path) -> None:
    broken = []
    for start, block in tables(page.read_text(encoding="utf-8")):
        if len(block) < 2 or not DELIMITER.match(block[1]):
            broken.append(f"line {start}: a table row with no header and delimiter row above it")
            continue
        width = cells(block[0])
        broken += [
            f"line {start + n}: {cells(row)} cells, the header has {width}"
            for n, row in enumerate(block[2:], 2)
            if cells(row) != width
        ]
    assert not broken, f"{page.name}: " + "; ".join(broken)
