"""Noise at the output by the adjoint solve (chain.smallsignal.noise), checked
against standard results: Johnson–Nyquist 4kTR, kT/C of an RC low-pass, the
IEC 61672-1 A-weighting table, and the hand formula of a common-cathode
stage's input-referred noise."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose

from chain.build import load
from chain.circuit import GROUND, Owner, Role
from chain.dc import solve as dc_solve
from chain.smallsignal import linearize
from chain.smallsignal.mna import assemble
from chain.smallsignal.noise import (
    BOLTZMANN_J_K,
    a_weighting_db,
    band_power,
    noise,
    noise_sources,
)
from ss_circuits import Net, dc_of

T = 300.0
KT = BOLTZMANN_J_K * T


def divider(r_top: float, r_bottom: float | None = None, c_f: float | None = None):
    net = Net()
    net.signal("input.emf")
    net.r("input.R", "input.emf", "out", r_top)
    if r_bottom is not None:
        net.r("output.load", "out", GROUND, r_bottom)
    if c_f is not None:
        net.c("input.C", "out", GROUND, c_f)
    return linearize(net.circuit("out", "out"), dc_of())


def test_single_resistor_density_is_4ktr():
    # Johnson–Nyquist: open-circuit noise density of a resistor, 4kTR V²/Hz (standard result)
    r = 47e3
    n = noise(divider(r), f_hz=np.geomspace(20, 20e3, 31), temperature_k=T)
    assert_allclose(n.output_psd_v2_hz, 4 * KT * r, rtol=1e-9)
    # 4kTR over 20 Hz–20 kHz: the band power is exactly the density times the bandwidth
    assert_allclose(n.output_rms_v ** 2, 4 * KT * r * (20e3 - 20.0), rtol=1e-9)


def test_two_resistors_density_is_4kt_times_parallel():
    # two resistors in parallel at the output: 4kT·(R1 ∥ R2) (standard result)
    n = noise(divider(10e3, 40e3), f_hz=np.array([100.0, 1e3]), temperature_k=T)
    assert_allclose(n.output_psd_v2_hz, 4 * KT * 8e3, rtol=1e-9)
    assert [c.fraction for c in n.contributors] == pytest.approx([0.8, 0.2])


def test_rc_lowpass_total_is_kt_over_c():
    # total noise of R into C integrated over all frequencies: kT/C (standard result, independent of R)
    c = 10e-9
    for r in (1e3, 100e3):
        fc = 1 / (2 * np.pi * r * c)
        f = np.geomspace(fc * 1e-5, fc * 1e5, 4001)
        n = noise(divider(r, c_f=c), f_hz=f, band_hz=(f[0], f[-1]), temperature_k=T)
        assert_allclose(n.output_rms_v ** 2, KT / c, rtol=2e-4)


@pytest.mark.parametrize("nominal_hz, db", [(31.5, -39.4), (1000.0, 0.0), (10e3, -2.5)])
def test_a_weighting_against_iec_61672_table(nominal_hz, db):
    # IEC 61672-1:2013 table 3, A-weighting, given to 0.1 dB at the exact base-ten frequencies
    # 1 kHz·10^(n/10) of the nominal ones (31.5 Hz nominal is 31.62 Hz exact)
    exact = 1000.0 * 10 ** (round(10 * np.log10(nominal_hz / 1000.0)) / 10)
    assert a_weighting_db(exact) == pytest.approx(db, abs=0.05)


def test_band_power_of_a_flat_density():
    f = np.geomspace(20, 20e3, 101)
    assert band_power(f, np.ones_like(f), (20, 20e3)) == pytest.approx(20e3 - 20, rel=1e-3)


def test_adjoint_matches_one_forward_solve_per_source():
    # the transposed solve gives the same transfer as injecting each source's current directly
    design, circuit, _ = load("netlists/clean_two_stage.chain")
    ss = linearize(circuit, dc_solve(circuit))
    f = np.array([50.0, 1e3, 15e3])
    n = noise(ss, f_hz=f, reference_hz=1e3, temperature_k=T, flicker_corner_hz=300.0)
    mna = assemble(ss)
    out = mna.index[ss.node_of[ss.output_node]]
    total = np.zeros(f.size)
    for src in noise_sources(ss, temperature_k=T, flicker_corner_hz=300.0):
        b = np.zeros(mna.size)
        if mna.index[src.a] >= 0:
            b[mna.index[src.a]] += 1.0
        if mna.index[src.b] >= 0:
            b[mna.index[src.b]] -= 1.0
        for k, fk in enumerate(f):
            x = np.linalg.solve(mna.g + 2j * np.pi * fk * mna.c, b)
            total[k] += abs(x[out]) ** 2 * src.psd(np.array([fk]))[0]
    assert_allclose(n.output_psd_v2_hz, total, rtol=1e-8)


CC = """\
title "one stage"
set reference 1kHz
supply HT 250V
input into V1 ideal
stage V1 common-cathode 12AX7
  plate {ra} from HT
  cathode 1k5 bypass 10m
  grid leak 1M stopper {rs}
