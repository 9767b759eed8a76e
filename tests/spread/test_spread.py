"""Part and tube spread (chain.spread): the batched engine against the single
analysis, variance propagation against the GUM first-order formula, the
language's tolerance lines, and the command."""

from __future__ import annotations

import json
import math
from dataclasses import replace

import numpy as np
import pytest
from numpy.testing import assert_allclose

from chain.analysis import sweep_frequencies
from chain.build import load, load_text
from chain.circuit import GROUND, Circuit, Owner, Resistor, Role, VoltageSource
from chain.cli import main
from chain.dc import solve
from chain.dc.result import SolveOptions
from chain.errors import LanguageError
from chain.smallsignal import gain_at, linearize, response
from chain.spread import Tolerance, from_design, spread, varied_parts
from chain.spread.engine import BatchCircuit
from chain.spread.montecarlo import _Model, draw

LEAD = "netlists/lead_four_stage.chain"


def _lead_text() -> str:
    with open(LEAD, encoding="utf-8") as fh:
        return fh.read()


@pytest.fixture(scope="module")
def lead():
    design, circuit, _ = load(LEAD)
    return design, circuit, solve(circuit)


def _modified(circuit: Circuit, factor: dict) -> Circuit:
    """The circuit with each named element's value (a triode's plate current) scaled."""
    return replace(
        circuit,
        resistors=tuple(replace(r, ohms=r.ohms * factor.get(r.name, 1.0)) for r in circuit.resistors),
        capacitors=tuple(replace(c, farads=c.farads * factor.get(c.name, 1.0)) for c in circuit.capacitors),
        inductors=tuple(replace(i, henries=i.henries * factor.get(i.name, 1.0)) for i in circuit.inductors),
        triodes=tuple(replace(t, model=replace(t.model, kg1=t.model.kg1 / factor.get(t.name, 1.0)))
                      for t in circuit.triodes),
    )


def test_batched_builds_equal_single_analyses_of_the_same_parts(lead):
    # each batched build against the ordinary DC solve and sweep of a circuit with those part values
    design, circuit, dc = lead
    groups = varied_parts(circuit)
    f = sweep_frequencies(design)[::25]
    model = _Model(circuit, dc, groups, f, 1000.0, SolveOptions())
    dev = draw(groups, 3, seed=7)
    out = model.run(dev, sweep=True)
    assert out["converged"].all()
    fac = model.factors(dev)
    names = model.batch.elements
    for s in range(3):
        cm = _modified(circuit, dict(zip(names, fac[s])))
        dm = solve(cm)
        for i, node in enumerate(model.batch.nodes):
            assert out["_dc"].node_v[s, i] == pytest.approx(dm.node_v[node], abs=1e-7)
        for t, tri in enumerate(circuit.triodes):
            assert out["_dc"].gm_s[s, t] == pytest.approx(dm.points[tri.name].gm_s, rel=1e-9)
            assert out["_dc"].rp_ohm[s, t] == pytest.approx(dm.points[tri.name].rp_ohm, rel=1e-9)
        ref = response(linearize(cm, dm), f)
        assert_allclose(out["response_db"][s], 20 * np.log10(np.abs(ref.output)), atol=1e-8)
        for st in circuit.stages:
            g = gain_at(ref, st.output, 1000.0) / gain_at(ref, st.input, 1000.0)
            assert out[f"{st.name}.gain_db"][s] == pytest.approx(20 * math.log10(abs(g)), abs=1e-8)


def test_tube_spread_scales_the_plate_current_at_fixed_voltages(lead):
    # kg1 → kg1/(1 + δ) scales the Koren plate current by (1 + δ) at any electrode voltages
    # (Koren, "Improved vacuum tube models for SPICE simulations", Ip = 2·E1^ex/kg1)
    from chain.tubes import plate_current_and_derivatives

    _, circuit, _ = lead
    model = circuit.triodes[0].model
    ip, _, _ = plate_current_and_derivatives(model, 180.0, -1.5)
    ip2, _, _ = plate_current_and_derivatives(replace(model, kg1=model.kg1 / 0.75), 180.0, -1.5)
    assert ip2 == pytest.approx(0.75 * ip, rel=1e-12)


