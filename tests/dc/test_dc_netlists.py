"""Every demo netlist solves, and Kirchhoff's current law holds at every node."""

from __future__ import annotations

from pathlib import Path

import pytest

from chain.dc import SolveOptions, solve, solve_network

NETLISTS = sorted((Path(__file__).resolve().parents[2] / "netlists").glob("*.chain"))


@pytest.mark.parametrize("path", NETLISTS, ids=lambda p: p.name)
def test_demo_netlist_solves(kit, path):
    from chain.build import load

    _, circuit, _ = load(path)
    options = SolveOptions()
    sol = solve(circuit, options)
    assert sol.max_residual_a <= options.tol_a
    assert set(sol.points) == {t.name for t in circuit.triodes}
    # Kirchhoff's current law, recomputed from the parts at the solved voltages
    state = solve_network(circuit, options=options)
    residuals = kit.kcl_residuals(circuit, state, options.gmin_s)
    assert max(abs(r) for r in residuals.values()) < 1e-11
    # every rail delivers what its stages and the rails below it draw: positive, below the supply's own
    supply_i = max(r.i_a for r in sol.rails.values())
    for rail in sol.rails.values():
        assert 0.0 < rail.i_a <= supply_i * (1 + 1e-9)
