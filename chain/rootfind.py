"""A bracketed scalar root finder (Brent's method), without scipy.

``scipy.optimize`` costs 0.35-0.45 s to import; the report needs one
bracketed root per corner frequency.  This is Brent's method (from memory
of R. P. Brent, "Algorithms for Minimization without Derivatives", 1973,
ch. 4, in the form of W. H. Press et al., "Numerical Recipes", ``zbrent``):
inverse quadratic interpolation or secant steps, falling back to bisection
whenever they would not shrink the bracket fast enough, so it converges at
least as surely as bisection.  ``tests/test_rootfind.py`` checks it against
``scipy.optimize.brentq``.
"""

from __future__ import annotations

import math
from typing import Callable

__all__ = ["brent"]

_EPS = 2.220446049250313e-16


def brent(f: Callable[[float], float], a: float, b: float, *, xtol: float = 1e-14,
          rtol: float = 4 * _EPS, maxiter: int = 100) -> float:
    """A root of ``f`` in ``[a, b]``, where ``f(a)`` and ``f(b)`` differ in sign.

    Stops when the bracket is narrower than ``xtol + rtol·|x|`` (both ends
    within it of the root), or after ``maxiter`` evaluations.

    Raises
    ------
    ValueError
        ``f(a)`` and ``f(b)`` have the same sign.
    """
    fa, fb = f(a), f(b)
    if fa == 0.0:
        return a
    if fb == 0.0:
        return b
    if (fa > 0.0) == (fb > 0.0):
        raise ValueError("f(a) and f(b) must differ in sign")
    c, fc = b, fb
    d = e = b - a
    for _ in range(maxiter):
        if (fb > 0.0) == (fc > 0.0):
            c, fc = a, fa
            d = e = b - a
        if abs(fc) < abs(fb):
            a, b, c = b, c, b
            fa, fb, fc = fb, fc, fb
        tol1 = rtol * abs(b) + 0.5 * xtol
        xm = 0.5 * (c - b)
        if abs(xm) <= tol1 or fb == 0.0:
            return b
        if abs(e) >= tol1 and abs(fa) > abs(fb):
            s = fb / fa
            if a == c:  # secant
                p, q = 2.0 * xm * s, 1.0 - s
            else:  # inverse quadratic interpolation
                q, r = fa / fc, fb / fc
                p = s * (2.0 * xm * q * (q - r) - (b - a) * (r - 1.0))
                q = (q - 1.0) * (r - 1.0) * (s - 1.0)
            if p > 0.0:
                q = -q
            p = abs(p)
            if 2.0 * p < min(3.0 * xm * q - abs(tol1 * q), abs(e * q)):
                e, d = d, p / q
            else:
                d = e = xm
        else:
            d = e = xm
        a, fa = b, fb
        b += d if abs(d) > tol1 else math.copysign(tol1, xm)
        fb = f(b)
    return b
