"""Turn a unit model and its faults into a circuit (pure computation, no I/O).

The same builder serves the virtual bench, fault coverage and Monte Carlo, so that every tool sees
the same physics.  Every wire is built as two halves around a midpoint node: a short "along the
wire" joins that midpoint, a series fault adds to the first half, an open makes the first half a
leakage-sized resistance.  Element names follow a fixed scheme (``wire:NAME:a``, ``ntc:NAME``,
``rtd:NAME`` ...)
so that faults and parameter sweeps can address them.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from rig.circuit import Circuit
from rig.config.unit_file import (
    NtcSensor,
    Potentiometer,
    RatiometricSensor,
    RtdSensor,
    SwitchSensor,
    UnitModel,
    Wire,
)
from rig.faults import Fault
from rig.models.copper import wire_resistance_ohm
from rig.models.ntc import BetaNtc, NtcModel, SteinhartHart
from rig.models.ratiometric import Ratiometric
from rig.models.rtd import Rtd

R_OPEN_OHM = 1e9
"""An open wire: the leakage of a broken conductor's insulation, not infinity (keeps nodes tied)."""
R_SHORT_OHM = 0.01
"""A hard short: a chafed conductor touching metal."""


def ntc_model(sensor: NtcSensor) -> NtcModel:
    """The sensor's nominal curve, as its unit file states it."""
    if sensor.sh_coefficients is not None:
        a, b, c = sensor.sh_coefficients
        return SteinhartHart(a, b, c)
    return BetaNtc(sensor.r25_ohm or 1.0, sensor.beta_k or 1.0)


def wire_r_ohm(wire: Wire, temp_c: float) -> float:
    """Conductor resistance of a wire at ``temp_c``."""
    return float(wire_resistance_ohm(wire.length_m, wire.area_mm2, temp_c))


def mid_node(wire: str) -> str:
    return f"mid:{wire}"


@dataclass
class UnitCircuit:
    """A unit's circuit with its faults applied; ``intermittent`` wires toggle per reading."""

    unit: UnitModel
    faults: list[Fault]
    circuit: Circuit = field(default_factory=Circuit)
    intermittent: dict[str, tuple[float, float]] = field(default_factory=dict)
    """element name -> (open fraction, closed resistance)"""

    def reroll_intermittent(self, rng: np.random.Generator, circuit: Circuit | None = None) -> None:
        """Draw, for this reading, whether each intermittent wire is open, in ``circuit`` (a
        circuit built around this unit's, such as the bench's) or in the unit's own."""
        target = self.circuit if circuit is None else circuit
        for element, (fraction, r_good) in self.intermittent.items():
            target.set_value(element, R_OPEN_OHM if rng.random() < fraction else r_good)


