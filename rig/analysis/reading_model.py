"""One reading of a sequence as an exact, fast function of a drawn unit's varied elements.

The circuit of one reading (unit, fixture relays, meter front end) is linear, and a drawn unit
changes only a few conductances and source voltages.  The nominal circuit is solved once with a
unit current injected at each varied element in turn (one ``solve_batch`` call); each drawn unit's
reading then follows exactly from the Sherman-Morrison-Woodbury identity as one small solve, run
for all drawn units at once.  Pure computation.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from drivers.base import MeterFunction
from rig.analysis.bench_model import Condition, StaticBench
from rig.analysis.good_units import FloatArray, Samples
from rig.circuit import Circuit, solve_batch
from rig.circuit.mna import BatchSolution
from rig.circuit.netlist import Kind
from rig.config.fixture import Bus
from rig.config.station import Station
from rig.sim.circuit_probe import bus_node
from rig.sim.sim_dmm import OVERRANGE_FACTOR


def meter_shows(solution: BatchSolution, function: MeterFunction, test_a: float) -> FloatArray:
    """What the meter shows, as ``rig.sim.circuit_probe.CircuitProbe.meter_value`` forms it."""
    hi, lo = bus_node(Bus.DMM_HI), bus_node(Bus.DMM_LO)
    if function is MeterFunction.DC_VOLTS:
        return solution.vdiff(hi, lo)
    if function is MeterFunction.DC_CURRENT:
        return solution.i_resistor("meter:input")
    if function is MeterFunction.RES_4W:
        return solution.vdiff(bus_node(Bus.SENSE_HI), bus_node(Bus.SENSE_LO)) / test_a
    return solution.vdiff(hi, lo) / test_a


@dataclass(frozen=True)
class Port:
    """A varied element of a reading's circuit: a resistance between nodes ``a`` and ``b``, or
    the gain of a voltage-controlled source whose control input is ``a`` - ``b``."""

    name: str
    """The key of its drawn values: an element name, or ``wire:NAME`` for a whole wire."""
    a: str
    b: str
    r0_ohm: float
    """The nominal resistance (or gain)."""
    halves: bool = False
    """True for a wire taken as one resistance end to end (its drawn value), False when it is
    the element itself; a wire split at a midpoint that something else joins is two ports."""
    gain: bool = False


def circuit_ports(circuit: Circuit, names: Sequence[str]) -> list[Port]:
    """The ports for drawn values ``names`` in ``circuit``.

    A wire is built as two equal halves around a midpoint; when nothing else touches the midpoint
    (no fault there), the two in series are one resistance between the wire's ends, which is
    exact and halves the size of each sample's solve.
    """
    degree: dict[str, int] = {}
    for element in circuit.elements.values():
        for node in element.nodes:
            degree[node] = degree.get(node, 0) + 1
    ports: list[Port] = []
    for name in names:
        if name in circuit.elements:
            e = circuit.elements[name]
            if e.kind is Kind.VCVS:
                ports.append(Port(name, e.nodes[2], e.nodes[3], e.value, gain=True))
            else:
                ports.append(Port(name, e.nodes[0], e.nodes[1], e.value))
            continue
        first, second = circuit.elements[f"{name}:a"], circuit.elements[f"{name}:b"]
        mid = first.nodes[1]
        if degree.get(mid, 0) == 2:
            ports.append(Port(name, first.nodes[0], second.nodes[1], first.value + second.value))
        else:
            for half in (first, second):
                ports.append(Port(half.name, half.nodes[0], half.nodes[1], half.value, True))
    return ports


def port_values(ports: Sequence[Port], values: Mapping[str, FloatArray]) -> list[FloatArray]:
    """Each port's drawn resistance."""
    return [values[p.name.rsplit(":", 1)[0]] / 2 if p.halves else values[p.name] for p in ports]


