"""Unit tests of the DC circuit solver against hand-worked circuit theory.

Sources named beside each check:
- "Ohm's law / KCL / KVL": Kirchhoff's circuit laws and Ohm's law, as in any circuit theory text.
- "voltage divider rule", "bridge balance condition", "Thevenin's theorem", "superposition":
  standard results of linear circuit theory (textbook results; the numbers are worked by hand).
- "SPICE sign convention": the ngspice manual, independent sources: positive current flows from the
  positive node through the source to the negative node (from memory of the manual; the same signs
  are checked against ngspice-39 output in test_circuit_ngspice.py).
- "Tellegen's theorem": the sum of branch powers of any network obeying KCL and KVL is zero.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rig.circuit import GROUND, Circuit, Kind, solve, solve_batch, to_spice
from rig.circuit.spice import spice_names
from rig.errors import CircuitError, RigError


def divider(v: float = 5.0, r_top: float = 1000.0, r_bottom: float = 2000.0) -> Circuit:
    c = Circuit()
    c.vsource("VS", "top", GROUND, v)
    c.resistor("R1", "top", "mid", r_top)
    c.resistor("R2", "mid", GROUND, r_bottom)
    return c


# -- hand-checked values ---------------------------------------------------------------------


def test_divider_voltage_and_currents() -> None:
    sol = solve(divider())
    # voltage divider rule: 5 V * 2k / (1k + 2k) = 10/3 V
    assert sol.v("mid") == pytest.approx(10.0 / 3.0, rel=1e-12)
    assert sol.v("top") == pytest.approx(5.0, rel=1e-12)
    # Ohm's law: 5 V / 3 kohm = 5/3 mA flows top -> mid through R1
    assert sol.i_resistor("R1") == pytest.approx(5.0 / 3000.0, rel=1e-12)
    assert sol.i("R2") == pytest.approx(5.0 / 3000.0, rel=1e-12)
    # SPICE sign convention: a source delivering power has a negative branch current
    assert sol.i("VS") == pytest.approx(-5.0 / 3000.0, rel=1e-12)
    assert sol.vdiff("top", "mid") == pytest.approx(5.0 / 3.0, rel=1e-12)
    assert sol.voltages == pytest.approx({"top": 5.0, "mid": 10.0 / 3.0}, rel=1e-12)


def wheatstone(r1: float, r2: float, r3: float, r4: float, v: float = 10.0) -> Circuit:
    """Supply across two arms: r1 over r2 (node a) and r3 over r4 (node b)."""
    c = Circuit()
    c.vsource("VB", "exc", GROUND, v)
    c.resistor("R1", "exc", "a", r1)
    c.resistor("R2", "a", GROUND, r2)
    c.resistor("R3", "exc", "b", r3)
    c.resistor("R4", "b", GROUND, r4)
    c.resistor("RM", "a", "b", 1e6)  # a detector across the bridge
    return c


def test_bridge_balance_and_unbalance() -> None:
    # bridge balance condition: R1/R2 = R3/R4 gives no voltage across the detector
    balanced = solve(wheatstone(1000.0, 2000.0, 350.0, 700.0))
    assert abs(balanced.vdiff("a", "b")) < 1e-12
    assert abs(balanced.i_resistor("RM")) < 1e-15
    # unloaded unbalanced bridge (voltage divider rule on each arm): with the detector removed,
    # Vab = V (R2/(R1+R2) - R4/(R3+R4)) = 10 (1200/2200 - 1000/2000) = 0.454545... V
    c = wheatstone(1000.0, 1200.0, 1000.0, 1000.0)
    c.remove("RM")
    assert solve(c).vdiff("a", "b") == pytest.approx(10.0 * (1200 / 2200 - 0.5), rel=1e-12)


def thevenin_network() -> Circuit:
    """12 V through 4k to node a, 12k from a to ground, 1k from a to the output b."""
    c = Circuit()
    c.vsource("V1", "in", GROUND, 12.0)
    c.resistor("R1", "in", "a", 4000.0)
    c.resistor("R2", "a", GROUND, 12000.0)
    c.resistor("R3", "a", "b", 1000.0)
    return c


def test_thevenin_equivalent() -> None:
    # Thevenin's theorem, worked by hand: Vth = 12 * 12k/16k = 9 V, Rth = 4k || 12k + 1k = 4 kohm
    open_circuit = thevenin_network()
    assert solve(open_circuit).v("b") == pytest.approx(9.0, rel=1e-12)

    shorted = thevenin_network()
    shorted.vsource("VSC", "b", GROUND, 0.0)  # an ammeter: 0 V source, b -> source -> ground
    # short-circuit current Vth/Rth = 2.25 mA flows into the source at its pos node (SPICE sign)
    assert solve(shorted).i("VSC") == pytest.approx(9.0 / 4000.0, rel=1e-12)

    for r_load in (500.0, 2000.0, 4000.0, 1e5):
        loaded = thevenin_network()
        loaded.resistor("RL", "b", GROUND, r_load)
        expected = 9.0 * r_load / (4000.0 + r_load)  # voltage divider rule on the equivalent
        assert solve(loaded).v("b") == pytest.approx(expected, rel=1e-12)


def test_current_source_sign_convention() -> None:
    # SPICE sign convention: i_a flows from pos through the source to neg, i.e. into node neg
    c = Circuit()
    c.isource("IS", GROUND, "n", 1e-3)
    c.resistor("R", "n", GROUND, 1000.0)
    sol = solve(c)
    assert sol.v("n") == pytest.approx(1.0, rel=1e-12)  # Ohm's law: 1 mA * 1 kohm
    assert sol.i("IS") == pytest.approx(1e-3)  # a current source reports its own value
    c.set_value("IS", -2e-3)
    assert solve(c).v("n") == pytest.approx(-2.0, rel=1e-12)

    reverse = Circuit()
    reverse.isource("IS", "n", GROUND, 1e-3)  # pulls 1 mA out of n
    reverse.resistor("R", "n", GROUND, 1000.0)
    assert solve(reverse).v("n") == pytest.approx(-1.0, rel=1e-12)


def test_source_absorbing_power_has_positive_current() -> None:
    # SPICE sign convention: a 5 V source charged from a 10 V source through 1 kohm absorbs power,
    # so its current (pos -> through it -> neg) is +5 mA; the 10 V source delivers: -5 mA
    c = Circuit()
    c.vsource("VHI", "hi", GROUND, 10.0)
    c.resistor("R", "hi", "lo", 1000.0)
    c.vsource("VLO", "lo", GROUND, 5.0)
    sol = solve(c)
    assert sol.i("VLO") == pytest.approx(5e-3, rel=1e-12)
    assert sol.i("VHI") == pytest.approx(-5e-3, rel=1e-12)


def test_superposition_with_two_sources() -> None:
    # superposition: V(n) = V1 R2/(R1+R2) + I R1 R2/(R1+R2), worked by hand for
    # V1 = 3 V, R1 = 1k, R2 = 3k, I = 2 mA into n: 2.25 + 1.5 = 3.75 V
    c = Circuit()
    c.vsource("V1", "s", GROUND, 3.0)
    c.resistor("R1", "s", "n", 1000.0)
    c.resistor("R2", "n", GROUND, 3000.0)
    c.isource("I1", GROUND, "n", 2e-3)
    assert solve(c).v("n") == pytest.approx(3.75, rel=1e-12)


def test_vcvs_ratiometric_output_follows_supply() -> None:
    # voltage divider rule + ideal amplifier: out = gain * Vs * R2/(R1+R2) = 2 * Vs * 0.25, so
    # out/Vs stays 0.5 whatever the supply (a ratiometric sensor output)
    c = divider(5.0, 3000.0, 1000.0)
    c.vcvs("EAMP", "out", GROUND, "mid", GROUND, 2.0)
    c.resistor("RLOAD", "out", GROUND, 10_000.0)
    supplies = np.array([4.5, 5.0, 5.5])
    batch = solve_batch(c, {"VS": supplies})
    np.testing.assert_allclose(batch.v("out") / supplies, 0.5, rtol=1e-12)
    sol = solve(c)
    assert sol.v("out") == pytest.approx(2.5, rel=1e-12)
    # the VCVS delivers 2.5 V / 10 kohm into the load: SPICE sign makes its current negative
    assert sol.i("EAMP") == pytest.approx(-2.5e-4, rel=1e-12)


def test_switch_states() -> None:
    # voltage divider rule with the switch resistance in series with a 1 kohm load
    c = Circuit()
    c.vsource("VS", "s", GROUND, 5.0)
    c.switch("K1", "s", "n", closed=True, r_on_ohm=0.05, r_off_ohm=1e9)
    c.resistor("RL", "n", GROUND, 1000.0)
    assert solve(c).v("n") == pytest.approx(5.0 * 1000.0 / 1000.05, rel=1e-12)
    assert c.elements["K1"].value == 0.05
    c.set_switch("K1", False)
    # an open switch still connects through r_off (by design): 5 V * 1k / (1e9 + 1k)
    assert solve(c).v("n") == pytest.approx(5.0 * 1000.0 / (1e9 + 1000.0), rel=1e-12)
    assert c.elements["K1"].closed is False
    assert solve(c).i_resistor("K1") == pytest.approx(5.0 / (1e9 + 1000.0), rel=1e-12)


def test_node_reached_only_through_open_switch_is_not_floating() -> None:
    c = Circuit()
    c.vsource("VS", "s", GROUND, 5.0)
    c.switch("K1", "s", "island", closed=False)
    c.isource("ILEAK", GROUND, "island", 1e-9)  # 1 nA into the island through the 1 Gohm contact
    # Ohm's law across r_off: V(island) = 5 V + 1 nA * 1 Gohm = 6 V
    assert solve(c).v("island") == pytest.approx(6.0, rel=1e-12)


def test_ground_aliases() -> None:
    c = Circuit()
    c.vsource("VS", "s", "gnd", 2.0)
    c.resistor("R1", "s", "m", 1.0)
    c.resistor("R2", "m", "GND", 1.0)
    c.resistor("R3", "m", "0", 1e12)
    assert c.nodes == ["s", "m"]
    sol = solve(c)
    assert sol.v("gnd") == 0.0 and sol.v("0") == 0.0 and sol.v(GROUND) == 0.0
    assert sol.v("m") == pytest.approx(1.0, rel=1e-9)  # voltage divider rule, 1e12 shunt ~ open


# -- physics invariants on random networks ----------------------------------------------------


def random_mesh(seed: int, n_nodes: int) -> Circuit:
    """A connected random mesh of resistors with one supply, current sources and a VCVS."""
    rng = np.random.default_rng(seed)
    c = Circuit()
    names = [f"n{k}" for k in range(n_nodes)]
    for k in range(1, n_nodes):  # a spanning tree keeps every node connected
        other = names[int(rng.integers(0, k))]
        c.resistor(f"RT{k}", names[k], other, float(rng.uniform(10.0, 1e5)))
    for k in range(n_nodes):  # extra mesh links
        a, b = rng.choice(n_nodes, size=2, replace=False)
        c.resistor(f"RX{k}", names[int(a)], names[int(b)], float(rng.uniform(10.0, 1e5)))
    c.resistor("RG", names[0], GROUND, float(rng.uniform(10.0, 1e3)))
    c.vsource("VS", "sup", GROUND, float(rng.uniform(1.0, 24.0)))
    c.resistor("RS", "sup", names[-1], float(rng.uniform(1.0, 100.0)))
    c.isource("IA", GROUND, names[n_nodes // 2], float(rng.uniform(-1e-3, 1e-3)))
    c.vcvs("EA", "amp", GROUND, names[1], names[2 % n_nodes], float(rng.uniform(-5.0, 5.0)))
    c.resistor("RA", "amp", GROUND, float(rng.uniform(100.0, 1e4)))
    c.switch("K1", names[0], names[-1], closed=bool(rng.integers(0, 2)))
    return c


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**31), n_nodes=st.integers(3, 25))
def test_kcl_and_tellegen_hold(seed: int, n_nodes: int) -> None:
    c = random_mesh(seed, n_nodes)
    sol = solve(c)
    current = {name: sol.i(name) for name in c.elements}
    scale = max(abs(i) for i in current.values())
    # KCL: at every node, the currents leaving through each element's first node and entering
    # through its second node sum to zero (VCVS control inputs draw no current)
    net: dict[str, float] = dict.fromkeys(c.nodes, 0.0)
    for name, element in c.elements.items():
        first, second = element.nodes[0], element.nodes[1]
        if first != GROUND:
            net[first] -= current[name]
        if second != GROUND:
            net[second] += current[name]
    for node, total in net.items():
        assert abs(total) <= 1e-9 * scale, node
    # Tellegen's theorem: sum over branches of V(first) - V(second) times current is zero
    power = [sol.vdiff(e.nodes[0], e.nodes[1]) * current[n] for n, e in c.elements.items()]
    assert abs(sum(power)) <= 1e-9 * max(abs(p) for p in power)
    # Ohm's law per resistor
    for name, element in c.elements.items():
        if element.kind is Kind.RESISTOR:
            drop = sol.vdiff(element.nodes[0], element.nodes[1])
            assert current[name] == pytest.approx(drop / element.value, rel=1e-9, abs=1e-18)


def test_batch_equals_loop_of_single_solves() -> None:
    c = random_mesh(7, 15)
    rng = np.random.default_rng(11)
    n = 64
    overrides: dict[str, np.ndarray] = {
        "RT3": rng.uniform(10.0, 1e4, n),
        "RX5": rng.uniform(10.0, 1e4, n),
        "VS": rng.uniform(1.0, 10.0, n),
        "IA": rng.uniform(-1e-3, 1e-3, n),
        "EA": rng.uniform(-3.0, 3.0, n),
        "K1": rng.integers(0, 2, n).astype(bool),
    }
    batch = solve_batch(c, overrides)
    assert batch.n == n
    for k in range(n):
        single = c.copy()
        for name, values in overrides.items():
            if name == "K1":
                single.set_switch(name, bool(values[k]))
            else:
                single.set_value(name, float(values[k]))
        sol = solve(single)
        for node in c.nodes:
            assert batch.v(node)[k] == pytest.approx(sol.v(node), rel=1e-10, abs=1e-12)
        for name in ("VS", "EA", "IA"):
            assert batch.i(name)[k] == pytest.approx(sol.i(name), rel=1e-10, abs=1e-15)
        assert batch.i_resistor("RX5")[k] == pytest.approx(sol.i_resistor("RX5"), rel=1e-10)
        assert batch.vdiff("n1", "n2")[k] == pytest.approx(sol.vdiff("n1", "n2"), abs=1e-12)
    assert set(batch.voltages) == set(c.nodes)


def test_batch_switch_override_accepts_zero_one() -> None:
    c = Circuit()
    c.vsource("VS", "s", GROUND, 5.0)
    c.switch("K1", "s", "n", closed=False, r_on_ohm=1.0, r_off_ohm=1e6)
    c.resistor("RL", "n", GROUND, 1.0)
    batch = solve_batch(c, {"K1": np.array([0, 1, 1, 0])})
    # voltage divider rule: closed 5 * 1/2, open 5 * 1/(1e6 + 1)
    np.testing.assert_allclose(batch.v("n"), [5 / 1000001, 2.5, 2.5, 5 / 1000001], rtol=1e-12)


# -- topology errors --------------------------------------------------------------------------


def test_floating_node_is_named() -> None:
    c = divider()
    c.resistor("RF1", "lonely1", "lonely2", 100.0)
    with pytest.raises(CircuitError, match="floating") as caught:
        solve(c)
    assert "'lonely1'" in str(caught.value) and "'lonely2'" in str(caught.value)
    assert set(caught.value.nodes) == {"lonely1", "lonely2"}
    assert "'mid'" not in str(caught.value)


def test_node_fed_only_by_current_source_floats() -> None:
    c = divider()
    c.isource("IX", "mid", "dangling", 1e-3)
    with pytest.raises(CircuitError, match=r"floating.*'dangling'"):
        solve(c)


def test_node_seen_only_by_vcvs_control_floats() -> None:
    c = divider()
    c.vcvs("EX", "out", GROUND, "sense", GROUND, 1.0)
    c.resistor("RO", "out", GROUND, 1000.0)
    with pytest.raises(CircuitError, match=r"floating.*'sense'") as caught:
        solve(c)
    assert caught.value.nodes == ("sense",)


def test_parallel_voltage_sources_are_named() -> None:
    c = divider()
    c.vsource("VSPARE", "top", GROUND, 5.0)  # even equal values: the loop current is undefined
    with pytest.raises(CircuitError, match="loop of ideal voltage sources") as caught:
        solve(c)
    assert "'VS'" in str(caught.value) and "'VSPARE'" in str(caught.value)


def test_loop_through_three_sources_names_all_three() -> None:
    c = Circuit()
    c.vsource("VA", "a", GROUND, 1.0)
    c.vsource("VB", "b", "a", 1.0)
    c.resistor("RB", "b", GROUND, 100.0)
    c.vcvs("EC", "b", GROUND, "a", GROUND, 2.0)  # closes a loop VA-VB-EC
    c.resistor("RX", "x", GROUND, 10.0)
    c.vsource("VX", "x", "y", 1.0)
    c.resistor("RY", "y", GROUND, 10.0)
    with pytest.raises(CircuitError) as caught:
        solve(c)
    message = str(caught.value)
    for name in ("'VA'", "'VB'", "'EC'"):
        assert name in message
    assert "'VX'" not in message  # a source in series with resistors is not in a loop


def test_shorted_voltage_source_is_a_loop() -> None:
    c = divider()
    c.vsource("VSHORT", "mid", "mid", 1.0)
    with pytest.raises(CircuitError, match="'VSHORT'"):
        solve(c)


def test_singular_system_becomes_circuit_error() -> None:
    # a VCVS of gain 1 that drives its own control node: V(out) = V(out) fixes nothing
    c = Circuit()
    c.vcvs("EFB", "out", GROUND, "out", GROUND, 1.0)
    c.resistor("RL", "out", GROUND, 1000.0)
    with pytest.raises(CircuitError, match="singular"):
        solve(c)
    c.set_value("EFB", 0.5)  # V(out) = 0.5 V(out) has the unique solution 0 V
    assert solve(c).v("out") == 0.0
    with pytest.raises(CircuitError, match="parameter set 2"):
        solve_batch(c, {"EFB": np.array([0.5, 2.0, 1.0])})


def test_errors_are_rig_errors_not_numpy_errors() -> None:
    assert issubclass(CircuitError, RigError)


# -- bad input ------------------------------------------------------------------------------


def test_duplicate_name_rejected() -> None:
    c = divider()
    with pytest.raises(CircuitError, match="duplicate element name 'R1'"):
        c.resistor("R1", "a", "b", 10.0)
    with pytest.raises(CircuitError, match="duplicate"):
        c.switch("R2", "a", "b", closed=True)
    assert c.elements["R1"].nodes == ("top", "mid")  # the first one is untouched


@pytest.mark.parametrize("bad", [0.0, -1.0, math.nan, math.inf, "1k", None, True])
def test_bad_resistance_names_the_element(bad: object) -> None:
    c = Circuit()
    with pytest.raises(CircuitError, match="'RBAD'"):
        c.resistor("RBAD", "a", GROUND, bad)  # type: ignore[arg-type]
    assert not c.has_element("RBAD")


@pytest.mark.parametrize("bad", [math.nan, math.inf, -math.inf, "5"])
def test_bad_source_values_name_the_element(bad: object) -> None:
    c = divider()
    with pytest.raises(CircuitError, match="'VS'"):
        c.set_value("VS", bad)  # type: ignore[arg-type]
    with pytest.raises(CircuitError, match="'IBAD'"):
        c.isource("IBAD", "mid", GROUND, bad)  # type: ignore[arg-type]
    with pytest.raises(CircuitError, match="'EBAD'"):
        c.vcvs("EBAD", "o", GROUND, "mid", GROUND, bad)  # type: ignore[arg-type]
    assert c.elements["VS"].value == 5.0


def test_bad_switch_arguments() -> None:
    c = Circuit()
    with pytest.raises(CircuitError, match=r"'K1'.*r_on_ohm"):
        c.switch("K1", "a", "b", closed=True, r_on_ohm=0.0)
    with pytest.raises(CircuitError, match="below r_off_ohm"):
        c.switch("K1", "a", "b", closed=True, r_on_ohm=10.0, r_off_ohm=1.0)
    with pytest.raises(CircuitError, match="True or False"):
        c.switch("K1", "a", "b", closed="yes")  # type: ignore[arg-type]
    c.switch("K1", "a", "b", closed=np.True_)  # type: ignore[arg-type]
    assert c.elements["K1"].closed is True
    with pytest.raises(CircuitError, match="set_switch"):
        c.set_value("K1", 1.0)
    c.resistor("R1", "a", GROUND, 1.0)
    with pytest.raises(CircuitError, match="not a switch"):
        c.set_switch("R1", True)


def test_bad_names() -> None:
    c = divider()
    with pytest.raises(CircuitError, match="element name"):
        c.resistor("", "a", "b", 1.0)
    with pytest.raises(CircuitError, match="node name"):
        c.resistor("RN", "", "b", 1.0)
    with pytest.raises(CircuitError, match=r"no element named 'R9'.*'R1'"):
        c.set_value("R9", 1.0)
    with pytest.raises(CircuitError, match="no element named 'R9'"):
        c.remove("R9")
    sol = solve(c)
    with pytest.raises(CircuitError, match="no node 'nowhere'"):
        sol.v("nowhere")
    with pytest.raises(CircuitError, match="no element named 'R9'"):
        sol.i("R9")
    with pytest.raises(CircuitError, match="use i\\(\\)"):
        sol.i_resistor("VS")


def test_bad_batch_overrides() -> None:
    c = divider()
    with pytest.raises(CircuitError, match="at least one override"):
        solve_batch(c, {})
    with pytest.raises(CircuitError, match="'RZ'"):
        solve_batch(c, {"RZ": np.ones(3)})
    with pytest.raises(CircuitError, match=r"shape \(N,\)"):
        solve_batch(c, {"R1": np.ones((2, 2))})
    with pytest.raises(CircuitError, match="same length"):
        solve_batch(c, {"R1": np.ones(3), "R2": np.ones(4)})
    with pytest.raises(CircuitError, match=r"'R1\[2\]'.*> 0 ohm"):
        solve_batch(c, {"R1": np.array([1.0, 2.0, -3.0])})
    with pytest.raises(CircuitError, match=r"'VS\[1\]'.*finite"):
        solve_batch(c, {"VS": np.array([1.0, np.nan])})
    c.switch("K1", "mid", GROUND, closed=False)
    with pytest.raises(CircuitError, match="closed states"):
        solve_batch(c, {"K1": np.array([0.0, 0.5])})


# -- caching and copies ---------------------------------------------------------------------


def test_values_change_without_recompiling_and_topology_changes_recompile() -> None:
    c = divider()
    first = solve(c).v("mid")
    compiled = c._compiled
    c.set_value("R2", 1000.0)
    assert c._compiled is compiled  # values only: the compiled topology is kept
    assert solve(c).v("mid") == pytest.approx(2.5, rel=1e-12)  # voltage divider rule
    assert first != solve(c).v("mid")
    c.resistor("R3", "mid", GROUND, 1000.0)
    assert c._compiled is None
    # voltage divider rule, 1k over (1k || 1k): 5 * 500/1500
    assert solve(c).v("mid") == pytest.approx(5.0 / 3.0, rel=1e-12)
    c.remove("R3")
    assert solve(c).v("mid") == pytest.approx(2.5, rel=1e-12)


def test_copy_is_independent() -> None:
    c = divider()
    twin = c.copy()
    twin.set_value("R2", 1000.0)
    twin.resistor("R3", "mid", GROUND, 1e3)
    assert solve(c).v("mid") == pytest.approx(10.0 / 3.0, rel=1e-12)
    assert solve(twin).v("mid") == pytest.approx(5.0 / 3.0, rel=1e-12)
    assert not c.has_element("R3") and twin.has_element("R3")


def test_elements_view_is_read_only_and_live() -> None:
    c = divider()
    view = c.elements
    with pytest.raises(TypeError):
        view["R1"] = view["R2"]  # type: ignore[index]
    c.set_value("R1", 42.0)
    assert view["R1"].value == 42.0 and view["R1"].kind is Kind.RESISTOR
    c.remove("R2")
    assert "R2" not in view and c.nodes == ["top", "mid"]
    c.remove("R1")
    assert c.nodes == ["top"]


# -- SPICE export -------------------------------------------------------------------------------


def test_to_spice_maps_names_and_keeps_values_exact() -> None:
    c = Circuit()
    c.vsource("V.supply", "SIG A", "gnd", 1 / 3)
    c.resistor("R1", "SIG A", "sig_a", 1234.5678901234567)
    c.resistor("r1", "sig_a", GROUND, 0.1)
    c.switch("K 1", "sig_a", GROUND, closed=False)
    text = to_spice(c, title="two\nlines")
    lines = text.splitlines()
    assert lines[0] == "two lines"  # SPICE reads the first line as the title
    assert ".op" in lines and lines[-1] == ".end"
    names = spice_names(c)
    assert names.nodes["SIG A"] != names.nodes["sig_a"]  # SPICE folds case: kept apart
    assert names.elements["R1"] != names.elements["r1"]
    assert names.elements["V.supply"].startswith("v") and names.elements["K 1"].startswith("r")
    cards = {line.split()[0]: line.split() for line in lines if not line.startswith(("*", "."))}
    assert float(cards[names.elements["V.supply"]][-1]) == 1 / 3
    assert float(cards[names.elements["R1"]][-1]) == 1234.5678901234567
    assert float(cards[names.elements["K 1"]][-1]) == 1e9  # open: written as r_off


def test_copies_solved_from_several_threads_stay_correct() -> None:
    # copies share one compiled topology (and its work matrix): concurrent solves must not mix
    from concurrent.futures import ThreadPoolExecutor

    base = divider()
    solve(base)

    def run(r_bottom: float) -> list[float]:
        c = base.copy()
        c.set_value("R2", r_bottom)
        return [solve(c).v("mid") for _ in range(200)]

    values = [500.0, 1000.0, 2000.0, 4000.0]
    with ThreadPoolExecutor(max_workers=4) as pool:
        results = list(pool.map(run, values))
    for r_bottom, got in zip(values, results, strict=True):
        # voltage divider rule: 5 V * R2 / (1k + R2)
        assert got == pytest.approx([5.0 * r_bottom / (1000.0 + r_bottom)] * 200, rel=1e-12)


def test_empty_circuit_solves_to_nothing() -> None:
    assert solve(Circuit()).voltages == {}
