"""Harmonics of a sampled periodic waveform, and total harmonic distortion.

Pure numerics (numpy only); nothing here knows about circuits.

Definitions
-----------
A waveform sampled at ``N`` equally spaced instants over exactly one period,
``y_j = y(2πj/N)``, ``j = 0 … N−1``, has the discrete Fourier coefficients
``Y_n = Σ_j y_j · exp(−2πi·n·j/N)``.  For ``1 <= n < N/2`` the peak amplitude
of the n-th harmonic is ``h_n = 2·|Y_n| / N`` (exact for a waveform whose
harmonics above N/2 vanish; otherwise those fold back — aliasing — so choose
N well above twice the highest harmonic of interest).

Total harmonic distortion, as used throughout `chain`::

    THD = sqrt(h_2² + h_3² + … + h_9²) / h_1

(the harmonics 2 to 9, relative to the fundamental — the common
"THD-F" form, a ratio of peak amplitudes, equal to the ratio of rms values).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from chain.decibels import db_ratio

__all__ = [
    "HIGHEST_HARMONIC",
    "sine_phases",
    "harmonic_amplitudes",
    "harmonic_phases",
    "thd",
    "relative_db",
]

#: the highest harmonic counted in THD and reported in spectra
HIGHEST_HARMONIC = 9


def sine_phases(points: int) -> np.ndarray:
    """Phases ``θ_j = 2πj/N`` (rad) of ``N`` samples over one period.

    Parameters
    ----------
    points : int
        Number of samples ``N`` per period (>= 4).

    Returns
    -------
    numpy.ndarray
        Shape ``(N,)``, radians (a phase, not a frequency).
    """
    if points < 4:
        raise ValueError(f"need at least 4 samples per period, got {points}")
    return 2.0 * np.pi * np.arange(points) / points


def _coefficients(samples: ArrayLike, n_max: int) -> np.ndarray:
    y = np.asarray(samples, dtype=float)
    count = y.shape[-1]
    if count < 2 * n_max + 2:
        raise ValueError(f"{count} samples per period cannot resolve harmonic {n_max} "
                         f"(need at least {2 * n_max + 2})")
    return np.fft.rfft(y, axis=-1)[..., 1:n_max + 1] / count


def harmonic_amplitudes(samples: ArrayLike, *, n_max: int = HIGHEST_HARMONIC) -> np.ndarray:
    """Peak amplitudes ``h_1 … h_n_max`` of a sampled periodic waveform.

    ``h_n = 2·|Y_n|/N`` with ``Y_n`` the discrete Fourier coefficient (see
    the module docstring).

    Parameters
    ----------
    samples : array_like
        Shape ``(..., N)``: one period sampled at equal steps along the last
        axis, in any unit (the amplitudes come back in the same unit).
    n_max : int
        Highest harmonic returned.

    Returns
    -------
    numpy.ndarray
        Shape ``(..., n_max)``: element ``n − 1`` is the peak amplitude of
        harmonic ``n``.
    """
    return 2.0 * np.abs(_coefficients(samples, n_max))


def harmonic_phases(samples: ArrayLike, *, n_max: int = HIGHEST_HARMONIC) -> np.ndarray:
    """Phases (rad) of harmonics 1 … n_max as sine components.

    Harmonic n is ``h_n · sin(nθ + φ_n)``; returns ``φ_n`` in (−π, π].

    Parameters
    ----------
    samples : array_like
        Shape ``(..., N)``, one period.
    n_max : int
        Highest harmonic returned.

    Returns
    -------
    numpy.ndarray
        Shape ``(..., n_max)``, radians.
    """
    c = _coefficients(samples, n_max)
    # y ⊃ 2|c| cos(nθ + arg c) = 2|c| sin(nθ + arg c + π/2)
    return np.angle(c * 1j)


def thd(amplitudes: ArrayLike) -> np.ndarray | float:
    """Total harmonic distortion ``sqrt(Σ_{n=2..9} h_n²) / h_1``.

    Parameters
    ----------
    amplitudes : array_like
        Shape ``(..., M)`` with M >= 2: harmonic amplitudes ``h_1 … h_M`` as
        from :func:`harmonic_amplitudes`; harmonics above 9 are ignored.

    Returns
    -------
    float or numpy.ndarray
        The ratio (not %, not dB); ``inf`` where ``h_1 = 0`` and some
        harmonic is not, ``nan`` where everything is 0.
    """
    h = np.asarray(amplitudes, dtype=float)
    if h.shape[-1] < 2:
        raise ValueError("THD needs at least the fundamental and the second harmonic")
    top = min(h.shape[-1], HIGHEST_HARMONIC)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.sqrt(np.sum(h[..., 1:top] ** 2, axis=-1)) / h[..., 0]
    return out[()] if np.ndim(out) == 0 else out


def relative_db(amplitudes: ArrayLike) -> np.ndarray:
    """Harmonics 2 … M in dB relative to the fundamental: ``20·log10(h_n/h_1)``.

    Parameters
    ----------
    amplitudes : array_like
        Shape ``(..., M)``, ``h_1 … h_M``.

    Returns
    -------
    numpy.ndarray
        Shape ``(..., M − 1)``, dB (``-inf`` for a harmonic that is exactly 0).
    """
    h = np.asarray(amplitudes, dtype=float)
    return db_ratio(h[..., 1:], h[..., :1])
