"""The bench supply's output as the Monte Carlo draws it: within its setting accuracy of the
voltage a step sets.

A real supply's output differs from its setting by up to its programming accuracy, ±(% of
setting + % of range), a bound its data sheet states and nothing more: a rectangular
distribution (GUM 4.3.7), as the meter's error is drawn.  The station states it under
``[supply.accuracy.setting]``; without it the output is taken as exactly its setting.  Pure
computation.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rig.analysis.good_units import UNIFORM, Draw, FloatArray
from rig.config.station import Station
from rig.judge.accuracy import AccuracySpec

ELEMENT = "supply:source"
"""The supply's voltage source in the bench circuit (``rig.sim.circuit_probe``)."""

SETTING_KEY = "[supply.accuracy.setting]"

UNIFORM_SUPPLY = (
    "uniform within ± the supply's setting accuracy (% of setting + % of range), one position "
    "per unit shared by every step: one supply's output error is systematic through a run "
    "(rectangular, GUM 4.3.7)"
)

DEPENDS_REL = 1e-9
"""A reading moves with the supply's output when a volt on the supply moves it by more than this
share of the reading (less is rounding in the solve)."""


@dataclass(frozen=True)
class SupplyOutput:
    """How far the supply's output may be from its setting: ±(pct_reading % of the setting +
    pct_range % of ``range_v``)."""

    range_v: float
    spec: AccuracySpec

    @classmethod
    def of(cls, station: Station) -> SupplyOutput | None:
        """The station's setting accuracy; None where it states none."""
        stated = station.supply_accuracy.get("setting")
        return None if stated is None else cls(stated[0], stated[1])

    def half_width(self, setting_v: float) -> float:
        return self.spec.half_width(setting_v, self.range_v)

    def drawn(self, setting_v: float, position: FloatArray) -> FloatArray:
        """The output for each unit's ``position`` in [-1, 1] within the bound."""
        return np.asarray(setting_v + position * self.half_width(setting_v), dtype=np.float64)

    def draw(self) -> Draw:
        """The line of ``rig limits``' table of draws."""
        s = self.spec
        spread = f"±({s.pct_reading:g} % of setting + {s.pct_range:g} % of {self.range_v:g} V)"
        return Draw("supply output", spread, UNIFORM, UNIFORM_SUPPLY)


def moves_with_supply(m0: float, per_volt: float, setting_v: float) -> bool:
    """Whether a reading follows the supply's output: its change per volt (``per_volt``) times
    the setting is more than rounding of the reading ``m0``."""
    return abs(per_volt) * max(abs(setting_v), 1.0) > DEPENDS_REL * max(abs(m0), 1e-12)


def exact_output_warning(steps: list[str], station: Station) -> str:
    """What ``rig limits`` says where a step's readings follow the supply's output but the
    station gives no setting accuracy: the output was taken as exact, and which key to add."""
    return (
        f"step{'s' if len(steps) > 1 else ''} {', '.join(steps)}: "
        f"{'their readings follow' if len(steps) > 1 else 'its readings follow'} the supply's "
        f"output, which was taken as exactly its setting: {station.path} states no "
        f"{SETTING_KEY}, so these limits leave out how far a real supply's output may be from "
        f"its setting; add {SETTING_KEY} (range, pct_reading, pct_range: the supply's "
        f"programming accuracy from its data sheet) under [supply] in {station.path}"
    )
