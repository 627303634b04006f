"""Block letters for the run's verdict, readable from across the bench.

Our own 5-row font, covering the letters of the verdict words only; anything else falls back to a
blank of the same width, and the verdict is always repeated in ordinary text below it.
"""

from __future__ import annotations

_FONT: dict[str, tuple[str, ...]] = {
    "A": (" ### ", "#   #", "#####", "#   #", "#   #"),
    "B": ("#### ", "#   #", "#### ", "#   #", "#### "),
    "C": (" ####", "#    ", "#    ", "#    ", " ####"),
    "D": ("#### ", "#   #", "#   #", "#   #", "#### "),
    "E": ("#####", "#    ", "#### ", "#    ", "#####"),
    "F": ("#####", "#    ", "#### ", "#    ", "#    "),
    "I": ("#####", "  #  ", "  #  ", "  #  ", "#####"),
    "K": ("#   #", "#  # ", "###  ", "#  # ", "#   #"),
    "L": ("#    ", "#    ", "#    ", "#    ", "#####"),
    "N": ("#   #", "##  #", "# # #", "#  ##", "#   #"),
    "O": (" ### ", "#   #", "#   #", "#   #", " ### "),
    "P": ("#### ", "#   #", "#### ", "#    ", "#    "),
    "R": ("#### ", "#   #", "#### ", "#  # ", "#   #"),
    "S": (" ####", "#    ", " ### ", "    #", "#### "),
    "T": ("#####", "  #  ", "  #  ", "  #  ", "  #  "),
    "U": ("#   #", "#   #", "#   #", "#   #", " ### "),
    ".": ("  ", "  ", "  ", "  ", "# "),
    " ": ("  ", "  ", "  ", "  ", "  "),
}
ROWS = 5
BLOCK = "█"


def big_letters(word: str) -> list[str]:
    """``word`` as ``ROWS`` lines of block letters, one column between letters."""
    lines = [""] * ROWS
    for char in word.upper():
        glyph = _FONT.get(char, ("     ",) * ROWS)
        for row in range(ROWS):
            lines[row] += glyph[row].replace("#", BLOCK) + " "
    return [line.rstrip() for line in lines]


def width_of(word: str) -> int:
    return max(len(line) for line in big_letters(word))
