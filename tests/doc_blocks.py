"""The blocks of the documentation pages that tests run or compare with rig's output.

The file-format pages each end their reference with a "Complete example" (a fenced ``toml``
block); the analysis pages show a command after ``$ `` on the first line of a fenced block with
rig's output below it.  Tests read them from the pages themselves, so a page that drifts from
what rig does fails.
"""

from __future__ import annotations

from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
DOCS = ROOT / "docs"


def section(page: str, heading: str) -> str:
    """The text of one ``## heading`` (or ``### heading``) section of ``docs/page``, to the next
    heading of the same or a higher level."""
    text = (DOCS / page).read_text(encoding="utf-8")
    level = heading.split(" ", 1)[0]
    start = text.index(f"\n{heading}\n") + len(heading) + 2
    ends = [text.find(f"\n{'#' * n} ", start) for n in range(2, len(level) + 1)]
    ends = [end for end in ends if end != -1]
    return text[start : min(ends)] if ends else text[start:]


def fenced(text: str, info: str) -> list[str]:
    """The fenced blocks of ``text`` whose info string is ``info`` (``""``: none), in order."""
    blocks: list[str] = []
    opened: str | None = None  # the info string of the open fence, None outside one
    lines: list[str] = []
    for line in text.splitlines():
        if opened is None and line.startswith("```"):
            opened, lines = line[3:], []
        elif opened is not None and line == "```":
            if opened == info:
                blocks.append("\n".join(lines) + "\n")
            opened = None
        elif opened is not None:
            lines.append(line)
    return blocks


def complete_example(page: str) -> str:
    """The TOML of a file-format page's "Complete example"."""
    return fenced(section(page, "## Complete example"), "toml")[0]


def write_complete_examples(folder: Path) -> dict[str, Path]:
    """The four complete examples, saved under the names they give each other."""
    names = {
        "station-file.md": "station.toml",
        "fixture-file.md": "fixture.toml",
        "unit-file.md": "unit.toml",
        "sequence-file.md": "sequence.toml",
    }
    paths = {}
    for page, name in names.items():
        paths[name] = folder / name
        paths[name].write_text(complete_example(page), encoding="utf-8")
    return paths


def shown_commands(page: str, heading: str) -> list[tuple[list[str], list[str]]]:
    """Each block of the section that starts with ``$ rig ...``: the command's arguments (after
    ``rig``) and the output lines shown under it."""
    found = []
    for block in fenced(section(page, heading), ""):
        first, *shown = block.splitlines()
        if first.startswith("$ rig "):
            found.append((first.removeprefix("$ rig ").split(), shown))
    return found
