"""The exact nodal solver of a stage's netlist (chain/formulas/nodal.py)
against lcapy solving the same text, and against Ohm's law and the
controlled-source definition on circuits small enough to solve by hand.

lcapy is the independent reference: every node voltage and every source
current must be the same rational function (their difference cancels to 0).
"""

from __future__ import annotations

import pytest

sympy = pytest.importorskip("sympy")
lcapy = pytest.importorskip("lcapy")

from chain.formulas import nodal, stage  # noqa: E402
from chain.formulas.kinds import cathodyne, long_tailed_pair  # noqa: E402
from chain.formulas.kinds.cathodyne import CathodyneParts  # noqa: E402
from chain.formulas.kinds.long_tailed_pair import PairParts  # noqa: E402
from chain.formulas.netlist import single_model  # noqa: E402
from chain.formulas.parts import StageParts  # noqa: E402

# any positive values would do; uneven decimals exercise the exact reading of numbers
PAIR = PairParts("PI", mu1=100.3, rp1_ohm=62123.7, mu2=99.0, rp2_ohm=63e3, rl1_ohm=100e3, rl2_ohm=82e3,
                 rt_ohm=10e3, rk_ohm=1e3, rg1_ohm=1e6, rg2_ohm=1e6, rs1_ohm=1e3, cg2_f=1e-7, rload1_ohm=1e6,
                 cgk_f=1.6e-12, cgp_f=1.7e-12, cpk_f=0.5e-12)
CATHODYNE = CathodyneParts("PI", 60.0, 17e3, rl_ohm=22e3, rk_ohm=22e3, rt_ohm=1.5e3, rg_ohm=1e6,
                           rload_p_ohm=470e3, cgk_f=1.6e-12, cgp_f=1.7e-12, cpk_f=0.46e-12)
SINGLE = StageParts("V1", "common-cathode", 100.0, 62.5e3, rl_ohm=100e3, rk_ohm=1.5e3, ck_f=22e-6,
                    rg_ohm=1e6, rs_ohm=68e3, cgk_f=1.6e-12, cgp_f=1.7e-12, cpk_f=0.46e-12, rload_ohm=1e6)


def _same_as_lcapy(text: str) -> None:
    got = nodal.solve_netlist(text)
    ref = lcapy.Circuit(text)
    assert set(got.nodes) == set(ref.nodes) - {"0"}
    for n in got.nodes:
        assert sympy.cancel(got.V(n) - ref[n].V(lcapy.s).sympy) == 0, n
    for src in got.currents:
        assert sympy.cancel(got.I(src) - ref[src].I(lcapy.s).sympy) == 0, src


def test_laplace_symbol_is_lcapys():
    assert nodal.laplace_symbol() == lcapy.s.sympy


@pytest.mark.parametrize("drive", long_tailed_pair.DRIVES)
def test_pair_full_numeric_model_matches_lcapy(drive):
    _same_as_lcapy(long_tailed_pair.model(PAIR, symbolic=False, drive=drive).text)


def test_pair_symbolic_midband_model_matches_lcapy():
    _same_as_lcapy(long_tailed_pair.model(PAIR, symbolic=True, drive="output:plate1", midband=True).text)


@pytest.mark.parametrize("drive", cathodyne.DRIVES)
@pytest.mark.parametrize("symbolic", [False, True])
def test_cathodyne_models_match_lcapy(drive, symbolic):
    _same_as_lcapy(cathodyne.model(CATHODYNE, symbolic=symbolic, drive=drive, interelectrode=not symbolic).text)


@pytest.mark.parametrize("drive", ["input", "output"])
@pytest.mark.parametrize("symbolic", [False, True])
def test_single_stage_models_match_lcapy(drive, symbolic):
    """The symbolic s-domain form keeps ``C_k`` as a symbol (admittance ``s·C_k``)."""
    _same_as_lcapy(single_model(SINGLE, symbolic=symbolic, drive=drive, interelectrode=not symbolic).text)


def test_divider_and_its_source_current_follow_ohms_law():
    """Unit source over R1 then R2 to ground: ``V(2) = R2/(R1 + R2)``, and the
    current entering the source's + end is ``−1/(R1 + R2)`` (Ohm's law)."""
    got = nodal.solve_netlist("V1 1 0 s 1\nR1 1 2 R_1\nR2 2 0 R_2")
    r1, r2 = sympy.symbols("R_1 R_2", positive=True)
    assert sympy.cancel(got.V("2") - r2 / (r1 + r2)) == 0
    assert sympy.cancel(got.I("V1") + 1 / (r1 + r2)) == 0
    assert got.V("0") == 0


def test_controlled_source_and_reactances_follow_their_definitions():
    """``E`` holds ``V(a) − V(b) = gain·(V(c) − V(d))``; a capacitor's
    admittance is ``s·C`` and an inductor's ``1/(s·L)`` (a series L–C divider
    gives ``V = 1/(1 + s²·L·C)`` across C)."""
    s = nodal.laplace_symbol()
    got = nodal.solve_netlist("V1 1 0 s 1\nE1 2 0 1 0 3.5\nR1 2 0 1000.0\nL1 1 3 L\nC1 3 0 C")
    lsym, csym = sympy.symbols("L C", positive=True)
    assert sympy.cancel(got.V("2")) == sympy.Rational(7, 2)
    assert sympy.cancel(got.V("3") - 1 / (1 + s ** 2 * lsym * csym)) == 0


def test_unread_elements_are_refused_and_the_stage_solve_falls_back_to_lcapy():
    text = "I1 0 1 s 1\nR1 1 0 5"
    with pytest.raises(nodal.UnsupportedNetlist):
        nodal.solve_netlist(text)
    got = stage._circuit(text)
    assert not isinstance(got, nodal.NodalSolution)
    assert got.V("1") == lcapy.Circuit(text)["1"].V(lcapy.s).sympy


def test_a_floating_node_is_a_singular_system():
    with pytest.raises(ValueError, match="singular"):
        nodal.solve_netlist("V1 1 0 s 1\nR1 1 0 R\nR2 2 3 R")


def test_factor_leaves_the_pair_forms_as_they_are():
    """The written forms reuse a solved form as its own factored form
    (stage._factor); sympy's ``factor`` is idempotent on them."""
    f = stage.stage_formulas(PairParts("PI", 60.0, 17e3, 60.0, 17e3, rl1_ohm=100e3, rl2_ohm=100e3, rt_ohm=10e3,
                                       rk_ohm=1e3, rg1_ohm=1e6, rg2_ohm=1e6))
    for q in long_tailed_pair.QUANTITIES:
        form = f.formula(q.name).midband
        assert sympy.factor(form) == form, q.name
