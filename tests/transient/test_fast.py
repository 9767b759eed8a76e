"""The compiled stepping loop (chain.transient.fast) is the numpy stepper, faster.

Its scalar Koren and grid-current equations are checked against the library
functions of chain.tubes (which carry the published sources), and whole runs
against the numpy stepper of chain.transient.engine, including steps the
compiled loop hands back for halving.
"""

import math
from dataclasses import replace

import numpy as np
import pytest

from chain.transient import TransientOptions, compile_transient, simulate
from chain.transient import fast
from chain.tubes import grid_current_and_derivative, lookup, plate_current_and_derivatives

pytestmark = pytest.mark.skipif(not fast.AVAILABLE, reason="numba is not installed")


def test_scalar_tube_equations_are_the_library_ones():
    rng = np.random.default_rng(11)
    for name, form in [(n, f) for n in ("12AX7", "12AT7", "12AU7") for f in ("koren", "dempwolf")]:
        model = replace(lookup(name), form=form, vct=0.3 if form == "koren" else 0.0,
                        dz_vct=0.2 if form == "dempwolf" else 0.0)
        prm = fast.triode_params([model])[0]
        out = np.empty(5)
        for vpk, vgk in zip(rng.uniform(-20, 450, 300), rng.uniform(-40, 3, 300)):
            fast.koren_scalar(prm, vpk, vgk, out)
            ip, gm, gp = plate_current_and_derivatives(model, vpk, vgk)
            ig, gg = grid_current_and_derivative(model, vgk)
            np.testing.assert_allclose(out, [ip, gm, gp, ig, gg], rtol=1e-12, atol=1e-300)


def _worst(a, b):
    return max(np.abs(a.v[n] - b.v[n]).max() / (1.0 + np.ptp(b.v[n])) for n in b.v)


def test_compiled_run_equals_the_numpy_stepper(two_stages):
    """Same steps, same numbers: the compiled loop against the numpy stepper, driven into clipping."""
    system = compile_transient(two_stages)
    u = 2.0 * np.sin(2 * math.pi * 2000.0 * np.arange(49) / 48e3)
    a = simulate(system, u, 48e3, oversample=2, engine="compiled")
    b = simulate(system, u, 48e3, oversample=2, engine="numpy")
    assert _worst(a, b) <= 1e-7


def test_halved_steps_stay_within_the_methods_own_error(two_stages):
    """With 5 Newton iterations allowed, hard-driven steps are halved (in the loop or handed back to the
    numpy stepper): the result stays as close to a fine-step run (16 steps per sample) as the plain run is."""
    u = 2.0 * np.sin(2 * math.pi * 2000.0 * np.arange(49) / 48e3)
    fine = simulate(compile_transient(two_stages), u, 48e3, oversample=16, engine="compiled")
    plain = simulate(compile_transient(two_stages), u, 48e3, oversample=2, engine="compiled")
    system = compile_transient(two_stages, options=TransientOptions(max_iter=5))
    halved = simulate(system, u, 48e3, oversample=2, engine="compiled")
    numpy_halved = simulate(system, u, 48e3, oversample=2, engine="numpy")
    bound = max(_worst(plain, fine), 1e-3)
    assert _worst(halved, fine) <= 1.5 * bound
    assert _worst(numpy_halved, fine) <= 1.5 * bound
