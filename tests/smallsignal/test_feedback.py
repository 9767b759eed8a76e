"""A global feedback loop (later plate → earlier cathode) against an
independent dense nodal solve written here from Kirchhoff's current law
(nodal analysis, any circuit-theory text), per frequency with
scipy.linalg.solve; the engine must agree to 1e-9."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import scipy.linalg
from numpy.testing import assert_allclose

from chain.circuit import GROUND
from chain.smallsignal import linearize, response
from ss_circuits import Net, dc_of, model, op

CAPS = dict(cgk_f=1.6e-12, cgp_f=1.7e-12, cpk_f=0.46e-12)
MU1, RP1 = 100.0, 62.5e3
MU2, RP2 = 95.0, 58e3
R_IN = 10e3


def feedback_circuit():
    tube = model(**CAPS)
    net = Net()
    net.supply("HT")
    net.signal("src")
    net.r("input.R", "src", "V1.in", R_IN)
    net.r("rail.B2.R", "HT", "B2", 10e3)
    net.c("rail.B2.C", "B2", GROUND, 10e-6)
    # V1: unbypassed cathode, the feedback returns here
    net.r("V1.Rg", "V1.in", GROUND, 1e6)
    net.r("V1.Rs", "V1.in", "V1.grid", 10e3)
    net.r("V1.RL", "B2", "V1.plate", 100e3)
    net.r("V1.Rk", "V1.cathode", GROUND, 1.5e3)
    net.triode("V1", "V1.plate", "V1.grid", "V1.cathode", tube)
    net.stage("V1", "common-cathode", "V1.in", "V1.plate", "B2")
    net.c("couple.V1-V2.C", "V1.plate", "V2.in", 22e-9)
    # V2: bypassed
    net.r("V2.Rg", "V2.in", GROUND, 470e3)
    net.r("V2.Rs", "V2.in", "V2.grid", 1e3)
    net.r("V2.RL", "B2", "V2.plate", 100e3)
    net.r("V2.Rk", "V2.cathode", GROUND, 1.5e3)
    net.c("V2.Ck", "V2.cathode", GROUND, 22e-6)
    net.triode("V2", "V2.plate", "V2.grid", "V2.cathode", tube)
    net.stage("V2", "common-cathode", "V2.in", "V2.plate", "B2")
    # the feedback resistor, later plate → earlier cathode
    net.r("fb.R", "V2.plate", "V1.cathode", 47e3)
    net.c("couple.V2-output.C", "V2.plate", "output", 47e-9)
    net.r("output.load", "output", GROUND, 1e6)
    circuit = net.circuit("V1.in", "output")
    return circuit, dc_of(op("V1", MU1, RP1), op("V2", MU2, RP2))


def reference_solve(f_hz):
    """Node voltages per volt of EMF, from nodal equations written out here."""
    nodes = ["V1.in", "V1.grid", "V1.plate", "V1.cathode", "B2", "V2.in", "V2.grid",
             "V2.plate", "V2.cathode", "output"]
    k = {n: i for i, n in enumerate(nodes)}
    out = np.empty((len(f_hz), len(nodes)), dtype=complex)
    for m, f in enumerate(f_hz):
        s = 2j * np.pi * f
        y = np.zeros((len(nodes), len(nodes)), dtype=complex)
        rhs = np.zeros(len(nodes), dtype=complex)

        def admit(a, b, adm):
            for p, q, sign in ((a, a, 1), (b, b, 1), (a, b, -1), (b, a, -1)):
                if p in k and q in k:
                    y[k[p], k[q]] += sign * adm

        def vccs(plate, cathode, grid, gm):
            # plate current gm·(vg − vk) flows plate → cathode inside the tube
            for node, sign in ((plate, 1), (cathode, -1)):
                if node in k:
                    if grid in k:
                        y[k[node], k[grid]] += sign * gm
                    if cathode in k:
                        y[k[node], k[cathode]] -= sign * gm

        # the source: 1 V EMF behind R_IN, as its Norton equivalent
        admit("V1.in", "gnd", 1 / R_IN)
        rhs[k["V1.in"]] += 1 / R_IN
        for a, b, r in (("B2", "gnd", 10e3), ("V1.in", "gnd", 1e6), ("V1.in", "V1.grid", 10e3),
                        ("B2", "V1.plate", 100e3), ("V1.cathode", "gnd", 1.5e3),
                        ("V2.in", "gnd", 470e3), ("V2.in", "V2.grid", 1e3),
                        ("B2", "V2.plate", 100e3), ("V2.cathode", "gnd", 1.5e3),
                        ("V2.plate", "V1.cathode", 47e3), ("output", "gnd", 1e6)):
            admit(a, b, 1 / r)
        for a, b, c in (("B2", "gnd", 10e-6), ("V1.plate", "V2.in", 22e-9),
                        ("V2.cathode", "gnd", 22e-6), ("V2.plate", "output", 47e-9)):
            admit(a, b, s * c)
        for t, mu, rp in (("V1", MU1, RP1), ("V2", MU2, RP2)):
            plate, grid, cathode = f"{t}.plate", f"{t}.grid", f"{t}.cathode"
            admit(plate, cathode, 1 / rp)
            vccs(plate, cathode, grid, mu / rp)
            admit(grid, cathode, s * CAPS["cgk_f"])
            admit(grid, plate, s * CAPS["cgp_f"])
            admit(plate, cathode, s * CAPS["cpk_f"])
        out[m] = scipy.linalg.solve(y, rhs)
    return nodes, out


def test_feedback_topology_matches_an_independent_nodal_solve():
    circuit, dc = feedback_circuit()
    f = np.geomspace(5.0, 100e3, 40)
    resp = response(linearize(circuit, dc), f)
    nodes, ref = reference_solve(f)
    for j, node in enumerate(nodes):
        assert_allclose(resp.h[node], ref[:, j], rtol=1e-9, err_msg=node)
    assert_allclose(resp.h["src"], 1.0, rtol=0)
    assert np.all(resp.h["HT"] == 0)


def test_feedback_lowers_the_gain():
    # negative feedback around two inverting stages reduces the gain (common practice)
    circuit, dc = feedback_circuit()
    f = np.array([1e3])
    with_fb = response(linearize(circuit, dc), f).h["output"]
    open_loop = replace(circuit, resistors=tuple(r for r in circuit.resistors if r.name != "fb.R"))
    without = response(linearize(open_loop, dc), f).h["output"]
    assert abs(with_fb[0]) < 0.5 * abs(without[0])
