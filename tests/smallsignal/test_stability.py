"""Stability: the unstable demo netlists are flagged with the right frequency
and loop; feedback-network loop gains and margins."""

from __future__ import annotations

import functools
import math
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from chain.smallsignal import linearize, response
from chain.smallsignal.mna import assemble
from chain.smallsignal.stability import feedback_networks, loop_gain, stability

ROOT = Path(__file__).resolve().parents[2]
UNSTABLE = ROOT / "netlists" / "unstable"


@functools.lru_cache(maxsize=None)
def demo(path):
    from chain.build import load
    from chain.dc import solve

    design, circuit, _ = load(path)
    ss = linearize(circuit, solve(circuit))
    s = design.settings
    return ss, stability(ss, ref_hz=s.reference_hz, band_hz=(s.band_low_hz, s.band_high_hz))


def ringing_hz(ss, node: str, period_s: float) -> float:
    """Frequency of the growing oscillation at ``node`` from a time-domain run.

    An independent check on the eigenvalues: the linear network
    ``C·x' + G·x = b(t)`` is integrated after a one-step kick of the source,
    first 20 backward-Euler steps (they damp the stiff modes the kick
    excites), then the trapezoidal rule (step 1/200 of ``period_s``; it
    turns a mode e^{st} by arg((1 + sh/2)/(1 − sh/2)) per step, within
    1e-3 of ωh here even for a fast-growing mode); once the fastest growing
    mode dominates, the mean spacing of the last zero crossings (each placed
    between its samples by linear interpolation) is half its
    period (implicit integration of a linear DAE; from memory of
    C. W. Gear, "Numerical Initial Value Problems in Ordinary Differential
    Equations", 1971).
    """
    from scipy.linalg import lu_factor, lu_solve

    mna = assemble(ss)
    h = period_s / 200.0
    be = lu_factor(mna.c / h + mna.g)
    tr = lu_factor(mna.c / h + mna.g / 2.0)
    tr_rhs = mna.c / h - mna.g / 2.0
    x = lu_solve(be, mna.source_rhs())
    k = mna.index[ss.node_of[node]]
    ys = []
    for step in range(200 * 40):
        x = lu_solve(be, mna.c @ x / h) if step < 20 else lu_solve(tr, tr_rhs @ x)
        if not np.all(np.isfinite(x)):
            break
        m = np.max(np.abs(x))
        if m > 1e100:
            x = x / m  # linear: rescaling keeps the crossings
            ys = [y / m for y in ys]
        ys.append(x[k])
    y = np.array(ys)
    idx = np.nonzero(np.diff(np.sign(y)) != 0)[0][-21:]
    # each crossing placed between its two samples by linear interpolation
    at = idx + y[idx] / (y[idx] - y[idx + 1])
    half = np.mean(np.diff(at)) * h
    return 1.0 / (2.0 * half)


@pytest.mark.parametrize("name, band, loop_kind", [
    ("squeal_four_stage.chain", (20e3, 1e6), "network"),
    ("motorboat_shared_rail.chain", (0.5, 20.0), "rail"),
])
def test_unstable_demos_are_flagged_and_ring_at_the_pole(name, band, loop_kind):
    ss, st = demo(UNSTABLE / name)
    assert not st.stable
    assert any(d.code == "E801" and d.severity == "error" for d in st.diagnostics)
    fastest = max(st.unstable, key=lambda p: p.s_hz.real)
    f_pole = fastest.oscillation_hz
    assert band[0] < f_pole < band[1]
    f_time = ringing_hz(ss, ss.output_node, 1.0 / f_pole)
    assert abs(f_time / f_pole - 1.0) < 0.05
    k = st.unstable.index(fastest)
    assert st.culprits[k] and all(c.kind == loop_kind for c in st.culprits[k])


def test_squeal_names_its_feedback_network_and_the_oscillation():
    _, st = demo(UNSTABLE / "squeal_four_stage.chain")
    hf = [d for d in st.diagnostics if d.code == "E801" and "kHz" in d.message]
    assert hf and "feedback network 'presence'" in hf[0].message
    assert "not what the circuit will do" in hf[0].message
    assert hf[0].subject == "presence.fb"


def test_motorboat_names_the_shared_rails():
    _, st = demo(UNSTABLE / "motorboat_shared_rail.chain")
    (d,) = [d for d in st.diagnostics if d.code == "E801"]
    assert "motorboating" in d.message and "rail" in d.message


@pytest.mark.parametrize("path", sorted((ROOT / "netlists").glob("*.chain")), ids=lambda p: p.stem)
def test_shipped_demos_have_no_stability_errors(path):
    _, st = demo(path)
    assert st.stable and not [d for d in st.diagnostics if d.code == "E801"]


def test_feedback_demo_loop_gain_is_negative_feedback_below_one():
    """The bass demo's 2M2 + 22n feedback network around two stages: negative
    feedback with |T| < 1 everywhere, so no crossover and nothing to warn about."""
    ss, st = demo(ROOT / "netlists" / "bass_two_rail.chain")
    (lg,) = st.loops
    assert lg.path.name == "feedback" and lg.node == "V2.plate"
    assert lg.negative and np.max(np.abs(lg.t)) < 1.0
    assert lg.phase_margin_deg is None
    assert not [d for d in st.diagnostics if d.code == "W801"]


