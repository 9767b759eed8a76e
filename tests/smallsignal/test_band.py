"""The banded elimination (chain.smallsignal.mna.BandSolver, issue 16 item 8)
against numpy.linalg.solve of the same matrices (the reference library): the
same numbers to rounding, with row interchanges, at a subset of frequencies,
and NaN where a matrix is singular."""

import numpy as np
import pytest

from chain.smallsignal import mna as M


def banded(n: int, lo: int, up: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """Random G and C with lower/upper bandwidth lo/up, then the unknowns shuffled
    (so the solver has to find the band again); with both bandwidths, a small
    diagonal in G so that partial pivoting must interchange rows."""
    rng = np.random.default_rng(seed)
    i, j = np.indices((n, n))
    inside = (i - j <= lo) & (j - i <= up)
    g = np.where(inside, rng.normal(size=(n, n)), 0.0)
    c = np.where(inside, rng.normal(size=(n, n)) * 1e-6, 0.0)
    if lo and up:
        g[np.diag_indices(n)] *= 1e-3
    else:  # a triangular band: no interchange possible, keep it well conditioned
        g[np.diag_indices(n)] += 3.0 * (lo + up + 1) * np.sign(g[np.diag_indices(n)])
    perm = rng.permutation(n)
    return g[np.ix_(perm, perm)], c[np.ix_(perm, perm)]


def reference(g, c, s, b):
    stack = g[None] + s[:, None, None] * c[None]
    return np.linalg.solve(stack, np.broadcast_to(b, (s.size, b.shape[-1]))[..., None])[..., 0]


@pytest.mark.parametrize("n, lo, up", [(30, 2, 3), (41, 1, 1), (25, 4, 0), (20, 0, 2)])
def test_band_solve_agrees_with_numpy_solve(n, lo, up):
    g, c = banded(n, lo, up, seed=n)
    s = 2j * np.pi * np.geomspace(10, 1e6, 37)
    b = np.random.default_rng(1).normal(size=n)
    solver = M.BandSolver(g, c, s)
    assert solver._lo + solver._up <= 2 * (lo + up)  # the reordering found a narrow band again
    ref = reference(g, c, s, b)
    x = solver.solve(b)
    assert np.allclose(x, ref, rtol=1e-9, atol=1e-11 * np.abs(ref).max())
    # a per-frequency right-hand side at some frequencies only, as refinement uses it
    rows = np.array([30, 2, 17])
    rb = np.random.default_rng(2).normal(size=(rows.size, n)) + 1j
    sub = solver.solve(rb, rows)
    assert np.allclose(sub, reference(g, c, s[rows], rb), rtol=1e-9, atol=1e-11 * np.abs(sub).max())


def test_refined_band_solve_reaches_rounding_level():
    g, c = banded(60, 3, 3, seed=7)
    s = 2j * np.pi * np.geomspace(10, 1e6, 50)
    b = np.zeros(60)
    b[5] = 1.0
    mna = M.Mna(tuple(str(k) for k in range(60)), {}, g, c, (), M.Stamp("src", "V", 0, -1, 1.0, branch=5))
    x = M._refine_all(M.BandSolver(g, c, s), M._Checker(mna, s, b), b, accept=None)
    # Oettli–Prager componentwise backward error (Higham, "Accuracy and Stability
    # of Numerical Algorithms", thm 7.3), a few units of rounding
    assert M.backward_error(mna, s, x, b) < 8 * np.finfo(float).eps


def test_a_singular_frequency_gives_nan():
    # a floating pair of nodes joined by a capacitor: singular at s = 0 only
    g = np.zeros((2, 2))
    c = np.array([[1.0, -1.0], [-1.0, 2.0]])
    x = M.BandSolver(g, c, np.array([0.0, 2j * np.pi * 100])).solve(np.array([1.0, 0.0]))
    assert np.all(np.isnan(x[0])) and np.all(np.isfinite(x[1]))
    assert np.allclose(x[1], np.linalg.solve(2j * np.pi * 100 * c, [1.0, 0.0]))


def test_reverse_cuthill_mckee_finds_a_path():
    # a path graph numbered at random has bandwidth 1 in breadth-first order
    # (Cuthill and McKee 1969: a level structure of width one)
    rng = np.random.default_rng(3)
    perm = rng.permutation(40)
    pattern = np.zeros((40, 40), dtype=bool)
    for k in range(39):
        pattern[perm[k], perm[k + 1]] = pattern[perm[k + 1], perm[k]] = True
    order = M._band_order(pattern)
    assert sorted(order) == list(range(40))
    assert M._bandwidths(pattern[np.ix_(order, order)]) == (1, 1)


def test_a_wide_band_keeps_the_dense_or_sparse_solve():
    rng = np.random.default_rng(4)
    s = 2j * np.pi * np.geomspace(10, 1e5, 20)
    for n, kind in ((20, M.DirectSolver), (70, M.SparseSolver)):
        g = rng.normal(size=(n, n))
        assert isinstance(M.direct_solver(g, np.zeros((n, n)), s), kind)


@pytest.mark.parametrize("n, lo, up", [(60, 3, 3), (41, 1, 2)])
@pytest.mark.parametrize("block_bytes", [M.DET_BLOCK_BYTES, 1])
def test_determinant_phase_agrees_with_numpy_slogdet(n, lo, up, block_bytes, monkeypatch):
    """arg det Y(s) from the banded factors (chain.smallsignal.mna.det_phases)
    against numpy.linalg.slogdet of the same matrices (the reference library),
    all points in one block and one point per block."""
    monkeypatch.setattr(M, "DET_BLOCK_BYTES", block_bytes)
    g, c = banded(n, lo, up, seed=3 * n)
    s = np.r_[0.0, 2j * np.pi * np.geomspace(1.0, 1e7, 41), -3e4 + 2e5j]
    got = M.det_phases(g, c, s)
    assert got is not None
    ref = np.angle([np.linalg.slogdet(g + sk * c)[0] for sk in s])
    assert np.allclose(np.angle(np.exp(1j * (got - ref))), 0.0, atol=1e-9)


def test_a_wide_band_gives_no_banded_determinant():
    rng = np.random.default_rng(0)
    g = rng.normal(size=(12, 12))
    assert M.det_phases(g, np.eye(12), np.array([1j, 2j])) is None
