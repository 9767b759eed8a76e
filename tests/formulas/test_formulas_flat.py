"""The whole chain solved by lcapy agrees with the fast nodal engine.

lcapy (a reference library: exact symbolic solve in s) and
:func:`chain.smallsignal.response` (numeric, per frequency) share no code
beyond the Circuit; they must agree to 1e-6 relative at every node that
matters, over 20 log-spaced points from 10 Hz to 100 kHz.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("lcapy")

from chain.build import build  # noqa: E402
from chain.dc import solve  # noqa: E402
from chain.formulas import flat_netlist, flat_solve, flat_transfer  # noqa: E402
from chain.language import parse_text  # noqa: E402
from chain.smallsignal import linearize, response  # noqa: E402

F_HZ = np.geomspace(10.0, 100e3, 20)
RTOL = 1e-6

ONE_STAGE = """\
title "flat one"
supply HT 300V impedance 100
rail B1 from HT drop 10k decouple 22u
input into V1 pickup winding 7k inductance 2.5H capacitance 120p cable 470p
stage V1 common-cathode 12AX7
  plate 100k from B1
  cathode 1k5 bypass 1u series 220
  grid leak 1M stopper 33k
couple V1 -> output cap 22n
output load 1M
"""

TWO_STAGE = """\
title "flat two"
supply HT 300V
rail B1 from HT drop 2k2 decouple 33u
rail B2 from B1 drop 10k decouple 10u
input into V1 resistance 10k
stage V1 common-cathode 12AX7
  plate 220k from B2
  cathode 2k2
  grid leak 1M stopper 68k
stage V2 cathode-follower 12AU7
  plate on B1
  cathode 47k
couple V1 -> V2 direct
couple V2 -> output cap 100n
output load 100k
stray V1.plate 50p
"""


#: a cathodyne with the bootstrapped grid leak (returned to the tap between bias and tail resistor)
CATHODYNE = """\
title "flat cathodyne"
supply HT 330V
input into PI resistance 47k
stage PI cathodyne 12AU7
  plate 22k from HT
  cathode 1k tail 21k
  grid leak 1M
output PI.plate load 470k and PI.cathode load 470k
"""

#: a long-tailed pair: bias and tail resistors, the second grid AC-grounded through a capacitor
LONG_TAIL = """\
title "flat long-tailed pair"
supply HT 350V
input into PI resistance 10k
stage PI long-tailed-pair 12AX7
  plate 82k from HT
  second plate 100k from HT
  cathode 820 tail 10k
  grid leak 1M stopper 4k7
  second grid leak 1M bypass 47n
output PI load 220k
"""


def _solved(text):
    circuit = build(parse_text(text))
    dc = solve(circuit)
    return circuit, dc, response(linearize(circuit, dc), F_HZ)


#: the shipped two-stage demo: pickup source, volume network with a bright capacitor, a dropped rail
DEMO = (Path(__file__).parents[2] / "netlists" / "clean_two_stage.chain").read_text(encoding="utf-8")


@pytest.mark.parametrize("text", [ONE_STAGE, TWO_STAGE, DEMO, CATHODYNE, LONG_TAIL],
                         ids=["one-stage", "two-stage", "demo-clean", "cathodyne", "long-tailed-pair"])
def test_flat_lcapy_solve_agrees_with_engine(text):
    circuit, dc, resp = _solved(text)
    nodes = [circuit.output_node, circuit.input_node, *circuit.outputs.values(),
             *(n for s in circuit.stages for n in s.outputs.values()), *(t.grid for t in circuit.triodes)]
    nodes = list(dict.fromkeys(nodes))
    sol = flat_solve(circuit, dc, nodes)
    for node in nodes:
        np.testing.assert_allclose(sol.at(node, F_HZ), resp.h[node], rtol=RTOL, err_msg=node)


def test_flat_transfer_of_a_node_shorted_by_a_supply_is_zero():
    circuit, dc, _ = _solved(ONE_STAGE)
    # HT sits behind the supply's own impedance; its raw node is shorted to ground
    h = flat_transfer(circuit, dc, F_HZ[:3], "HT.raw")
    assert np.array_equal(h, np.zeros(3, dtype=complex))


def test_flat_netlist_parses_as_the_intended_lcapy_parts():
    import lcapy

    circuit, dc, _ = _solved(TWO_STAGE)
    text = flat_netlist(circuit, dc)
    cct = lcapy.Circuit(text)
    # lcapy keeps comment lines as "XX" elements
    kinds = sorted(type(e).__name__ for e in cct.elements.values() if type(e).__name__ != "XX")
    n_r = len(circuit.resistors) + len(circuit.triodes)  # + one rp per triode
    n_c = len(circuit.capacitors) + 3 * len(circuit.triodes)
    assert kinds.count("R") == n_r and kinds.count("C") == n_c
    assert kinds.count("E") == len(circuit.triodes) and kinds.count("sV") == 1
    assert len(kinds) == n_r + n_c + len(circuit.triodes) + 1
