"""The stage-by-stage starting guess (issue 16: vectorised).  Its
definition: Gauss-Seidel sweeps in signal order placing each triode on its
load and bias lines given the others' currents, forming every node voltage
each time from the inverse of the linear matrix (numpy.linalg.inv), each
load point a root of ``f(vpk0 + dvpk·I, vgk0 + dvgk·I) − I`` found by
scipy.optimize.brentq (the reference root finder).  The fast form — only each
triode's own vpk and vgk, triodes that do not move each other's lines placed
together — must give the same guess to the root finders' tolerance."""

from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import brentq

from chain.build import build, load
from chain.dc.engine import _GUESS_SWEEPS, _load_point, _load_points, compile_network
from chain.language import parse_text
from chain.tubes import plate_current_and_derivatives

from tests.cascades import cascade

LEAD = Path(__file__).parents[2] / "netlists" / "lead_four_stage.chain"


def brentq_load_point(model, vpk0, dvpk, vgk0, dvgk) -> float:
    def h(i_a):
        with np.errstate(over="ignore", invalid="ignore"):
            ip, _, _ = plate_current_and_derivatives(model, np.array([vpk0 + dvpk * i_a]),
                                                     np.array([vgk0 + dvgk * i_a]))
        value = float(ip[0]) - i_a
        return value if np.isfinite(value) else -1.0

    if h(0.0) <= 0.0:
        return 0.0
    hi = vpk0 / -dvpk  # the load line reaches Vpk = 0 (every triode here has a plate load)
    return brentq(h, 0.0, hi, xtol=1e-16, rtol=1e-13)


def reference_guess(system) -> np.ndarray:
    """The guess by its definition, every node voltage formed at every step."""
    z = np.linalg.inv(system._a)
    t = len(system.triode_names)
    n = len(system.nodes)
    d = np.zeros((system.size, t))
    for i in range(t):
        for node, sign in ((system._k[i], 1.0), (system._p[i], -1.0)):
            if node >= 0:
                d[:, i] += sign * z[:, node]

    def vpad(x):
        return np.r_[x[:n], 0.0]

    dvpk = np.array([vpad(d[:, i])[system._p[i]] - vpad(d[:, i])[system._k[i]] for i in range(t)])
    dvgk = np.array([vpad(d[:, i])[system._g[i]] - vpad(d[:, i])[system._k[i]] for i in range(t)])
    x_base = z @ system.rhs(0.0)
    current = np.zeros(t)
    for _ in range(_GUESS_SWEEPS):
        change = 0.0
        for i in system._order:
            v = vpad(x_base + d @ current - d[:, i] * current[i])
            new = brentq_load_point(system._models[i], v[system._p[i]] - v[system._k[i]], dvpk[i],
                                    v[system._g[i]] - v[system._k[i]], dvgk[i])
            change = max(change, abs(new - current[i]))
            current[i] = new
        if change <= 1e-9 + 1e-4 * float(np.abs(current).max()):
            break
    return x_base + d @ current


@pytest.mark.parametrize("which", ["lead", "cascade"])
def test_fast_guess_equals_its_definition(which):
    if which == "lead":
        _, circuit, _ = load(LEAD)
    else:  # twelve stages on rails of their own: the triodes are placed together
        circuit = build(parse_text(cascade(12), "c12.chain"))
    system = compile_network(circuit)
    got = system.initial_guess(0.0)
    assert np.allclose(got, reference_guess(system), rtol=1e-9, atol=1e-7)
    if which == "cascade":
        _, d, _, _ = system._prepare_guess()
        dpad = np.r_[d[:len(system.nodes)], np.zeros((1, d.shape[1]))]
        groups = system._guess_levels(dpad[system._p] - dpad[system._k], dpad[system._g] - dpad[system._k])
        assert len(groups) == 1 and groups[0].size == 12


def test_load_points_together_equal_one_at_a_time():
    """The vectorised load points, each with its own bracket and stop, give
    exactly the one-triode values (the same arithmetic per triode)."""
    _, circuit, _ = load(LEAD)
    models = tuple(t.model for t in circuit.triodes) * 3
    rng = np.random.default_rng(4)
    m = len(models)
    vpk0 = rng.uniform(-20.0, 400.0, m)
    dvpk = -rng.uniform(1e3, 3e5, m)
    vgk0 = rng.uniform(-4.0, 0.5, m)
    dvgk = -rng.uniform(0.0, 3e3, m)
    vgk0[::5] = -60.0  # cut off: no current
    ix = np.arange(m)
    together = _load_points(models, ix, vpk0, dvpk, vgk0, dvgk)
    alone = [_load_point(models[i], vpk0[i], dvpk[i], vgk0[i], dvgk[i]) for i in ix]
    assert np.array_equal(together, alone)
    assert np.any(together > 0.0) and np.any(together == 0.0)
