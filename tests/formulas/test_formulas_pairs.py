"""Closed forms of the two-triode stages (chain/formulas/kinds/cathodyne.py and
long_tailed_pair.py) against the published results and against two
independent solves of the same circuit.

Symbolic checks use ``sympy.simplify(got - expected) == 0`` on the mid-band
forms; the published forms are quoted with their source beside each check.
Numeric checks compare the full model (interelectrode capacitances
included) at 1 kHz with the fast engine's stage table and with the flat
lcapy solve of the whole circuit, to 1e-6 relative.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

sympy = pytest.importorskip("sympy")
pytest.importorskip("lcapy")

from chain.analysis import analyze_design  # noqa: E402
from chain.build import load_text  # noqa: E402
from chain.errors import FormulaError  # noqa: E402
from chain.formulas import flat_solve, stage_formulas, stage_parts  # noqa: E402
from chain.formulas.kinds.cathodyne import CathodyneParts  # noqa: E402
from chain.formulas.kinds.long_tailed_pair import PairParts  # noqa: E402

MU, RP = 60.0, 17e3  # a 12AT7-like operating point (any positive numbers would do)
RTOL = 1e-6


def _is_zero(expr) -> bool:
    return sympy.simplify(expr) == 0


def _par(a, b):
    return a * b / (a + b)


# --------------------------------------------------------------------------- cathodyne, published forms


def test_cathodyne_midband_forms_are_the_valve_text_results():
    """From memory of M. Jones, "Valve Amplifiers", the cathodyne section:
    ``A_p = −mu·R_L/(r_p + R_L + (mu+1)·R_k)``, ``A_k = mu·R_k/(…same…)``,
    ``Z_p = R_L ∥ (r_p + (mu+1)·R_k)``, ``Z_k = R_k ∥ (r_p + R_L)/(mu+1)``;
    the grid leak to ground is the input impedance; the balance
    ``A_k/A_p = −R_k/R_L``."""
    f = stage_formulas(CathodyneParts("PI", MU, RP, rl_ohm=22e3, rk_ohm=22e3, rg_ohm=1e6))
    mu, rp, rl, rk, rg = (f.symbols[n] for n in ("mu", "r_p", "R_L", "R_k", "R_g"))
    den = rp + rl + (mu + 1) * rk
    assert _is_zero(f.formula("gain_plate").midband - (-mu * rl / den))
    assert _is_zero(f.formula("gain_cathode").midband - (mu * rk / den))
    assert _is_zero(f.formula("balance").midband - (-rk / rl))
    assert _is_zero(f.formula("zout_plate").midband - _par(rl, rp + (mu + 1) * rk))
    assert _is_zero(f.formula("zout_cathode").midband - _par(rk, (rp + rl) / (mu + 1)))
    assert _is_zero(f.formula("zin").midband - rg)
    # equal loads: gains just under one, equal and opposite; output impedances very unequal
    gp, gk = f.formula("gain_plate").midband_value, f.formula("gain_cathode").midband_value
    assert 0.9 < gk < 1.0 and gp == pytest.approx(-gk, rel=1e-12)
    assert f.formula("zout_cathode").midband_value < 0.05 * f.formula("zout_plate").midband_value


def test_cathodyne_external_loads_enter_in_parallel_with_each_load():
    """The same source: each load in parallel with its external load
    (``R_L' = R_L ∥ R_loadp``, ``R_k' = R_k ∥ R_loadk``) in the gains; the
    plate's output impedance sees ``R_k'`` (the cathode's load stays on)."""
    f = stage_formulas(CathodyneParts("PI", MU, RP, rl_ohm=22e3, rk_ohm=27e3, rload_p_ohm=220e3,
                                      rload_k_ohm=470e3))
    mu, rp, rl, rk, lp, lk = (f.symbols[n] for n in ("mu", "r_p", "R_L", "R_k", "R_loadp", "R_loadk"))
    rl_, rk_ = _par(rl, lp), _par(rk, lk)
    den = rp + rl_ + (mu + 1) * rk_
    assert _is_zero(f.formula("gain_plate").midband - (-mu * rl_ / den))
    assert _is_zero(f.formula("gain_cathode").midband - (mu * rk_ / den))
    assert _is_zero(f.formula("zout_plate").midband - _par(rl, rp + (mu + 1) * rk_))
    assert _is_zero(f.formula("zout_cathode").midband - _par(rk, (rp + rl_) / (mu + 1)))


def test_cathodyne_bootstrapped_grid_leak_multiplies_the_input_impedance():
    """Grid leak returned to the tap between R_k and R_t: the leak is
    bootstrapped, ``Z_in ≈ R_g/(1 − A_k·R_t/(R_k + R_t))`` (Miller's
    theorem; common practice), ``A_k`` the cathode gain with the whole
    cathode load ``R_k + R_t`` (M. Jones, as above).  The approximation
    leaves out the leak's own current into the tap: agreement to 1 %."""
    rl, rk, rt, rg = 47e3, 1.5e3, 47e3, 1e6
    f = stage_formulas(CathodyneParts("PI", MU, RP, rl_ohm=rl, rk_ohm=rk, rt_ohm=rt, rg_ohm=rg), symbolic=False)
    ak = MU * (rk + rt) / (RP + rl + (MU + 1) * (rk + rt))
    expected = rg / (1.0 - ak * rt / (rk + rt))
    assert f.formula("zin").midband_value == pytest.approx(expected, rel=0.01)
    assert f.formula("zin").midband_value > 10 * rg
    # the gains are those of the whole cathode load, to the same 1 %
    assert f.formula("gain_cathode").midband_value == pytest.approx(ak, rel=0.01)


# --------------------------------------------------------------------------- long-tailed pair, published forms


def _equal_halves(f):
    """Substitutions making the two triodes and plate loads equal."""
    sy = f.symbols
    mu, rp, rl = sympy.symbols("mu r_p R_L", positive=True)
    subs = {sy["mu_1"]: mu, sy["mu_2"]: mu, sy["r_p1"]: rp, sy["r_p2"]: rp, sy["R_L1"]: rl, sy["R_L2"]: rl}
    return subs, mu, rp, rl, sy["R_t"]


def test_long_tailed_pair_midband_forms_are_the_valve_text_results():
    """Equal halves, tail only, grid 2 at AC ground.  From memory of M. Jones,
    "Valve Amplifiers" (the long-tailed pair), as in
    tests/smallsignal/test_pairs.py: ``A_1 = −mu·R_L·(r_p + R_L + (mu+1)·R_t)/D``,
    ``A_2 = mu·(mu+1)·R_L·R_t/D``, ``D = (r_p + R_L)·(r_p + R_L + 2·(mu+1)·R_t)``,
    balance ``A_2/A_1 = −(mu+1)·R_t/(r_p + R_L + (mu+1)·R_t)``.
    Differential and common-mode gains with the definitions of Gray, Hurst,
    Lewis and Meyer, "Analysis and Design of Analog Integrated Circuits"
    (differential pair; from memory): ``A_dm = −mu·R_L/(r_p + R_L)``,
    ``A_cm = −mu·R_L/(r_p + R_L + 2·(mu+1)·R_t)``.  Output impedance at a
    plate: ``R_L ∥ (r_p + (mu+1)·(R_t ∥ (r_p + R_L)/(mu+1)))`` (the
    common-cathode result with the other triode's cathode impedance in the
    tail; common practice)."""
    f = stage_formulas(PairParts("PI", MU, RP, MU, RP, rl1_ohm=100e3, rl2_ohm=100e3, rt_ohm=10e3,
                                 rg1_ohm=1e6, rg2_ohm=1e6, cg2_f=1e-6))
    subs, mu, rp, rl, rt = _equal_halves(f)

    def mid(name):
        return f.formula(name).midband.subs(subs)

    d = (rp + rl) * (rp + rl + 2 * (mu + 1) * rt)
    assert _is_zero(mid("gain_plate1") - (-mu * rl * (rp + rl + (mu + 1) * rt) / d))
    assert _is_zero(mid("gain_plate2") - (mu * (mu + 1) * rl * rt / d))
    assert _is_zero(mid("balance") - (-(mu + 1) * rt / (rp + rl + (mu + 1) * rt)))
    assert _is_zero(mid("gain_diff") - (-mu * rl / (rp + rl)))
    assert _is_zero(mid("gain_cm") - (-mu * rl / (rp + rl + 2 * (mu + 1) * rt)))
    zk = _par(rt, (rp + rl) / (mu + 1))
    for port in ("zout_plate1", "zout_plate2"):
        assert _is_zero(mid(port) - _par(rl, rp + (mu + 1) * zk))


def test_long_tailed_pair_balance_approaches_antiphase_as_the_tail_grows():
    """A longer tail gives better balance, |A_2/A_1| → 1 (0 dB) at 180°, and a
    smaller common-mode gain (M. Jones, as above)."""
    imbalances, common = [], []
    for rt in (2.2e3, 10e3, 47e3, 220e3):
        f = stage_formulas(PairParts("PI", MU, RP, MU, RP, rl1_ohm=100e3, rl2_ohm=100e3, rt_ohm=rt),
                           symbolic=False)
        b = f.formula("balance").midband_value
        imbalances.append(-20 * math.log10(abs(b)))
        common.append(abs(f.formula("gain_cm").midband_value))
        assert b < 0
    assert all(x > 0 for x in imbalances) and imbalances == sorted(imbalances, reverse=True)
    assert common == sorted(common, reverse=True)
    assert imbalances[-1] < 0.2


def test_bad_pair_parts_are_refused():
    with pytest.raises(FormulaError) as info:
        PairParts("PI", MU, RP, MU, RP, rl1_ohm=100e3, rl2_ohm=-1.0, rt_ohm=10e3)
    assert info.value.diagnostics[0].code == "E520"


# --------------------------------------------------------------------------- against the engine and flat lcapy

CATHODYNE = """\
title "cathodyne formulas"
supply HT 300V
input into PI ideal
stage PI cathodyne 12AT7
  plate 22k from HT
  cathode 1k tail 22k
  grid leak 1M stopper 10k
output PI load 470k
"""

LTP = """\
title "long-tailed pair formulas"
supply HT 350V
input into PI ideal
stage PI long-tailed-pair 12AX7
  plate 82k from HT
  second plate 100k from HT
  cathode 1k tail 10k
  grid leak 1M stopper 10k
  second grid leak 1M bypass 100n
output PI.plate1 load 330k and PI.plate2 load 220k
"""


def _solved(text):
    design, circuit, warnings = load_text(text)
    a = analyze_design(design, circuit, warnings, headroom=False)
    return a, stage_formulas(stage_parts(a.circuit, a.dc, "PI"), symbolic=False, f_hz=1000.0)


@pytest.mark.parametrize("text, gains, zouts", [
    (CATHODYNE, ("gain_plate", "gain_cathode"), ("zout_plate", "zout_cathode")),
    (LTP, ("gain_plate1", "gain_plate2"), ("zout_plate1", "zout_plate2")),
], ids=["cathodyne", "long-tailed-pair"])
def test_full_model_agrees_with_the_engine_and_the_flat_lcapy_solve(text, gains, zouts):
    """The stage fed by an ideal source and loaded by the chain's outputs is
    the stage alone: the formulas' full model at 1 kHz must equal the
    engine's stage row (gain per port, output impedance per port, input
    impedance, balance) and the flat lcapy solve's node voltages."""
    a, f = _solved(text)
    ref = a.design.settings.reference_hz
    assert ref == 1000.0
    (row,) = a.stages
    for port, name in zip(row.outputs, gains):
        np.testing.assert_allclose(f.formula(name).value, port.gain, rtol=RTOL)
    for port, name in zip(row.outputs, zouts):
        np.testing.assert_allclose(f.formula(name).value, port.zout_ohm, rtol=RTOL)
    np.testing.assert_allclose(f.formula("zin").value, row.zin_ohm, rtol=RTOL)
    np.testing.assert_allclose(f.formula("balance").value, row.balance, rtol=RTOL)
    nodes = [port.node for port in row.outputs]
    flat = flat_solve(a.circuit, a.dc, nodes)
    for node, name in zip(nodes, gains):
        np.testing.assert_allclose(f.formula(name).value, flat.at(node, 1000.0)[0], rtol=RTOL)


def test_pair_parts_follow_the_text():
    a, f = _solved(LTP)
    p = f.parts
    assert (p.rl1_ohm, p.rl2_ohm, p.rk_ohm, p.rt_ohm) == (82e3, 100e3, 1e3, 10e3)
    assert (p.rg1_ohm, p.rg2_ohm, p.rs1_ohm, p.rs2_ohm, p.cg2_f) == (1e6, 1e6, 10e3, None, 100e-9)
    assert (p.rload1_ohm, p.rload2_ohm) == (330e3, 220e3)
    op1, op2 = (a.dc.points[n] for n in a.circuit.stage("PI").triodes)
    assert (p.mu1, p.rp1_ohm, p.mu2, p.rp2_ohm) == (op1.mu, op1.rp_ohm, op2.mu, op2.rp_ohm)
    c, fc = _solved(CATHODYNE)
    q = fc.parts
    assert (q.rl_ohm, q.rk_ohm, q.rt_ohm, q.rg_ohm, q.rs_ohm, q.rload_p_ohm, q.rload_k_ohm) == (
        22e3, 1e3, 22e3, 1e6, 10e3, 470e3, 470e3)
