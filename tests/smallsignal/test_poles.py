"""Poles, zeros and pole sensitivities of the whole chain (chain.smallsignal.poles)."""

from __future__ import annotations

import functools
import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from chain.circuit import GROUND
from chain.smallsignal import linearize, response
from chain.smallsignal.mna import Mna, Stamp, _matrices, assemble
from chain.smallsignal.poles import pencil_eigen, pole_zero, poles
from ss_circuits import Net, dc_of, rc_ladder

ROOT = Path(__file__).resolve().parents[2]
DEMOS = sorted((ROOT / "netlists").glob("*.chain"))


@functools.lru_cache(maxsize=None)
def demo_ss(path):
    from chain.build import load
    from chain.dc import solve

    _, circuit, _ = load(path)
    return linearize(circuit, solve(circuit))


def _passive(build):
    net = Net()
    net.signal("src")
    build(net)
    return linearize(net.circuit("src", "out"), dc_of())


def test_single_rc_section_pole():
    """First-order RC low-pass: one pole at s = −1/(RC) (any circuit-theory text)."""
    r, c = 4.7e3, 22e-9
    ss = _passive(lambda n: (n.r("R", "src", "out", r), n.c("C", "out", GROUND, c)))
    (p,) = poles(ss)
    assert_allclose(p.s_hz, -1.0 / (2 * math.pi * r * c), rtol=1e-10)
    assert p.q is None and not p.unstable
    # one pole, one part each: its normalised sensitivity to R and to C is −1
    sens = dict(p.dominant)
    assert_allclose([sens["R"], sens["C"]], [-1.0, -1.0], rtol=1e-9)


def test_series_rlc_poles_and_q():
    """Series RLC driven by a source: s² + (R/L)s + 1/(LC) = 0, Q = √(L/C)/R
    (standard second-order section, any circuit-theory text)."""
    r, l, c = 220.0, 0.5, 100e-9
    ss = _passive(lambda n: (n.r("R", "src", "a", r), n.l("L", "a", "out", l), n.c("C", "out", GROUND, c)))
    ps = poles(ss)
    assert len(ps) == 2
    w0, alpha = 1.0 / math.sqrt(l * c), r / (2 * l)
    expected = complex(-alpha, math.sqrt(w0 ** 2 - alpha ** 2)) / (2 * math.pi)
    got = sorted((p.s_hz for p in ps), key=lambda z: z.imag)
    assert_allclose(got, [expected.conjugate(), expected], rtol=1e-10)
    assert_allclose(ps[0].q, math.sqrt(l / c) / r, rtol=1e-10)
    assert_allclose(ps[0].f_hz, w0 / (2 * math.pi), rtol=1e-10)


def _phase_shift_oscillator(gain: float, r: float = 10e3, c: float = 10e-9) -> Mna:
    """An ideal inverting amplifier (a transconductance into 1 Ω) closing a
    three-section high-pass RC ladder (series C, shunt R) back to its input."""
    names = ["amp", "a", "b", "x", "src"]
    ix = {n: i for i, n in enumerate(names)}
    n = len(names)
    ro = 1.0
    stamps = [
        Stamp("Ro", "R", ix["amp"], -1, 1.0 / ro),
        Stamp("A", "G", ix["amp"], -1, gain / ro, cp=ix["x"], cn=-1),  # v_amp = −gain·v_x
        Stamp("C1", "C", ix["amp"], ix["a"], c), Stamp("R1", "R", ix["a"], -1, 1.0 / r),
        Stamp("C2", "C", ix["a"], ix["b"], c), Stamp("R2", "R", ix["b"], -1, 1.0 / r),
        Stamp("C3", "C", ix["b"], ix["x"], c), Stamp("R3", "R", ix["x"], -1, 1.0 / r),
        Stamp("Rs", "R", ix["src"], -1, 1e-3),
    ]
    src = Stamp("sig", "V", ix["src"], -1, 1.0, branch=n)
    stamps.append(src)
    g, cm = _matrices(n + 1, stamps)
    index = dict(ix)
    index[GROUND] = -1
    return Mna(tuple(names), index, g, cm, tuple(stamps), src)