def build_unit_circuit(unit: UnitModel, faults: list[Fault] | None = None) -> UnitCircuit:
    """The unit's circuit with ``faults`` applied.

    Node 0 is bench ground, but nothing here ties the unit to it: the caller does, through the
    fixture's bench-ground pin (as the virtual bench does), so the two never add a second source.
    """
    faults = list(faults or [])
    built = UnitCircuit(unit, faults)
    c = built.circuit
    ambient = unit.ambient_c
    drift = {f.targets[0]: (f.value or 0.0) for f in faults if f.kind == "drift"}

    for wire in unit.wires.values():
        half = wire_r_ohm(wire, ambient) / 2
        c.resistor(f"wire:{wire.name}:a", wire.a, mid_node(wire.name), half)
        c.resistor(f"wire:{wire.name}:b", mid_node(wire.name), wire.b, half)

    for res in unit.resistors.values():
        c.resistor(f"res:{res.name}", res.a, res.b, res.r_ohm)

    if unit.controller is not None:
        for src in unit.controller.sources:
            c.vsource(f"src:{src.name}", src.node, unit.controller.ground, src.volts)

    for sensor in unit.sensors.values():
        factor = 1.0 + drift.get(sensor.name, 0.0) / 100.0
        if isinstance(sensor, NtcSensor):
            temp = ambient if sensor.temp_c is None else sensor.temp_c
            r = float(ntc_model(sensor).r_at(temp)) * factor
            c.resistor(f"ntc:{sensor.name}", sensor.a, sensor.b, r)
        elif isinstance(sensor, RtdSensor):
            temp = ambient if sensor.temp_c is None else sensor.temp_c
            r = float(Rtd(r0_ohm=sensor.r0_ohm).r_at(temp)) * factor
            c.resistor(f"rtd:{sensor.name}", sensor.a, sensor.b, r)
        elif isinstance(sensor, RatiometricSensor):
            _add_ratiometric(c, sensor, unit.pressure_pa, factor)
        elif isinstance(sensor, Potentiometer):
            r_aw = max(sensor.r_ohm * sensor.position * factor, 1e-3)
            r_wb = max(sensor.r_ohm * (1 - sensor.position), 1e-3)
            c.resistor(f"pot:{sensor.name}:aw", sensor.a, sensor.wiper, r_aw)
            c.resistor(f"pot:{sensor.name}:wb", sensor.wiper, sensor.b, r_wb)
        elif isinstance(sensor, SwitchSensor):
            c.switch(f"sw:{sensor.name}", sensor.a, sensor.b, sensor.closed, sensor.r_on_ohm)

    if unit.probe is not None:
        p = unit.probe
        rtd = Rtd(r0_ohm=p.r0_ohm)
        c.resistor("probe:element", "probe:a", "probe:b", float(rtd.r_at(ambient)))
        c.resistor("probe:force_hi", p.force_hi, "probe:a", p.lead_ohm)
        c.resistor("probe:sense_hi", p.sense_hi, "probe:a", p.lead_ohm)
        c.resistor("probe:force_lo", "probe:b", p.force_lo, p.lead_ohm)
        c.resistor("probe:sense_lo", "probe:b", p.sense_lo, p.lead_ohm)

    _apply_wire_faults(built, faults)
    return built


def _add_ratiometric(
    c: Circuit, sensor: RatiometricSensor, ambient_pa: float, factor: float
) -> None:
    """Output = fraction(pressure) x supply, behind its output resistance; it draws its quiescent
    current from the supply."""
    model = Ratiometric(
        sensor.p_low_pa, sensor.p_high_pa, sensor.fraction_low, sensor.fraction_high
    )
    pressure = ambient_pa if sensor.pressure_pa is None else sensor.pressure_pa
    fraction = float(model.fraction_at(pressure)) * factor
    inner = f"rat:{sensor.name}:int"
    c.vcvs(f"rat:{sensor.name}:gain", inner, sensor.ground, sensor.supply, sensor.ground, fraction)
    c.resistor(f"rat:{sensor.name}:out", inner, sensor.output, sensor.r_out_ohm)
    # quiescent draw at the nominal 5 V supply, as a resistance
    c.resistor(f"rat:{sensor.name}:q", sensor.supply, sensor.ground, 5.0 / sensor.quiescent_a)


def _apply_wire_faults(built: UnitCircuit, faults: list[Fault]) -> None:
    c = built.circuit
    unit = built.unit
    controller = unit.controller
    for index, fault in enumerate(faults):
        if fault.kind == "drift":
            continue
        first = fault.targets[0]
        element = f"wire:{first}:a"
        r_half = c.elements[element].value
        name = f"fault:{index}"
        if fault.kind == "open":
            c.set_value(element, R_OPEN_OHM)
        elif fault.kind == "series":
            c.set_value(element, r_half + (fault.value or 0.0))
        elif fault.kind == "intermittent":
            built.intermittent[element] = (fault.value or 0.5, r_half)
        elif fault.kind == "short-ground":
            c.resistor(name, mid_node(first), "0", R_SHORT_OHM)
        elif fault.kind in ("short-ref", "short-feed") and controller is not None:
            source = controller.source("reference" if fault.kind == "short-ref" else "feed")
            if source is not None:
                c.resistor(name, mid_node(first), source.node, R_SHORT_OHM)
        elif fault.kind == "short":
            c.resistor(name, mid_node(first), mid_node(fault.targets[1]), R_SHORT_OHM)
