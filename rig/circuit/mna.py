"""Linear DC modified nodal analysis (MNA), single and batched.

Unknowns are the non-ground node voltages followed by one branch current per voltage source and
per VCVS.  Every matrix and right-hand-side entry is a fixed coefficient times one parameter
(a conductance, a gain, a source value or the constant 1), so a circuit is compiled once into
index arrays and each solve is a gather, one scatter-add (``np.bincount``, the fast 1-D form of
``np.add.at``) and one ``np.linalg.solve``.  A batch of N parameter sets scatters into an
``(N, n, n)`` stack and solves it in one call.

Before anything is solved, a union-find pass rejects floating nodes and loops of ideal voltage
sources with a message that names them; a singular system found later is still a ``CircuitError``.

Sign conventions (SPICE, as in the ngspice manual's description of independent sources): the
current of a source is the current flowing from its ``pos`` node through the source to its ``neg``
node, so a source delivering power reports a negative current.  ``i_resistor`` is the current from
``a`` through the resistor or switch to ``b``.
"""

from __future__ import annotations

import logging
import threading
from collections import deque
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np
import numpy.typing as npt

from rig.circuit.netlist import GROUND, Circuit, Element, Kind, canonical_node, check_value
from rig.errors import CircuitError

log = logging.getLogger(__name__)

FloatArray = npt.NDArray[np.float64]
IntArray = npt.NDArray[np.intp]

_GROUND_INDEX = -1  # x_ext[..., -1] is always 0 V, so ground needs no special case
_BATCH_CHUNK_ENTRIES = 1 << 24  # matrix entries assembled at once in a batch (~128 MB)


@dataclass(frozen=True, eq=False)
class Topology:
    """A circuit compiled to index arrays; valid until an element is added or removed."""

    nodes: tuple[str, ...]
    node_index: Mapping[str, int]
    size: int
    res_names: tuple[str, ...]  # resistors and switches, in stamp order
    res_a: IntArray
    res_b: IntArray
    vs_names: tuple[str, ...]
    is_names: tuple[str, ...]
    e_names: tuple[str, ...]
    slot: Mapping[str, tuple[Kind, int]]  # element -> (kind, position in its kind's list)
    branch_row: Mapping[str, int]  # vsource / vcvs -> index of its current unknown
    is_pos: IntArray
    is_neg: IntArray
    # matrix: A.flat[mat_flat] += mat_coef * p_mat[mat_param]; p_mat = (g..., gain..., 1)
    mat_flat: IntArray
    mat_param: IntArray
    mat_coef: FloatArray
    # single solves sum entries per distinct position (mat_inv) into a reused matrix at mat_uniq:
    # a fresh ~1 MB matrix per solve costs more than the LU itself for 300 nodes
    mat_uniq: IntArray
    mat_inv: IntArray
    # right-hand side: z[rhs_row] += rhs_coef * p_rhs[rhs_param]; p_rhs = (v..., i...)
    rhs_row: IntArray
    rhs_param: IntArray
    rhs_coef: FloatArray
    work: FloatArray = field(repr=False)  # size*size, zero outside mat_uniq; guarded by lock
    lock: threading.Lock = field(default_factory=threading.Lock, repr=False)


# -- compiling --------------------------------------------------------------------------------


def compile_circuit(circuit: Circuit) -> Topology:
    """Return the circuit's compiled topology, building and checking it if it changed."""
    cached = circuit._compiled
    if isinstance(cached, Topology):
        return cached
    topology = _build(circuit)
    circuit._compiled = topology
    return topology


