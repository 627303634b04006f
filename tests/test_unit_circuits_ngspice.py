"""The shipped unit models, healthy and faulted, solved by rig and by ngspice.

Reference: ngspice-39 operating-point analysis (Debian package ngspice), run by
``tests/ngspice_ref.py`` on the netlist ``rig.circuit.to_spice`` writes for the same circuit.  Every
node must agree to 1e-6 relative, with a 1e-9 V floor for nodes near 0 V.  Without ngspice these
tests skip, except under CI, where they fail (``require_ngspice``).

A unit circuit has no node 0 of its own; it is solved as the bench sees it with every relay open:
the fixture's bench-ground pin tied to node 0 as ``rig.sim.circuit_probe`` ties it, any island
with no path to node 0 referenced to node 0 at one of its nodes (no current flows through that
reference), and the DMM's ohms test current (1 mA) through the bench Pt100 and, for a unit with no
controller of its own, through its sensor, so that no island sits at a trivial 0 V.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from grounding import ground_like_the_bench
from ngspice_ref import ngspice_op, require_ngspice

from rig.circuit import Circuit, solve
from rig.config.unit_file import UnitModel, load_unit
from rig.faults import parse_faults
from rig.unit_circuit import build_unit_circuit

UNITS = Path(__file__).resolve().parent.parent / "sequences" / "units"
REL = 1e-6
ABS_V = 1e-9
TEST_CURRENT_A = 1e-3

FAULT_CASES: dict[str, list[list[str]]] = {
    "temp-circuit": [
        [],
        ["open:signal"],
        ["short-ground:signal"],
        ["short-ref:signal", "series:ground=15ohm"],
        ["short:signal,ground", "drift:coolant=+8%"],
        ["short-feed:signal"],
    ],
    "pressure-circuit": [
        [],
        ["open:sensor_ground"],
        ["series:signal=47ohm", "drift:map=-10%"],
        ["short-feed:supply"],
        ["short-ground:signal", "short-ref:sensor_ground"],
    ],
    "ntc-sender": [
        [],
        ["series:lead_a=2ohm", "drift:sender=+5%"],
        # no open lead here: 1 mA into 1 Gohm of leakage is 1e6 V, where a real meter would
        # overload and both solvers lose digits to the conditioning of the system
        ["short:lead_a,lead_b"],
        ["series:lead_b=0.5ohm", "drift:sender=-30%"],
    ],
}
SENSOR_PINS = {"ntc-sender": ("T1", "T2")}
"""Where the DMM's ohms test current goes for a unit with no controller sources."""


def cases() -> list[tuple[str, list[str]]]:
    found = []
    for path in sorted(UNITS.glob("*.toml")):
        # a unit shipped without cases here is still checked healthy
        for faults in FAULT_CASES.get(path.stem, [[]]):
            found.append((path.stem, faults))
    return found


def on_bench(unit: UnitModel, circuit: Circuit) -> Circuit:
    """A copy of ``circuit`` set up as the module docstring says."""
    c = circuit.copy()
    if unit.probe is not None:
        c.isource("test:pt100", unit.probe.force_lo, unit.probe.force_hi, TEST_CURRENT_A)
    if unit.name in SENSOR_PINS:
        hi, lo = SENSOR_PINS[unit.name]
        c.isource("test:ohms", lo, hi, TEST_CURRENT_A)  # pushed into hi, drawn from lo
    return ground_like_the_bench(unit, c)


@pytest.mark.ngspice
@pytest.mark.parametrize(
    ("name", "faults"), cases(), ids=[f"{n}[{' '.join(f) or 'good'}]" for n, f in cases()]
)
def test_unit_circuit_matches_ngspice(name: str, faults: list[str]) -> None:
    require_ngspice()
    unit = load_unit(UNITS / f"{name}.toml")
    built = build_unit_circuit(unit, parse_faults(faults, unit))
    circuit = on_bench(unit, built.circuit)
    ours = solve(circuit)
    reference = ngspice_op(circuit)
    assert set(reference) == set(circuit.nodes)
    for node, v_ref in reference.items():
        assert ours.v(node) == pytest.approx(v_ref, rel=REL, abs=ABS_V), node
    # the comparison is not between two circuits at rest
    assert max(abs(v) for v in reference.values()) > 0.01


# Solid copper at 20 degC, ohm/km: 18 AWG 20.95, 20 AWG 33.30 (handbook AWG table; recomputed from
# the ASTM B258 diameter and the IEC 60028 resistivity, see SOURCES.md).  Corrected to the unit's
# ambient with alpha20 = 0.00393 /K (from memory; IEC 60228 Annex B fits about 0.004 /K).
OHM_PER_KM_20C = {"18 AWG": 20.95, "20 AWG": 33.30}
ALPHA20 = 0.00393


@pytest.mark.parametrize("wire", ["ground", "signal"])
def test_wire_resistance_against_the_copper_table(wire: str) -> None:
    unit = load_unit(UNITS / "temp-circuit.toml")
    spec = unit.wires[wire]
    built = build_unit_circuit(unit)
    halves = [built.circuit.elements[f"wire:{wire}:{end}"].value for end in "ab"]
    expected = (
        OHM_PER_KM_20C[spec.gauge] / 1000.0 * spec.length_m * (1 + ALPHA20 * (unit.ambient_c - 20))
    )
    assert unit.ambient_c == 23.0 and spec.length_m == 1.6  # as the shipped file states
    # the table is rounded to 4 digits (18 AWG recomputes to 20.947 ohm/km)
    assert sum(halves) == pytest.approx(expected, rel=5e-4)
    assert halves[0] == pytest.approx(halves[1], rel=1e-15)
