"""The solver against ngspice, an independent SPICE implementation (Debian package ``ngspice``).

Every check compares rig's operating point with ngspice's batch ``.op`` of the same netlist
(source: ngspice-39 run by ``tests/ngspice_ref.py``), to 1e-6 relative with a 1e-9 V floor for
nodes near 0 V.  Without ngspice these tests skip, except under CI (``CI`` set), where they fail.
"""

from __future__ import annotations

import numpy as np
import pytest
from ngspice_ref import ngspice_run, require_ngspice

from rig.circuit import GROUND, Circuit, solve

pytestmark = pytest.mark.ngspice

REL = 1e-6
ABS_V = 1e-9
ABS_A = 1e-12


@pytest.fixture(autouse=True)
def _ngspice_present() -> None:
    require_ngspice()


def assert_matches_ngspice(c: Circuit, check_currents: bool = True) -> None:
    """rig and ngspice agree on every node voltage and every voltage-source current."""
    ours = solve(c)
    ref = ngspice_run(c)
    assert set(ref.voltages) == set(c.nodes)
    for node, v_ref in ref.voltages.items():
        assert ours.v(node) == pytest.approx(v_ref, rel=REL, abs=ABS_V), node
    if check_currents:
        for name, i_ref in ref.currents.items():
            assert ours.i(name) == pytest.approx(i_ref, rel=REL, abs=ABS_A), name


def test_wheatstone_bridge() -> None:
    c = Circuit()
    c.vsource("VEXC", "exc", GROUND, 10.0)
    c.resistor("R1", "exc", "a", 1000.0)
    c.resistor("R2", "a", GROUND, 1200.0)
    c.resistor("R3", "exc", "b", 1000.0)
    c.resistor("R4", "b", GROUND, 1000.0)
    c.resistor("RDET", "a", "b", 50_000.0)
    assert_matches_ngspice(c)


def test_ratiometric_divider_with_vcvs() -> None:
    # a sensor on a pull-up to the 5 V reference, buffered x1 and scaled x0.8 by two VCVS
    for v_ref in (4.75, 5.0, 5.25):
        c = Circuit()
        c.vsource("VREF", "ref", GROUND, v_ref)
        c.resistor("RPULL", "ref", "sig", 2200.0)
        c.resistor("RSENSOR", "sig", GROUND, 3300.0)
        c.vcvs("EBUF", "buf", GROUND, "sig", GROUND, 1.0)
        c.vcvs("ESCALE", "adc", GROUND, "buf", GROUND, 0.8)
        c.resistor("RADC", "adc", GROUND, 100_000.0)
        c.resistor("RBUF", "buf", GROUND, 47_000.0)
        assert_matches_ngspice(c)
        assert solve(c).v("adc") / v_ref == pytest.approx(0.8 * 3300 / 5500, rel=1e-12)


def test_current_sources_and_signs() -> None:
    c = Circuit()
    c.isource("IEXC", GROUND, "rtd", 1e-3)  # 1 mA pushed into rtd (SPICE convention)
    c.resistor("RRTD", "rtd", GROUND, 138.5055)
    c.isource("ISINK", "load", GROUND, 2.5e-3)  # 2.5 mA pulled out of load
    c.vsource("VS", "sup", GROUND, 12.0)
    c.resistor("RSUP", "sup", "load", 820.0)
    c.resistor("RLOAD", "load", GROUND, 4700.0)
    c.isource("IBRIDGE", "rtd", "load", 1e-4)  # from rtd through the source into load
    c.vsource("VCHG", "bat", GROUND, 3.0)
    c.resistor("RCHG", "load", "bat", 100.0)  # the 3 V source absorbs power: positive current
    assert_matches_ngspice(c)
    ref = ngspice_run(c)
    assert ref.currents["VS"] < 0 < ref.currents["VCHG"]  # SPICE sign, as rig documents


def test_switches_in_both_states() -> None:
    c = Circuit()
    c.vsource("VS", "s", GROUND, 5.0)
    c.switch("K1", "s", "a", closed=True)
    c.switch("K2", "a", "b", closed=False)
    c.switch("K3", "s", "b", closed=True, r_on_ohm=0.2, r_off_ohm=1e8)
    c.resistor("RA", "a", GROUND, 1000.0)
    c.resistor("RB", "b", GROUND, 1e6)
    c.switch("K4", "b", "c", closed=False, r_on_ohm=0.1, r_off_ohm=1e9)
    c.resistor("RC", "c", GROUND, 1e3)
    for states in [(True, False, True, False), (False, True, False, True), (False,) * 4]:
        for name, closed in zip(("K1", "K2", "K3", "K4"), states, strict=True):
            c.set_switch(name, closed)
        assert_matches_ngspice(c)


def test_resistor_ladder_of_120_nodes() -> None:
    c = Circuit()
    c.vsource("VIN", "l0", GROUND, 10.0)
    for k in range(120):
        c.resistor(f"RS{k}", f"l{k}", f"l{k + 1}", 100.0 + k)
        c.resistor(f"RP{k}", f"l{k + 1}", GROUND, 2000.0 + 7.0 * k)
    assert len(c.nodes) == 121
    # deep in the ladder the voltage decays towards a few nV: the absolute floor matters there
    assert_matches_ngspice(c)


def test_random_mesh() -> None:
    rng = np.random.default_rng(20240601)
    c = Circuit()
    n = 40
    names = [f"m{k}" for k in range(n)]
    for k in range(1, n):
        c.resistor(f"RT{k}", names[k], names[int(rng.integers(0, k))], float(rng.uniform(10, 1e5)))
    for k in range(2 * n):
        a, b = rng.choice(n, size=2, replace=False)
        c.resistor(f"RX{k}", names[int(a)], names[int(b)], float(rng.uniform(10, 1e5)))
    for k in range(0, n, 7):
        c.resistor(f"RG{k}", names[k], GROUND, float(rng.uniform(100, 1e4)))
    c.vsource("V1", "p1", GROUND, 12.0)
    c.resistor("RP1", "p1", names[3], 50.0)
    c.vsource("V2", names[10], names[20], -2.5)
    c.isource("I1", names[5], names[30], 1.5e-3)
    c.vcvs("E1", "amp", GROUND, names[8], names[9], 25.0)
    c.resistor("RAMP", "amp", names[15], 330.0)
    c.switch("K1", names[1], names[2], closed=True)
    c.switch("K2", names[11], GROUND, closed=False)
    assert_matches_ngspice(c)
