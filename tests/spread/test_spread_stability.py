"""Stability under spread: each build's right-half-plane poles against the
single analysis (chain.smallsignal.stability) of a circuit with that build's
part values; unstable builds kept out of the statistics; an unstable nominal
circuit reported as `chain report` does (E801, exit 4)."""

from __future__ import annotations

import json
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from chain.analysis import sweep_frequencies
from chain.build import load_text
from chain.cli import EXIT_UNSTABLE, main
from chain.dc import solve
from chain.dc.result import SolveOptions
from chain.smallsignal import linearize
from chain.smallsignal.stability import stability
from chain.spread import spread, varied_parts
from chain.spread.montecarlo import _Model, draw, rank_correlation

ROOT = Path(__file__).resolve().parents[2]
MOTORBOAT = ROOT / "netlists" / "unstable" / "motorboat_shared_rail.chain"


def _marginal_text() -> str:
    """The motorboating demo with larger rail capacitors: stable as drawn, but
    close enough to the edge that some builds motorboat."""
    text = MOTORBOAT.read_text(encoding="utf-8")
    text = text.replace("drop 10k decouple 10u", "drop 10k decouple 22u")
    return text.replace("rail B2 from B1 drop 47k decouple 2u2", "rail B2 from B1 drop 47k decouple 3u3")


@pytest.fixture(scope="module")
def marginal():
    design, circuit, _ = load_text(_marginal_text(), "marginal.chain")
    return design, circuit, solve(circuit)


def _modified(circuit, factor):
    return replace(
        circuit,
        resistors=tuple(replace(r, ohms=r.ohms * factor.get(r.name, 1.0)) for r in circuit.resistors),
        capacitors=tuple(replace(c, farads=c.farads * factor.get(c.name, 1.0)) for c in circuit.capacitors),
        inductors=tuple(replace(i, henries=i.henries * factor.get(i.name, 1.0)) for i in circuit.inductors),
        triodes=tuple(replace(t, model=replace(t.model, kg1=t.model.kg1 / factor.get(t.name, 1.0)))
                      for t in circuit.triodes),
    )


def test_each_builds_stability_matches_the_single_analysis(marginal):
    # reference: chain.smallsignal.stability (QZ on the pencil of one circuit) on a
    # circuit built with the drawn values; the batch finds the poles by eigenvalues
    # of (G + s0·C)⁻¹·C for all builds at once
    design, circuit, dc = marginal
    groups = varied_parts(circuit)
    model = _Model(circuit, dc, groups, sweep_frequencies(design)[::20], design.settings.reference_hz,
                   SolveOptions())
    dev = draw(groups, 40, seed=3)
    out = model.run(dev, sweep=True)
    unstable = np.flatnonzero(~out["stable"])
    stable = np.flatnonzero(out["stable"])
    assert unstable.size and stable.size  # the circuit sits at the edge: both kinds among 40 builds
    fac = model.factors(dev)
    for i in [*unstable[:3], *stable[:2]]:
        cm = _modified(circuit, dict(zip(model.batch.elements, fac[i])))
        st = stability(linearize(cm, solve(cm)))
        assert st.stable == bool(out["stable"][i])
        if not st.stable:
            worst = max(st.unstable, key=lambda p: p.s_hz.real).s_hz
            assert out["rhp_hz"][i] == pytest.approx(worst, rel=1e-6)
    # the same decision without the sweep (the corner builds' path)
    again = model.run(dev[:10], sweep=False)
    assert (again["stable"] == out["stable"][:10]).all()


def test_unstable_builds_are_counted_and_left_out(marginal):
    design, circuit, dc = marginal
    r = spread(circuit, dc, f_hz=sweep_frequencies(design), reference_hz=design.settings.reference_hz,
               samples=200, seed=5, corners=False)
    assert r.nominal_rhp_hz is None
    assert r.instability is not None and 0 < r.instability.count < 200
    assert r.counted + r.instability.count + r.unconverged == 200
    assert r.instability.fraction == pytest.approx(r.instability.count / 200)
    # the motorboating loop runs through the rails: a larger first rail capacitor makes it rarer
    # (the docstring of the demo; the pole moves left as the rail filter's corner drops)
    rho = dict(r.instability.influence)
    assert rho.get("B1 rail decoupling capacitor (rail.B1.C)", 0.0) < 0.0
    lo, med, hi = r.instability.oscillation_hz
    assert 0.5 < lo <= med <= hi < 10.0  # the demo's motorboating, about 2 Hz


def test_rank_correlation_matches_scipy_spearman_with_ties():
    # reference: scipy.stats.spearmanr (average ranks for ties)
    from scipy.stats import spearmanr

    rng = np.random.default_rng(11)
    x = rng.random((300, 4))
    x[:, 3] = np.round(x[:, 3], 1)  # ties
    y = (x[:, 0] + 0.3 * rng.random(300) > 0.8).astype(float)  # a 0/1 outcome: many ties
    got = rank_correlation(x, y)
    for j in range(4):
        assert got[j] == pytest.approx(spearmanr(x[:, j], y).statistic, abs=1e-12)


def test_spread_of_an_unstable_circuit_says_so_and_exits_4(tmp_path, capsys):
    assert main(["spread", str(MOTORBOAT), "-n", "50"]) == EXIT_UNSTABLE
    cap = capsys.readouterr()
    assert cap.out.splitlines()[2].startswith("UNSTABLE: the nominal circuit oscillates")
    assert "motorboat_shared_rail.chain:16:6: error E801" in cap.err
    out = tmp_path / "s.json"
    assert main(["spread", str(MOTORBOAT), "-n", "50", "--format", "json", "--output", str(out)]) == EXIT_UNSTABLE
    data = json.loads(out.read_text(encoding="utf-8"))
    assert data["stability"]["nominal_stable"] is False
    assert data["stability"]["nominal_rhp_hz"]["im"] == pytest.approx(2.09, abs=0.01)  # the E801 message's
    assert [d["code"] for d in data["diagnostics"]] == ["E801"]
    assert data["diagnostics"][0]["location"]["line"] == 16
