"""Decibels and phase: the one home of ``20·log10|x|`` and ``arg x``.

Amplitude ratios in dB are ``20·log10|x|`` (the ratio of two voltages, or of
a voltage to 1 V for dBV with ``x`` in V rms).  Zero gives −inf and NaN
stays NaN, never a warning or an exception: a node that receives no signal is
a fact to report, not an error.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike

__all__ = ["db", "db_array", "db_ratio", "phase_deg", "phase_deg_array"]


def db(ratio: complex | float) -> float:
    """``20·log10|ratio|`` in dB for one number (−inf for 0, NaN for NaN)."""
    mag = abs(ratio)
    if math.isnan(mag):
        return math.nan
    return 20.0 * math.log10(mag) if mag > 0.0 else -math.inf


def db_array(values: ArrayLike) -> np.ndarray:
    """``20·log10|values|`` elementwise, dB (−inf where 0, NaN where NaN)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return 20.0 * np.log10(np.abs(np.asarray(values)))


def db_ratio(num: ArrayLike, den: ArrayLike) -> np.ndarray:
    """``20·log10(num/den)`` for magnitudes, dB; −inf or NaN (not a crash) when a side is 0."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return 20.0 * np.log10(np.asarray(num, dtype=float) / np.asarray(den, dtype=float))


def phase_deg(value: complex) -> float:
    """Phase of one complex number in degrees, in (−180, 180]."""
    return math.degrees(math.atan2(value.imag, value.real))


def phase_deg_array(values: ArrayLike, *, unwrap: bool = True) -> np.ndarray:
    """Phase in degrees along a frequency axis; unwrapped (continuous) by default."""
    ang = np.angle(np.asarray(values))
    return np.degrees(np.unwrap(ang) if unwrap else ang)
