"""ngspice as an independent reference solver for rig circuits (test helper, not library code).

``ngspice_op(circuit)`` writes ``to_spice(circuit)`` to a temporary directory, runs
``ngspice -b -r <raw> <netlist>`` and reads the operating point back from the raw file, which
carries full double precision (the printed tables of ngspice-39 round to 6-7 digits unless
``numdgt`` is raised).  ``SPICE_ASCIIRAWFILE=1`` asks for an ASCII raw file; a binary one is read
as well, in case a local ``spinit`` overrides it.

``require_ngspice()`` skips a test when ngspice is missing, but fails it when the environment
variable ``CI`` is set (to anything except ``""``, ``0`` or ``false``): CI must run these tests.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import tempfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from rig.circuit import GROUND, Circuit, spice_names, to_spice

NGSPICE_ENV = "RIG_NGSPICE"  # optional path to another ngspice binary
_TIMEOUT_S = 60.0


class NgspiceFailed(RuntimeError):
    """ngspice could not be run or its output could not be read."""


@dataclass(frozen=True)
class NgspiceOp:
    """An ngspice operating point under rig's names."""

    voltages: dict[str, float]  # non-ground node -> V
    currents: dict[str, float]  # vsource / vcvs name -> A, SPICE sign (pos -> source -> neg)


def ngspice_path() -> str | None:
    """The ngspice binary to use, or None when it is not installed."""
    return shutil.which(os.environ.get(NGSPICE_ENV, "ngspice"))


def in_ci() -> bool:
    return os.environ.get("CI", "").strip().lower() not in ("", "0", "false")


def require_ngspice() -> str:
    """Path to ngspice; skip the calling test without it, or fail it under CI."""
    import pytest

    path = ngspice_path()
    if path is None:
        if in_ci():
            pytest.fail(
                "ngspice is not installed but CI is set: CI must run the ngspice reference "
                "tests (install the Debian package 'ngspice')",
                pytrace=False,
            )
        pytest.skip("ngspice is not installed (Debian package 'ngspice')")
    return path


def ngspice_op(circuit: Circuit) -> dict[str, float]:
    """Node voltages of ``circuit`` computed by ngspice, keyed by rig's node names."""
    return ngspice_run(circuit).voltages


def ngspice_run(circuit: Circuit) -> NgspiceOp:
    """Node voltages and source branch currents of ``circuit`` computed by ngspice."""
    binary = ngspice_path()
    if binary is None:
        raise NgspiceFailed("ngspice is not installed")
    names = spice_names(circuit)
    with tempfile.TemporaryDirectory(prefix="rig-ngspice-") as tmp:
        netlist = Path(tmp) / "circuit.cir"
        raw = Path(tmp) / "circuit.raw"
        netlist.write_text(to_spice(circuit, title="rig reference check"), encoding="ascii")
        env = dict(os.environ, SPICE_ASCIIRAWFILE="1")
        done = subprocess.run(
            [binary, "-b", "-r", str(raw), str(netlist)],
            capture_output=True,
            text=True,
            timeout=_TIMEOUT_S,
            env=env,
            cwd=tmp,
            check=False,
        )
        if done.returncode != 0 or not raw.exists():
            raise NgspiceFailed(
                f"ngspice exited with {done.returncode}:\n{done.stdout[-2000:]}\n"
                f"{done.stderr[-2000:]}"
            )
        values = read_raw_op(raw.read_bytes())
    voltages: dict[str, float] = {}
    for node, spice_node in names.nodes.items():
        if node == GROUND:
            continue
        key = f"v({spice_node})"
        if key not in values:
            raise NgspiceFailed(f"ngspice result has no {key} for node {node!r}")
        voltages[node] = values[key]
    currents: dict[str, float] = {}
    for name, ref in names.elements.items():
        for key in (f"i({ref})", f"{ref}#branch"):
            if key in values:
                currents[name] = values[key]
    return NgspiceOp(voltages, currents)


def read_raw_op(data: bytes) -> dict[str, float]:
    """Variable name (lower case, e.g. ``v(n_a)``, ``i(v_v1)``) -> value from a one-point raw file.

    The raw format: a text header with ``No. Variables:``, ``No. Points:``, a ``Variables:`` list
    (index, name, type per line), then ``Values:`` in text or ``Binary:`` as float64 values.
    """
    marker_text, marker_bin = b"Values:\n", b"Binary:\n"
    if marker_bin in data:
        head, _, body = data.partition(marker_bin)
    elif marker_text in data:
        head, _, body = data.partition(marker_text)
    else:
        raise NgspiceFailed("raw file has neither a Values: nor a Binary: section")
    header = head.decode("ascii", errors="replace").splitlines()
    count = 0
    names: list[str] = []
    in_vars = False
    for line in header:
        if line.startswith("No. Variables:"):
            count = int(line.split(":", 1)[1])
        elif line.startswith("Flags:") and "complex" in line:
            raise NgspiceFailed("raw file holds complex data; expected a DC operating point")
        elif line.startswith("Variables:"):
            in_vars = True
        elif in_vars and line.strip():
            fields = line.split()
            names.append(fields[1].lower())
    if count == 0 or len(names) != count:
        raise NgspiceFailed(f"raw file lists {len(names)} variables, header says {count}")
    if marker_bin in data:
        numbers = np.frombuffer(body[: 8 * count], dtype="<f8")
    else:
        tokens = body.decode("ascii").split()
        # first point: "<index> <value>" then one value per variable
        numbers = np.array([float(t) for t in tokens[1 : 1 + count]])
    if len(numbers) != count:
        raise NgspiceFailed(f"raw file has {len(numbers)} values for {count} variables")
    return dict(zip(names, numbers.tolist(), strict=True))
