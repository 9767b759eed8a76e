"""Work that grows with the number of stages (issue 16), each checked against
an independent computation of the same quantity: scipy's conversion of the
dense matrix, numpy's dense solve, the plain per-pair loop it replaces."""

import numpy as np
import pytest
from scipy.sparse import csr_matrix

from chain.dc import solve
from chain.smallsignal import mna as M


def test_stacked_sparse_g_and_c_equal_scipys_conversion_of_the_dense_stack(big):
    # reference: scipy.sparse.csr_matrix of the dense (2N, N) stack [G; C]
    _, _, mna = big
    got = M._stacked_csr(mna.g, mna.c)
    ref = csr_matrix(np.vstack([mna.g, mna.c]))
    assert got.shape == ref.shape
    assert np.array_equal(got.indptr, ref.indptr)
    assert np.array_equal(got.indices, ref.indices)
    assert np.array_equal(got.data, ref.data)


def test_checker_residual_equals_the_dense_numpy_residual(big):
    # reference: b − (G + s·C)·x formed with dense numpy products
    _, _, mna = big
    assert mna.size >= M.SPARSE_FROM  # the sparse product is the one under test
    rng = np.random.default_rng(1)
    s = 2j * np.pi * np.geomspace(10, 1e5, 5)
    x = rng.standard_normal((s.size, mna.size)) + 1j * rng.standard_normal((s.size, mna.size))
    b = mna.source_rhs()
    r = M._Checker(mna, s, b).residual(x)
    ref = b[None, :] - np.einsum("ij,kj->ki", mna.g, x) - s[:, None] * np.einsum("ij,kj->ki", mna.c, x)
    assert np.allclose(r, ref, rtol=1e-13, atol=1e-13 * np.abs(ref).max())


def test_rankings_solve_each_frequency_once_and_give_the_uncached_values(big, monkeypatch):
    # reference: gain_sensitivity computed on its own (no shared adjoint), which
    # tests/smallsignal/test_sensitivity.py checks against finite differences
    from chain.smallsignal import sensitivity as S

    circuit, ss, mna = big
    k = mna.index[ss.node_of.get(ss.output_node, ss.output_node)]
    parts = {p.name for p in (*circuit.resistors, *circuit.capacitors, *circuit.inductors)}
    ref = S.gain_sensitivity(mna, k, 1e3, parts)
    calls = []
    real = S._adjoint
    monkeypatch.setattr(S, "_adjoint", lambda *a: calls.append(a[2]) or real(*a))
    got = S.rankings(ss, solve(circuit), ref_hz=1e3, f_low_hz=20.0, f_high_hz=20e3, mna=mna)
    assert sorted(calls) == [20.0, 1e3, 20e3]  # three frequencies, each solved once
    gain = dict(got[0].parts)
    assert gain == {name: v.real for name, v in ref.items()}


def _cancel_by_pairs(p, z):
    """The plain per-pair walk: each pole takes the first remaining zero within
    CANCEL_REL of it (the definition the vectorised form must reproduce)."""
    from chain.smallsignal.poles import CANCEL_REL

    p, z = list(p), list(z)
    kept = []
    for x in p:
        hit = next((i for i, y in enumerate(z) if abs(x - y) <= CANCEL_REL * max(abs(x), abs(y))), None)
        if hit is None:
            kept.append(x)
        else:
            z.pop(hit)
    return kept, z


@pytest.mark.parametrize("seed", range(6))
def test_cancel_matches_the_per_pair_walk(seed):
    # reference: _cancel_by_pairs above, on roots with planted near-coincident
    # poles and zeros, repeated roots and a zero at the origin
    from chain.smallsignal.poles import _cancel

    rng = np.random.default_rng(seed)
    p = list(rng.standard_normal(40) * 1e3 + 1j * rng.standard_normal(40) * 1e3)
    p += [p[3], p[3], 0j]
    z = [x * (1 + 1e-9 * rng.standard_normal()) for x in rng.choice(np.array(p), 15)]
    z += list(rng.standard_normal(10) * 1e3) + [0j, p[3]]
    rng.shuffle(z)
    assert _cancel(p, z) == _cancel_by_pairs(p, z)


def test_stability_uses_one_eigen_solve_with_the_same_poles_as_pole_zero_alone(big, monkeypatch):
    # reference: pole_zero and poles each solving the pencil themselves (their
    # accuracy against scipy's QZ: test_poles_and_zeros_agree_with_qz)
    from chain.smallsignal import poles as P
    from chain.smallsignal import stability as St

    _, ss, mna = big
    alone = P.pole_zero(ss, mna=mna)
    calls = []
    real = P.pencil_eigen
    monkeypatch.setattr(St, "pencil_eigen", lambda *a, **k: calls.append(1) or real(*a, **k))
    monkeypatch.setattr(P, "pencil_eigen", lambda *a, **k: calls.append(1) or real(*a, **k))
    st = St.stability(ss, mna=mna)
    assert len(calls) == 1
    assert st.output.poles_hz == alone.poles_hz and st.output.zeros_hz == alone.zeros_hz
    assert [p.s_hz for p in st.poles] == [p.s_hz for p in P.poles(ss, mna=mna)]