def _build(circuit: Circuit) -> Topology:
    elements = list(circuit.elements.values())
    nodes = tuple(circuit.nodes)
    node_index = {name: i for i, name in enumerate(nodes)}
    check_topology(nodes, elements)

    def idx(node: str) -> int:
        return _GROUND_INDEX if node == GROUND else node_index[node]

    by_kind: dict[Kind, list[Element]] = {kind: [] for kind in Kind}
    for element in elements:
        by_kind[element.kind].append(element)
    resistive = by_kind[Kind.RESISTOR] + by_kind[Kind.SWITCH]
    vsources, isources, vcvss = by_kind[Kind.VSOURCE], by_kind[Kind.ISOURCE], by_kind[Kind.VCVS]

    n = len(nodes)
    branch_row: dict[str, int] = {}
    for element in vsources + vcvss:
        branch_row[element.name] = n + len(branch_row)
    size = n + len(branch_row)

    slot: dict[str, tuple[Kind, int]] = {}
    for group in (resistive, vsources, isources, vcvss):
        for position, element in enumerate(group):
            slot[element.name] = (element.kind, position)

    n_res = len(resistive)
    const = n_res + len(vcvss)
    rows: list[int] = []
    cols: list[int] = []
    params: list[int] = []
    coefs: list[float] = []

    def put(row: int, col: int, param: int, coef: float) -> None:
        if row != _GROUND_INDEX and col != _GROUND_INDEX:
            rows.append(row)
            cols.append(col)
            params.append(param)
            coefs.append(coef)

    res_a = np.array([idx(e.nodes[0]) for e in resistive], dtype=np.intp)
    res_b = np.array([idx(e.nodes[1]) for e in resistive], dtype=np.intp)
    for j, (a, b) in enumerate(zip(res_a.tolist(), res_b.tolist(), strict=True)):
        put(a, a, j, 1.0)
        put(b, b, j, 1.0)
        put(a, b, j, -1.0)
        put(b, a, j, -1.0)
    for element in vsources + vcvss:
        r = branch_row[element.name]
        p, q = idx(element.nodes[0]), idx(element.nodes[1])
        put(p, r, const, 1.0)
        put(q, r, const, -1.0)
        put(r, p, const, 1.0)
        put(r, q, const, -1.0)
    for j, element in enumerate(vcvss):
        r = branch_row[element.name]
        put(r, idx(element.nodes[2]), n_res + j, -1.0)
        put(r, idx(element.nodes[3]), n_res + j, 1.0)

    rhs_row: list[int] = []
    rhs_param: list[int] = []
    rhs_coef: list[float] = []
    for j, element in enumerate(vsources):
        rhs_row.append(branch_row[element.name])
        rhs_param.append(j)
        rhs_coef.append(1.0)
    n_vs = len(vsources)
    is_pos = np.array([idx(e.nodes[0]) for e in isources], dtype=np.intp)
    is_neg = np.array([idx(e.nodes[1]) for e in isources], dtype=np.intp)
    for j, (p, q) in enumerate(zip(is_pos.tolist(), is_neg.tolist(), strict=True)):
        # i flows out of pos (through the source) into neg: KCL sources on the right-hand side.
        for row, coef in ((p, -1.0), (q, 1.0)):
            if row != _GROUND_INDEX:
                rhs_row.append(row)
                rhs_param.append(n_vs + j)
                rhs_coef.append(coef)

    row_arr = np.array(rows, dtype=np.intp)
    col_arr = np.array(cols, dtype=np.intp)
    mat_flat = row_arr * size + col_arr
    mat_uniq, mat_inv = np.unique(mat_flat, return_inverse=True)
    log.debug("compiled circuit: %d nodes, %d unknowns, %d matrix entries", n, size, len(row_arr))
    return Topology(
        nodes=nodes,
        node_index=node_index,
        size=size,
        res_names=tuple(e.name for e in resistive),
        res_a=res_a,
        res_b=res_b,
        vs_names=tuple(e.name for e in vsources),
        is_names=tuple(e.name for e in isources),
        e_names=tuple(e.name for e in vcvss),
        slot=slot,
        branch_row=branch_row,
        is_pos=is_pos,
        is_neg=is_neg,
        mat_flat=mat_flat,
        mat_param=np.array(params, dtype=np.intp),
        mat_coef=np.array(coefs, dtype=np.float64),
        mat_uniq=mat_uniq.astype(np.intp),
        mat_inv=mat_inv.astype(np.intp).ravel(),
        rhs_row=np.array(rhs_row, dtype=np.intp),
        rhs_param=np.array(rhs_param, dtype=np.intp),
        rhs_coef=np.array(rhs_coef, dtype=np.float64),
        work=np.zeros(size * size, dtype=np.float64),
    )