def _divider(r1: float, r2: float) -> Circuit:
    stage = Owner("stage", "X")
    return Circuit(
        title="divider",
        resistors=(Resistor("X.R1", "HT", "mid", r1, stage, Role.PLATE_LOAD),
                   Resistor("X.R2", "mid", GROUND, r2, stage, Role.CATHODE_RESISTOR)),
        capacitors=(), inductors=(),
        sources=(VoltageSource("supply.HT", "HT", GROUND, 300.0, Role.SUPPLY, Owner("supply", "HT")),),
        triodes=(), stages=(), input_node="mid", output_node="mid",
    )


@pytest.mark.parametrize("t1, t2", [(0.05, 0.05), (0.01, 0.10)])
def test_divider_spread_matches_first_order_variance_propagation(t1, t2):
    # GUM (JCGM 100:2008) eq. (10): u_c²(y) = Σ (∂f/∂x_i)²·u²(x_i); a uniform tolerance ±t has
    # u = R·t/√3 (GUM 4.3.7).  For Vout = V·R2/(R1 + R2): ∂/∂R1 = −V·R2/(R1+R2)², ∂/∂R2 = V·R1/(R1+R2)².
    r1, r2, v = 100e3, 47e3, 300.0
    circuit = _divider(r1, r2)
    dc = solve(circuit)
    groups = varied_parts(circuit, by_part={"X.R1": Tolerance.symmetric(t1), "X.R2": Tolerance.symmetric(t2)})
    assert [g.names for g in groups] == [("X.R1",), ("X.R2",)]
    batch = BatchCircuit(circuit, dc, ("X.R1", "X.R2"))
    dev = draw(groups, 40000, seed=3)
    out = batch.dc(1.0 + dev)
    assert out.converged.all()
    mid = batch.node_voltage(out, "mid")
    s = r1 + r2
    u = math.sqrt((v * r2 / s ** 2 * r1 * t1 / math.sqrt(3)) ** 2 + (v * r1 / s ** 2 * r2 * t2 / math.sqrt(3)) ** 2)
    assert np.std(mid) == pytest.approx(u, rel=0.03)
    assert np.mean(mid) == pytest.approx(v * r2 / s, rel=1e-3)


def test_same_seed_same_builds_and_what_if(lead):
    design, circuit, dc = lead
    f = sweep_frequencies(design)[::50]
    a = spread(circuit, dc, f_hz=f, reference_hz=1000.0, samples=40, seed=5, corners=False)
    b = spread(circuit, dc, f_hz=f, reference_hz=1000.0, samples=40, seed=5, corners=False)
    assert np.array_equal(a.deviations, b.deviations)
    assert np.array_equal(a.envelope_db, b.envelope_db, equal_nan=True)
    w = spread(circuit, dc, f_hz=f, reference_hz=1000.0, samples=40, seed=5, fixed={"V2": -0.25})
    assert w.fixed == {"V2 tube": -0.25}
    # a weak tube under cathode bias: less current, but far less than 25 % (the cathode resistor
    # pulls the bias back; common practice), and a higher plate voltage
    ip0, ip1 = w.nominal["V2"]["ip_a"], w.what_if["V2"]["ip_a"]
    assert 0.75 * ip0 < ip1 < ip0
    assert w.what_if["V2"]["vp_v"] > w.nominal["V2"]["vp_v"]
    # corners bracket the percentiles of a monotonic figure
    ip = next(s for s in w.stages if s.stage == "V1").figures["ip_a"]
    assert ip.corner_low <= ip.p5 <= ip.median <= ip.p95 <= ip.corner_high


