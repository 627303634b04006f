"""docs/station-file.md lists every SCPI command role a station may override, with its default and
its placeholders, exactly as the drivers' ``DIALECT`` tables have them: the list cannot go stale."""

from __future__ import annotations

import re
import string
from collections.abc import Mapping
from pathlib import Path

import pytest

from drivers.scpi_dmm import ScpiDmm
from drivers.scpi_supply import ScpiSupply

DOC = Path(__file__).resolve().parent.parent / "docs" / "station-file.md"


def documented_roles(heading: str) -> dict[str, tuple[str, frozenset[str]]]:
    """role -> (default, placeholders) from the table that follows the line starting with
    ``heading``."""
    lines = DOC.read_text(encoding="utf-8").splitlines()
    start = next(i for i, line in enumerate(lines) if line.startswith(heading))
    rows: dict[str, tuple[str, frozenset[str]]] = {}
    for line in lines[start + 1 :]:
        if not line.strip() and rows:
            break
        if not line.startswith("| `"):
            continue
        cells = [c.strip() for c in line.strip("|").split("|")]
        role, default = (c.strip("`") for c in cells[:2])
        assert role not in rows, f"role {role} listed twice under {heading}"
        names = frozenset(re.findall(r"`([a-z_]+)`", cells[2]))
        rows[role] = (default, names)
    return rows


def code_roles(table: Mapping[str, str]) -> dict[str, tuple[str, frozenset[str]]]:
    return {
        role: (template, frozenset(f for _, f, _, _ in string.Formatter().parse(template) if f))
        for role, template in table.items()
    }


@pytest.mark.parametrize(
    ("heading", "table"),
    [("`scpi-dmm` (`DIALECT`", ScpiDmm.DIALECT), ("`scpi-supply` (`DIALECT`", ScpiSupply.DIALECT)],
)
def test_the_docs_list_every_dialect_role_as_the_driver_has_it(
    heading: str, table: Mapping[str, str]
) -> None:
    assert documented_roles(heading) == code_roles(table)