def test_rhp_count_grid_turning_equals_the_per_root_sum(big):
    # reference: the per-root loop it replaces (each root's unwrapped phase turn
    # summed root by root): the same sample grid bit for bit, and the count of
    # a stable cascade is zero
    from chain.smallsignal import poles as P

    _, _, mna = big
    s_est = P.pencil_eigen(mna)
    fine = np.geomspace(1.0, 1e9, 2000)
    ref = np.zeros(fine.size)
    for p in s_est:
        ref += np.abs(np.unwrap(np.angle(1j * fine - p)) - np.angle(1j * fine[0] - p))
    got = P._turned(s_est, fine)
    assert np.array_equal(got, ref)
    assert P.rhp_count(mna) == 0


def test_streamed_band_rows_give_the_determinant_phase_of_the_stored_band_bit_for_bit(big):
    # reference: the same elimination over the whole band formed beforehand
    # (the path taken when a stack of changes is applied; here an empty one)
    _, _, mna = big
    s = 1j * np.geomspace(1.0, 1e9, 300) + 5.0  # a real part too: every term of the rows
    plan = M._band_plan((mna.g != 0.0) | (mna.c != 0.0), s.size)
    assert plan is not None
    empty = M.removal_changes(mna, [])
    streamed = M.BandSolver(mna.g, mna.c, s, plan[0], keep=False).det_phase()
    stored = M.BandSolver(mna.g, mna.c, s, plan[0], empty, keep=False).det_phase()
    assert np.array_equal(streamed, stored)


@pytest.mark.parametrize("block_bytes", [M.DET_BLOCK_BYTES, 1])
def test_cascade_determinant_phases_match_numpy_slogdet(big, monkeypatch, block_bytes):
    # reference: numpy.linalg.slogdet of each dense G + s·C (its sign's angle),
    # compared modulo 2π
    _, _, mna = big
    monkeypatch.setattr(M, "DET_BLOCK_BYTES", block_bytes)
    s = 1j * np.geomspace(1.0, 1e8, 40)
    got = M.det_phases(mna.g, mna.c, s)
    ref = np.array([np.angle(np.linalg.slogdet(mna.g + sk * mna.c)[0]) for sk in s])
    diff = (got - ref + np.pi) % (2 * np.pi) - np.pi
    assert np.all(np.abs(diff) < 1e-8)


@pytest.mark.parametrize("shape", [(1, 1), (7, 3), (40, 40), (0, 5)])
def test_nonzero_positions_equal_numpys_nonzero(shape):
    # reference: numpy.nonzero of the same 2-D mask, and of its transpose
    rng = np.random.default_rng(sum(shape))
    mask = rng.random(shape) < 0.2
    for m in (mask, mask.T):
        got = M.nonzero_positions(m)
        ref = np.nonzero(m)
        assert all(np.array_equal(a, b) for a, b in zip(got, ref))


def test_adjoint_of_a_large_circuit_matches_numpy_dense_solves(big):
    # reference: numpy.linalg.solve of Y(s) and of its transpose (the sparse LU
    # serves from SPARSE_FROM unknowns on)
    from chain.smallsignal.sensitivity import _adjoint

    _, ss, mna = big
    k = mna.index[ss.node_of.get(ss.output_node, ss.output_node)]
    s, x, lam, h = _adjoint(mna, k, 1e3)
    y = mna.g + s * mna.c
    e = np.zeros(mna.size)
    e[k] = 1.0
    x_ref = np.linalg.solve(y, mna.source_rhs())
    lam_ref = np.linalg.solve(y.T, e)
    assert np.allclose(x, x_ref, rtol=1e-9, atol=1e-12 * np.abs(x_ref).max())
    assert np.allclose(lam, lam_ref, rtol=1e-9, atol=1e-12 * np.abs(lam_ref).max())
    assert h == x[k]


def test_pole_zero_reference_gain_of_a_large_circuit_matches_numpy(big):
    # reference: numpy.linalg.solve of Y(j·2π·1 kHz) for the output's transfer
    from chain.smallsignal.poles import pole_zero

    _, ss, mna = big
    k = mna.index[ss.node_of.get(ss.output_node, ss.output_node)]
    pz = pole_zero(ss, mna=mna, ref_hz=1e3)
    ref = np.linalg.solve(mna.g + 2j * np.pi * 1e3 * mna.c, mna.source_rhs())[k]
    assert abs(pz.h_ref - ref) <= 1e-9 * abs(ref)
