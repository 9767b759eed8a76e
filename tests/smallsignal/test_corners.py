"""Half-power corners: first-order RC sections, whose corner is f = 1/(2πRC)
(any circuit-theory text, e.g. the coupling capacitor into a grid leak)."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose

from chain.circuit import GROUND
from chain.smallsignal import corners, linearize, response, response_corners, transfer_function
from ss_circuits import Net, dc_of

R, C = 1e6, 22e-9  # grid leak and coupling capacitor


def high_pass():
    net = Net()
    net.signal("src")
    net.c("couple.in-V1.C", "src", "V1.in", C)
    net.r("V1.Rg", "V1.in", GROUND, R)
    return linearize(net.circuit("src", "V1.in"), dc_of())


def low_pass(r=10e3, c=1e-9):
    net = Net()
    net.signal("src")
    net.r("input.R", "src", "in", r)
    net.c("V1.Cin", "in", GROUND, c)
    return linearize(net.circuit("in", "in"), dc_of())


F = np.geomspace(0.5, 1e5, 300)


def test_coupling_cap_into_grid_leak_corner():
    ss = high_pass()
    resp = response(ss, F)
    fn = transfer_function(ss, "V1.in")
    low, high = corners(F, resp.h["V1.in"], evaluate=lambda f: complex(fn(f)))
    assert_allclose(low, 1.0 / (2 * np.pi * R * C), rtol=1e-6)
    assert high is None


def test_low_pass_corner_and_response_helper():
    ss = low_pass()
    resp = response(ss, F)
    low, high = response_corners(resp)
    assert low is None
    assert_allclose(high, 1.0 / (2 * np.pi * 10e3 * 1e-9), rtol=1e-6)


def test_interpolation_alone_is_close_but_refinement_is_exact():
    # without the exact response the corner comes from dB-vs-log-f interpolation
    ss = high_pass()
    resp = response(ss, F)
    low_grid, _ = corners(F, resp.h["V1.in"])
    exact = 1.0 / (2 * np.pi * R * C)
    assert_allclose(low_grid, exact, rtol=1e-3)
    assert abs(low_grid / exact - 1) > 1e-9  # the refinement has something to do


def test_corner_outside_the_band_is_none():
    ss = high_pass()
    f = np.geomspace(100.0, 1e4, 50)  # the 7.2 Hz corner is below the band
    resp = response(ss, f)
    assert response_corners(resp) == (None, None)


def test_reference_frequency_level():
    # a band-pass: a 1k/10n low-pass (15.9 kHz) feeding the 22n/1M high-pass
    # (7.2 Hz); the sections barely load each other, so relative to |H(1 kHz)|
    # the corners are the first-order ones to within 1 %
    net = Net()
    net.signal("src")
    net.r("lp.R", "src", "a", 1e3)
    net.c("lp.C", "a", GROUND, 10e-9)
    net.c("hp.C", "a", "b", C)
    net.r("hp.R", "b", GROUND, R)
    ss = linearize(net.circuit("src", "b"), dc_of())
    resp = response(ss, F)
    low, high = response_corners(resp, "b", ref_hz=1e3)
    assert_allclose(low, 1.0 / (2 * np.pi * R * C), rtol=1e-2)
    assert_allclose(high, 1.0 / (2 * np.pi * 1e3 * 10e-9), rtol=1e-2)


def test_bad_grid_is_rejected():
    with pytest.raises(ValueError):
        corners([1.0, 1.0, 2.0], [1.0, 1.0, 1.0])
    with pytest.raises(ValueError):
        corners([1.0, 2.0], [1.0])
