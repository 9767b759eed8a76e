"""Output swing of one common-cathode stage against a hand load-line construction.

Construction (load-line method of any valve text; from memory of M. Jones,
"Valve Amplifiers", chapter on the common-cathode stage): with the cathode
bypassed and the coupling capacitor holding its DC voltage Vc, the plate
node at signal frequencies sees the plate load RL to the rail Vb and the
next stage's grid leak Rg through the capacitor, so

    (Vb − Vp)/RL = Ip + (Vp − Vc)/Rg                  (AC load line)

* cutoff, Ip → 0: Vp = (Vb/RL + Vc/Rg)/(1/RL + 1/Rg) — the rail minus the
  drop from the current leaking through RL into the grid leak;
  at the reported criterion Ip = f·Iq the same with −f·Iq in the numerator;
* grid conduction, Vgk = 0: the intersection of the AC load line with the
  Vgk = 0 plate curve (plate current from the tube model, cathode fixed at
  its DC voltage by the bypass capacitor).
Tolerance: 10 mV on swings of about 85 V — the onsets are root-found to
~1e-10 relative, so only solver tolerances (1e-9 V) remain.
"""

from __future__ import annotations

import math

import pytest
from scipy.optimize import brentq

from chain.headroom import CUTOFF, GRID_CONDUCTION, headroom
from chain.tubes import grid_current, plate_current

VB, RL, RG, RS, RSRC = 300.0, 100e3, 470e3, 10e3, 1e3
RLEAK = 1e6  # V1's own grid leak
TOL_V = 0.010


@pytest.fixture(scope="module")
def result(one_stage):
    _, circuit, dc = one_stage
    return circuit, dc, headroom(circuit, dc, level_v=0.01, spectrum=False)


def test_cutoff_swing_is_the_rail_minus_the_leakage(result):
    circuit, dc, hr = result
    row = hr.stage("V1")
    point = dc.points["V1"]
    vq, iq = point.vp_v, point.ip_a
    vc = dc.capacitors["couple.V1-output.C"].v
    frac = hr.cutoff_fraction
    vp_cut = (VB / RL + vc / RG - frac * iq) / (1 / RL + 1 / RG)
    vp_zero = (VB / RL + vc / RG) / (1 / RL + 1 / RG)
    assert row.negative.mechanism == CUTOFF  # a negative grid swing cuts the tube off
    assert row.swing_pos_v == pytest.approx(vp_cut - vq, abs=TOL_V)
    assert row.negative.cutoff.output_v == pytest.approx(vp_cut - vq, abs=TOL_V)
    # and within f·Iq·(RL ∥ RG) of the Ip = 0 limit
    assert row.swing_pos_v == pytest.approx(vp_zero - vq, abs=frac * iq * RL * RG / (RL + RG) + TOL_V)


def test_grid_conduction_swing_on_the_vgk_zero_curve(result):
    circuit, dc, hr = result
    row = hr.stage("V1")
    model = circuit.triode("V1").model
    point = dc.points["V1"]
    vq, vk = point.vp_v, point.vk_v
    vc = dc.capacitors["couple.V1-output.C"].v

    def kcl(vp):
        return (VB - vp) / RL - float(plate_current(model, vp - vk, 0.0)) - (vp - vc) / RG

    vp_grid = brentq(kcl, vk + 1.0, vq, xtol=1e-9)
    assert row.positive.mechanism == GRID_CONDUCTION
    assert row.swing_neg_v == pytest.approx(vp_grid - vq, abs=TOL_V)


def test_grid_conduction_input_level_from_the_grid_circuit(result):
    # At Vgk = 0 the grid pin sits at the (held) cathode voltage; the grid
    # current Ig(0) of the tube model flows through the stopper, so the top of
    # the grid leak is at Vk + Ig·Rs, and the source EMF adds the drop of the
    # leak and grid current through the source resistance (Ohm's and
    # Kirchhoff's laws).
    circuit, dc, hr = result
    model = circuit.triode("V1").model
    ig = float(grid_current(model, model.grid_onset_v))
    vk = dc.points["V1"].vk_v
    v_in = vk + ig * RS
    emf = v_in + (v_in / RLEAK + ig) * RSRC
    onset = hr.stage("V1").positive.grid
    assert onset.stage_input_v == pytest.approx(v_in, abs=1e-6)
    assert onset.input_v == pytest.approx(emf, abs=1e-6)
    assert hr.first.stage == "V1" and hr.first.first is onset
    # margin at the stated 10 mV: 20·log10(clip level / stated level)
    assert hr.stage("V1").margin_db == pytest.approx(20 * math.log10(emf / 0.01), abs=1e-5)
