"""Single-stage gains, impedances and phases against the standard small-signal
results of valve amplifier analysis (from memory of M. Jones, "Valve
Amplifiers", the chapters on the common-cathode, cathode-follower and
common-grid stages).

Interelectrode capacitances are zero here and coupling/bypass capacitors are
10 F, so the mid-band formulas hold to better than 1e-7 at 1 kHz; the
tolerance used is rtol 1e-6.
"""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose

from chain.circuit import GROUND
from chain.smallsignal import linearize, response
from ss_circuits import MU, RP, Net, common_cathode, dc_of, model, op, parallel

BIG_F = 10.0  # farads: a short at 1 kHz for these tests
F_MID = np.geomspace(500.0, 2000.0, 12)  # >8 points: the modal solve is exercised


def cc_circuit(*, bypassed: bool, rl=100e3, rk=1.5e3, r_next=470e3):
    net = Net()
    net.supply("HT")
    net.signal("src")
    net.r("input.R", "src", "V1.in", 1e3)
    common_cathode(net, "V1", rail="HT", rl=rl, rk=rk, ck=BIG_F if bypassed else None,
                   tube_model=model(), rs=0.0)
    net.c("couple.V1-V2.C", "V1.plate", "V2.in", BIG_F)
    net.r("V2.Rg", "V2.in", GROUND, r_next)
    net.couplings["V1->V2"] = ("V1.plate", "V2.in")
    return net.circuit("V1.in", "V2.in"), dc_of(op("V1"))


def stage_gain(resp, stage):
    st = resp.ss.circuit.stage(stage)
    return resp.h[st.output] / resp.h[st.input]


@pytest.mark.parametrize("method", ["auto", "direct"])
def test_common_cathode_bypassed_gain(method):
    # A = −mu·RL'/(RL' + rp), RL' = RL ∥ next grid leak (Jones, common-cathode stage, from memory)
    circuit, dc = cc_circuit(bypassed=True)
    resp = response(linearize(circuit, dc), F_MID, method=method)
    rl_eff = parallel(100e3, 470e3)
    expected = -MU * rl_eff / (rl_eff + RP)
    assert_allclose(stage_gain(resp, "V1"), expected, rtol=1e-6)


@pytest.mark.parametrize("method", ["auto", "direct"])
def test_common_cathode_unbypassed_gain(method):
    # A = −mu·RL'/(RL' + rp + (mu+1)·Rk) (Jones, cathode feedback, from memory)
    circuit, dc = cc_circuit(bypassed=False)
    resp = response(linearize(circuit, dc), F_MID, method=method)
    rl_eff = parallel(100e3, 470e3)
    expected = -MU * rl_eff / (rl_eff + RP + (MU + 1) * 1.5e3)
    assert_allclose(stage_gain(resp, "V1"), expected, rtol=1e-6)


def test_common_cathode_output_impedance():
    # Zout at the plate (next stage removed) = RL ∥ (rp + (mu+1)·Rk) (Jones, from memory)
    circuit, dc = cc_circuit(bypassed=False)
    resp = response(linearize(circuit, dc), F_MID)
    assert_allclose(resp.stage_zout_ohm["V1"], parallel(100e3, RP + (MU + 1) * 1.5e3), rtol=1e-6)


def cf_circuit(*, rk=10e3, r_load=100e3):
    net = Net()
    net.supply("HT")
    net.signal("V1.in")
    net.r("V1.Rg", "V1.in", GROUND, 1e6)
    net.r("V1.Rs", "V1.in", "V1.grid", 4.7e3)
    net.r("V1.Rk", "V1.cathode", GROUND, rk)
    net.triode("V1", "HT", "V1.grid", "V1.cathode", model())
    net.stage("V1", "cathode-follower", "V1.in", "V1.cathode", "HT")
    net.c("couple.V1-output.C", "V1.cathode", "output", BIG_F)
    net.r("output.load", "output", GROUND, r_load)
    net.couplings["V1->output"] = ("V1.cathode", "output")
    return net.circuit("V1.in", "output"), dc_of(op("V1"))


def test_cathode_follower_gain():
    # A = mu·Rk'/(rp + (mu+1)·Rk'), Rk' = Rk ∥ load (Jones, cathode follower, from memory)
    circuit, dc = cf_circuit()
    resp = response(linearize(circuit, dc), F_MID)
    rk_eff = parallel(10e3, 100e3)
    assert_allclose(stage_gain(resp, "V1"), MU * rk_eff / (RP + (MU + 1) * rk_eff), rtol=1e-6)
    # the source drives the grid leak directly (no capacitances): it sees 1 MΩ
    assert_allclose(resp.zin_ohm, 1e6, rtol=1e-9)


