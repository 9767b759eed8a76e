"""Random RC ladders: the voltage ratio of a passive RC ladder never exceeds 1
(from memory of A. Fialkow and I. Gerst, "The transfer function of general
two terminal-pair RC networks", Quart. Appl. Math. 10, 1952), and the engine
agrees with a per-frequency scipy.linalg.solve of the nodal equations."""

from __future__ import annotations

import numpy as np
import scipy.linalg
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from chain.circuit import GROUND
from chain.smallsignal import linearize, response
from ss_circuits import Net, dc_of

F = np.geomspace(1.0, 1e5, 25)

values = st.floats(min_value=0.0, max_value=4.0)  # log10 of the scale factor
section = st.tuples(st.booleans(), values, st.booleans(), values)


def build(sections):
    """Series element then shunt element per section; R = 100·10^k Ω, C = 1n·10^k F."""
    net = Net()
    net.signal("n0")
    parts = []
    for i, (series_is_c, ks, shunt_is_c, kh) in enumerate(sections, start=1):
        a, b = f"n{i - 1}", f"n{i}"
        for name, p, q, is_c, k in ((f"s{i}", a, b, series_is_c, ks), (f"h{i}", b, GROUND, shunt_is_c, kh)):
            if is_c:
                net.c(name, p, q, 1e-9 * 10.0 ** k)
            else:
                net.r(name, p, q, 100.0 * 10.0 ** k)
            parts.append((p, q, is_c, 1e-9 * 10.0 ** k if is_c else 100.0 * 10.0 ** k))
    n = len(sections)
    return net.circuit("n0", f"n{n}"), parts, n


def reference(parts, n):
    """Nodal equations: unknowns n1..nn, n0 held at 1 V, ground at 0 V."""
    out = np.empty((len(F), n), dtype=complex)
    unknown = {f"n{i}": i - 1 for i in range(1, n + 1)}
    for m, f in enumerate(F):
        y = np.zeros((n, n), dtype=complex)
        rhs = np.zeros(n, dtype=complex)
        for p, q, is_c, v in parts:
            adm = 2j * np.pi * f * v if is_c else 1.0 / v
            for x, other in ((p, q), (q, p)):
                if x not in unknown:
                    continue
                y[unknown[x], unknown[x]] += adm
                if other in unknown:
                    y[unknown[x], unknown[other]] -= adm
                elif other == "n0":
                    rhs[unknown[x]] += adm * 1.0
        out[m] = scipy.linalg.solve(y, rhs)
    return out


@settings(max_examples=40, deadline=None, derandomize=True)
@given(st.lists(section, min_size=1, max_size=6))
def test_rc_ladders_are_passive_and_match_a_dense_solve(sections):
    circuit, parts, n = build(sections)
    resp = response(linearize(circuit, dc_of()), F)
    ref = reference(parts, n)
    for i in range(1, n + 1):
        h = resp.h[f"n{i}"]
        assert np.all(np.abs(h) <= 1.0 + 1e-12)
        assert_allclose(h, ref[:, i - 1], rtol=1e-9, atol=1e-14)
