"""Two-triode stages against the published closed forms of the valve texts.

Each check solves a netlist end to end (DC operating point, linearisation,
response) and compares the gains and output impedances at each output
with the textbook formulas evaluated at the solved ``mu`` and ``rp``.  The
tube is defined without interelectrode capacitances so that the mid-band
formulas hold exactly at 1 kHz (all other capacitors are large).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from chain.analysis import analyze_design
from chain.build import load_text
from chain.smallsignal import output_balance


def _analysed(text: str):
    design, circuit, warnings = load_text(text)
    return analyze_design(design, circuit, warnings, headroom=False)


def _par(*rs: float) -> float:
    return 1.0 / sum(1.0 / r for r in rs)


CATHODYNE = """\
title "cathodyne check"
supply HT 300V
tube T like 12AU7 cgk 0 cgp 0 cpk 0
input into PI ideal
stage PI cathodyne T
  plate {rl} from HT
  cathode {rk}
  grid leak 1M
output PI load {load}
"""


@pytest.mark.parametrize("rl, rk, load", [(22e3, 22e3, 470e3), (47e3, 47e3, 1e9), (22e3, 27e3, 220e3)],
                         ids=["22k-22k", "47k-47k-unloaded", "22k-27k"])
def test_cathodyne_gains_and_output_impedances_match_the_valve_texts(rl, rk, load):
    """Split-load inverter with the grid driven from an ideal source.

    Standard valve-text results (from memory of M. Jones, "Valve
    Amplifiers", the cathodyne section; the same algebra as the
    common-cathode stage with an unbypassed cathode resistor):
    ``A_p = −mu·R_L' / (r_p + R_L' + (mu+1)·R_k')``,
    ``A_k = mu·R_k' / (r_p + R_L' + (mu+1)·R_k')`` with each load in
    parallel with the external one; output impedances
    ``Z_p = R_L ∥ (r_p + (mu+1)·R_k')`` and ``Z_k = R_k ∥ (r_p + R_L')/(mu+1)``.
    """
    a = _analysed(CATHODYNE.format(rl=rl, rk=rk, load=load))
    op = a.dc.points["PI"]
    mu, rp = op.mu, op.rp_ohm
    rl_, rk_ = _par(rl, load), _par(rk, load)
    den = rp + rl_ + (mu + 1.0) * rk_
    (row,) = a.stages
    plate, cathode = row.outputs
    assert (plate.port, cathode.port) == ("plate", "cathode")
    np.testing.assert_allclose(plate.gain, -mu * rl_ / den, rtol=1e-6)
    np.testing.assert_allclose(cathode.gain, mu * rk_ / den, rtol=1e-6)
    np.testing.assert_allclose(plate.zout_ohm, _par(rl, rp + (mu + 1.0) * rk_), rtol=1e-6)
    np.testing.assert_allclose(cathode.zout_ohm, _par(rk, (rp + rl_) / (mu + 1.0)), rtol=1e-6)
    # the textbook picture: gains under one (just under for equal, lightly loaded halves),
    # the output impedances very unequal
    assert abs(plate.gain) < 1.0 and abs(cathode.gain) < 1.0
    if rl == rk and load >= 470e3:
        assert abs(plate.gain) > 0.8 and abs(cathode.gain) > 0.8
    assert abs(cathode.zout_ohm) < 0.2 * abs(plate.zout_ohm)


def test_equal_loads_give_equal_and_opposite_cathodyne_outputs():
    """With R_L = R_k and equal external loads the two outputs carry the same
    current, so they are equal and in antiphase (common practice; it follows
    from the formulas above)."""
    a = _analysed(CATHODYNE.format(rl=22e3, rk=22e3, load=470e3))
    (row,) = a.stages
    assert abs(row.balance_db) < 1e-9
    assert abs(abs(row.balance_deg) - 180.0) < 1e-6


LTP = """\
title "long-tailed pair check"
supply HT 350V
tube T like 12AU7 cgk 0 cgp 0 cpk 0
input into PI ideal
stage PI long-tailed-pair T
  plate {rl} from HT
  second plate {rl} from HT
  cathode {rt}
  grid leak 1M
  second grid leak 1M bypass 100u
