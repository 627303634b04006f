"""Every link between the documentation pages leads somewhere: the file exists, and the heading a
``#fragment`` names is on that page.

Pages are moved and sections renamed as the docs grow; a link that no longer leads anywhere is
found here rather than by a reader.  Fragments follow the rule GitHub uses for heading anchors
(lower case, punctuation other than ``-`` and ``_`` dropped, spaces to hyphens, a repeated heading
numbered ``-1``, ``-2``...; common practice of Markdown renderers, no published standard).
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from doc_blocks import DOCS, ROOT

PAGES = [*sorted(DOCS.glob("*.md")), ROOT / "README.md", ROOT / "DEVELOPERS.md"]
LINK = re.compile(r"\[[^\]]*\]\(([^)\s]+)\)")
HEADING = re.compile(r"^(#{1,6}) (.+?)\s*$")


def anchor(heading: str) -> str:
    """GitHub's anchor for a heading's text."""
    text = re.sub(r"\[([^\]]*)\]\([^)]*\)", r"\1", heading)  # a link's words stay
    text = text.lower().replace("`", "")
    text = re.sub(r"[^\w\- ]", "", text)
    return text.replace(" ", "-")


def anchors(page: Path) -> set[str]:
    """The anchors of a page's headings (outside fenced blocks)."""
    found: set[str] = set()
    seen: dict[str, int] = {}
    fenced = False
    for line in page.read_text(encoding="utf-8").splitlines():
        if line.startswith("```"):
            fenced = not fenced
        match = None if fenced else HEADING.match(line)
        if match:
            base = anchor(match.group(2))
            n = seen.get(base, 0)
            seen[base] = n + 1
            found.add(base if n == 0 else f"{base}-{n}")
    return found


def links(page: Path) -> list[str]:
    """The relative link targets of a page, outside fenced blocks and inline code."""
    out: list[str] = []
    fenced = False
    for line in page.read_text(encoding="utf-8").splitlines():
        if line.startswith("```"):
            fenced = not fenced
            continue
        if not fenced:
            prose = re.sub(r"`[^`]*`", "", line)
            out += [t for t in LINK.findall(prose) if not re.match(r"[a-z]+:", t)]
    return out


def test_anchor_rule_on_known_headings() -> None:
    # GitHub's rule, as its rendered pages show it (common practice, no published standard)
    assert anchor("The benchmark (`tests/benchmarks/throughput.py`)") == (
        "the-benchmark-testsbenchmarksthroughputpy"
    )
    assert anchor("Opening the bench") == "opening-the-bench"


@pytest.mark.parametrize("page", PAGES, ids=lambda p: p.name)
def test_every_link_leads_somewhere(page: Path) -> None:
    broken = []
    for target in links(page):
        path, _, fragment = target.partition("#")
        dest = (page.parent / path).resolve() if path else page
        if not dest.exists():
            broken.append(f"{target}: no file {dest.relative_to(ROOT)}")
        elif fragment and dest.suffix == ".md" and fragment not in anchors(dest):
            broken.append(f"{target}: no heading with anchor #{fragment} in {dest.name}")
    assert not broken, f"{page.name}: " + "; ".join(broken)
