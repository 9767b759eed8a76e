"""The Miller effect and the grid-stopper pole come out of the nodal solve.

Source: J. M. Miller, "Dependence of the input impedance of a three-electrode
vacuum tube upon the load in the plate circuit", Scientific Papers of the
Bureau of Standards 351 (1920) (from memory): the grid sees
``Cin = Cgk + Cgp·(1 − A)``, ``A`` the grid-to-plate gain; with the
mid-band ``A = −|A|`` this is ``Cgk + Cgp·(1 + |A|)``, and a grid stopper
``Rs`` makes a pole at ``f = 1/(2π·Rs·Cin)``.
"""

from __future__ import annotations

import numpy as np
from numpy.testing import assert_allclose

from chain.smallsignal import corners, linearize, response, transfer_function
from chain.tubes import lookup
from ss_circuits import MU, RP, Net, common_cathode, dc_of, op

RL, RS = 100e3, 100e3


def miller_circuit():
    tube = lookup("12AX7")  # Cgk 1.6 pF, Cgp 1.7 pF, Cpk 0.46 pF in the library
    net = Net()
    net.supply("HT")
    net.signal("V1.in")
    common_cathode(net, "V1", rail="HT", rl=RL, rk=1.5e3, ck=10.0, tube_model=tube, rs=RS)
    return net.circuit("V1.in", "V1.plate"), dc_of(op("V1")), tube


def test_grid_admittance_is_the_miller_capacitance():
    circuit, dc, tube = miller_circuit()
    f = np.geomspace(200.0, 2e3, 12)
    resp = response(linearize(circuit, dc), f)
    h_in, h_grid, h_plate = resp.h["V1.in"], resp.h["V1.grid"], resp.h["V1.plate"]
    y_grid = (h_in - h_grid) / RS / h_grid  # current through the stopper per grid volt
    c_eff = y_grid / (2j * np.pi * f)
    # Miller's relation with the solved gain (exact for a bypassed cathode)
    a = h_plate / h_grid
    assert_allclose(c_eff, tube.cgk_f + tube.cgp_f * (1 - a), rtol=1e-9)
    # the textbook form with the resistive mid-band gain |A| = mu·RL/(RL + rp)
    a_mid = MU * RL / (RL + RP)
    assert_allclose(c_eff.real, tube.cgk_f + tube.cgp_f * (1 + a_mid), rtol=1e-3)


def test_grid_stopper_pole_at_miller_frequency():
    circuit, dc, tube = miller_circuit()
    ss = linearize(circuit, dc)
    f = np.geomspace(100.0, 1e6, 300)
    resp = response(ss, f)
    fn = transfer_function(ss, "V1.grid")
    low, high = corners(f, resp.h["V1.grid"], evaluate=lambda x: complex(fn(x)))
    c_in = tube.cgk_f + tube.cgp_f * (1 + MU * RL / (RL + RP))
    # the one-pole Miller estimate ignores the plate-node pole (≈ 2 MHz here)
    # and the Cgp feed-forward: 2 % covers both
    assert low is None
    assert_allclose(high, 1.0 / (2 * np.pi * RS * c_in), rtol=2e-2)