def test_closed_loop_gain_is_open_loop_over_one_plus_loop_gain():
    """Feedback theory: with the network's drive cut (open loop, gain A) and
    the return ratio T = Aβ of that cut, the closed loop gives
    A/(1 + Aβ) plus the small direct path through the passive network
    (standard feedback theory; the asymptotic-gain form of it is from memory
    of S. Rosenstark, "Feedback Amplifier Principles", 1986).  On the bass
    demo the direct path is negligible at mid-band, so A/(1+T) must match the
    full solve to 1 %."""
    ss, st = demo(ROOT / "netlists" / "bass_two_rail.chain")
    (path,) = feedback_networks(ss.circuit)
    f = np.array([100.0, 200.0, 1e3, 3e3])
    lg = loop_gain(ss, path, f)
    closed = response(ss, f, stage_impedances=False).h[ss.output_node]
    # open loop: the same cut (the network still loads V2's plate but is not driven by it)
    mna = assemble(ss)
    from chain.smallsignal.mna import DirectSolver

    k = mna.index["V2.plate"]
    g0, c0 = mna.g.copy(), mna.c.copy()
    for st_ in mna.stamps:
        if st_.name in path.parts and st_.touches(k):
            m = st_.b if st_.a == k else st_.a
            (g0 if st_.kind == "R" else c0)[m, k] += st_.value
    x = DirectSolver(g0, c0, 2j * math.pi * f).solve(mna.source_rhs())
    a_open = x[:, mna.index[ss.node_of[ss.output_node]]]
    assert_allclose(closed, a_open / (1.0 + lg.t), rtol=1e-2)
    # and the feedback is worth its name: it takes 3 dB or more
    assert np.all(np.abs(closed) < np.abs(a_open) / 1.4)


def test_feedback_pair_demo_shows_loop_gain_and_healthy_margins():
    """The Wren demo: about 20 dB of negative feedback, crossing 0 dB once
    below and once above the band with phase margins over 45° (common
    practice) and no warning."""
    _, st = demo(ROOT / "netlists" / "feedback_pair.chain")
    (lg,) = st.loops
    assert lg.negative and 15.0 < 20 * math.log10(abs(lg.t_mid)) < 25.0
    (f_low, pm_low), (f_high, pm_high) = lg.crossovers
    assert f_low < 10.0 and f_high > 40e3
    assert min(pm_low, pm_high) > 45.0
    assert st.stable and not [d for d in st.diagnostics if d.code == "W801"]


def test_a_slimmer_margin_is_a_warning(tmp_path):
    """The same pair with a 100n coupling capacitor and a 100n feedback block:
    the low-frequency crossover keeps under 45° of phase margin → W801."""
    text = (ROOT / "netlists" / "feedback_pair.chain").read_text()
    text = text.replace("couple V1 -> V2 cap 22n", "couple V1 -> V2 cap 100n").replace(
        "fbm -- V1.cathode 470n", "fbm -- V1.cathode 100n")
    path = tmp_path / "slim.chain"
    path.write_text(text)
    _, st = demo(path)
    assert st.stable
    (w,) = [d for d in st.diagnostics if d.code == "W801"]
    assert "phase margin" in w.message and w.subject == "feedback.fb"
    assert st.loops[0].phase_margin_deg < 45.0


def test_loop_plot_draws_the_loop_gain_and_marks_the_crossovers():
    from chain.plot.loop import loop_plot

    _, st = demo(ROOT / "netlists" / "feedback_pair.chain")
    (lg,) = st.loops
    plot = loop_plot(lg, title="t")
    mag, ph = plot.lines
    assert np.allclose(mag.get_ydata(), 20 * np.log10(np.abs(lg.t)))
    assert np.allclose(ph.get_ydata(), lg.phase_deg)
    notes = [t.get_text() for t in plot.axes[0].texts]
    assert sum(n.startswith("phase margin") for n in notes) == 2


def test_a_long_cascade_without_a_shared_impedance_is_stable():
    """Sixteen common-cathode stages, each plate on its own decoupled rail from
    an ideal supply: no impedance is shared, so no loop exists and the chain
    is stable (common practice); the located poles of such a chain scatter
    across the axis by rounding, and the argument-principle count must
    overrule them (W802 when it does)."""
    from chain.build import build
    from chain.dc import solve
    from chain.language import parse_text
    from chain.smallsignal import linearize
    from chain.smallsignal.stability import stability

    n = 16
    lines = ['title "cascade"', "supply HT 330V", "input into V1 resistance 10k"]
    lines += [f"rail B{i} from HT drop 10k decouple 22u" for i in range(1, n + 1)]
    for i in range(1, n + 1):
        lines += [f"stage V{i} common-cathode 12AX7", f"  plate 100k from B{i}",
                  "  cathode 1k5 bypass 22u" if i % 2 else "  cathode 2k7", "  grid leak 1M stopper 33k"]
    lines += [f"couple V{i} -> V{i + 1} cap 22n" for i in range(1, n)]
    lines += [f"couple V{n} -> output cap 22n", "output load 1M", ""]
    circuit = build(parse_text("\n".join(lines), "cascade16.chain"))
    result = stability(linearize(circuit, solve(circuit)))
    assert result.stable
    assert not any(d.code == "E801" for d in result.diagnostics)