@pytest.mark.parametrize("margin, unstable", [(1.05, True), (0.95, False)])
def test_rc_phase_shift_oscillator(margin, unstable):
    """Three equal high-pass RC sections turn the phase by 180° at
    f = 1/(2π·√6·RC), where they pass 1/29: an inverting gain above 29
    oscillates there, below 29 it does not (the RC phase-shift oscillator of
    the standard electronics texts, e.g. from memory of Millman & Halkias,
    "Integrated Electronics", §17)."""
    r, c = 10e3, 10e-9
    s = pencil_eigen(_phase_shift_oscillator(29.0 * margin, r, c))
    rhp = s[s.real > 0]
    assert bool(rhp.size) is unstable
    f0 = 1.0 / (2 * math.pi * math.sqrt(6) * r * c)
    # the pair nearest the axis rings at the phase-shift frequency
    near = s[np.argmin(np.abs(s.real) / np.abs(s))]
    # (a gain 5 % off 29 moves it by about 2 %)
    assert abs(abs(near.imag) / (2 * math.pi) / f0 - 1.0) < 0.05


def test_phase_shift_oscillator_at_exactly_29_sits_on_the_axis():
    r, c = 10e3, 10e-9
    s = pencil_eigen(_phase_shift_oscillator(29.0, r, c))
    near = s[np.argmin(np.abs(s.real) / np.abs(s))]
    f0 = 1.0 / (2 * math.pi * math.sqrt(6) * r * c)
    # the 1 Ω amplifier output resistance is the only departure from the ideal
    assert abs(near.real) < 1e-3 * abs(near)
    assert_allclose(abs(near.imag) / (2 * math.pi), f0, rtol=1e-3)


@pytest.mark.parametrize("path", DEMOS, ids=lambda p: p.stem)
def test_pole_zero_form_equals_the_nodal_sweep(path):
    """H(s) from poles, zeros and one value equals the nodal solve on the jω axis to 1e-9."""
    ss = demo_ss(path)
    pz = pole_zero(ss)
    f = np.geomspace(1.0, 200e3, 120)
    h = response(ss, f, stage_impedances=False).h[ss.output_node]
    assert np.max(np.abs(pz(f) - h) / np.abs(h)) < 1e-9
    # poles of the transfer are among the circuit's natural frequencies
    assert len(pz.poles_hz) <= len(poles(ss, parts=0))


@pytest.mark.parametrize("path", DEMOS, ids=lambda p: p.stem)
def test_every_shipped_demo_is_stable(path):
    ps = poles(demo_ss(path), parts=0)
    assert ps and not any(p.unstable for p in ps)


def test_pole_sensitivities_match_finite_differences():
    """d ln p / d ln x from the eigenvectors against a central difference of the
    recomputed poles (relative step 1e-6)."""
    ss = demo_ss(ROOT / "netlists" / "clean_two_stage.chain")
    base = poles(ss, parts=40)
    mna = assemble(ss)
    checked = 0
    for p in base[:6]:
        for name, sens in p.dominant[:3]:
            h = 1e-6
            shifted = []
            for sign in (1.0, -1.0):
                st = next(x for x in mna.stamps if x.name == name)
                factor = (1.0 + sign * h) ** (-1.0 if st.kind == "R" else 1.0)
                stamps = tuple(replace(x, value=x.value * factor) if x.name == name else x for x in mna.stamps)
                g, c = _matrices(mna.size, stamps)
                s = pencil_eigen(Mna(mna.nodes, mna.index, g, c, stamps, mna.source)) / (2 * math.pi)
                shifted.append(s[np.argmin(np.abs(s - p.s_hz))])
            fd = (np.log(shifted[0]) - np.log(shifted[1])) / (np.log1p(h) - np.log1p(-h))
            assert abs(fd - sens) <= 1e-4 * max(abs(sens), 1e-2), (name, p.s_hz, fd, sens)
            checked += 1
    assert checked >= 12


