"""The sparse per-frequency LU (issue 16 item 8) against numpy.linalg.solve of
the same matrices (the reference library): the same numbers to rounding."""

import numpy as np

from chain.smallsignal import mna as M
from chain.smallsignal import response


def test_the_cascade_is_big_enough_for_the_sparse_path(big):
    _, _, mna = big
    assert mna.size >= M.SPARSE_FROM and mna.size > M.MODAL_UP_TO


def test_sparse_lu_agrees_with_numpy_dense_solve(big):
    _, _, mna = big
    s = 2j * np.pi * np.geomspace(10, 100e3, 40)
    b = mna.source_rhs()
    x = M.SparseSolver(mna.g, mna.c, s).solve(b)
    stack = mna.g[None] + s[:, None, None] * mna.c[None]
    ref = np.linalg.solve(stack, np.broadcast_to(b, (s.size, b.size))[..., None])[..., 0]
    assert np.allclose(x, ref, rtol=1e-9, atol=1e-12 * np.abs(ref).max())
    assert M.backward_error(mna, s, x, b) < 1e-12  # one unrefined solve


def test_auto_uses_the_banded_solve_and_matches_the_dense_one(big):
    # a chain of stages reorders to a narrow band, so the banded elimination is chosen
    circuit, ss, _ = big
    f = np.geomspace(20, 20e3, 60)
    auto = response(ss, f, output_impedances=False, stage_impedances=False)
    assert auto.method == "direct (banded)"
    out = circuit.output_node
    dense = M.DirectSolver
    mna = M.assemble(ss)
    s = 2j * np.pi * f
    ref = dense(mna.g, mna.c, s).solve(mna.source_rhs())[:, mna.index[ss.node_of[out]]]
    assert np.allclose(auto.h[out], ref, rtol=1e-9)


def test_a_singular_frequency_gives_nan_not_an_error():
    g = np.array([[1.0, -1.0], [-1.0, 1.0]])  # floating pair: singular at every s with C = 0
    c = np.zeros((2, 2))
    x = M.SparseSolver(g, c, np.array([2j * np.pi * 100])).solve(np.array([1.0, 0.0]))
    assert np.all(np.isnan(x))