def test_cathode_follower_output_impedance():
    # Zout = rp/(mu+1) ∥ Rk with the plate at AC ground (Jones, from memory)
    circuit, dc = cf_circuit()
    resp = response(linearize(circuit, dc), F_MID)
    expected = parallel(RP / (MU + 1), 10e3)
    assert_allclose(resp.stage_zout_ohm["V1"], expected, rtol=1e-6)
    # the chain output: the same through a 10 F coupling capacitor, load removed
    assert_allclose(resp.zout_ohm, expected, rtol=1e-6)


def cg_circuit(*, rl=100e3, rs=600.0):
    net = Net()
    net.supply("HT")
    net.signal("src")
    net.r("input.R", "src", "V1.cathode", rs)
    net.r("V1.RL", "HT", "V1.plate", rl)
    net.triode("V1", "V1.plate", GROUND, "V1.cathode", model())
    net.stage("V1", "common-grid", "V1.cathode", "V1.plate", "HT")
    return net.circuit("V1.cathode", "V1.plate"), dc_of(op("V1"))


def test_common_grid_input_impedance():
    # Zin at the cathode = (RL + rp)/(mu+1) (Jones, grounded-grid stage, from memory)
    circuit, dc = cg_circuit()
    resp = response(linearize(circuit, dc), F_MID)
    expected = (100e3 + RP) / (MU + 1)
    assert_allclose(resp.zin_ohm, expected, rtol=1e-6)
    assert_allclose(resp.stage_zin_ohm["V1"], expected, rtol=1e-6)


def test_common_grid_gain_from_source_emf():
    # A = (mu+1)·RL/(RL + rp + (mu+1)·Rs) from the source EMF (Jones, from memory)
    circuit, dc = cg_circuit()
    resp = response(linearize(circuit, dc), F_MID)
    expected = (MU + 1) * 100e3 / (100e3 + RP + (MU + 1) * 600.0)
    assert_allclose(resp.h["V1.plate"], expected, rtol=1e-6)


def test_mid_band_phase_inverting_and_following():
    # common cathode inverts (±180°), a cathode follower does not (0°) — common
    # practice; real 12AX7 capacitances and ordinary coupling values, 1 kHz
    net = Net()
    net.supply("HT")
    net.signal("src")
    net.r("input.R", "src", "V1.in", 10e3)
    common_cathode(net, "V1", rail="HT", rl=100e3, rk=1.5e3, ck=22e-6,
                   tube_model=model(1.6e-12, 1.7e-12, 0.46e-12), rs=10e3)
    net.r("V2.Rk", "V2.cathode", GROUND, 47e3)
    net.triode("V2", "HT", "V1.plate", "V2.cathode", model(1.6e-12, 1.7e-12, 0.46e-12))
    net.stage("V2", "cathode-follower", "V1.plate", "V2.cathode", "HT")
    circuit = net.circuit("V1.in", "V2.cathode")
    resp = response(linearize(circuit, dc_of(op("V1"), op("V2"))), [1e3])
    cc_phase = np.degrees(np.angle(stage_gain(resp, "V1")))[0]
    cf_phase = np.degrees(np.angle(stage_gain(resp, "V2")))[0]
    assert abs(abs(cc_phase) - 180.0) < 0.5
    assert abs(cf_phase) < 0.5


def bypass_shelf_circuit(ck):
    net = Net()
    net.supply("HT")
    net.signal("V1.in")
    common_cathode(net, "V1", rail="HT", rl=100e3, rk=1.5e3, ck=ck, tube_model=model(), rs=0.0)
    return net.circuit("V1.in", "V1.plate"), dc_of(op("V1"))


