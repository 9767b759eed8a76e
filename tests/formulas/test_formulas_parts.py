"""StageParts pulled out of a built circuit and its DC solution."""

from __future__ import annotations

from dataclasses import replace

import pytest

from chain.build import build
from chain.dc import solve
from chain.errors import FormulaError
from chain.formulas import stage_parts
from chain.language import parse_text

TEXT = """\
title "formulas parts"
supply HT 300V
rail B1 from HT drop 4k7 decouple 22u

input into V1 resistance 10k

stage V1 common-cathode 12AX7
  plate 100k from B1
  cathode 2k7 bypass 2u2 series 470
  grid leak 1M stopper 68k

stage V2 cathode-follower 12AX7
  plate on B1
  cathode 56k

stage V3 common-grid 12AT7
  plate 47k from B1
  cathode 820
  grid ground

couple V1 -> V2 direct
couple V2 -> V3 cap 1u
couple V3 -> output cap 47n
output load 470k
"""


@pytest.fixture(scope="module")
def built():
    circuit = build(parse_text(TEXT))
    return circuit, solve(circuit)


def test_common_cathode_parts_follow_the_text(built):
    circuit, dc = built
    p = stage_parts(circuit, dc, "V1")
    assert (p.kind, p.rl_ohm, p.rk_ohm, p.ck_f, p.rkc_ohm, p.rg_ohm, p.rs_ohm) == \
        ("common-cathode", 100e3, 2.7e3, 2.2e-6, 470.0, 1e6, 68e3)
    # mu and rp are the operating point's, the capacitances the tube model's
    op = dc.points["V1"]
    model = circuit.triode("V1").model
    assert (p.mu, p.rp_ohm) == (op.mu, op.rp_ohm)
    assert (p.cgk_f, p.cgp_f, p.cpk_f) == (model.cgk_f, model.cgp_f, model.cpk_f)
    assert p.rload_ohm is None  # the output load hangs on V3's output, not V1's


def test_follower_and_common_grid_parts(built):
    circuit, dc = built
    cf = stage_parts(circuit, dc, "V2")
    assert (cf.kind, cf.rl_ohm, cf.rk_ohm, cf.rg_ohm) == ("cathode-follower", None, 56e3, None)
    cg = stage_parts(circuit, dc, "V3")
    # "grid ground": no leak, no stopper; the output load is behind a coupling
    # capacitor, so it is not the stage's own load
    assert (cg.kind, cg.rl_ohm, cg.rk_ohm, cg.rg_ohm, cg.rs_ohm, cg.rload_ohm) == \
        ("common-grid", 47e3, 820.0, None, None, None)
    assert stage_parts(circuit, dc, "V3", rload_ohm=10e3).rload_ohm == 10e3


def test_misplaced_part_is_refused(built):
    circuit, dc = built
    moved = tuple(replace(r, b="B1") if r.name == "V1.Rg" else r for r in circuit.resistors)
    with pytest.raises(FormulaError) as info:
        stage_parts(replace(circuit, resistors=moved), dc, "V1")
    assert info.value.diagnostics[0].code == "E521"
    assert "V1.Rg" in str(info.value)


def test_unknown_stage_is_refused(built):
    circuit, dc = built
    with pytest.raises(FormulaError, match="no stage named 'V7'"):
        stage_parts(circuit, dc, "V7")
