"""The whole chain's H(s) with chosen parts symbolic (chain.formulas.transfer)."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest

from chain.build import build
from chain.dc import solve
from chain.errors import FormulaError
from chain.formulas.flat import flat_solve
from chain.formulas.transfer import symbolic_transfer
from chain.language import parse_text
from chain.smallsignal import linearize, response

ONE_STAGE = """title "one stage"
supply HT 300V
input into V1 resistance 1k
stage V1 common-cathode 12AX7
  plate 100k from HT
  cathode 1k5 bypass 10u
  grid leak 1M stopper 10k
couple V1 -> output cap 22n
output load 1M
"""


@pytest.fixture(scope="module")
def one_stage():
    circuit = build(parse_text(ONE_STAGE, "one.chain"))
    dc = solve(circuit)
    return circuit, dc, linearize(circuit, dc)


def _with(circuit, name, factor):
    return replace(circuit, resistors=tuple(replace(r, ohms=r.ohms * factor) if r.name == name else r
                                            for r in circuit.resistors),
                   capacitors=tuple(replace(c, farads=c.farads * factor) if c.name == name else c
                                    for c in circuit.capacitors))


def test_symbolic_h_of_one_stage_equals_lcapys_solve(one_stage):
    """H(s) with V1.Rk and V1.Ck symbolic, at their own values and at changed
    values, against lcapy's exact solve of the same small-signal circuit
    (same operating point) with those values, at several s: to 1e-9."""
    circuit, dc, ss = one_stage
    tr = symbolic_transfer(ss, ("V1.Rk", "V1.Ck"))
    f = np.array([3.0, 30.0, 300.0, 3e3, 30e3, 300e3])
    for rk_factor, ck_factor in ((1.0, 1.0), (2.0, 1.0), (0.5, 3.0)):
        varied = _with(_with(circuit, "V1.Rk", rk_factor), "V1.Ck", ck_factor)
        ref = flat_solve(varied, dc, [circuit.output_node])
        want = ref.at(circuit.output_node, f)
        got = tr.at(f, **{"V1.Rk": 1.5e3 * rk_factor, "V1.Ck": 10e-6 * ck_factor})
        assert np.max(np.abs(got - want) / np.abs(want)) < 1e-9, (rk_factor, ck_factor)


def test_numeric_h_equals_the_sweep(one_stage):
    _, _, ss = one_stage
    f = np.geomspace(1.0, 1e5, 50)
    h = response(ss, f, stage_impedances=False).h[ss.output_node]
    assert np.max(np.abs(symbolic_transfer(ss).at(f) - h) / np.abs(h)) < 1e-9


def test_the_symbols_are_where_the_circuit_puts_them(one_stage):
    """A bypassed cathode: the gain rises from the unbypassed value to the
    bypassed one with a zero at s = −1/(Rk·Ck) (standard valve-amplifier
    analysis, common practice): the numerator holds the factor (1 + s·Rk·Ck)
    up to the rest, so it vanishes there for any Rk and Ck."""
    import sympy

    _, _, ss = one_stage
    tr = symbolic_transfer(ss, ("V1.Rk", "V1.Ck"))
    rk, ck = tr.symbols["V1.Rk"], tr.symbols["V1.Ck"]
    num = tr.numerator
    for r_val, c_val in ((1.5e3, 10e-6), (3.3e3, 1e-6)):
        at_zero = num.subs({rk: r_val, ck: c_val, tr.s: -1.0 / (r_val * c_val)})
        scale = sum(abs(t.subs({rk: r_val, ck: c_val, tr.s: 1.0 / (r_val * c_val)}))
                    for t in sympy.Add.make_args(sympy.expand(num)))
        assert abs(complex(at_zero)) < 1e-6 * float(scale)
    assert "R_{V1.Rk}" in tr.latex() and "C_{V1.Ck}" in tr.latex()


def test_too_many_symbols_are_refused_with_the_size():
    """Eleven parts of the four-stage lead demo: refused at once, with the size."""
    from pathlib import Path

    from chain.build import load

    _, circuit, _ = load(Path(__file__).resolve().parents[2] / "netlists" / "lead_four_stage.chain")
    ss = linearize(circuit, solve(circuit))
    parts = [p.name for p in (*circuit.resistors, *circuit.capacitors) if p.owner.kind == "stage"][:11]
    with pytest.raises(FormulaError) as err:
        symbolic_transfer(ss, parts)
    d = err.value.diagnostics[0]
    assert d.code == "E802" and "2^11" in d.message and "terms" in d.message


def test_unknown_part_is_refused(one_stage):
    _, _, ss = one_stage
    with pytest.raises(FormulaError) as err:
        symbolic_transfer(ss, ("V1.Rx",))
    assert "V1.Rx" in err.value.diagnostics[0].message