# -- graph checks -------------------------------------------------------------------------------


class _UnionFind:
    """Disjoint sets over node names (path halving, union by size)."""

    def __init__(self) -> None:
        self.parent: dict[str, str] = {}
        self.count: dict[str, int] = {}

    def find(self, x: str) -> str:
        parent = self.parent
        if x not in parent:
            parent[x] = x
            self.count[x] = 1
            return x
        while parent[x] != x:
            parent[x] = parent[parent[x]]
            x = parent[x]
        return x

    def union(self, a: str, b: str) -> bool:
        """Join the sets of ``a`` and ``b``; False when they were already one set."""
        ra, rb = self.find(a), self.find(b)
        if ra == rb:
            return False
        if self.count[ra] < self.count[rb]:
            ra, rb = rb, ra
        self.parent[rb] = ra
        self.count[ra] += self.count[rb]
        return True


def check_topology(nodes: tuple[str, ...], elements: list[Element]) -> None:
    """Raise ``CircuitError`` for floating nodes and loops of ideal voltage sources.

    A node floats when no chain of resistors, switches (open or closed), voltage sources or VCVS
    outputs reaches ground: current sources and VCVS control inputs carry no defined DC path, so
    the node's voltage is undetermined.  A loop made only of voltage sources and VCVS outputs
    over-determines its voltages (and leaves the loop current undetermined).
    """
    problems: list[str] = []
    bad_nodes: list[str] = []

    conduct = _UnionFind()
    conduct.find(GROUND)
    for node in nodes:
        conduct.find(node)
    for element in elements:
        if element.kind is not Kind.ISOURCE:
            conduct.union(element.nodes[0], element.nodes[1])
    ground_root = conduct.find(GROUND)
    groups: dict[str, list[str]] = {}
    for node in nodes:
        root = conduct.find(node)
        if root != ground_root:
            groups.setdefault(root, []).append(node)
    if groups:
        listed = "; ".join(", ".join(repr(n) for n in group) for group in groups.values())
        problems.append(
            f"floating node(s) with no DC path to ground through resistors, switches or voltage "
            f"sources (current sources and VCVS control inputs do not count): {listed}"
        )
        bad_nodes.extend(n for group in groups.values() for n in group)

    stiff = _UnionFind()
    forest: dict[str, list[tuple[str, str]]] = {}
    for element in elements:
        if element.kind not in (Kind.VSOURCE, Kind.VCVS):
            continue
        p, q = element.nodes[0], element.nodes[1]
        if stiff.union(p, q):
            forest.setdefault(p, []).append((q, element.name))
            forest.setdefault(q, []).append((p, element.name))
            continue
        path_nodes, path_sources = _forest_path(forest, p, q)
        loop_sources = [*path_sources, element.name]
        problems.append(
            "loop of ideal voltage sources (voltage sources and VCVS outputs only): "
            + ", ".join(repr(s) for s in loop_sources)
            + " through nodes "
            + ", ".join(repr(n) for n in path_nodes)
            + "; put a resistance in the loop or remove a source"
        )
        bad_nodes.extend(n for n in path_nodes if n not in bad_nodes)
    if problems:
        raise CircuitError("circuit cannot be solved: " + " | ".join(problems), tuple(bad_nodes))


def _forest_path(
    forest: Mapping[str, list[tuple[str, str]]], start: str, goal: str
) -> tuple[list[str], list[str]]:
    """Nodes and source names on the unique path from ``start`` to ``goal`` in the forest."""
    if start == goal:
        return [start], []
    came: dict[str, tuple[str, str]] = {}
    queue: deque[str] = deque([start])
    seen = {start}
    while queue:
        here = queue.popleft()
        if here == goal:
            break
        for there, source in forest.get(here, []):
            if there not in seen:
                seen.add(there)
                came[there] = (here, source)
                queue.append(there)
    path_nodes, path_sources = [goal], []
    node = goal
    while node != start:
        node, source = came[node]
        path_nodes.append(node)
        path_sources.append(source)
    path_nodes.reverse()
    path_sources.reverse()
    return path_nodes, path_sources


