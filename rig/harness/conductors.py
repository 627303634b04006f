"""Continuity limits from conductor physics: copper resistance at the measured ambient plus a
stated allowance per connector contact and per splice (pure).

A row from a drawing gives gauge and length: R = rho20 L / A [1 + alpha20 (T - 20)] with annealed
copper (IEC 60028, see ``rig.models.copper``) is what the wire should read (the expected value);
its limit allows the most a conductor of that size may resist within its standard, moved to the
ambient the same way (IEC 60228 class 5 for a metric size, a stated margin over ASTM B258 for an
AWG one: ``rig.models.conductor_max``), so a long, correctly sized flexible wire is not failed.
A row captured from a known-good harness gives its measured resistance and the temperature it was
measured at; it is moved to today's ambient with the same copper coefficient, and a stated
tolerance is added for the spread between harnesses.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace

from rig.harness.wire_list import WireRow
from rig.models.conductor_max import max_over_nominal
from rig.models.copper import ALPHA20_PER_K, wire_resistance_ohm


@dataclass(frozen=True)
class Allowances:
    """What the limit adds to the copper: per contact, per splice, and for a captured row."""

    contact_ohm: float = 0.005
    splice_ohm: float = 0.002
    captured_pct: float = 10.0
    two_wire_ohm: float = 0.0
    """Added when a path is read 2-wire (the fixture lacks sense relays): leads and relays."""


@dataclass(frozen=True)
class PathLimit:
    conductor_ohm: float
    """Nominal copper of the path at the ambient: what it should read, less its contacts."""
    allowance_ohm: float
    stated_ohm: float | None = None
    """A limit the sequence states for the net (``net_limits``), in place of the sum."""
    conductor_max_ohm: float | None = None
    """The most the path's conductors may resist within their standards (None: nominal)."""

    @property
    def max_ohm(self) -> float:
        if self.stated_ohm is not None:
            return self.stated_ohm
        conductor = self.conductor_ohm if self.conductor_max_ohm is None else self.conductor_max_ohm
        return conductor + self.allowance_ohm


def copper_factor(temp_c: float, from_c: float = 20.0, alpha20: float = ALPHA20_PER_K) -> float:
    """R(temp_c) / R(from_c) for copper: [1 + a (T - 20)] / [1 + a (T0 - 20)]."""
    return (1.0 + alpha20 * (temp_c - 20.0)) / (1.0 + alpha20 * (from_c - 20.0))


def row_resistance_ohm(row: WireRow, temp_c: float) -> float:
    """The conductor (drawing row) or the measured path (captured row) at ``temp_c``."""
    if row.measured_ohm is not None:
        at_c = 20.0 if row.measured_at_c is None else row.measured_at_c  # 0 degC is a temperature
        return row.measured_ohm * copper_factor(temp_c, at_c)
    if row.area_mm2 is None or row.length_m is None:
        raise ValueError(f"row {row.line} has neither gauge and length nor a measured resistance")
    return float(wire_resistance_ohm(row.length_m, row.area_mm2, temp_c))


def row_max_ohm(row: WireRow, temp_c: float) -> float:
    """The most the row's conductor may resist at ``temp_c`` within its standard; a captured
    row's own value (its tolerance is an allowance)."""
    r = row_resistance_ohm(row, temp_c)
    if row.measured_ohm is not None or row.area_mm2 is None or row.length_m is None:
        return r
    per_km = row_resistance_ohm(replace(row, length_m=1000.0), 20.0)
    return r * max_over_nominal(row.gauge, row.area_mm2, per_km)


def path_limit(
    rows: Sequence[WireRow], temp_c: float, allowances: Allowances, *, four_wire: bool = True
) -> PathLimit:
    """The most a path of rows may read end to end at ``temp_c``.

    A drawing row brings its two contacts (one per fixture end); a splice end brings the splice
    allowance once per splice passed.  A captured row was read between fixture pins
    (``rig.harness.capture``), so its value already holds the two contacts of the harness it was
    captured from; it gets its tolerance (the spread of the copper) and one contact allowance:
    a later harness's two contacts may each read up to the allowance, where the captured ones
    read, typically, half of it each, so together they may read one allowance more.
    """
    conductor = conductor_max = 0.0
    allowance = 0.0 if four_wire else allowances.two_wire_ohm
    splices: set[str] = set()
    for row in rows:
        r = row_resistance_ohm(row, temp_c)
        conductor += r
        conductor_max += row_max_ohm(row, temp_c)
        if row.measured_ohm is not None:
            allowance += r * allowances.captured_pct / 100.0 + allowances.contact_ohm
        for end in row.ends:
            if end.is_splice:
                splices.add(end.name)
            elif row.measured_ohm is None:
                allowance += allowances.contact_ohm
    allowance += allowances.splice_ohm * len(splices)
    return PathLimit(conductor, allowance, conductor_max_ohm=conductor_max)
