"""Poles and zeros with the purely resistive unknowns eliminated first
(chain.smallsignal.poles._static_split) against the whole pencil's QZ
(scipy.linalg.eig) and a closed form."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from chain.circuit import GROUND
from chain.smallsignal import linearize
from chain.smallsignal.mna import assemble
from chain.smallsignal.poles import STATIC_MIN, _static_split, pencil_eigen, poles, zeros
from ss_circuits import Net, dc_of

ROOT = Path(__file__).resolve().parents[2]

#: series resistors added to a demo: more than STATIC_MIN purely resistive nodes
CHAIN_LINKS = 150


def _finite_qz(g, c):
    """Finite eigenvalues ``s`` (rad/s) of ``G + s·C`` from ``scipy.linalg.eigvals(−G, C)``:
    QZ of the whole, unreduced pencil (the outside reference).  The pencil is
    first scaled by powers of two (rows, columns, and ``s`` by ``S0``: exact,
    eigenvalues unchanged), without which QZ loses digits on the zeros near
    1 GHz; eigenvalues at infinity come out as inf/NaN or beyond 1e13 rad/s."""
    from scipy.linalg import eigvals

    from chain.smallsignal.poles import S0, _scaled_pencil

    gs, cs, _, _ = _scaled_pencil(g, c)
    lam = eigvals(-gs, cs)
    lam = lam[np.isfinite(lam)] * S0
    return lam[np.abs(lam) < 1e13]


def _matched(got, ref, rtol):
    """Every reference eigenvalue has a computed one within ``rtol`` and the counts agree."""
    got = np.asarray(got)
    assert got.size == ref.size
    for x in ref:
        assert np.min(np.abs(got - x)) <= rtol * max(abs(x), 1.0), x


def _demo_circuit():
    """The clean two-stage demo with a chain of CHAIN_LINKS 100 Ω resistors from
    V1's plate to a 100 kΩ resistor to ground: CHAIN_LINKS nodes without a
    capacitance."""
    from chain.build import build
    from chain.dc import solve
    from chain.language import parse_text

    text = (ROOT / "netlists" / "clean_two_stage.chain").read_text()
    links = [f"  resistor r{i} {'V1.plate' if i == 0 else f'm{i}'} -- m{i + 1} 100" for i in range(CHAIN_LINKS)]
    text += "\nnetwork drain\n" + "\n".join(links) + f"\n  resistor end m{CHAIN_LINKS} -- gnd 100k\n"
    circuit = build(parse_text(text, "drain.chain"))
    dc = solve(circuit)
    return circuit, dc, linearize(circuit, dc)


def _demo_with_network():
    return _demo_circuit()[2]


def _bordered_numerator(mna, node):
    """The Cramer numerator pencil of :func:`zeros`: the source's row replaced by ``x_node = 0``."""
    g = mna.g.copy()
    g[mna.source.branch, :] = 0.0
    g[mna.source.branch, node] = 1.0
    return g


def test_the_demo_network_is_eliminated():
    mna = assemble(_demo_with_network())
    static = _static_split(mna.g, mna.c)
    assert static is not None and static.drop.size >= CHAIN_LINKS
    assert not np.any(mna.c[np.ix_(static.drop, np.arange(mna.size))])
    assert not np.any(mna.c[np.ix_(np.arange(mna.size), static.drop)])


def test_demo_poles_and_zeros_against_qz_of_the_whole_pencil():
    ss = _demo_with_network()
    mna = assemble(ss)
    _matched(pencil_eigen(mna), _finite_qz(mna.g, mna.c), 1e-7)
    k = mna.index[ss.node_of.get(ss.output_node, ss.output_node)]
    # two equal stages give a double zero, which any solver splits by about √ε
    _matched(zeros(mna, k), _finite_qz(_bordered_numerator(mna, k), mna.c), 1e-6)


def test_lifted_eigenvectors_solve_the_whole_pencil():
    """``(G + pC)·v = 0`` and ``wᴴ·(G + pC) = 0`` on every unknown, eliminated
    ones included (the definition of the eigenvectors), relative to ``|G|·|v|``."""
    mna = assemble(_demo_with_network())
    s, w, v = pencil_eigen(mna, vectors=True)
    for k, p in enumerate(s):
        y = mna.g + p * mna.c
        scale_r = np.abs(mna.g) @ np.abs(v[:, k]) + abs(p) * (np.abs(mna.c) @ np.abs(v[:, k]))
        scale_l = np.abs(w[:, k]) @ np.abs(mna.g) + abs(p) * (np.abs(w[:, k]) @ np.abs(mna.c))
        assert np.max(np.abs(y @ v[:, k])) <= 1e-8 * np.max(scale_r)
        assert np.max(np.abs(w[:, k].conj() @ y)) <= 1e-8 * np.max(scale_l)