# -- parameters ----------------------------------------------------------------------------------


def _base_params(circuit: Circuit, topo: Topology) -> tuple[FloatArray, FloatArray]:
    """The circuit's present values as the matrix and right-hand-side parameter vectors."""
    elements = circuit.elements
    p_mat = np.empty(len(topo.res_names) + len(topo.e_names) + 1, dtype=np.float64)
    n_res = len(topo.res_names)
    p_mat[:n_res] = [elements[name].value for name in topo.res_names]
    np.divide(1.0, p_mat[:n_res], out=p_mat[:n_res])
    p_mat[n_res:-1] = [elements[name].value for name in topo.e_names]
    p_mat[-1] = 1.0
    p_rhs = np.array(
        [elements[name].value for name in topo.vs_names]
        + [elements[name].value for name in topo.is_names],
        dtype=np.float64,
    )
    return p_mat, p_rhs


def _override_column(
    circuit: Circuit, topo: Topology, name: str, raw: object
) -> tuple[bool, int, FloatArray]:
    """Where an override goes: (in the matrix?, parameter index, parameter values)."""
    if name not in topo.slot:
        raise CircuitError(f"solve_batch override {name!r}: no element of that name in the circuit")
    kind, position = topo.slot[name]
    array = np.asarray(raw)
    if array.ndim != 1:
        raise CircuitError(
            f"solve_batch override {name!r}: expected a 1-D array of shape (N,), got shape "
            f"{array.shape}"
        )
    if kind is Kind.SWITCH:
        element = circuit.elements[name]
        assert element.r_on_ohm is not None and element.r_off_ohm is not None
        if array.dtype != np.bool_:
            if not np.issubdtype(array.dtype, np.number) or not np.all((array == 0) | (array == 1)):
                raise CircuitError(
                    f"solve_batch override {name!r} (switch): expected closed states "
                    "(bool, or 0 = open / 1 = closed)"
                )
            array = array.astype(bool)
        resistance = np.where(array, element.r_on_ohm, element.r_off_ohm)
        return True, position, 1.0 / resistance
    try:
        values = array.astype(np.float64)
    except (TypeError, ValueError):
        raise CircuitError(
            f"solve_batch override {name!r} ({kind.value}): expected real numbers, got "
            f"dtype {array.dtype}"
        ) from None
    bad = ~np.isfinite(values)
    if kind is Kind.RESISTOR:
        bad |= ~(values > 0.0)
    if bad.any():
        first = int(np.flatnonzero(bad)[0])
        # Reuse the single-value rule so the message says what was expected.
        check_value(f"{name}[{first}]", kind, float(values[first]))
    if kind is Kind.RESISTOR:
        return True, position, 1.0 / values
    if kind is Kind.VCVS:
        return True, len(topo.res_names) + position, values
    if kind is Kind.VSOURCE:
        return False, position, values
    return False, len(topo.vs_names) + position, values


# -- solving ------------------------------------------------------------------------------------


def _scatter(index: IntArray, weights: FloatArray, length: int) -> FloatArray:
    """Sum ``weights`` into a zero vector of ``length`` at ``index`` (vectorised stamping).

    ``np.bincount`` with weights is the 1-D scatter-add ``np.add.at`` performs, several times
    faster; repeated indices (two elements on one node) add up as stamps must.
    """
    return np.asarray(np.bincount(index, weights, minlength=length), dtype=np.float64)


def _solve_stack(a: FloatArray, z: FloatArray, offset: int = 0) -> FloatArray:
    """Solve ``a @ x = z`` for one matrix or a stack, turning every failure into CircuitError."""
    try:
        x = np.linalg.solve(a, z) if a.ndim == 2 else np.linalg.solve(a, z[..., None])[..., 0]
    except np.linalg.LinAlgError:
        where = ""
        if a.ndim == 3:
            for k in range(a.shape[0]):
                try:
                    np.linalg.solve(a[k], z[k])
                except np.linalg.LinAlgError:
                    where = f" for parameter set {offset + k}"
                    break
        raise CircuitError(
            f"the circuit's equations are singular{where} (a dependent source arrangement with "
            "no unique solution, such as a VCVS feeding its own control input with gain 1)"
        ) from None
    if not np.all(np.isfinite(x)):
        bad = np.flatnonzero(~np.all(np.isfinite(x.reshape(-1, x.shape[-1])), axis=1))
        where = f" for parameter set {offset + int(bad[0])}" if a.ndim == 3 else ""
        raise CircuitError(f"the circuit's equations are numerically singular{where}")
    return np.asarray(x, dtype=np.float64)


