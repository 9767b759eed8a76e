"""The sparse form of the DC engine (issue 16: long chains).  From
SPARSE_MIN_SIZE unknowns up a NetworkSystem keeps its matrix in compressed
columns and solves by SuperLU; the dense form (numpy's LAPACK solve, the
reference here) must give the same answers to rounding."""

import numpy as np
import pytest

from chain.build import build
from chain.dc import SolveOptions, compile_network
from chain.dc.engine import SPARSE_MIN_SIZE
from chain.language import parse_text
from tests.cascades import padded


@pytest.fixture(scope="module")
def pair():
    circuit = build(parse_text(padded(12), "padded12.chain"))
    return compile_network(circuit, sparse=False), compile_network(circuit, sparse=True)


def test_the_form_follows_the_size():
    small = compile_network(build(parse_text(padded(2), "padded2.chain")))
    large = compile_network(build(parse_text(padded(24), "padded24.chain")))
    assert small.size < SPARSE_MIN_SIZE <= large.size
    assert not small.sparse and large.sparse


def test_sparse_and_dense_solves_agree(pair):
    dense, sparse = pair
    a, b = dense.solve(), sparse.solve()
    for node, v in a.node_v.items():
        assert b.node_v[node] == pytest.approx(v, abs=1e-9)
    # continuation from a displaced guess, as the headroom sweep does
    x = sparse.solve(0.5, a.x).x
    assert np.allclose(x, dense.solve(0.5, a.x).x, rtol=1e-10, atol=1e-12)


def test_sparse_jacobian_and_its_solve_agree_with_dense(pair):
    dense, sparse = pair
    x = dense.solve().x
    jac = dense.jacobian(x)
    assert np.allclose(sparse.jacobian(x), jac, rtol=1e-13, atol=0.0)
    rhs = np.random.default_rng(1).standard_normal((dense.size, 40))  # more columns than one block
    assert np.allclose(sparse.solve_jacobian(x, rhs), np.linalg.solve(jac, rhs), rtol=1e-9, atol=1e-12)


def test_sparse_starting_guess_and_cold_solution_agree_with_dense(pair):
    dense, sparse = pair
    assert np.allclose(sparse.cold_solution(0.0), dense.cold_solution(0.0), rtol=1e-12, atol=1e-12)
    assert np.allclose(sparse.initial_guess(0.0), dense.initial_guess(0.0), rtol=1e-9, atol=1e-9)


def test_sparse_fallbacks_converge_to_the_same_point(pair):
    """gmin stepping and source stepping (the fallbacks when Newton fails)
    work on the sparse matrix too."""
    dense, sparse = pair
    ref = dense.solve().x
    options = SolveOptions()
    for strategy in ("_gmin_stepping", "_source_stepping"):
        x, _, ok, _ = getattr(sparse, strategy)(0.0, options)
        assert ok
        assert np.allclose(x[:len(sparse.nodes)], ref[:len(dense.nodes)], rtol=1e-8, atol=1e-8)


def test_tangent_is_the_derivative_of_the_solution(pair):
    """newton_and_tangent: J⁻¹·∂b/∂v against a central difference of two solves."""
    dense, sparse = pair
    x = sparse.solve(0.2, None).x
    _, step, tangent = sparse.newton_and_tangent(x, 0.2)
    h = 1e-4
    numeric = (sparse.solve(0.2 + h, x).x - sparse.solve(0.2 - h, x).x) / (2 * h)
    n = len(sparse.nodes)
    assert np.allclose(tangent[:n], numeric[:n], rtol=1e-4, atol=1e-6)
    assert np.abs(step[:n]).max() < 1e-6  # at a solution the Newton step is nil
