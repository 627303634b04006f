"""How far a good unit's readings may lie from the nominal ones, for the diagnosis's no-fault
hypothesis.

A good unit is any unit whose parts lie inside the tolerances its unit file states, read at the
ambient the run measured.  Each tolerance is a rectangular distribution, u = a/sqrt(3) (GUM
4.3.7); each becomes a "move": an element's values one standard uncertainty either way.  The
readings' change over a move, linearised, gives the good unit's covariance C = D + J J^T (D: the
meter's variances, J: one column per move), and the no-fault hypothesis is scored on its marginal
likelihood over those parts: the misfit r^T C^-1 r and the Occam factor det(I + J^T D^-1 J)^-1/2
(a Gaussian prior integrated out in closed form).  So a reading within tolerance costs the good
unit little, as it costs a fitted drift little.  Pure computation.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from rig.analysis.bench_model import FloatArray
from rig.config.unit_file import NtcSensor, RatiometricSensor, RtdSensor, UnitModel
from rig.models.rtd import TOLERANCE_CLASSES, Rtd
from rig.unit_circuit import build_unit_circuit

Move = dict[str, tuple[float, float]]
"""Element -> (value one standard uncertainty down, value one up)."""

RECTANGULAR = math.sqrt(3.0)
"""Half-width over standard uncertainty of a rectangular distribution (GUM 4.3.7)."""


def tolerance_moves(unit: UnitModel, values: dict[str, float]) -> list[Move]:
    """One move per stated tolerance; ``values`` are the circuit's nominal element values."""
    moves: list[Move] = []

    def scale(elements: list[str], pct: float) -> None:
        rel = pct / 100.0 / RECTANGULAR
        if rel > 0 and all(e in values for e in elements):
            moves.append({e: (values[e] * (1 - rel), values[e] * (1 + rel)) for e in elements})

    for w in unit.wires.values():  # R = rho l / A: both halves of a wire move together
        scale([f"wire:{w.name}:a", f"wire:{w.name}:b"], w.length_tolerance_pct)
        scale([f"wire:{w.name}:a", f"wire:{w.name}:b"], w.area_tolerance_pct)
    for r in unit.resistors.values():
        scale([f"res:{r.name}"], r.tolerance_pct)
    for s in unit.controller.sources if unit.controller else []:
        scale([f"src:{s.name}"], s.tolerance_pct)
    for sensor in unit.sensors.values():
        if isinstance(sensor, NtcSensor) and sensor.sh_coefficients is None and sensor.r25_ohm:
            element = f"ntc:{sensor.name}"
            scale([element], sensor.r25_tolerance_pct)
            if element in values:  # ln R = ln R25 + (B'/B) ln(R_nominal / R25), as good_units
                scale(
                    [element],
                    sensor.beta_tolerance_pct * abs(math.log(values[element] / sensor.r25_ohm)),
                )
        elif isinstance(sensor, RatiometricSensor) and sensor.fraction_tolerance_pct:
            element = f"rat:{sensor.name}:gain"
            if element in values:  # percentage points of the supply, not a share of the gain
                step = sensor.fraction_tolerance_pct / 100.0 / RECTANGULAR
                moves.append({element: (values[element] - step, values[element] + step)})
    elements = [
        (f"rtd:{s.name}", s.r0_ohm, s.tolerance_class, s.temp_c)
        for s in unit.sensors.values()
        if isinstance(s, RtdSensor)
    ]
    if unit.probe is not None:
        elements.append(("probe:element", unit.probe.r0_ohm, unit.probe.tolerance_class, None))
    for element, r0_ohm, cls, temp_c in elements:
        if cls and element in values:  # a class is a deviation in degC from the curve
            t = unit.ambient_c if temp_c is None else temp_c
            a, b = TOLERANCE_CLASSES[cls]
            dev = (a + b * abs(t)) / RECTANGULAR
            rtd, at = Rtd(r0_ohm=r0_ohm), np.array([t])
            low, high = (float(rtd.r_of_element(at, np.array([d]))[0]) for d in (-dev, dev))
            moves.append({element: (low, high)})
    return moves


def ambient_move(unit: UnitModel, values: dict[str, float]) -> Move:
    """The elements that change with the ambient (sensors read at it, copper, the reference
    probe), at one kelvin below and above it; ``values`` are the nominal element values."""
    down, up = (
        {name: e.value for name, e in build_unit_circuit(moved).circuit.elements.items()}
        for moved in (replace(unit, ambient_c=unit.ambient_c + d) for d in (-1.0, 1.0))
    )
    return {e: (down[e], up[e]) for e in values if e in down and e in up and down[e] != up[e]}


def good_unit_misfit(
    residual: FloatArray, u: FloatArray, spread: FloatArray
) -> tuple[float, float]:
    """(r^T C^-1 r, log Occam factor) with C = diag(u^2) + J J^T, ``spread`` being J (readings x
    moves): the no-fault hypothesis's squared misfit and the log of the share of its prior the
    data leave, relative to a hypothesis scored on diag(u^2) alone (Woodbury identity)."""
    d = u**2
    if spread.size == 0:
        return float(np.sum(residual**2 / d)), 0.0
    scaled = spread / d[:, None]
    inner = np.eye(spread.shape[1]) + spread.T @ scaled
    b = scaled.T @ residual
    chi2 = float(np.sum(residual**2 / d) - b @ np.linalg.solve(inner, b))
    _, logdet = np.linalg.slogdet(inner)
    return chi2, -0.5 * float(logdet)


def widening(slope: FloatArray, u: FloatArray, spread: FloatArray) -> float:
    """log(sigma_C / sigma_D) of a fitted parameter whose readings move by ``slope`` per unit of
    it: how much wider its likelihood is once the parts' tolerances may take up part of its
    effect (Fisher information g^T C^-1 g against g^T D^-1 g; Woodbury identity)."""
    d = u**2
    plain = float(np.sum(slope**2 / d))
    if spread.size == 0 or not plain > 0:
        return 0.0
    scaled = spread / d[:, None]
    inner = np.eye(spread.shape[1]) + spread.T @ scaled
    b = scaled.T @ slope
    wide = plain - float(b @ np.linalg.solve(inner, b))
    return 0.5 * math.log(plain / wide) if wide > 0 else 0.0
