"""The mid-band capacitor treatment (chain.headroom.network)."""

from __future__ import annotations

import math

import pytest

from chain.headroom import mid_band_capacitors, transfer_curves
from chain.headroom.network import seen_resistances

RL, RK, RLOAD = 100e3, 1.5e3, 470e3


def test_resistances_seen_match_the_textbook_stage_impedances(one_stage):
    # With the other capacitor open (textbook small-signal results, from
    # memory of M. Jones, "Valve Amplifiers"):
    # * the bypass capacitor sees Rk in parallel with the resistance looking
    #   into the cathode, (rp + RL)/(mu + 1), grid at signal ground;
    # * the coupling capacitor sees the plate's output resistance with the
    #   cathode unbypassed, RL ∥ (rp + (mu + 1)·Rk), plus the load it feeds.
    _, circuit, dc = one_stage
    p = dc.points["V1"]
    seen = seen_resistances(circuit, dc)
    into_cathode = (p.rp_ohm + RL) / (p.mu + 1.0)
    assert seen["V1.Ck"] == pytest.approx(1.0 / (1.0 / RK + 1.0 / into_cathode), rel=1e-3)
    plate = 1.0 / (1.0 / RL + 1.0 / (p.rp_ohm + (p.mu + 1.0) * RK))
    assert seen["couple.V1-output.C"] == pytest.approx(plate + RLOAD, rel=1e-3)


def test_classification_by_omega_tau(one_stage):
    _, circuit, dc = one_stage
    seen = seen_resistances(circuit, dc)
    caps = {c.name: c for c in circuit.capacitors}
    # at 1 kHz both capacitors are far above ω·τ = 10: held at their DC voltage
    t = mid_band_capacitors(circuit, dc, f_ref_hz=1000.0)
    assert set(t.held) == {"V1.Ck", "couple.V1-output.C"} and not t.stand_in_ohm and not t.open
    assert t.held["V1.Ck"] == pytest.approx(dc.capacitors["V1.Ck"].v)
    # choose f so the bypass capacitor sits at ω·τ = 1: it becomes a stand-in of 1/(ωC) = R
    f = 1.0 / (2 * math.pi * seen["V1.Ck"] * caps["V1.Ck"].farads)
    t = mid_band_capacitors(circuit, dc, f_ref_hz=f)
    assert t.omega_tau["V1.Ck"] == pytest.approx(1.0)
    assert t.stand_in_ohm["V1.Ck"] == pytest.approx(seen["V1.Ck"], rel=1e-9)
    # far below: open
    t = mid_band_capacitors(circuit, dc, f_ref_hz=f / 20.0)
    assert "V1.Ck" in t.open
    # the caller's choice wins
    t = mid_band_capacitors(circuit, dc, held=["couple.V1-output.C"])
    assert set(t.held) == {"couple.V1-output.C"} and t.open == ("V1.Ck",) and t.chosen_by_caller
    with pytest.raises(ValueError, match="no capacitor"):
        mid_band_capacitors(circuit, dc, held=["nope"])


def test_unbypassed_stage_gain_when_the_bypass_is_left_open(one_stage):
    # common-cathode gain with an unbypassed cathode resistor,
    # A = mu·RL'/(RL' + rp + (mu + 1)·Rk) with RL' = RL ∥ Rload (from memory of
    # M. Jones, "Valve Amplifiers"); the slope of the curve at the origin
    _, circuit, dc = one_stage
    p = dc.points["V1"]
    curves = transfer_curves(circuit, dc, held_caps=["couple.V1-output.C"], max_input_v=1e-3)
    z = curves.zero_index
    x, y = curves.stage_curve("V1")
    slope = (y[z + 1] - y[z - 1]) / (x[z + 1] - x[z - 1])
    rl = 1.0 / (1.0 / RL + 1.0 / RLOAD)
    assert slope == pytest.approx(-p.mu * rl / (rl + p.rp_ohm + (p.mu + 1.0) * RK), rel=2e-3)
