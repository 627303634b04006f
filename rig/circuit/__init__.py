"""Linear DC circuit solver: the virtual bench's physics (pure computation, no I/O).

Build a ``Circuit``, ``solve`` it for one operating point or ``solve_batch`` it for N parameter
sets at once, and ``to_spice`` it for an independent check with ngspice.
"""

from rig.circuit.mna import BatchSolution, Solution, solve, solve_batch
from rig.circuit.netlist import GROUND, Circuit, Element, Kind
from rig.circuit.spice import spice_names, to_spice

__all__ = [
    "GROUND",
    "BatchSolution",
    "Circuit",
    "Element",
    "Kind",
    "Solution",
    "solve",
    "solve_batch",
    "spice_names",
    "to_spice",
]