def test_a_hot_cathode_follower_shows_as_grid_conduction_in_some_builds(lead):
    # the lead demo's follower sits a fraction of a volt below its grid: weak tubes drive it into
    # grid current (the netlist's own comment says it conducts first)
    design, circuit, dc = lead
    r = spread(circuit, dc, f_hz=sweep_frequencies(design)[::50], reference_hz=1000.0, samples=200, seed=1,
               corners=False)
    hits = [b for b in r.breaks if b.subject == "V4" and "grid conduction" in b.check]
    assert hits and 0 < hits[0].fraction < 0.5
    # the draws shown are the stage's own, largest first, and the tube is among them
    labels = [lab for lab, _ in hits[0].draws[0][1]]
    assert "V4 tube" in labels


def test_tolerance_lines_in_the_language():
    text = _lead_text() + (
        "tolerance resistors 1%\ntolerance electrolytics -10%+30%\ntolerance tube 12AX7 25%\n"
        "tolerance V2 10%\ntolerance V1.RL 0.5%\n")
    design, circuit, _ = load_text(text, "lead.chain")
    by_kind, by_part = from_design(design, circuit)
    groups = {g.label: g.tolerance for g in varied_parts(circuit, by_kind=by_kind, by_part=by_part)}
    assert groups["V1 plate load (V1.RL)"] == Tolerance(-0.005, 0.005)
    assert groups["V2 plate load (V2.RL)"] == Tolerance(-0.01, 0.01)
    assert groups["V1 cathode bypass (V1.Ck)"] == Tolerance(-0.1, 0.3)
    assert groups["V1 tube"] == Tolerance(-0.25, 0.25)
    assert groups["V2 tube"] == Tolerance(-0.1, 0.1)
    assert groups["drive network part (drive.block)"] == Tolerance(-0.1, 0.1)  # the film default


@pytest.mark.parametrize("line, code", [("tolerance resistors 150%", "E950"), ("tolerance resistors 5%-2%", "E950"),
                                        ("tolerance V9 5%", "E951"), ("tolerance tube 6V6 5%", "E951")])
def test_bad_tolerance_lines_are_located(line, code):
    text = _lead_text() + line + "\n"
    with pytest.raises(LanguageError) as exc:
        design, circuit, _ = load_text(text, "lead.chain")
        from_design(design, circuit)
    d = exc.value.diagnostics[0]
    assert d.code == code
    assert d.span.line == text.count("\n")
    assert d.span.column > 1


def test_spread_command(tmp_path, capsys):
    out = tmp_path / "s.json"
    png = tmp_path / "s.png"
    assert main(["spread", LEAD, "-n", "30", "--what-if", "V2=-25%", "--format", "json", "--output", str(out),
                 "--plot", str(png)]) == 0
    data = json.loads(out.read_text(encoding="utf-8"))
    assert data["schema"] == "chain-spread/1" and data["samples"] == 30
    assert data["fixed"] == {"V2 tube": -0.25}
    assert len(data["response"]["f_hz"]) == len(data["response"]["p95_db"])
    assert png.stat().st_size > 10000
    capsys.readouterr()
    assert main(["spread", LEAD, "-n", "20", "--what-if", "V9=-25%"]) == 2
    assert "V9" in capsys.readouterr().err
    assert main(["spread", LEAD, "-n", "20", "--tolerance", "resistors=200%"]) == 2
    assert main(["spread", LEAD, "-n", "20"]) == 0
    text = capsys.readouterr().out
    assert "Stage spread at 1 kHz" in text and "Safety" in text


def test_too_many_builds_for_memory_are_refused_before_the_solve(lead):
    from chain.errors import AnalysisError

    design, circuit, dc = lead
    with pytest.raises(AnalysisError) as exc:
        spread(circuit, dc, f_hz=sweep_frequencies(design), reference_hz=1000.0, samples=10_000_000)
    assert exc.value.diagnostics[0].code == "E952"