@pytest.mark.parametrize("sections", [1, 3, 8])
def test_rc_ladder_poles_closed_form(sections):
    """A uniform RC ladder (series R, shunt C, open at the far end) driven by a
    voltage source: its nodal matrix is (1/R)·T with T tridiagonal (2, −1) and
    a last diagonal entry 1, whose eigenvalues are 2 − 2·cos((2k−1)π/(2n+1)),
    k = 1…n (the discrete Laplacian with one fixed and one free end; from memory
    of G. Strang, "Introduction to Applied Mathematics", §1.5), so the poles
    are s = −(2 − 2cos((2k−1)π/(2n+1)))/(RC)."""
    r, c = 10e3, 47e-9
    got = np.sort(np.array([p.s_hz for p in poles(rc_ladder(sections, r, c), parts=0)]).real)
    k = np.arange(1, sections + 1)
    expected = np.sort(-(2 - 2 * np.cos((2 * k - 1) * np.pi / (2 * sections + 1))) / (r * c) / (2 * np.pi))
    assert_allclose(got, expected, rtol=1e-10)


def _qz(g, c):
    """Finite generalized eigenvalues of G + sC by scipy's QZ (the outside reference)."""
    from scipy.linalg import eig

    alpha, beta = eig(g, -c, right=False, homogeneous_eigvals=True)
    keep = np.abs(beta) > 1e-9 * np.abs(alpha)
    return alpha[keep] / beta[keep]


def _matched_rel_error(got, ref):
    got = np.asarray(got)
    assert got.size == len(ref)
    return max(float(np.min(np.abs(got - x)) / max(abs(x), 1.0)) for x in ref)


@pytest.mark.parametrize("path", DEMOS, ids=lambda p: p.stem)
def test_poles_and_zeros_agree_with_qz(path):
    """The poles (deflated reduction) and output zeros (shift and invert on
    the Cramer numerator) against scipy.linalg.eig's QZ of the same pencils,
    equilibrated the way the module does it."""
    from chain.smallsignal.poles import S0, _scaled_pencil, zeros

    ss = demo_ss(path)
    mna = assemble(ss)
    gs, cs, _, _ = _scaled_pencil(mna.g, mna.c)
    assert _matched_rel_error(pencil_eigen(mna), _qz(gs, cs) * S0) < 1e-8
    k = mna.index[ss.node_of.get(ss.output_node, ss.output_node)]
    n = mna.size
    g = np.zeros((n + 1, n + 1))
    c = np.zeros((n + 1, n + 1))
    g[:n, :n], c[:n, :n] = mna.g, mna.c
    g[:n, n] = mna.source_rhs()
    g[n, k] = 1.0  # the bordered (Rosenbrock) pencil
    gb, cb, _, _ = _scaled_pencil(g, c)
    # two equal stages give a double zero (gm/Cgp), which any solver splits by about √ε
    assert _matched_rel_error(zeros(mna, k), _qz(gb, cb) * S0) < 1e-6


def test_zeros_of_an_rc_low_pass_pair_at_a_capacitive_node():
    """Source → R1 → a (C1 to ground) → R2 → out (C2 to ground), read at ``a``:
    H = (1 + s·R2·C2)/D(s), a single zero at −1/(R2·C2) (nodal analysis by
    hand); the output node has a capacitance, which makes the bordered
    pencil of higher index."""
    from chain.smallsignal.poles import zeros

    r1, r2, c1, c2 = 1e3, 22e3, 100e-9, 4.7e-9
    ss = _passive(lambda n: (n.r("R1", "src", "a", r1), n.c("C1", "a", GROUND, c1),
                             n.r("R2", "a", "out", r2), n.c("C2", "out", GROUND, c2)))
    mna = assemble(ss)
    z = zeros(mna, mna.index[ss.node_of.get("a", "a")])
    assert_allclose(z, [-1.0 / (r2 * c2)], rtol=1e-10)
    z_out = zeros(mna, mna.index[ss.node_of.get(ss.output_node, ss.output_node)])
    assert z_out.size == 0