couple V1 -> output cap 10u
output load {rl}
"""


@pytest.mark.parametrize("ra, rs, rl, fc", [(100e3, 1e3, 1e6, 0.0), (220e3, 10e3, 470e3, 500.0)])
def test_common_cathode_input_noise_against_hand_formula(tmp_path, ra, rs, rl, fc):
    # Hand formula for a bypassed common-cathode stage driven by an ideal source through a grid
    # stopper Rs (standard valve noise analysis, from memory of M. Jones, "Valve Amplifiers"):
    #   e_in² = 4kT·[Rs + F/gm·(1 + fc/f) + (1/Ra + 1/RL)/gm²]
    # the plate load and the output load each add a current 4kT/R at the plate, referred to the
    # grid through gm; the grid leak is shorted by the ideal source; bypass and coupling caps are
    # shorts at 1 kHz.  F = 2.5 (triode equivalent noise resistance, from memory of standard valve texts).
    path = tmp_path / "cc.chain"
    path.write_text(CC.format(ra=ra, rs=rs, rl=rl))
    design, circuit, _ = load(path)
    ss = linearize(circuit, dc_solve(circuit))
    gm = ss.triodes[0].gm_s
    n = noise(ss, reference_hz=1e3, f_hz=np.array([1e3]), temperature_k=T, grid_noise_factor=2.5,
              flicker_corner_hz=fc)
    hand = 4 * KT * (rs + 2.5 / gm * (1 + fc / 1e3) + (1 / ra + 1 / rl) / gm ** 2)
    assert n.input_density_ref_v ** 2 == pytest.approx(hand, rel=5e-3)


def test_contributors_are_named_by_owner_and_role():
    design, circuit, _ = load("netlists/lead_four_stage.chain")
    ss = linearize(circuit, dc_solve(circuit))
    n = noise(ss, reference_hz=1e3, level_v=0.15)
    assert sum(c.fraction for c in n.contributors) == pytest.approx(1.0)
    assert sum(c.fraction_a for c in n.contributors) == pytest.approx(1.0)
    top = n.contributors[0]
    # a 68k grid stopper in front of a gain of ~10⁴ dominates the hiss (common practice)
    assert (top.owner, top.role) == (Owner("stage", "V1"), Role.GRID_STOPPER)
    assert top.label == "V1 grid stopper"
    # no plate resistance among the sources: the tube's noise is its own entry
    assert all(c.role != Role.PLATE_RESISTANCE for c in n.contributors)
    assert any(c.role == Role.TRIODE and c.owner == Owner("stage", "V4") for c in n.contributors)
    # the A-weighted total of hiss whose density is flat or falling is below the unweighted one
    assert n.output_rms_a_v < n.output_rms_v * 1.1
    assert n.snr_db == pytest.approx(20 * np.log10(0.15 / np.sqrt(2) * n.gain_ref / n.output_rms_v))
