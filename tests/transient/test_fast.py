"""The compiled stepping loop (chain.transient.fast) is the numpy stepper, faster.

Its scalar Koren and grid-current equations are checked against the library
functions of chain.tubes (which carry the published sources), and whole runs
against the numpy stepper of chain.transient.engine, including steps the
compiled loop hands back for halving.
"""

import math

import numpy as np
import pytest

from chain.transient import TransientOptions, compile_transient, simulate
from chain.transient import fast
from chain.tubes import grid_current_and_derivative, lookup, plate_current_and_derivatives

pytestmark = pytest.mark.skipif(not fast.AVAILABLE, reason="numba is not installed")


def test_scalar_tube_equations_are_the_library_ones():
    rng = np.random.default_rng(11)
    for name in ("12AX7", "12AT7", "12AU7"):
        model = lookup(name)
        prm = fast.triode_params([model])[0]
        out = np.empty(5)
        for vpk, vgk in zip(rng.uniform(-20, 450, 300), rng.uniform(-40, 3, 300)):
            fast.koren_scalar(prm, vpk, vgk, out)
            ip, gm, gp = plate_current_and_derivatives(model, vpk, vgk)
            ig, gg = grid_current_and_derivative(model, vgk)
            np.testing.assert_allclose(out, [ip, gm, gp, ig, gg], rtol=1e-12, atol=1e-300)


@pytest.mark.parametrize("max_iter", [40, 5])
def test_compiled_run_equals_the_numpy_stepper(two_stages, max_iter, monkeypatch):
    """Same waveforms; with 5 Newton iterations allowed, hard-driven steps are halved (in the loop, or by the numpy stepper)."""
    system = compile_transient(two_stages, options=TransientOptions(max_iter=max_iter))
    calls = []
    kernel = fast.run_kernel
    monkeypatch.setattr(fast, "run_kernel", lambda *a: calls.append(1) or kernel(*a))

    # sampled input: both engines take it as a straight line between samples (also within halved steps)
    u = 2.0 * np.sin(2 * math.pi * 2000.0 * np.arange(73) / 48e3)
    a = simulate(system, u, 48e3, oversample=2, engine="compiled")
    b = simulate(system, u, 48e3, oversample=2, engine="numpy")
    # same steps: same numbers; where the two halve different steps they differ by the
    # method's truncation error (a step against two half steps): 2e-3 of the swing here
    rel = 1e-7 if max_iter == 40 else 5e-3
    for node in a.v:
        assert np.abs(a.v[node] - b.v[node]).max() <= rel * (1.0 + np.ptp(b.v[node])), node