@pytest.mark.parametrize("margin, expected", [(0.95, 0), (1.05, 2), (3.0, 2)])
def test_rhp_count_of_the_phase_shift_oscillator(margin, expected):
    """The argument-principle count agrees with the 1/29 criterion of the RC
    phase-shift oscillator (Millman & Halkias, as above): a pair of poles
    crosses into the right half-plane when the gain passes 29."""
    from chain.smallsignal.poles import rhp_count

    assert rhp_count(_phase_shift_oscillator(29.0 * margin)) == expected


def test_rhp_count_of_a_negative_conductance_tank():
    """C in parallel with a negative conductance −g (fed from the source through
    R): the single pole sits at s = (g − 1/R)/C, in the right half-plane when
    g > 1/R (first-order nodal equation)."""
    from chain.smallsignal.poles import rhp_count

    def mna_for(g_neg):
        stamps = [Stamp("R", "R", 0, 1, 1e-3), Stamp("C", "C", 0, -1, 1e-6),
                  Stamp("N", "G", 0, -1, -g_neg, cp=0, cn=-1)]
        src = Stamp("sig", "V", 1, -1, 1.0, branch=2)
        stamps.append(src)
        g, c = _matrices(3, stamps)
        return Mna(("a", "src"), {"a": 0, "src": 1, GROUND: -1}, g, c, tuple(stamps), src)

    for g_neg, expected in ((0.5e-3, 0), (2e-3, 1)):
        mna = mna_for(g_neg)
        (s,) = pencil_eigen(mna)
        assert_allclose(s.real, (g_neg - 1e-3) / 1e-6, rtol=1e-9)
        assert rhp_count(mna) == expected


@pytest.mark.parametrize("g_neg, expected", [(0.5e-3, 0), (2e-3, 1)])
def test_rhp_count_with_banded_determinants(g_neg, expected):
    """The negative-conductance tank above beside a separate 40-section RC
    ladder (a connected part of its own, so det Y = det Y_ladder · det Y_tank):
    the ladder's poles are negative real (passive RC network: e.g. Van
    Valkenburg, "Introduction to Modern Network Synthesis", RC driving-point
    functions), so the count is the tank's, now formed from banded
    determinants batched over the points."""
    from chain.smallsignal.mna import det_phases
    from chain.smallsignal.poles import rhp_count

    ladder = 40
    stamps = [Stamp("R", "R", 0, 1, 1e-3), Stamp("C", "C", 0, -1, 1e-6),
              Stamp("N", "G", 0, -1, -g_neg, cp=0, cn=-1), Stamp("Rg", "R", 2, -1, 1e-4)]
    for i in range(ladder):
        node = 2 + i
        stamps.append(Stamp(f"C{i}", "C", node, -1, 1e-9 * (1 + i % 3)))
        if i + 1 < ladder:
            stamps.append(Stamp(f"R{i}", "R", node, node + 1, 1.0 / (1e3 * (1 + i % 5))))
    size = 2 + ladder + 1
    src = Stamp("sig", "V", 1, -1, 1.0, branch=size - 1)
    stamps.append(src)
    g, c = _matrices(size, stamps)
    names = ("a", "src") + tuple(f"n{i}" for i in range(ladder))
    mna = Mna(names, {**{k: i for i, k in enumerate(names)}, GROUND: -1}, g, c, tuple(stamps), src)
    assert det_phases(g, c, np.array([1j, 2j])) is not None  # the banded path is taken
    assert rhp_count(mna) == expected
