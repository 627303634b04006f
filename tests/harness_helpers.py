"""Shared pieces of the harness tests: invented harnesses with seeded random faults, and the
finding each fault must produce."""

from __future__ import annotations

import ctypes
import glob
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from rig.harness.as_built import BuildFault
from rig.harness.miswire import Finding


def one_blas_thread() -> None:
    """The bench circuit is a few hundred nodes: BLAS threads only fight over the CPU (a solve
    is ten times slower with them on a loaded two-core machine).  Results are unchanged."""
    import numpy

    folder = os.path.join(os.path.dirname(numpy.__file__), os.pardir, "numpy.libs")
    for path in glob.glob(os.path.join(folder, "libscipy_openblas*.so")):
        lib = ctypes.CDLL(path)
        for name in ("scipy_openblas_set_num_threads64_", "openblas_set_num_threads"):
            setter = getattr(lib, name, None)
            if setter is not None:
                setter(ctypes.c_int(1))
                return


@dataclass(frozen=True)
class Planted:
    fault: BuildFault
    kind: str
    """The finding kind it must produce."""
    words: tuple[str, ...]
    """Text the finding must contain: the wire-list words a technician works by (pins, nets,
    wire ids)."""


def plant_faults(nets: int, splices: int, spare_pins: list[str], seed: int) -> list[Planted]:
    """Up to five faults on distinct nets of an invented harness (``rig.sim.harness_bench``)."""
    rng = np.random.default_rng(seed)
    plain = [i for i in range(splices + 1, nets + 1)]
    order = [int(x) for x in rng.permutation(plain)]
    planted: list[Planted] = []
    kinds = ["open", "short", "swap", "high", "very-high", "misplaced-spare", "misplaced-net"]
    rng.shuffle(kinds)
    for kind in kinds[: int(rng.integers(1, 5))]:
        if len(order) < 2:
            break
        i = order.pop()
        if kind == "open":
            planted.append(
                Planted(BuildFault("open", f"W{i}"), "open", (f"A-{i}", f"B-{i}", f"(wire W{i}"))
            )
        elif kind == "high":
            fault = BuildFault("high", f"W{i}", ohm=0.5)
            planted.append(Planted(fault, "high-resistance", (f"N{i}:", "limit", f"(wire W{i}")))
        elif kind == "very-high":
            fault = BuildFault("high", f"W{i}", ohm=2000.0)
            planted.append(Planted(fault, "high-resistance", (f"N{i}:", "only through", f"W{i}")))
        elif kind == "short":
            j = order.pop()
            fault = BuildFault("short", f"W{i}", other=f"W{j}")
            # each net by its pins and its wire (the invented lists' two-pin nets are blue)
            words = tuple(f"N{k} (A-{k}, B-{k}: wire W{k}, blue)" for k in sorted((i, j)))
            words += (f"N{min(i, j)} (", ") and N", "are joined")
            planted.append(Planted(fault, "short", words))
        elif kind == "swap":
            j = order.pop()
            fault = BuildFault("swap", f"W{i}", other=f"W{j}")
            planted.append(Planted(fault, "swap", (f"A-{i} reaches B-{j}, expected B-{i}",)))
        elif kind == "misplaced-spare" and spare_pins:
            pin = spare_pins.pop()
            fault = BuildFault("misplaced", f"W{i}", pin=pin)
            planted.append(Planted(fault, "miswire", (f"A-{i} reaches {pin}, expected B-{i}",)))
        elif kind == "misplaced-net":
            j = order.pop()
            fault = BuildFault("misplaced", f"W{i}", pin=f"B-{j}")
            planted.append(Planted(fault, "miswire", (f"A-{i} reaches B-{j}, expected B-{i}",)))
    if splices:
        planted.append(
            Planted(
                BuildFault("missing-splice", "W1c"), "splice", ("C-1 does not reach", "SP1", "W1c")
            )
        )
    return planted


def unmatched(planted: list[Planted], findings: list[Finding]) -> list[str]:
    """Planted faults with no finding of their kind and words; and findings nobody planted."""
    left = list(findings)
    missing = []
    for p in planted:
        match = next(
            (f for f in left if f.kind == p.kind and all(w in f.text for w in p.words)), None
        )
        if match is None:
            missing.append(f"not found: {p.fault} (want {p.kind} {p.words})")
        else:
            left.remove(match)
    return missing + [f"not planted: {f.kind}: {f.text}" for f in left]


def folder_for(tmp: Path, name: str) -> Path:
    path = tmp / name
    path.mkdir(parents=True, exist_ok=True)
    return path
