"""A magnetic pickup (winding R and L, self-capacitance) on a cable into a
1 MΩ grid leak: a series-RLC resonance near f0 = 1/(2π·√(L·(Cp + Ccable)))
(series resonance, any circuit-theory text), moving down as the cable
capacitance grows (common practice)."""

from __future__ import annotations

import numpy as np
from numpy.testing import assert_allclose
from scipy.optimize import minimize_scalar

from chain.circuit import GROUND
from chain.smallsignal import linearize, response, transfer_function
from ss_circuits import Net, dc_of

R_W, L_W, C_P = 8e3, 2.5, 100e-12


def pickup(c_cable, r_loss=None):
    net = Net()
    net.signal("input.emf")
    net.r("input.R", "input.emf", "input.x", R_W)
    net.l("input.L", "input.x", "in", L_W)
    if r_loss is not None:
        net.r("input.Rloss", "input.x", "in", r_loss)
    net.c("input.Cp", "in", GROUND, C_P)
    net.c("input.Ccable", "in", GROUND, c_cable)
    net.r("V1.Rg", "in", GROUND, 1e6)
    return linearize(net.circuit("in", "in"), dc_of())


def peak_hz(ss):
    f = np.geomspace(300.0, 30e3, 400)
    mag = np.abs(response(ss, f).h["in"])
    k = int(np.argmax(mag))
    fn = transfer_function(ss, "in")
    res = minimize_scalar(lambda x: -abs(complex(fn(10.0 ** x))),
                          bounds=(np.log10(f[k - 1]), np.log10(f[k + 1])), method="bounded",
                          options={"xatol": 1e-10})
    return 10.0 ** res.x, -res.fun


def test_resonance_peak_near_series_rlc_frequency():
    c_cable = 500e-12
    f_peak, gain = peak_hz(pickup(c_cable))
    f0 = 1.0 / (2 * np.pi * np.sqrt(L_W * (C_P + c_cable)))
    # Q ≈ 5 with the winding resistance and the 1 MΩ load: the peak of |H|
    # sits within 1 % of f0 (ω_peak = ω0·√(1 − 1/(2Q²)) and the load's shift)
    assert_allclose(f_peak, f0, rtol=2e-2)
    assert gain > 3.0  # a real peak, well above the 1.0 of the flat band


def test_more_cable_capacitance_moves_the_peak_down():
    f_short, _ = peak_hz(pickup(300e-12))
    f_long, _ = peak_hz(pickup(1000e-12))
    assert f_long < f_short
    assert_allclose(f_short / f_long, np.sqrt((C_P + 1000e-12) / (C_P + 300e-12)), rtol=2e-2)


def test_source_sees_the_grid_leak_and_no_pickup_parts():
    # Zin excludes the "input.*" parts: the load on the pickup is the 1 MΩ leak
    resp = response(pickup(500e-12), np.geomspace(20.0, 20e3, 30))
    assert_allclose(resp.zin_ohm, 1e6, rtol=1e-9)


def test_eddy_current_loss_across_the_coil_is_a_plain_divider():
    # Voltage divider (any circuit-theory text): series arm Rw + (jωL ∥ Rloss),
    # shunt arm 1/(jω(Cp + Ccable)) ∥ 1 MΩ.
    c_cable, r_loss = 500e-12, 300e3
    f = np.geomspace(20.0, 20e3, 60)
    w = 2j * np.pi * f
    z_coil = 1.0 / (1.0 / (w * L_W) + 1.0 / r_loss)
    z_shunt = 1.0 / (w * (C_P + c_cable) + 1.0 / 1e6)
    assert_allclose(response(pickup(c_cable, r_loss), f).h["in"], z_shunt / (R_W + z_coil + z_shunt), rtol=1e-9)


def test_eddy_current_loss_lowers_the_resonance_peak():
    # Common practice: a loaded passive pickup peaks a few dB up to about +10 dB,
    # a lossless coil far more; the loss must bring the peak down, not move it much.
    f_free, g_free = peak_hz(pickup(500e-12))
    f_loss, g_loss = peak_hz(pickup(500e-12, 300e3))
    assert 20 * np.log10(g_free) > 12.0
    assert 3.0 < 20 * np.log10(g_loss) < 10.0
    assert_allclose(f_loss, f_free, rtol=0.1)
