"""Distortion, first clip, blocking after a burst and rail sag from the time-domain solve.

Sources: a triode common-cathode stage is second-harmonic dominant (common
practice; from memory of M. Jones, "Valve Amplifiers"); a coupling capacitor
charged by grid current during a loud burst leaves the next grid negative
and discharges through the grid leak with τ = C·(R_source + R_leak), R_source
the driving stage's output impedance R_L ∥ r_p for a bypassed stage (common
practice; output impedance from memory of M. Jones, "Valve Amplifiers");
rails sag when the drawn current rises (common practice).
"""

import math

import numpy as np
import pytest

from chain.dc import solve
from chain.headroom import headroom
from chain.transient import compile_transient
from chain.transient.measure import burst, distortion, first_clip, sag, tone_burst

from conftest import circuit_of

BLOCKING = """title "blocking"
supply HT 300V impedance 100
rail B1 from HT drop 4k7 decouple 47u
input into V1 resistance 1k
stage V1 common-cathode 12AX7
  plate 100k from B1
  cathode 1k5 bypass 47u
  grid leak 1M stopper 10k
stage V2 common-cathode 12AX7
  plate 100k from B1
  cathode 1k5
  grid leak 470k stopper 10k
couple V1 -> V2 cap 22n
couple V2 -> output cap 22n
output load 1M
"""


def test_a_single_stage_is_second_harmonic_dominant(one_stage):
    system = compile_transient(one_stage)
    (point,) = distortion(system, [1000.0], [0.3], steps=64)
    h = point.nodes["V1"]
    assert h.level_db[2] > h.level_db[3] + 10.0
    assert 0.001 < h.thd < 0.2
    # the THD is the root-sum-square of the listed harmonics
    assert h.thd == pytest.approx(math.sqrt(sum(10 ** (h.level_db[k] / 10) for k in range(2, 10))), rel=1e-9)


def test_first_clip_at_mid_band_is_near_the_quasi_static_one(one_stage):
    """At 1 kHz the coupling and bypass capacitors are short: the quasi-static clip level holds within 1 dB."""
    dc = solve(one_stage)
    qs = headroom(one_stage, dc, level_v=0.1, spectrum=False).first
    cp = first_clip(compile_transient(one_stage, dc=dc), 1000.0, guess_v=qs.clip_input_v, rel_tol=0.05, steps=48)
    assert cp.stage == qs.stage and cp.mechanism == qs.mechanism
    assert abs(20 * math.log10(cp.level_v / qs.clip_input_v)) < 1.0


def test_tone_burst_has_the_stated_levels():
    u = tone_burst(1000.0, 1.0, 0.01, lead_s=0.005, burst_s=0.01, after_s=0.005, fs_hz=48e3)
    assert np.abs(u).max() == pytest.approx(1.0, rel=1e-3)
    assert np.abs(u[:200]).max() == pytest.approx(0.01, rel=1e-2)
    assert np.abs(u[-200:]).max() == pytest.approx(0.01, rel=1e-2)


def test_burst_blocks_the_next_grid_and_it_recovers_with_the_coupling_time_constant():
    circuit = circuit_of(BLOCKING)
    dc = solve(circuit)
    system = compile_transient(circuit, dc=dc)
    res = burst(system, 1000.0, 0.5, 0.0, lead_s=0.005, burst_s=0.03, after_s=0.06, fs_hz=24e3, oversample=2)
    v2 = next(g for g in res.grids if g.stage == "V2")
    assert v2.coupling == "capacitor"
    assert v2.shift_at_end_v < -1.0  # grid current charged the coupling capacitor: the grid sits negative
    op = dc.points["V1"]
    r_source = 1.0 / (1.0 / 100e3 + 1.0 / op.rp_ohm)  # bypassed stage: R_L ∥ r_p
    tau = 22e-9 * (r_source + 470e3)
    assert v2.recovery_s == pytest.approx(tau, rel=0.15)
    v1 = next(g for g in res.grids if g.stage == "V1")
    assert v1.coupling == "source"


def test_rails_sag_under_drive(one_stage):
    system = compile_transient(one_stage)
    rails = {r.rail: r for r in sag(system, 1000.0, 3.0, steps=64)}
    assert rails["B1"].sag_v > 0.0
    assert rails["B1"].lowest_v < rails["B1"].driven_v < rails["B1"].dc_v
