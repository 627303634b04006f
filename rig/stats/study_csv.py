"""Reading a gauge study made elsewhere from CSV: columns ``part``, ``operator``, ``trial``,
``value``; one row per measurement.  Every problem names the file, the row and the column.

The file is read as rig reads its other data files (``rig.config.text_file``), so a CSV saved by
a spreadsheet with a byte-order mark is accepted and a byte that is not UTF-8 is named by its line
and column."""

from __future__ import annotations

import csv
import math
from pathlib import Path

from rig.config.text_file import read_text
from rig.errors import ConfigError
from rig.stats.grr import GaugeStudyError, Observation

COLUMNS = ("part", "operator", "trial", "value")


def read_study_csv(path: Path) -> list[Observation]:
    """The study's measurements; raises ``GaugeStudyError`` listing every bad row."""
    try:
        text = read_text(path, "a gauge study (.csv)")
    except ConfigError as exc:
        raise GaugeStudyError(str(exc)) from None
    reader = csv.DictReader(text.splitlines())
    header = [h.strip().lower() for h in (reader.fieldnames or [])]
    missing = [c for c in COLUMNS if c not in header]
    if missing:
        raise GaugeStudyError(
            f"{path}: row 1 (header) lacks column(s) {', '.join(missing)}; expected the columns "
            f"{', '.join(COLUMNS)}, found {', '.join(header) or 'none'}"
        )
    reader.fieldnames = header
    observations: list[Observation] = []
    problems: list[str] = []
    for row_number, row in enumerate(reader, start=2):
        cells = {c: (row.get(c) or "").strip() for c in COLUMNS}
        if not any(cells.values()):
            continue
        where = f"{path}: row {row_number}"
        bad = [f"column {c} is empty" for c in ("part", "operator") if not cells[c]]
        trial: int | None = None
        try:
            trial = int(cells["trial"])
        except ValueError:
            bad.append(f"column trial: expected a whole number, got {cells['trial']!r}")
        value = math.nan
        try:
            value = float(cells["value"])
            if not math.isfinite(value):
                raise ValueError
        except ValueError:
            bad.append(f"column value: expected a finite number, got {cells['value']!r}")
        if bad:
            problems.append(f"{where}: " + "; ".join(bad))
        elif trial is not None:
            observations.append(Observation(cells["part"], cells["operator"], trial, value, where))
    if problems:
        raise GaugeStudyError("\n".join(problems))
    if not observations:
        raise GaugeStudyError(f"{path}: no measurements after the header row")
    return observations