def test_cathode_bypass_shelf_zero_and_pole():
    # Zk = Rk/(1 + jωRkCk) in A = −mu·RL/(RL + rp + (mu+1)·Zk) gives
    # A = A_unbypassed·(1 + jf/fz)/(1 + jf/fp) with fz = 1/(2π·Rk·Ck) and
    # fp = 1/(2π·Ck·(Rk ∥ (rp + RL)/(mu+1)))  (Jones, cathode bypass, from memory)
    rl, rk, ck = 100e3, 1.5e3, 10e-6
    circuit, dc = bypass_shelf_circuit(ck)
    f = np.geomspace(1e-3, 1e5, 60)
    resp = response(linearize(circuit, dc), f)
    a_unb = -MU * rl / (rl + RP + (MU + 1) * rk)
    a_byp = -MU * rl / (rl + RP)
    fz = 1.0 / (2 * np.pi * rk * ck)
    fp = 1.0 / (2 * np.pi * ck * parallel(rk, (RP + rl) / (MU + 1)))
    expected = a_unb * (1 + 1j * f / fz) / (1 + 1j * f / fp)
    assert_allclose(stage_gain(resp, "V1"), expected, rtol=1e-9)
    # the two ends of the shelf
    assert_allclose(stage_gain(resp, "V1")[0], a_unb, rtol=1e-3)
    assert_allclose(stage_gain(resp, "V1")[-1], a_byp, rtol=1e-3)


def rail_circuit(c_rail):
    """Bypassed stage whose plate load hangs from rail B2 (22k from the supply)."""
    net = Net()
    net.supply("HT")
    net.signal("V1.in")
    if c_rail is None:
        rail = "HT"
    else:
        rail = "B2"
        net.r("rail.B2.R", "HT", "B2", 22e3)
        net.c("rail.B2.C", "B2", GROUND, c_rail)
    common_cathode(net, "V1", rail=rail, rl=100e3, rk=1.5e3, ck=BIG_F, tube_model=model(), rs=0.0)
    return net.circuit("V1.in", "V1.plate"), dc_of(op("V1"))


def test_small_decoupling_cap_raises_low_frequency_gain():
    # a rail decoupled by a small capacitor adds its impedance to the plate load
    # at low frequency: more gain there (common practice); exactly
    # A = −mu·(RL + Zr)/(RL + Zr + rp + (mu+1)·Zk), Zr = Rr/(1 + jωRrCr),
    # Zk = Rk/(1 + jωRkCk) (Jones' common-cathode formula with RL → RL + Zr)
    f = np.geomspace(2.0, 20e3, 40)
    ideal = response(linearize(*rail_circuit(None)), f).h["V1.plate"]
    small = response(linearize(*rail_circuit(100e-9)), f)
    large = response(linearize(*rail_circuit(1e-3)), f).h["V1.plate"]
    w = 2 * np.pi * f
    zr = 22e3 / (1 + 1j * w * 22e3 * 100e-9)
    zk = 1.5e3 / (1 + 1j * w * 1.5e3 * BIG_F)
    expected = -MU * (100e3 + zr) / (100e3 + zr + RP + (MU + 1) * zk)
    assert_allclose(small.h["V1.plate"], expected, rtol=1e-9)
    assert abs(small.h["V1.plate"][0]) > 1.05 * abs(ideal[0])
    assert abs(small.h["B2"][0]) > 0.1  # the rail itself carries signal
    assert_allclose(small.h["V1.plate"][-1], ideal[-1], rtol=5e-3)
    assert_allclose(large, ideal, rtol=2e-3)


def test_inductive_coupling_impedances():
    # a choke between plate and output: the stage output impedance (choke
    # removed) is RL ∥ rp; the chain's (load removed) adds jωL in series
    # (series impedances, any circuit-theory text; Jones for RL ∥ rp)
    net = Net()
    net.supply("HT")
    net.signal("V1.in")
    common_cathode(net, "V1", rail="HT", rl=100e3, rk=1.5e3, ck=BIG_F, tube_model=model(), rs=0.0)
    net.l("couple.V1-output.L", "V1.plate", "output", 1.0)
    net.r("output.load", "output", GROUND, 10e3)
    circuit = net.circuit("V1.in", "output")
    resp = response(linearize(circuit, dc_of(op("V1"))), F_MID)
    z_stage = parallel(100e3, RP)
    assert_allclose(resp.stage_zout_ohm["V1"], z_stage, rtol=1e-6)
    assert_allclose(resp.zout_ohm, z_stage + 2j * np.pi * F_MID * 1.0, rtol=1e-6)
    # and the loaded gain: −mu·Z'/(Z' + rp), Z' = RL ∥ (jωL + R_load)
    z_load = 1.0 / (1 / 100e3 + 1 / (2j * np.pi * F_MID * 1.0 + 10e3))
    assert_allclose(stage_gain(resp, "V1"), -MU * z_load / (z_load + RP), rtol=1e-6)
