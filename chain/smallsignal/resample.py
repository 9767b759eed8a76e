"""Reading a sampled response at other frequencies (for reports and comparisons)."""

from __future__ import annotations

import numpy as np

__all__ = ["on_log_grid"]


def on_log_grid(f_hz, values, at_hz) -> np.ndarray:
    """``values`` sampled at ``f_hz`` (increasing, Hz), read at ``at_hz``.

    Linear interpolation against log10 frequency over the finite samples —
    exact for anything linear in log f, such as a dB slope of a first-order
    corner far from it, and within a few thousandths of a dB on a sweep of a
    few hundred points per band.  NaN outside the sampled band or when fewer
    than two samples are finite.  On the same grid the samples come back as
    they are.
    """
    f = np.asarray(f_hz, dtype=float)
    v = np.asarray(values, dtype=float)
    at = np.asarray(at_hz, dtype=float)
    if f.shape == at.shape and np.array_equal(f, at):
        return v.copy()
    out = np.full(at.shape, np.nan)
    ok = np.isfinite(v)
    if ok.sum() < 2:
        return out
    fo = f[ok]
    inside = (at >= fo[0]) & (at <= fo[-1])
    out[inside] = np.interp(np.log10(at[inside]), np.log10(fo), v[ok])
    return out
