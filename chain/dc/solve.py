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

__all__ = ["solve", "rail_current", "rail_currents"]


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
    currents = rail_currents(system, x, circuit.rail_names())
    rails = {name: RailPoint(name=name, v=system.voltage(x, name), i_a=currents[name])
             for name in circuit.rail_names()}
    caps = {c.name: CapacitorPoint(name=c.name, v=system.voltage(x, c.a) - system.voltage(x, c.b),
                                   rated_v=c.rated_v)
            for c in circuit.capacitors}
    solution = DcSolution(points=system.operating_points(x), rails=rails, capacitors=caps,
                          node_v=dict(state.node_v), iterations=state.iterations,
                          max_residual_a=state.max_residual_a, options=options)
    return replace(solution, diagnostics=diagnose(circuit, solution, options, system=system))


def rail_current(system: NetworkSystem, x: np.ndarray, rail: str) -> float:
    """Current the rail node delivers into everything but its feed, A.

    Kirchhoff's current law at the rail node, summed over every element but
    the feed (:meth:`Circuit.rail_feeds`): resistors, voltage branches,
    triode pins and gmin.
    """
    return rail_currents(system, x, (rail,))[rail]


def rail_currents(system: NetworkSystem, x: np.ndarray, rails) -> dict[str, float]:
    """:func:`rail_current` of every rail in ``rails``, one pass over the parts
    for all of them (each rail's terms summed in the same order)."""
    circuit = system.circuit
    feeds = {rail: set(names) for rail, names in circuit.rails_feeds(rails).items()}
    v = {rail: system.voltage(x, rail) for rail in rails}
    total = {rail: system.gmin_s * v[rail] for rail in rails}
    for r in circuit.resistors:
        for rail in dict.fromkeys((r.a, r.b)):
            if rail not in total or r.name in feeds[rail]:
                continue
            other = r.b if r.a == rail else r.a
            if other != rail:
                total[rail] += (v[rail] - system.voltage(x, other)) / r.ohms
    for rail in rails:
        total[rail] += system.branch_current_out_of(x, rail, exclude=feeds[rail])
    if circuit.triodes:
        ip, ig, *_ = system.triode_currents(x)
        for i, tri in enumerate(circuit.triodes):
            if tri.plate in total:
                total[tri.plate] += ip[i]
            if tri.grid in total:
                total[tri.grid] += ig[i]
            if tri.cathode in total:
                total[tri.cathode] -= ip[i] + ig[i]
    return {rail: float(value) for rail, value in total.items()}
