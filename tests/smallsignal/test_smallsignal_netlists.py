"""The example netlists, built by chain.build and solved by chain.dc, go
through the small-signal engine: both solvers agree and the stage table is
consistent with the node transfers."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from chain.build import load
from chain.dc import solve
from chain.smallsignal import linearize, overall, response, stage_table

NETLISTS = sorted((Path(__file__).parents[2] / "netlists").glob("*.chain"))


@pytest.mark.parametrize("path", NETLISTS, ids=[p.stem for p in NETLISTS])
def test_netlist_response(path):
    _, circuit, _ = load(path)
    dc = solve(circuit)
    ss = linearize(circuit, dc)
    f = np.geomspace(20.0, 20e3, 120)
    fast = response(ss, f)
    slow = response(ss, f, method="direct")
    for node in circuit.nodes():
        scale = np.abs(slow.h[node]).max()
        assert_allclose(fast.h[node], slow.h[node], rtol=0, atol=1e-10 * scale, err_msg=node)
    for st in circuit.stages:
        assert_allclose(fast.stage_zout_ohm[st.name], slow.stage_zout_ohm[st.name], rtol=1e-9)
    rows = stage_table(circuit, dc, fast, 1e3, 0.1)
    assert [r.stage for r in rows] == [st.name for st in circuit.stages]
    at = response(ss, [1e3])
    for row, st in zip(rows, circuit.stages):
        assert_allclose(row.cumulative_gain, at.h[st.output][0], rtol=1e-12)
        assert_allclose(row.gain * at.h[st.input][0], at.h[st.output][0], rtol=1e-12)
    total = overall(fast, 1e3)
    assert_allclose(total.gain, at.h[circuit.output_node][0], rtol=1e-12)
