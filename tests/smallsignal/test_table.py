"""Stage table and overall figures of a two-stage chain with a resistive
coupling network, against the common-cathode formula and the voltage divider
(Jones, from memory; the divider: Ohm's law)."""

from __future__ import annotations

import math

import numpy as np
from numpy.testing import assert_allclose

from chain.circuit import GROUND
from chain.smallsignal import db, overall, linearize, response, stage_table
from ss_circuits import MU, RP, Net, common_cathode, dc_of, model, op, parallel

R_SERIES, RG2, RL = 470e3, 1e6, 100e3


def two_stage():
    net = Net()
    net.supply("HT")
    net.signal("src")
    net.r("input.R", "src", "V1.in", 1e3)
    common_cathode(net, "V1", rail="HT", rl=RL, rk=1.5e3, ck=10.0, tube_model=model(), rs=0.0)
    # coupling: a series resistor into V2's grid leak (no capacitor: flat)
    net.r("couple.V1-V2.R", "V1.plate", "V2.in", R_SERIES)
    net.couplings["V1->V2"] = ("V1.plate", "V2.in")
    common_cathode(net, "V2", rail="HT", rl=RL, rk=1.5e3, ck=10.0, tube_model=model(), rg=RG2, rs=0.0)
    net.c("couple.V2-output.C", "V2.plate", "output", 10.0)
    net.r("output.load", "output", GROUND, 1e6)
    net.couplings["V2->output"] = ("V2.plate", "output")
    circuit = net.circuit("V1.in", "output")
    dc = dc_of(op("V1"), op("V2", 90.0, 55e3))
    return circuit, dc


def test_stage_rows():
    circuit, dc = two_stage()
    resp = response(linearize(circuit, dc), np.geomspace(20.0, 20e3, 40))
    rows = stage_table(circuit, dc, resp, 1e3, 0.2)
    assert [r.stage for r in rows] == ["V1", "V2"]
    v1, v2 = rows
    # V1 loaded by the divider (470k + 1M): A = −mu·RL'/(RL' + rp)
    rl1 = parallel(RL, R_SERIES + RG2)
    assert_allclose(v1.gain, -MU * rl1 / (rl1 + RP), rtol=1e-6)
    assert v1.coupling is None and v1.coupling_db is None
    assert v1.gain_db == db(v1.gain) and v1.kind == "common-cathode" and v1.mu == MU
    # the divider feeding V2
    assert v2.coupling == "V1->V2"
    assert_allclose(v2.coupling_ratio, RG2 / (R_SERIES + RG2), rtol=1e-9)
    assert_allclose(v2.coupling_db, 20 * math.log10(RG2 / (R_SERIES + RG2)), rtol=1e-9)
    rl2 = parallel(RL, 1e6)
    assert_allclose(v2.gain, -90.0 * rl2 / (rl2 + 55e3), rtol=1e-6)
    # cumulative gain from the EMF: input divider (1k into 1M) × stages × coupling
    h_in = 1e6 / (1e6 + 1e3)
    assert_allclose(v1.cumulative_gain, h_in * v1.gain, rtol=1e-9)
    assert_allclose(v2.cumulative_gain, h_in * v1.gain * v2.coupling_ratio * v2.gain, rtol=1e-9)
    # levels in peak volts for a 0.2 V source
    assert_allclose(v1.level_in_v, 0.2 * h_in, rtol=1e-9)
    assert_allclose(v2.level_out_v, 0.2 * abs(v2.cumulative_gain), rtol=1e-9)
    # impedances: V2's input is its 1 MΩ leak; V1's output RL ∥ rp
    assert_allclose(v2.zin_ohm, RG2, rtol=1e-6)
    assert_allclose(v1.zout_ohm, parallel(RL, RP), rtol=1e-6)


def test_overall_result():
    circuit, dc = two_stage()
    f = np.geomspace(20.0, 20e3, 40)
    resp = response(linearize(circuit, dc), f)
    total = overall(resp, 1e3)
    rows = stage_table(circuit, dc, resp, 1e3, 0.2)
    assert_allclose(total.gain, rows[-1].cumulative_gain, rtol=1e-9)
    assert total.gain_db == db(total.gain)
    assert abs(total.phase_deg) < 0.5  # two inversions
    assert total.f_low_hz is None and total.f_high_hz is None  # flat: 10 F couplings, no capacitances
    assert_allclose(total.zin_ohm, 1e6, rtol=1e-6)  # V1's grid leak
    assert_allclose(total.zout_ohm, parallel(RL, 55e3), rtol=1e-6)
