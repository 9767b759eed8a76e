"""DC operating point of a circuit: nonlinear nodal solve, warnings, bias curves.

``solve(circuit)`` gives a :class:`DcSolution`; ``compile_network(circuit,
held_caps=...)`` gives a reusable :class:`NetworkSystem` for repeated solves
(the large-signal sweep); :func:`diagnose` lists the operating-point warnings;
:mod:`chain.dc.curves` has the numbers for bias plots.
"""

from chain.dc.curves import BiasLine, LoadLine, PlateFamily, bias_line, load_line, plate_family, stage_lines
from chain.dc.diagnose import diagnose
from chain.dc.result import CapacitorPoint, DcSolution, OperatingPoint, RailPoint, SolveOptions
from chain.dc.engine import (
    LoadLineCoefficients,
    NetworkState,
    NetworkSystem,
    compile_network,
    solve_network,
)
from chain.dc.solve import solve

__all__ = [
    "solve",
    "solve_network",
    "compile_network",
    "NetworkSystem",
    "NetworkState",
    "LoadLineCoefficients",
    "diagnose",
    "SolveOptions",
    "DcSolution",
    "OperatingPoint",
    "RailPoint",
    "CapacitorPoint",
    "PlateFamily",
    "LoadLine",
    "BiasLine",
    "plate_family",
    "load_line",
    "bias_line",
    "stage_lines",
]
