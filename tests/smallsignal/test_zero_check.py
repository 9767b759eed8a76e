"""Each computed zero of the output transfer is checked by solving the nodal
system at it (chain.smallsignal.poles.verified_zeros); those at which the
output does not vanish are left out, and the stability check says so (W803)."""

from __future__ import annotations

import math

import numpy as np
from numpy.testing import assert_allclose

from chain.circuit import GROUND
from chain.smallsignal import linearize
from chain.smallsignal.mna import assemble, direct_solver
from chain.smallsignal.poles import pole_zero, zeros
from chain.smallsignal.stability import stability
from ss_circuits import MU, RP, Net, common_cathode, dc_of, model, op, rc_ladder

LADDER_SECTIONS = 70


def _codes(st) -> list[str]:
    return [d.code for d in st.diagnostics]


def test_long_rc_ladder_read_at_its_far_end_has_no_zeros():
    """The voltage transfer of an RC ladder to its far end is 1/(a polynomial
    in s): no finite zeros (any network-theory text: every series arm carries
    the whole signal, no shunt arm can short it at a finite frequency).  The
    eigen-solve scatters the zero at infinity of order 70 into spurious
    finite zeros; none of them checks out, and W803 says how many were left out."""
    r, c = 10e3, 47e-9
    ss = rc_ladder(LADDER_SECTIONS, r, c)
    mna = assemble(ss)
    k = mna.index["out"]
    raw = zeros(mna, k)
    assert raw.size > 0  # what the check is for: the unchecked solve does report zeros
    assert np.any(raw.real > 0)
    st = stability(ss)
    pz = st.output
    assert pz.zeros_hz == ()
    assert pz.zeros_left_out > 0
    (w,) = [d for d in st.diagnostics if d.code == "W803"]
    assert f"{pz.zeros_left_out} of the {pz.zeros_left_out}" in w.message
    # with only poles left the pole–zero form is the nodal solve itself
    f = np.geomspace(1.0, 1e4, 9)
    x = direct_solver(mna.g, mna.c, 2j * math.pi * f).solve(mna.source_rhs())
    assert_allclose(pz(f), x[:, k], rtol=1e-6)


def test_bypassed_cathode_zero_is_kept():
    """A common-cathode stage with a bypassed cathode resistor (no
    interelectrode capacitances): the cathode impedance Rk/(1 + s·Rk·Ck) makes
    the gain −μ·RL/(rp + RL + (μ+1)·Zk), whose numerator has the factor
    (1 + s·Rk·Ck): a zero at s = −1/(Rk·Ck) (common practice)."""
    rk, ck = 1.5e3, 22e-6
    net = Net()
    net.supply("HT")
    net.signal("V1.in")
    common_cathode(net, "V1", rail="HT", rl=100e3, rk=rk, ck=ck, tube_model=model())
    ss = linearize(net.circuit("V1.in", "V1.plate"), dc_of(op("V1")))
    st = stability(ss)
    assert_allclose(np.array(st.output.zeros_hz), [-1.0 / (2 * math.pi * rk * ck)], rtol=1e-9)
    assert st.output.zeros_left_out == 0 and "W803" not in _codes(st)


def test_miller_feed_forward_zero_in_the_right_half_plane_is_kept():
    """A common-cathode stage, cathode grounded, with only a grid-to-plate
    capacitance, driven at its grid by the source: the plate's transfer
    vanishes where the current s·Cgp·vg through Cgp equals gm·vg, at
    s = +gm/Cgp in the right half-plane (the feed-forward zero of a
    common-cathode / common-source stage; e.g. Sedra & Smith,
    "Microelectronic Circuits", high-frequency response)."""
    cgp = 1.7e-12
    net = Net()
    net.supply("HT")
    net.signal("V1.grid")
    net.r("V1.RL", "HT", "V1.plate", 100e3)
    net.r("V1.Rg", "V1.grid", GROUND, 1e6)
    net.triode("V1", "V1.plate", "V1.grid", GROUND, model(cgp_f=cgp))
    net.stage("V1", "common-cathode", "V1.grid", "V1.plate", "HT")
    ss = linearize(net.circuit("V1.grid", "V1.plate"), dc_of(op("V1")))
    st = stability(ss)
    assert_allclose(np.array(st.output.zeros_hz), [(MU / RP) / cgp / (2 * math.pi)], rtol=1e-9)
    assert st.output.zeros_left_out == 0 and "W803" not in _codes(st)


def test_ladder_read_near_its_source_keeps_its_zeros():
    """Read at the first node of the same ladder, the transfer vanishes where
    the admittance of the ladder beyond it is infinite: at the poles of that
    ladder of n − 1 sections, s = −(2 − 2cos((2k−1)π/(2n−1)))/(RC) (the
    discrete Laplacian with one fixed and one free end; from memory of
    G. Strang, "Introduction to Applied Mathematics", §1.5): all 69 are true
    zeros and all are kept."""
    r, c, n = 10e3, 47e-9, LADDER_SECTIONS
    ss = rc_ladder(n, r, c)
    pz = pole_zero(ss, "n1")
    m = n - 1
    k = np.arange(1, m + 1)
    expected = np.sort(-(2 - 2 * np.cos((2 * k - 1) * np.pi / (2 * m + 1))) / (r * c)) / (2 * math.pi)
    assert pz.zeros_left_out == 0
    assert_allclose(np.sort(np.array(pz.zeros_hz).real), expected, rtol=1e-8)
