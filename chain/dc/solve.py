"""The DC operating point of a whole circuit: the solve plus the result record.

The nonlinear engine is :mod:`chain.dc.engine`; this module runs it once at
the quiescent point and assembles a :class:`~chain.dc.result.DcSolution`
(per triode, per rail, per capacitor) with the operating-point warnings of
:mod:`chain.dc.diagnose`.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from chain.circuit import Circuit
from chain.dc.diagnose import diagnose
from chain.dc.engine import NetworkSystem, compile_network
from chain.dc.result import CapacitorPoint, DcSolution, RailPoint, SolveOptions

__all__ = ["solve", "rail_current"]


def solve(circuit: Circuit, options: SolveOptions = SolveOptions()) -> DcSolution:
    """The DC operating point of a whole circuit.

    Parameters
    ----------
    circuit : Circuit
    options : SolveOptions
        Tolerances, iteration limit, gmin, step limit and warning thresholds.

    Returns
    -------
    DcSolution
        Per triode an :class:`OperatingPoint` (gm, rp, mu from the tube model
        at that point), per rail a :class:`RailPoint` (see
        :meth:`Circuit.rail_feeds` for the current), per capacitor its DC
        voltage, every node voltage, the Newton iterations, the largest node
        residual and the operating-point warnings of
        :func:`chain.dc.diagnose.diagnose`.

    Raises
    ------
    DcConvergenceError
        With a diagnostic naming the likely stage.
    """
    system = compile_network(circuit, gmin_s=options.gmin_s)
    state = system.solve(0.0, None, options=options)
    x = state.x
    rails = {name: RailPoint(name=name, v=system.voltage(x, name), i_a=rail_current(system, x, name))
             for name in circuit.rail_names()}
    caps = {c.name: CapacitorPoint(name=c.name, v=system.voltage(x, c.a) - system.voltage(x, c.b),
                                   rated_v=c.rated_v)
            for c in circuit.capacitors}
    solution = DcSolution(points=system.operating_points(x), rails=rails, capacitors=caps,
                          node_v=dict(state.node_v), iterations=state.iterations,
                          max_residual_a=state.max_residual_a, options=options)
    return replace(solution, diagnostics=diagnose(circuit, solution, options))


def rail_current(system: NetworkSystem, x: np.ndarray, rail: str) -> float:
    """Current the rail node delivers into everything but its feed, A.

    Kirchhoff's current law at the rail node, summed over every element but
    the feed (:meth:`Circuit.rail_feeds`): resistors, voltage branches,
    triode pins and gmin.
    """
    circuit = system.circuit
    feeds = set(circuit.rail_feeds(rail))
    v = system.voltage(x, rail)
    total = system.gmin_s * v
    for r in circuit.resistors:
        if r.name in feeds or rail not in (r.a, r.b):
            continue
        other = r.b if r.a == rail else r.a
        if other != rail:
            total += (v - system.voltage(x, other)) / r.ohms
    total += system.branch_current_out_of(x, rail, exclude=feeds)
    if circuit.triodes:
        ip, ig, *_ = system.triode_currents(x)
        for i, tri in enumerate(circuit.triodes):
            if tri.plate == rail:
                total += ip[i]
            if tri.grid == rail:
                total += ig[i]
            if tri.cathode == rail:
                total -= ip[i] + ig[i]
    return float(total)
