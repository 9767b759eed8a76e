"""−3 dB corner frequencies of a sampled response, refined on the exact response."""

from __future__ import annotations

import math
from typing import Callable

import numpy as np
from numpy.typing import ArrayLike

from chain.rootfind import brent
from chain.smallsignal.response import Response, transfer_function
from chain.decibels import db

__all__ = ["corners", "response_corners"]

#: half-power ratio: the "−3 dB" point is |H| = |H_ref| / √2 (−3.0103 dB)
HALF_POWER = 1.0 / math.sqrt(2.0)


def corners(
    f_hz: ArrayLike,
    h: ArrayLike,
    *,
    evaluate: Callable[[float], complex] | None = None,
    ref_hz: float | None = None,
) -> tuple[float | None, float | None]:
    """Outermost lower and upper half-power (−3 dB) band edges of ``h``.

    Reference ("mid-band") level: the largest ``|h|`` on the grid, or
    ``|H(ref_hz)|`` when ``ref_hz`` is given.  The band edges are the
    *outermost* crossings of ``reference/√2``: the lower edge where ``|h|``
    first rises to it coming up from the low end of the grid, the upper edge
    where it last falls below it.  A dip below the −3 dB level between the
    edges (a tone network's scoop) is a dip, not an edge; see
    :func:`chain.smallsignal.shape.response_shape`.  The crossing is
    estimated by linear interpolation of dB against log frequency and, when
    ``evaluate`` (the exact, continuous ``H(f)``) is given, refined with
    Brent's method (``scipy.optimize.brentq``) on ``|H(f)| − reference/√2``
    inside that bracket.

    Parameters
    ----------
    f_hz
        Increasing frequencies, Hz (a log grid works best).
    h
        Complex (or real) transfer at ``f_hz``.
    evaluate
        Exact ``H(f)`` for one frequency in Hz, e.g.
        :func:`chain.smallsignal.transfer_function`.
    ref_hz
        Reference frequency, Hz, inside the grid; default: the grid maximum.

    Returns
    -------
    (f_low_hz, f_high_hz)
        Each ``None`` when ``|h|`` is at or above the −3 dB level at that end
        of the grid (the edge is outside the band).
    """
    f = np.asarray(f_hz, dtype=float)
    mag = np.abs(np.asarray(h))
    if f.ndim != 1 or f.shape != mag.shape or f.size < 2 or np.any(np.diff(f) <= 0.0):
        raise ValueError("f_hz must be increasing, 1-D, at least two points, and match h")
    if ref_hz is None:
        ref = float(np.max(mag))
    else:
        if not f[0] <= ref_hz <= f[-1]:
            raise ValueError(f"ref_hz={ref_hz!r} is outside the grid")
        if evaluate is not None:
            ref = abs(complex(evaluate(ref_hz)))
        else:
            ref = float(np.interp(math.log(ref_hz), np.log(f), mag))
    if not ref > 0.0:
        return None, None
    target = ref * HALF_POWER

    inside = np.nonzero(mag >= target)[0]
    if inside.size == 0:
        return None, None
    first, last = int(inside[0]), int(inside[-1])
    low = None if first == 0 else _crossing(f[first - 1], f[first], mag[first - 1], mag[first], target, evaluate)
    high = None if last == f.size - 1 else _crossing(f[last], f[last + 1], mag[last], mag[last + 1], target,
                                                      evaluate)
    return low, high


def response_corners(resp: Response, node: str | None = None, *,
                     ref_hz: float | None = None) -> tuple[float | None, float | None]:
    """:func:`corners` of ``resp.h[node]`` (default: the output node), refined exactly."""
    node = resp.ss.circuit.output_node if node is None else node
    fn = transfer_function(resp.ss, node)
    return corners(resp.f_hz, resp.h[node], evaluate=lambda f: complex(fn(f)), ref_hz=ref_hz)


def _crossing(f0: float, f1: float, m0: float, m1: float, target: float,
              evaluate: Callable[[float], complex] | None) -> float:
    """Frequency (Hz) in [f0, f1] where |H| crosses ``target``."""
    x0, x1 = math.log10(f0), math.log10(f1)
    d0, d1, dt = (db(max(v, 1e-300)) for v in (m0, m1, target))
    x = x0 if d1 == d0 else x0 + (dt - d0) * (x1 - x0) / (d1 - d0)
    if evaluate is None:
        return 10.0 ** x
    def g(xx: float) -> float:
        return abs(complex(evaluate(10.0 ** xx))) - target

    g0, g1 = g(x0), g(x1)
    if g0 == 0.0:
        return f0
    if g1 == 0.0:
        return f1
    if (g0 > 0.0) == (g1 > 0.0):
        return 10.0 ** x
    return 10.0 ** brent(g, x0, x1, xtol=1e-14, rtol=4 * np.finfo(float).eps)