output PI.plate1 load {load} and PI.plate2 load {load}
"""


def _ltp_reference(mu, rp, rl, rt):
    """Per-side gains of a long-tailed pair, grid 1 driven, grid 2 at AC ground.

    From memory of M. Jones, "Valve Amplifiers" (the long-tailed pair),
    checked here by solving the two triodes' linear model with sympy:
    ``A_1 = −mu·R_L·(r_p + R_L + (mu+1)·R_t) / D`` and
    ``A_2 = mu·(mu+1)·R_L·R_t / D`` with ``D = (r_p + R_L)·(r_p + R_L + 2·(mu+1)·R_t)``.
    The ratio ``A_2/A_1 = −(mu+1)·R_t / (r_p + R_L + (mu+1)·R_t)`` tends
    to −1 as the tail grows.
    """
    d = (rp + rl) * (rp + rl + 2.0 * (mu + 1.0) * rt)
    return -mu * rl * (rp + rl + (mu + 1.0) * rt) / d, mu * (mu + 1.0) * rl * rt / d


@pytest.mark.parametrize("rt", [4.7e3, 10e3, 22e3, 47e3])
def test_long_tailed_pair_gains_match_the_valve_texts(rt):
    rl, load = 100e3, 1e6
    a = _analysed(LTP.format(rl=rl, rt=rt, load=load))
    pa, pb = a.dc.points["PIa"], a.dc.points["PIb"]
    # equal loads and both grids at 0 V DC: the two triodes sit at one operating point
    np.testing.assert_allclose([pa.ip_a, pa.vp_v], [pb.ip_a, pb.vp_v], rtol=1e-6)
    a1, a2 = _ltp_reference(pa.mu, pa.rp_ohm, _par(rl, load), rt)
    (row,) = a.stages
    p1, p2 = row.outputs
    assert (p1.port, p2.port) == ("plate1", "plate2")
    np.testing.assert_allclose(p1.gain, a1, rtol=1e-5)
    np.testing.assert_allclose(p2.gain, a2, rtol=1e-5)


def test_long_tailed_pair_imbalance_shrinks_as_the_tail_grows():
    """Imbalance ``|A_2/A_1|`` in dB against the closed form, and its trend:
    a longer tail gives better balance (standard valve texts, from memory of
    M. Jones, "Valve Amplifiers")."""
    rl, load = 100e3, 1e6
    imbalances = []
    for rt in (2.2e3, 4.7e3, 10e3, 22e3, 47e3):
        a = _analysed(LTP.format(rl=rl, rt=rt, load=load))
        p = a.dc.points["PIa"]
        (row,) = a.stages
        rl_ = _par(rl, load)
        expected = (p.mu + 1.0) * rt / (p.rp_ohm + rl_ + (p.mu + 1.0) * rt)
        np.testing.assert_allclose(row.balance_db, 20.0 * math.log10(expected), atol=1e-5)
        assert abs(abs(row.balance_deg) - 180.0) < 1e-3
        imbalances.append(-row.balance_db)
    assert all(x > 0 for x in imbalances)
    assert imbalances == sorted(imbalances, reverse=True)


def test_balance_over_frequency_tracks_the_second_grid_bypass():
    """The grid leaks return to the tap between bias and tail resistor; with
    a small second-grid capacitor that grid follows the tap at low
    frequencies instead of sitting at AC ground: the second output shrinks
    and the balance departs from antiphase there, and returns to it above
    the corner of the capacitor against the grid leak, ``1/(2π·1M·10n)``
    ≈ 16 Hz (common practice)."""
    text = LTP.format(rl=100e3, rt="1k tail 22k", load=1e6).replace("bypass 100u", "bypass 10n")
    a = _analysed(text)
    (st,) = a.circuit.stages
    bal = output_balance(a.freq, st)
    f = a.freq.f_hz
    low, high = bal[np.argmin(abs(f - 10.0))], bal[np.argmin(abs(f - 10e3))]
    assert abs(abs(np.degrees(np.angle(high))) - 180.0) < 1.0
    assert abs(abs(np.degrees(np.angle(low))) - 180.0) > 5.0
    assert abs(low) < abs(high) - 0.05
    assert output_balance(a.freq, st) is not None


def test_a_single_output_stage_has_no_balance():
    a = _analysed(CATHODYNE.format(rl=22e3, rk=22e3, load=470e3).replace("cathodyne", "common-cathode"))
    (row,) = a.stages
    assert row.balance is None and row.balance_db is None and len(row.outputs) == 1
    assert output_balance(a.freq, a.circuit.stages[0]) is None