def solve(circuit: Circuit) -> Solution:
    """Solve the circuit's DC operating point with its present values."""
    topo = compile_circuit(circuit)
    p_mat, p_rhs = _base_params(circuit, topo)
    size = topo.size
    if size == 0:
        x = np.zeros(0, dtype=np.float64)
    else:
        weights = p_mat[topo.mat_param] * topo.mat_coef
        z = _scatter(topo.rhs_row, p_rhs[topo.rhs_param] * topo.rhs_coef, size)
        with topo.lock:  # the work matrix is shared by every copy of this circuit
            topo.work[topo.mat_uniq] = _scatter(topo.mat_inv, weights, len(topo.mat_uniq))
            x = _solve_stack(topo.work.reshape(size, size), z)  # solve copies its input
    return Solution(topo, np.append(x, 0.0), p_mat, p_rhs)


def solve_batch(circuit: Circuit, overrides: Mapping[str, npt.ArrayLike]) -> BatchSolution:
    """Solve N parameter sets of one topology at once.

    ``overrides`` maps element names to arrays of shape (N,): resistance (ohm), source value,
    VCVS gain, or for a switch its closed state (bool or 0/1).  Elements not named keep their
    present value in every set.
    """
    if not isinstance(overrides, Mapping) or not overrides:
        raise CircuitError(
            "solve_batch needs at least one override: element name -> array of shape (N,)"
        )
    topo = compile_circuit(circuit)
    p_mat, p_rhs = _base_params(circuit, topo)
    columns = [
        (name, *_override_column(circuit, topo, name, raw)) for name, raw in overrides.items()
    ]
    lengths = {name: len(values) for name, _, _, values in columns}
    n_sets = next(iter(lengths.values()))
    if len(set(lengths.values())) != 1 or n_sets == 0:
        shown = ", ".join(f"{name!r}: {length}" for name, length in lengths.items())
        raise CircuitError(
            f"solve_batch overrides must all have the same length N >= 1, got {shown}"
        )
    mat = np.repeat(p_mat[None, :], n_sets, axis=0)
    rhs = np.repeat(p_rhs[None, :], n_sets, axis=0)
    for _, in_matrix, index, values in columns:
        (mat if in_matrix else rhs)[:, index] = values

    size = topo.size
    x = np.zeros((n_sets, size), dtype=np.float64)
    if size:
        chunk = max(1, _BATCH_CHUNK_ENTRIES // (size * size))
        for start in range(0, n_sets, chunk):
            stop = min(start + chunk, n_sets)
            x[start:stop] = _assemble_and_solve(topo, mat[start:stop], rhs[start:stop], start)
    x_ext = np.concatenate((x, np.zeros((n_sets, 1))), axis=1)
    return BatchSolution(topo, x_ext, mat, rhs)


def _assemble_and_solve(
    topo: Topology, mat: FloatArray, rhs: FloatArray, offset: int
) -> FloatArray:
    """Scatter a block of parameter sets into an (n_sets, size, size) stack and solve it."""
    n_sets, size = mat.shape[0], topo.size
    base = np.arange(n_sets, dtype=np.intp)[:, None]
    weights = mat[:, topo.mat_param] * topo.mat_coef
    a = _scatter(
        (base * (size * size) + topo.mat_flat).ravel(), weights.ravel(), n_sets * size * size
    ).reshape(n_sets, size, size)
    z = _scatter(
        (base * size + topo.rhs_row).ravel(),
        (rhs[:, topo.rhs_param] * topo.rhs_coef).ravel(),
        n_sets * size,
    ).reshape(n_sets, size)
    return _solve_stack(a, z, offset)


# -- results --------------------------------------------------------------------------------------


class _Results:
    """Lookups shared by single and batched solutions; arrays carry any leading batch axis."""

    def __init__(
        self, topo: Topology, x_ext: FloatArray, p_mat: FloatArray, p_rhs: FloatArray
    ) -> None:
        self._topo = topo
        self._x = x_ext  # (..., size + 1); the last column is ground (0 V)
        self._p_mat = p_mat
        self._p_rhs = p_rhs

    @property
    def nodes(self) -> tuple[str, ...]:
        """Non-ground node names, in the circuit's order."""
        return self._topo.nodes

    def _node(self, node: str) -> int:
        name = canonical_node(node)
        if name == GROUND:
            return _GROUND_INDEX
        try:
            return self._topo.node_index[name]
        except KeyError:
            shown = ", ".join(repr(n) for n in self._topo.nodes[:8])
            more = ", ..." if len(self._topo.nodes) > 8 else ""
            raise CircuitError(
                f"no node {node!r} in the solved circuit (nodes: {shown}{more})"
            ) from None

    def _v(self, node: str) -> FloatArray:
        return self._x[..., self._node(node)]

    def _current(self, name: str, resistive_only: bool) -> FloatArray:
        topo = self._topo
        if name not in topo.slot:
            raise CircuitError(f"no element named {name!r} in the solved circuit")
        kind, position = topo.slot[name]
        if kind in (Kind.RESISTOR, Kind.SWITCH):
            drop = self._x[..., topo.res_a[position]] - self._x[..., topo.res_b[position]]
            return np.asarray(drop * self._p_mat[..., position], dtype=np.float64)
        if resistive_only:
            raise CircuitError(
                f"element {name!r} is a {kind.value}: i_resistor() takes a resistor or switch, "
                "use i() for sources"
            )
        if kind is Kind.ISOURCE:
            return np.asarray(self._p_rhs[..., len(topo.vs_names) + position], dtype=np.float64)
        return self._x[..., topo.branch_row[name]]


class Solution(_Results):
    """The DC operating point of one circuit."""

    def v(self, node: str) -> float:
        """Voltage of ``node`` against ground."""
        return float(self._v(node))

    def vdiff(self, a: str, b: str) -> float:
        """``V(a) - V(b)``."""
        return float(self._v(a) - self._v(b))

    def i(self, name: str) -> float:
        """Current from an element's first node through it to its second node.

        For a voltage source or VCVS that is the SPICE branch current (pos -> source -> neg,
        negative when the source delivers power); for a current source its set value; for a
        resistor or switch the current a -> b.
        """
        return float(self._current(name, resistive_only=False))

    def i_resistor(self, name: str) -> float:
        """Current from ``a`` through a resistor or switch to ``b``."""
        return float(self._current(name, resistive_only=True))

    @property
    def voltages(self) -> dict[str, float]:
        """Every non-ground node voltage."""
        nodes = self._topo.nodes
        return dict(zip(nodes, self._x[: len(nodes)].tolist(), strict=True))


class BatchSolution(_Results):
    """DC operating points of N parameter sets; every lookup returns an array of shape (N,)."""

    @property
    def n(self) -> int:
        """Number of parameter sets."""
        return int(self._x.shape[0])

    def v(self, node: str) -> FloatArray:
        return self._v(node).copy()

    def vdiff(self, a: str, b: str) -> FloatArray:
        return np.asarray(self._v(a) - self._v(b), dtype=np.float64)

    def i(self, name: str) -> FloatArray:
        """As ``Solution.i``, one value per parameter set."""
        return np.array(
            np.broadcast_to(self._current(name, resistive_only=False), (self.n,)), dtype=np.float64
        )

    def i_resistor(self, name: str) -> FloatArray:
        return np.array(self._current(name, resistive_only=True), dtype=np.float64)

    @property
    def voltages(self) -> dict[str, FloatArray]:
        """Every non-ground node voltage, one array of shape (N,) per node."""
        return {node: self._x[:, k].copy() for k, node in enumerate(self._topo.nodes)}
