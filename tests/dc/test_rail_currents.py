"""The rails' delivered currents (chain.dc.solve.rail_currents, every rail in
one pass over the parts) against Kirchhoff's current law at each rail node
taken the other way: what a rail delivers is what enters it through its feed
(here the drop resistor from the supply or the previous rail), to within the
gmin leak of the node."""

from pathlib import Path

import pytest

from chain.build import build, load
from chain.circuit import Resistor
from chain.dc import solve
from chain.language import parse_text

from tests.cascades import cascade

DEMOS = sorted((Path(__file__).parents[2] / "netlists").glob("*.chain"))


def circuits():
    yield "cascade", build(parse_text(cascade(10), "c10.chain"))
    for path in DEMOS:
        yield path.stem, load(path)[1]


@pytest.mark.parametrize("name, circuit", list(circuits()), ids=lambda v: v if isinstance(v, str) else "")
def test_each_rail_delivers_what_its_feed_brings(name, circuit):
    dc = solve(circuit)
    checked = 0
    for rail, point in dc.rails.items():
        parts = {el.name: el for el in circuit.elements}
        feeds = [parts[f] for f in circuit.rail_feeds(rail)]
        if not feeds or not all(isinstance(f, Resistor) for f in feeds):
            continue
        inflow = 0.0
        for f in feeds:
            other = f.b if f.a == rail else f.a
            inflow += (dc.node_v.get(other, 0.0) - dc.node_v[rail]) / f.ohms
        gmin_leak = dc.options.gmin_s * abs(dc.node_v[rail])
        assert point.i_a == pytest.approx(inflow, rel=1e-9, abs=2 * gmin_leak + 1e-12)
        checked += 1
    if name == "cascade":
        assert checked == 10