def _interleaved_ladder(sections: int, r: float, c: float, out: str):
    """A uniform RC ladder (series R, shunt C) whose every series resistor is
    two R/2 in series: one node without a capacitance between each pair."""
    net = Net()
    net.signal("src")
    prev = "src"
    for i in range(1, sections + 1):
        net.r(f"Ra{i}", prev, f"m{i}", r / 2)
        net.r(f"Rb{i}", f"m{i}", f"n{i}", r / 2)
        net.c(f"C{i}", f"n{i}", GROUND, c)
        prev = f"n{i}"
    return linearize(net.circuit("src", out), dc_of())


SECTIONS = STATIC_MIN + 6


def test_interleaved_ladder_poles_closed_form():
    """The uniform RC ladder open at the far end has the poles
    s = −(2 − 2cos((2k−1)π/(2n+1)))/(RC), k = 1…n (the discrete Laplacian with
    one fixed and one free end; from memory of G. Strang, "Introduction to
    Applied Mathematics", §1.5); splitting each R in two leaves them."""
    r, c = 10e3, 47e-9
    ss = _interleaved_ladder(SECTIONS, r, c, f"n{SECTIONS}")
    mna = assemble(ss)
    assert _static_split(mna.g, mna.c) is not None
    got = np.sort(np.array([p.s_hz for p in poles(ss, parts=0)]).real)
    expected = _ladder_poles_rad_s(SECTIONS, r, c) / (2 * math.pi)
    assert_allclose(got, expected, rtol=1e-9)
    _matched(pencil_eigen(mna), _finite_qz(mna.g, mna.c), 1e-8)


def _ladder_poles_rad_s(sections: int, r: float, c: float) -> np.ndarray:
    k = np.arange(1, sections + 1)
    return np.sort(-(2 - 2 * np.cos((2 * k - 1) * np.pi / (2 * sections + 1))) / (r * c))


@pytest.mark.parametrize("out", ["n1", "m1", "n2"])
def test_interleaved_ladder_zeros_against_qz(out):
    """Read near the source, at capacitive nodes and at a node without
    capacitance (which must stay: it borders the numerator), against QZ of
    the whole numerator pencil.  Read deep in a long ladder the transfer has
    a zero at infinity of high order, which neither QZ nor shift and invert
    resolves, so the outputs stay near the source."""
    r, c = 10e3, 47e-9
    ss = _interleaved_ladder(SECTIONS, r, c, out)
    mna = assemble(ss)
    k = mna.index[ss.node_of.get(out, out)]
    assert _static_split(_bordered_numerator(mna, k), mna.c, kept=(mna.source.branch, k)) is not None
    got = zeros(mna, k)
    assert got.size > 0
    _matched(got, _finite_qz(_bordered_numerator(mna, k), mna.c), 1e-7)
    if out == "n1":
        # V(n1)/E vanishes where the admittance of the ladder beyond n1 is
        # infinite: at the poles of that ladder (SECTIONS − 1 sections, closed
        # form above), driven with n1 held at zero
        assert_allclose(np.sort(got.real), _ladder_poles_rad_s(SECTIONS - 1, r, c), rtol=1e-9)
        assert np.all(got.imag == 0.0)


def test_bias_sensitivity_of_a_long_network_through_the_sparse_jacobian(monkeypatch):
    """The DC system of the demo with the long chain is sparse; its bias
    sensitivities (one sparse LU) against numpy.linalg.solve of the dense
    Jacobian (the same system compiled dense)."""
    import chain.dc.engine as engine
    from chain.dc.engine import compile_network
    from chain.smallsignal.sensitivity import bias_sensitivity

    circuit, dc, _ = _demo_circuit()
    assert compile_network(circuit).sparse
    got = bias_sensitivity(circuit, dc)
    monkeypatch.setattr(engine, "SPARSE_MIN_SIZE", 10**9)
    assert not compile_network(circuit).sparse
    ref = bias_sensitivity(circuit, dc)
    assert set(got) == set(ref) and got
    for tube, sens in ref.items():
        assert set(got[tube]) == set(sens)
        scale = max(abs(v) for v in sens.values())
        for part, value in sens.items():
            assert abs(got[tube][part] - value) <= 1e-9 * scale, (tube, part)
