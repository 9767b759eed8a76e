"""Harmonic distortion through triode stages (chain.headroom.distortion)."""

from __future__ import annotations

import numpy as np
import pytest

from chain.headroom import distortion, headroom, thd_versus_level, transfer_curves


def test_triode_low_level_distortion_is_mostly_second_harmonic(one_stage):
    # common practice: a triode stage driven well below clipping makes mainly
    # second harmonic (its curves are roughly a 3/2-power law, an even-order bend)
    _, circuit, dc = one_stage
    dist = distortion(circuit, dc, level_v=0.02)
    out = dist.stage("V1").output
    rel = np.array(out.relative_db)  # h2 … h9 relative to h1
    assert rel[0] == max(rel)
    assert rel[0] - max(rel[1:]) > 20.0
    assert out.thd < 0.01
    # the fundamental is the small-signal gain times the drive, to first order
    s = dist.stage("V1")
    assert s.gain_db == pytest.approx(20 * np.log10(abs(s.small_signal_gain)), abs=0.1)


def test_cathode_follower_distorts_far_less_than_common_cathode_at_same_output(stage_and_follower):
    # common practice: the follower's 100 % local feedback makes its own
    # distortion a small fraction of a common-cathode stage's at the same swing
    _, circuit, dc = stage_and_follower
    assert dc.points["V2"].vgk_v < -0.5  # the follower is biased clear of grid current
    level = 0.2  # about 14 V peak at the stage output
    first = distortion(circuit, dc, level_v=level)
    cc = first.stage("V1")
    y_cc = cc.output.fundamental_v
    # raise the drive so that the follower's output fundamental equals the stage's
    level_cf = level * y_cc / first.stage("V2").output.fundamental_v
    cf = distortion(circuit, dc, level_v=level_cf).stage("V2")
    assert cf.output.fundamental_v == pytest.approx(y_cc, rel=0.02)
    # the stage's own distortion is the 2nd harmonic of a power-law triode
    # Ip ∝ x^n under load R: H2/H1 = (n−1)/(4·x0) · A/(1 + R/rp), with
    # x0 = n·Ip/gm the effective grid voltage and A = v·rp/(rp + R) its swing
    # (derived by hand from the Taylor series of the 3/2-power law, as in any
    # valve text's load-line distortion estimate); within ±25 %
    p = dc.points["V1"]
    n = circuit.triode("V1").model.ex
    r_load = 220e3
    swing = level * p.rp_ohm / (p.rp_ohm + r_load)
    estimate = (n - 1.0) / (4.0 * n * p.ip_a / p.gm_s) * swing / (1.0 + r_load / p.rp_ohm)
    assert cc.own_thd == pytest.approx(estimate, rel=0.25)
    assert cc.own_thd < 0.05
    assert cf.own_thd < 0.1 * cc.own_thd
    # the follower passes the stage's distortion on almost unchanged
    assert cf.output.thd == pytest.approx(cc.output.thd, rel=0.1)


def test_interpolated_curves_agree_with_direct_solves(demo):
    # the THD thresholds read the swept curves; check them against solving
    # every phase point directly (same model, two numerical routes)
    design, circuit, dc = demo["clean_two_stage"]
    curves = transfer_curves(circuit, dc, f_ref_hz=design.settings.reference_hz)
    levels = np.array([0.03, 0.1, 0.2, 0.3])
    overall = thd_versus_level(curves, None, circuit.output_node, levels)
    v2 = circuit.stage("V2")
    own = thd_versus_level(curves, v2.input, v2.output, levels)
    for k, level in enumerate(levels):
        direct = distortion(circuit, dc, level_v=float(level), f_ref_hz=design.settings.reference_hz)
        assert overall[k] == pytest.approx(direct.overall.thd, rel=0.02)
        assert own[k] == pytest.approx(direct.stage("V2").own_thd, rel=0.02)


def test_thd_thresholds_are_where_the_direct_thd_reaches_them(one_stage):
    _, circuit, dc = one_stage
    hr = headroom(circuit, dc, level_v=0.1, spectrum=False)
    row = hr.stage("V1")
    for target, level in zip(hr.thd_levels, row.thd_input_v):
        assert level is not None
        got = distortion(circuit, dc, level_v=level).stage("V1").own_thd
        assert got == pytest.approx(target, rel=0.03)
    # the whole sine reaches a threshold no later than either half-wave alone
    # would suggest for the half that distorts more (the 2nd harmonic comes from
    # the two halves differing): 1 % comes before the grid-conduction onset
    assert row.thd_input_v[0] < row.positive.grid.input_v