@dataclass
class PortModel:
    """One reading as an exact function of the varied elements (Sherman-Morrison-Woodbury).

    With G the nominal circuit's matrix, a sample changes it by U D V' and the sources by dv.  A
    resistance is driven and sensed across its nodes (U = V = e_a - e_b, D = 1/R - 1/R0); a gain
    is driven by a volt in series with its output and sensed at its control input (D = -(k - k0)).
    The reading m = c'G^-1 z becomes m = m0 + b'dv - h'(I + D W)^-1 D (v0 + S dv), where, from
    nominal solves: v0 are the sensed voltages, W[i, j] port i's sensed voltage per unit of drive
    at port j, h the reading per unit of drive, b and S the reading's and the sensed voltages'
    change per volt of each source.
    """

    m0: float
    ports: list[Port]
    r0: FloatArray
    sources: list[str]
    vs0: FloatArray
    b: FloatArray
    h: FloatArray
    v0: FloatArray
    s: FloatArray
    w: FloatArray

    @classmethod
    def build(
        cls,
        circuit: Circuit,
        ports: Sequence[Port],
        sources: Sequence[str],
        function: MeterFunction,
        test_a: float,
    ) -> PortModel:
        c = circuit.copy()
        for j, port in enumerate(ports):
            if port.gain:  # a source in series with the output: V(out) = k V(control) + drive
                e = c.elements[port.name]
                out, neg, cp, cn = e.nodes
                c.remove(port.name)
                c.vcvs(port.name, f"mc:behind:{j}", neg, cp, cn, e.value)
                c.vsource(f"mc:inject:{j}", out, f"mc:behind:{j}", 0.0)
            else:
                c.isource(f"mc:inject:{j}", port.b, port.a, 0.0)  # 1 A into a, out of b
        p, q = len(ports), len(sources)
        sets = 1 + q + p
        overrides: dict[str, FloatArray] = {}
        vs0 = np.array([c.elements[name].value for name in sources], dtype=np.float64)
        for k, name in enumerate(sources):
            overrides[name] = vs0[k] + (np.arange(sets) == 1 + k)
        for j in range(p):
            overrides[f"mc:inject:{j}"] = (np.arange(sets) == 1 + q + j).astype(np.float64)
        if not overrides:  # nothing varies: one solve, through a source of 0 A
            c.isource("mc:none", "0", c.nodes[0], 0.0)
            overrides["mc:none"] = np.zeros(1)
        solution = solve_batch(c, overrides)
        m = meter_shows(solution, function, test_a)
        if p:
            volts = np.stack([solution.vdiff(port.a, port.b) for port in ports])
        else:
            volts = np.zeros((0, sets))
        return cls(
            m0=float(m[0]),
            ports=list(ports),
            r0=np.array([port.r0_ohm for port in ports], dtype=np.float64),
            sources=list(sources),
            vs0=vs0,
            b=m[1 : 1 + q] - m[0],
            h=m[1 + q :] - m[0],
            v0=volts[:, 0],
            s=volts[:, 1 : 1 + q] - volts[:, :1],
            w=volts[:, 1 + q :] - volts[:, :1],
        )

    def evaluate(self, values: Mapping[str, FloatArray], n: int) -> FloatArray:
        """The reading for each of ``n`` drawn units."""
        m = np.full(n, self.m0)
        dv = np.zeros((0, n))
        if self.sources:
            dv = np.stack([values[s] - v for s, v in zip(self.sources, self.vs0, strict=True)])
            m += self.b @ dv
        if self.ports:
            drawn = port_values(self.ports, values)
            dg = np.stack(
                [
                    r - v if port.gain else 1.0 / v - 1.0 / r
                    for port, v, r in zip(self.ports, drawn, self.r0, strict=True)
                ]
            )
            rhs = dg * (self.v0[:, None] + self.s @ dv)
            m -= self.h @ solve_identity_plus(dg, self.w, rhs)
        return m

    def subset(self, ports: Sequence[Port], sources: Sequence[str]) -> PortModel:
        """The same reading with every other element held at nominal (exact: its D entry is 0)."""
        pi = [self.ports.index(p) for p in ports]
        si = [self.sources.index(s) for s in sources]
        return PortModel(
            m0=self.m0,
            ports=list(ports),
            r0=self.r0[pi],
            sources=list(sources),
            vs0=self.vs0[si],
            b=self.b[si],
            h=self.h[pi],
            v0=self.v0[pi],
            s=self.s[np.ix_(pi, si)],
            w=self.w[np.ix_(pi, pi)],
        )

    def pruned(self, pilot: Samples, tolerance: float) -> PortModel:
        """Leave out, one by one, each element that moves this reading by under ``tolerance``."""
        full = self.evaluate(pilot.values, pilot.n)
        model = self
        for name in [*(p.name for p in self.ports), *self.sources]:
            ports = [p for p in model.ports if p.name != name]
            sources = [s for s in model.sources if s != name]
            trial = model.subset(ports, sources)
            if np.max(np.abs(trial.evaluate(pilot.values, pilot.n) - full)) <= tolerance:
                model = trial
        return model


