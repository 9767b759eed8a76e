"""Per-stage closed forms solved by lcapy, checked against published results.

Symbolic checks use ``sympy.simplify(got - expected) == 0``; the expected
forms are the standard small-signal results for a triode modelled as
``mu·vgk`` behind ``rp`` (from memory of M. Jones, "Valve Amplifiers",
chapters on the common-cathode stage, the cathode follower and the
grounded-grid stage).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

sympy = pytest.importorskip("sympy")
pytest.importorskip("lcapy")

from chain.errors import FormulaError  # noqa: E402
from chain.formulas import StageParts, stage_formulas  # noqa: E402

MU, RP = 100.0, 62.5e3
CAPS = dict(cgk_f=1.6e-12, cgp_f=1.7e-12, cpk_f=0.46e-12)


def _sym(f, *names):
    return [f.symbols[n] for n in names]


def _is_zero(expr) -> bool:
    return sympy.simplify(expr) == 0


def test_common_cathode_unbypassed_gain():
    # A = -mu·RL / (RL + rp + (mu+1)·Rk)   (Jones, common-cathode stage, from memory)
    f = stage_formulas(StageParts("V1", "common-cathode", MU, RP, rl_ohm=100e3, rk_ohm=1.5e3))
    mu, rp, rl, rk = _sym(f, "mu", "r_p", "R_L", "R_k")
    assert _is_zero(f.gain.midband - (-mu * rl / (rl + rp + (mu + 1) * rk)))
    # with no capacitor at all the s-domain form is the same expression
    assert _is_zero(f.gain.s_expr - f.gain.midband)


def test_common_cathode_bypassed_gain_midband_and_low_frequency_limit():
    # mid-band (Ck a short): A = -mu·RL / (RL + rp)   (Jones, from memory)
    f = stage_formulas(StageParts("V1", "common-cathode", MU, RP, rl_ohm=100e3, rk_ohm=1.5e3,
                                  ck_f=22e-6))
    mu, rp, rl, rk = _sym(f, "mu", "r_p", "R_L", "R_k")
    assert _is_zero(f.gain.midband - (-mu * rl / (rl + rp)))
    # s-domain form with Ck: s -> infinity gives the bypassed gain, s -> 0 the
    # unbypassed one (the capacitor is a short / open at those limits)
    s = f.s
    assert _is_zero(sympy.limit(f.gain.s_expr, s, sympy.oo) - (-mu * rl / (rl + rp)))
    assert _is_zero(sympy.limit(f.gain.s_expr, s, 0) - (-mu * rl / (rl + rp + (mu + 1) * rk)))


def test_common_cathode_output_impedance():
    # Zout at the plate = RL ∥ (rp + (mu+1)·Rk)   (Jones, from memory)
    f = stage_formulas(StageParts("V1", "common-cathode", MU, RP, rl_ohm=100e3, rk_ohm=1.5e3))
    mu, rp, rl, rk = _sym(f, "mu", "r_p", "R_L", "R_k")
    ra = rp + (mu + 1) * rk
    assert _is_zero(f.zout.midband - rl * ra / (rl + ra))


def test_cathode_follower_gain_and_output_impedance():
    # A = mu·Rk / (rp + (mu+1)·Rk);  Zout = rp/(mu+1) ∥ Rk   (Jones, from memory)
    f = stage_formulas(StageParts("V2", "cathode-follower", MU, RP, rk_ohm=100e3, rg_ohm=1e6))
    mu, rp, rk = _sym(f, "mu", "r_p", "R_k")
    assert _is_zero(f.gain.midband - mu * rk / (rp + (mu + 1) * rk))
    r_look = rp / (mu + 1)
    assert _is_zero(f.zout.midband - r_look * rk / (r_look + rk))
    rg, = _sym(f, "R_g")
    assert _is_zero(f.zin.midband - rg)


def test_common_grid_input_impedance_and_gain():
    # Zin at the cathode = (RL + rp)/(mu+1);  A = (mu+1)·RL / (RL + rp)
    # (grounded-grid stage, Jones, from memory)
    f = stage_formulas(StageParts("V3", "common-grid", MU, RP, rl_ohm=100e3))
    mu, rp, rl = _sym(f, "mu", "r_p", "R_L")
    assert _is_zero(f.zin.midband - (rl + rp) / (mu + 1))
    assert _is_zero(f.gain.midband - (mu + 1) * rl / (rl + rp))


def test_numeric_forms_agree_with_symbolic_midband():
    # the numeric-only solve (a different lcapy netlist: numbers, not
    # symbols) must give the symbolic mid-band forms with numbers substituted
    parts = StageParts("V1", "common-cathode", MU, RP, rl_ohm=100e3, rk_ohm=1.5e3, ck_f=22e-6,
                       rkc_ohm=100.0, rg_ohm=1e6, rs_ohm=68e3, rload_ohm=470e3, **CAPS)
    sym = stage_formulas(parts, symbolic=True)
    num = stage_formulas(parts, symbolic=False)
    for q in ("gain", "zin", "zout"):
        assert num.formula(q).midband_value == pytest.approx(sym.formula(q).midband_value, rel=1e-12)
        assert num.formula(q).value == pytest.approx(sym.formula(q).value, rel=1e-12)
    assert num.gain.midband is None and num.gain.text == f"{num.gain.midband_value:.6g}"
    # hand-evaluated mid-band gain: -mu·(RL∥Rload)/(RL∥Rload + rp + (mu+1)·(Rk∥Rkc))
    rl = 100e3 * 470e3 / (100e3 + 470e3)
    rk = 1.5e3 * 100.0 / 1.6e3
    assert sym.gain.midband_value == pytest.approx(-MU * rl / (rl + RP + (MU + 1) * rk), rel=1e-12)


def test_miller_input_capacitance():
    # Miller effect: with no grid leak and no stopper the input is the pure
    # capacitance Cgk + (1 - A)·Cgp, A the (inverting) mid-band gain of the
    # stage with Cpk and Cgp's feed-forward negligible at audio frequencies
    # (J. M. Miller, 1920; restated in Jones, from memory).  The full numeric
    # model must show it to 0.1 % at 1 kHz.
    parts = StageParts("V1", "common-cathode", MU, RP, rl_ohm=100e3, rk_ohm=1.5e3,
                       ck_f=1.0, **CAPS)
    f = stage_formulas(parts, symbolic=False)
    a = -MU * 100e3 / (100e3 + RP)
    c_in = 1.6e-12 + (1 - a) * 1.7e-12
    z = f.zin.at(1000.0)[0]
    assert z.real == pytest.approx(0.0, abs=1e-3 * abs(z))
    assert -1 / (2 * math.pi * 1000.0 * z.imag) == pytest.approx(c_in, rel=1e-3)


def test_formula_at_matches_value_and_is_vectorised():
    parts = StageParts("V1", "common-cathode", MU, RP, rl_ohm=100e3, rk_ohm=1.5e3, ck_f=1e-6,
                       **CAPS)
    f = stage_formulas(parts, symbolic=False, f_hz=250.0)
    h = f.gain.at(np.array([250.0, 2500.0]))
    assert h.shape == (2,) and h[0] == f.gain.value
    # bypass corner: below it the gain falls toward the unbypassed value
    unbypassed = -MU * 100e3 / (100e3 + RP + (MU + 1) * 1.5e3)
    low = f.gain.at(0.01)[0]
    assert low.real == pytest.approx(unbypassed, rel=1e-3)


def test_strings_show_the_forms():
    f = stage_formulas(StageParts("V2", "cathode-follower", MU, RP, rk_ohm=100e3))
    assert f.gain.text == "R_k*mu/((mu + 1)*R_k + r_p)"
    assert f.gain.latex == r"\frac{R_{k} \mu}{\left(\mu + 1\right) R_{k} + r_{p}}"
    assert f.zin.text == "inf"  # no grid leak and no capacitances at mid-band


def test_results_are_cached_on_frozen_parts():
    parts = StageParts("V2", "cathode-follower", MU, RP, rk_ohm=100e3)
    assert stage_formulas(parts) is stage_formulas(parts)


def test_lcapy_failure_becomes_formula_error_with_netlist(monkeypatch):
    broken = "Rbad only_one_node"
    from chain.formulas.kinds import common_cathode
    from chain.formulas.netlist import StageModel

    monkeypatch.setattr(common_cathode, "model", lambda *a, **k: StageModel(broken, {}))
    parts = StageParts("V9", "common-cathode", 42.0, 1e4, rl_ohm=1e5)
    with pytest.raises(FormulaError) as info:
        stage_formulas(parts)
    assert info.value.netlist == broken
    assert info.value.diagnostics[0].code == "E530"
    assert "V9" in str(info.value)
