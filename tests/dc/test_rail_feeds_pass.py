"""Every rail's feeds in one pass over the parts (issue 16), against the
per-rail definition of Circuit.rail_feeds written out (sources on the rail,
then each resistor and inductor on it that is its own drop or supply
impedance or joins it to an earlier rail), on every shipped demo and a long
cascade; and the DC diagnostics' cold plate voltages solved on the solve's
own network equal those of a freshly compiled one."""

from pathlib import Path

import pytest

from chain.build import build, load
from chain.circuit import Owner, Role
from chain.dc import solve
from chain.dc.diagnose import _cold_plate_voltages
from chain.dc.engine import compile_network
from chain.language import parse_text

from tests.cascades import cascade

ROOT = Path(__file__).resolve().parents[2]
CIRCUITS = [*sorted((ROOT / "netlists").glob("*.chain")), "cascade"]


def _circuit(which):
    if which == "cascade":
        return build(parse_text(cascade(12), "c12.chain"))
    return load(which)[1]


def _feeds_by_definition(circuit, rail):
    names = circuit.rail_names()
    earlier = set(names[:names.index(rail)]) if rail in names else set()
    feeds = [s.name for s in circuit.sources if rail in (s.pos, s.neg)]
    own = {(Owner("rail", rail), Role.RAIL_DROP), (Owner("supply", rail), Role.SUPPLY_IMPEDANCE)}
    for part in (*circuit.resistors, *circuit.inductors):
        if rail in (part.a, part.b):
            other = part.b if part.a == rail else part.a
            if (part.owner, part.role) in own or other in earlier:
                feeds.append(part.name)
    return tuple(feeds)


@pytest.mark.parametrize("which", CIRCUITS, ids=lambda p: getattr(p, "stem", p))
def test_rails_feeds_in_one_pass_equal_the_per_rail_definition(which):
    circuit = _circuit(which)
    rails = circuit.rail_names()
    assert rails
    got = circuit.rails_feeds(rails)
    assert got == {rail: _feeds_by_definition(circuit, rail) for rail in rails}


@pytest.mark.parametrize("which", CIRCUITS, ids=lambda p: getattr(p, "stem", p))
def test_cold_plate_voltages_on_the_solves_network_equal_a_fresh_one(which):
    circuit = _circuit(which)
    options = solve(circuit).options
    system = compile_network(circuit, gmin_s=options.gmin_s)
    system.solve(0.0, None, options=options)  # as the DC solve leaves it
    assert _cold_plate_voltages(circuit, options, system) == _cold_plate_voltages(circuit, options)
