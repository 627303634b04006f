"""Speed of the DC circuit solver: prints a table, then one JSON object as its very last line.

Goals (not asserted, this is a benchmark): one solve of a 300-node circuit, assembly included,
<= 2 ms; 10,000 parameter sets of a 20-node circuit in one batch <= 0.25 s.  Figures are medians
over repetitions.  ``--quick`` runs few repetitions (the smoke run of the test suite).

Usage: python tests/benchmarks/solver.py [--quick]
"""

from __future__ import annotations

import argparse
import json
import statistics
import sys
import time
from collections.abc import Callable

import numpy as np

from rig.circuit import Circuit, solve, solve_batch


def grid_circuit(rows: int, cols: int, seed: int = 1) -> Circuit:
    """A rows x cols resistor mesh (1-10 kohm), a 5 V supply, a current source and a VCVS."""
    rng = np.random.default_rng(seed)
    c = Circuit()

    def node(r: int, k: int) -> str:
        return f"g{r}_{k}"

    for r in range(rows):
        for k in range(cols):
            if k + 1 < cols:
                c.resistor(f"RH{r}_{k}", node(r, k), node(r, k + 1), float(rng.uniform(1e3, 1e4)))
            if r + 1 < rows:
                c.resistor(f"RV{r}_{k}", node(r, k), node(r + 1, k), float(rng.uniform(1e3, 1e4)))
    c.vsource("VS", "supply", "0", 5.0)
    c.resistor("RS", "supply", node(0, 0), 10.0)
    c.resistor("RG", node(rows - 1, cols - 1), "0", 100.0)
    c.isource("IB", "0", node(rows // 2, cols // 2), 1e-4)
    c.vcvs("EA", "amp", "0", node(rows // 2, 0), "0", 2.0)
    c.resistor("RL", "amp", "0", 1e4)
    return c


def median_s(run: Callable[[], object], repeat: int) -> float:
    """Median wall time of ``run`` over ``repeat`` calls, in seconds."""
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        run()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def bench_solve(rows: int, cols: int, repeat: int) -> tuple[float, float, int]:
    """(warm ms, cold ms, node count) for one solve of a grid circuit.

    Warm: change a resistor value, then solve (assembly and solve, topology cached).
    Cold: remove and re-add an element (topology invalidated), then solve (compile, graph check,
    assembly and solve).
    """
    c = grid_circuit(rows, cols)
    values = np.random.default_rng(2).uniform(1e3, 1e4, size=repeat + 1).tolist()
    position = iter(range(len(values)))

    def warm() -> None:
        c.set_value("RH0_0", values[next(position)])
        solve(c)

    def cold() -> None:
        c.remove("RL")
        c.resistor("RL", "amp", "0", 1e4)
        solve(c)

    solve(c)
    warm_s = median_s(warm, repeat)
    cold_s = median_s(cold, max(3, repeat // 10))
    return warm_s * 1e3, cold_s * 1e3, len(c.nodes)


def bench_batch(rows: int, cols: int, n_sets: int, repeat: int) -> tuple[float, int, int]:
    """(median s, node count, overridden elements): every resistor varied +-1 % (Monte Carlo)."""
    c = grid_circuit(rows, cols)
    rng = np.random.default_rng(3)
    names = [name for name, e in c.elements.items() if e.kind.value == "resistor"]
    overrides = {
        name: c.elements[name].value * rng.uniform(0.99, 1.01, size=n_sets) for name in names
    }
    solve_batch(c, overrides)
    return median_s(lambda: solve_batch(c, overrides), repeat), len(c.nodes), len(names)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="few repetitions (smoke run)")
    args = parser.parse_args(argv)
    repeat_single = 20 if args.quick else 300
    repeat_batch = 2 if args.quick else 15

    warm_ms, cold_ms, nodes_300 = bench_solve(15, 20, repeat_single)
    warm_small_ms, _, nodes_small = bench_solve(4, 5, repeat_single)
    batch_s, nodes_batch, varied = bench_batch(3, 6, 10_000, repeat_batch)
    roundtrip_ms = read_roundtrip_ms(50 if args.quick else 1000)

    rows = [
        (f"solve, {nodes_300} nodes, values changed", f"{warm_ms:.3f} ms", "<= 2 ms"),
        (f"solve, {nodes_300} nodes, topology rebuilt", f"{cold_ms:.3f} ms", "-"),
        (f"solve, {nodes_small} nodes, values changed", f"{warm_small_ms:.3f} ms", "-"),
        (
            f"batch, {nodes_batch} nodes, 10000 sets, {varied} resistors varied",
            f"{batch_s:.4f} s",
            "<= 0.25 s",
        ),
    ]
    if roundtrip_ms is not None:
        rows.append(("READ? round trip through pyvisa", f"{roundtrip_ms:.3f} ms", "<= 1 ms"))
    width = max(len(r[0]) for r in rows)
    print(f"{'case':<{width}}  {'median':>12}  goal")
    for case, value, goal in rows:
        print(f"{case:<{width}}  {value:>12}  {goal}")

    figures: dict[str, float | int | bool] = {
        "solve_300_ms": round(warm_ms, 4),
        "solve_300_cold_ms": round(cold_ms, 4),
        "solve_300_nodes": nodes_300,
        "batch_10k_s": round(batch_s, 5),
        "batch_nodes": nodes_batch,
        "quick": bool(args.quick),
    }
    if roundtrip_ms is not None:
        figures["read_roundtrip_ms"] = round(roundtrip_ms, 4)
    print(json.dumps(figures))
    return 0


def read_roundtrip_ms(count: int) -> float | None:
    """Median time of one ``READ?`` through pyvisa-py to the virtual bench's DMM, instant timing.

    The bench is the shipped sensor circuit's unit (temp-circuit) on the demo fixture, served on a
    real TCP socket.
    """
    import statistics
    from pathlib import Path

    import pyvisa

    from rig.config.fixture import load_fixture
    from rig.config.unit_file import load_unit
    from rig.sim.bench import VirtualBench

    root = Path(__file__).resolve().parents[2] / "sequences"
    unit = load_unit(root / "units" / "temp-circuit.toml")
    with VirtualBench(unit, load_fixture(unit.fixture_path)) as bench:
        assert bench.endpoints is not None
        rm = pyvisa.ResourceManager("@py")
        inst = rm.open_resource(
            bench.endpoints.dmm_resource,
            read_termination="\n",
            write_termination="\n",
            timeout=3000,
        )
        try:
            inst.write("CONF:VOLT:DC 10")
            inst.query("READ?")
            times = []
            for _ in range(count):
                start = time.perf_counter()
                inst.query("READ?")
                times.append((time.perf_counter() - start) * 1000.0)
        finally:
            inst.close()
            rm.close()
    return statistics.median(times)


if __name__ == "__main__":
    sys.exit(main())
