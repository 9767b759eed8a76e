"""The stage-by-stage starting guess (issue 16 item 9: vectorised).  Its
definition: Gauss-Seidel sweeps placing each triode on its load and bias
lines given the others' currents, forming every node voltage each time.
The fast form, which needs only each triode's own vpk and vgk, must give
the same guess to rounding."""

from pathlib import Path

import numpy as np

from chain.build import load
from chain.dc.engine import _GUESS_SWEEPS, _load_point, compile_network

LEAD = Path(__file__).parents[2] / "netlists" / "lead_four_stage.chain"


def reference_guess(system) -> np.ndarray:
    """The guess by its definition, every node voltage formed at every step."""
    system._prepare_guess()
    x_base = system._z @ system.rhs(0.0)
    current = np.zeros(len(system.triode_names))
    for _ in range(_GUESS_SWEEPS):
        change = 0.0
        for i in system._order:
            v = system._padded_v(x_base + system._d @ current - system._d[:, i] * current[i])
            new = _load_point(system._models[i], v[system._p[i]] - v[system._k[i]], system._dvpk[i],
                              v[system._g[i]] - v[system._k[i]], system._dvgk[i])
            change = max(change, abs(new - current[i]))
            current[i] = new
        if change <= 1e-9 + 1e-4 * float(np.abs(current).max()):
            break
    return x_base + system._d @ current


def test_fast_guess_equals_its_definition():
    _, circuit, _ = load(LEAD)
    system = compile_network(circuit)
    assert np.allclose(system.initial_guess(0.0), reference_guess(system), rtol=1e-12, atol=1e-9)