def solve_identity_plus(dg: FloatArray, w: FloatArray, rhs: FloatArray) -> FloatArray:
    """Solve (I + diag(dg[:, k]) W) y[:, k] = rhs[:, k] for every sample k (arrays (p, N)).

    Gaussian elimination vectorised over the samples, without pivoting: the matrix is the
    identity plus each element's relative change times the share of its own resistance it sees,
    so it is strongly diagonal.  Should a pivot ever come out small, the block is handed to
    ``numpy.linalg.solve`` (LU with partial pivoting) instead.
    """
    p = w.shape[0]
    a = dg[:, None, :] * w[:, :, None]
    a[np.arange(p), np.arange(p)] += 1.0
    b = rhs.copy()
    for k in range(p):
        pivot = a[k, k]
        if np.min(np.abs(pivot)) < 1e-3:
            full = np.eye(p)[None] + dg.T[:, :, None] * w[None]
            return np.asarray(np.linalg.solve(full, rhs.T[..., None])[..., 0].T, dtype=np.float64)
        factor = a[k + 1 :, k] / pivot
        a[k + 1 :, k:] -= factor[:, None, :] * a[k, k:][None]
        b[k + 1 :] -= factor * b[k]
    y = np.empty_like(b)
    for k in range(p - 1, -1, -1):
        y[k] = (b[k] - np.einsum("jn,jn->n", a[k, k + 1 :], y[k + 1 :])) / a[k, k]
    return y


def prepared_circuit(bench: StaticBench, condition: Condition) -> Circuit:
    """The unit on its fixture as one reading sees it: relays, meter function, supply."""
    function = condition.function
    if function is None:
        raise ValueError("the supply's own readback has no meter circuit")
    bench.closed = condition.relays
    bench.supply.output_on = condition.supply_on
    bench.supply.voltage_v = condition.supply_v
    bench.supply.current_limit_a = condition.supply_limit_a
    bench.probe.meter_value(function, condition.test_current_a)  # sets up the probe's circuit
    return bench.probe.circuit.copy()


@dataclass
class MeterError:
    """The meter's error bound on one reading: ±(% of reading + % of range) / 100."""

    ranges: FloatArray
    pct_reading: FloatArray
    pct_range: FloatArray
    fixed: bool

    @classmethod
    def for_reading(
        cls, station: Station, function: MeterFunction, range_: float | None
    ) -> MeterError | None:
        """The bound on a fixed range, or on each range autorange may pick; None when the
        station's accuracy table does not cover the reading (the engine then has no U either)."""
        table = station.dmm_accuracy
        try:
            ranges = [range_] if range_ is not None else table.ranges(function.value)
            specs = [table.spec_for(function.value, r) for r in ranges]
        except ValueError:
            return None
        return cls(
            np.array(ranges, dtype=np.float64),
            np.array([s.pct_reading for s in specs], dtype=np.float64),
            np.array([s.pct_range for s in specs], dtype=np.float64),
            range_ is not None,
        )

    def apply(self, true_value: FloatArray, rng: np.random.Generator) -> FloatArray:
        """A reading per sample: the true value plus an error drawn within the bound, and
        overload beyond 120 % of the range in use."""
        mag = np.abs(true_value)
        index = np.minimum(np.searchsorted(self.ranges, mag), len(self.ranges) - 1)
        in_use = self.ranges[index]
        half = (self.pct_reading[index] * mag + self.pct_range[index] * in_use) / 100.0
        value = true_value + half * rng.uniform(-1.0, 1.0, size=len(true_value))
        return np.where(mag > in_use * OVERRANGE_FACTOR, np.inf, value)


@dataclass
class ReadingModel:
    step_id: str
    role: str
    model: PortModel
    meter: MeterError | None
