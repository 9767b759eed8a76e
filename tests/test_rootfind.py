"""chain.rootfind.brent against scipy.optimize.brentq (the reference library)."""

import math

import pytest
from scipy.optimize import brentq

from chain.rootfind import brent

CASES = [
    ("cubic", lambda x: x ** 3 - 2 * x - 5, 2.0, 3.0),  # Wallis's cubic
    ("cosine", lambda x: math.cos(x) - x, 0.0, 1.0),
    ("steep", lambda x: math.tanh(50 * (x - 0.3)), -1.0, 2.0),
    ("flat near the root", lambda x: x ** 5 - 1e-3, 0.0, 3.5),
    ("-3 dB of a first-order high-pass in log10 f", lambda x: 1 / math.sqrt(1 + (30.0 / 10 ** x) ** 2)
     - 1 / math.sqrt(2), 0.0, 4.0),
]


@pytest.mark.parametrize("name, f, a, b", CASES, ids=[c[0] for c in CASES])
def test_agrees_with_scipy_brentq(name, f, a, b):
    ref = brentq(f, a, b, xtol=1e-14, rtol=8.9e-16)
    got = brent(f, a, b, xtol=1e-14)
    assert got == pytest.approx(ref, rel=1e-12, abs=1e-12)


def test_high_pass_corner_is_its_textbook_frequency():
    """f_c = 1/(2·pi·R·C) for a first-order RC high-pass (any circuits text)."""
    r, c = 1e6, 22e-9
    fc = 1 / (2 * math.pi * r * c)
    x = brent(lambda x: 1 / math.sqrt(1 + (fc / 10 ** x) ** 2) - 1 / math.sqrt(2), 0.0, 3.0)
    assert 10 ** x == pytest.approx(fc, rel=1e-12)


def test_refuses_a_bracket_without_a_sign_change():
    with pytest.raises(ValueError):
        brent(lambda x: x * x + 1, -1.0, 1.0)
