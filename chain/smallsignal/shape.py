"""The shape of a response as a practitioner quotes it: band edges, peaks and
dips, and the levels of the low and high shelves.

A guitar preamp's response is rarely a plain band-pass: a pickup resonates
(a peak of several dB at 2–6 kHz), a passive tone network scoops the mids (a
dip of 10 dB and more around 400–800 Hz).  "The −3 dB corners" of such a
response say little; what is quoted instead is

* the **band edges**: the outermost −3 dB points relative to the level at the
  reference frequency (:func:`chain.smallsignal.corners`);
* every **peak** and **dip** that stands out from its surroundings, with its
  frequency and its height relative to the reference level;
* the **shelves**: the average level of the bass region (an octave around
  100 Hz, 70–140 Hz) and of the treble region (an octave around 5 kHz,
  3.5–7 kHz) — where bass and treble controls act (common practice) — as
  gains and relative to the reference level.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from chain.decibels import db, db_array
from chain.smallsignal.response import Response, transfer_function

__all__ = ["Extremum", "ResponseShape", "response_shape", "peaks_with_prominence", "golden_max", "PROMINENCE_DB",
           "LOW_SHELF_HZ", "HIGH_SHELF_HZ"]

#: a peak or dip is reported when it stands out from its surroundings by at least this much, dB
PROMINENCE_DB = 1.0
#: the bass and treble regions whose average level is the shelf, Hz (an octave around 100 Hz and 5 kHz)
LOW_SHELF_HZ = (70.0, 140.0)
HIGH_SHELF_HZ = (3500.0, 7000.0)


@dataclass(frozen=True, slots=True)
class Extremum:
    """A peak or a dip of the response."""

    #: "peak" or "dip"
    kind: str
    f_hz: float
    #: the response there, dB (source EMF to output)
    gain_db: float
    #: height above (peak, > 0 usually) or below (dip) the reference level, dB
    relative_db: float
    #: how far it stands out from the higher of the lowest points within an
    #: octave on either side (peak), or below the lower of the highest points
    #: within an octave on either side (dip), dB (> 0)
    prominence_db: float


@dataclass(frozen=True, slots=True)
class ResponseShape:
    """Band edges, peaks, dips and shelves of one response (see the module docstring)."""

    #: the level the edges, heights and shelves are relative to: |H(f_ref)|, dB
    reference_db: float
    f_ref_hz: float
    #: outermost −3 dB band edges, Hz; None when outside the band
    f_low_hz: float | None
    f_high_hz: float | None
    #: peaks and dips, in frequency order
    peaks: tuple[Extremum, ...]
    dips: tuple[Extremum, ...]
    #: mean level over LOW_SHELF_HZ and HIGH_SHELF_HZ, dB (source EMF to output);
    #: None when that region is not inside the band
    low_shelf_db: float | None
    high_shelf_db: float | None

    @property
    def low_shelf_relative_db(self) -> float | None:
        """The low shelf relative to the reference level, dB."""
        return None if self.low_shelf_db is None else self.low_shelf_db - self.reference_db

    @property
    def high_shelf_relative_db(self) -> float | None:
        """The high shelf relative to the reference level, dB."""
        return None if self.high_shelf_db is None else self.high_shelf_db - self.reference_db


def response_shape(resp: Response, f_ref_hz: float, node: str | None = None, *,
                   prominence_db: float = PROMINENCE_DB) -> ResponseShape:
    """The :class:`ResponseShape` of ``H(node)`` (default: the output).

    Peaks and dips are the local maxima and minima of the sampled dB response
    whose topographic prominence within one octave either side
    (:func:`peaks_with_prominence`, a two-octave window) is at least
    ``prominence_db``; points at the ends of the band are never peaks.  Each
    is then located on the exact response by a golden-section search
    (:func:`golden_max`) between its grid neighbours.  A
    shelf is the mean of the exact dB response at 17 log-spaced points over
    its region.
    """
    from chain.smallsignal.corners import corners

    node = resp.ss.circuit.output_node if node is None else node
    fn = transfer_function(resp.ss, node)

    def level_db(f_hz: float) -> float:
        return db(complex(fn(f_hz)))

    f = np.asarray(resp.f_hz, dtype=float)
    ref_db = level_db(f_ref_hz)
    low, high = corners(f, resp.h[node], evaluate=lambda x: complex(fn(x)), ref_hz=f_ref_hz)
    mag_db = np.nan_to_num(db_array(resp.h[node]), nan=-600.0, neginf=-600.0)
    logf = np.log10(f)

    # prominence is measured within one octave either side (a bump on a plateau
    # that only ends where the band rolls off is no peak)
    per_octave = (f.size - 1) / max(np.log2(f[-1] / f[0]), 1e-12)
    window = max(3, int(round(2.0 * per_octave)) | 1)

    def extrema(sign: float, kind: str) -> tuple[Extremum, ...]:
        out = []
        for i, prom in peaks_with_prominence(sign * mag_db, prominence_db, window):
            lo, hi = logf[max(i - 1, 0)], logf[min(i + 1, f.size - 1)]
            x = golden_max(lambda xx: sign * level_db(10.0 ** xx), lo, hi)
            at_db = level_db(10.0 ** x)
            out.append(Extremum(kind, 10.0 ** x, at_db, at_db - ref_db, float(prom)))
        return tuple(out)

    def shelf(region: tuple[float, float]) -> float | None:
        if not (f[0] <= region[0] and region[1] <= f[-1]):
            return None
        points = np.geomspace(region[0], region[1], 17)
        return float(np.mean([level_db(x) for x in points]))

    return ResponseShape(
        reference_db=ref_db, f_ref_hz=float(f_ref_hz), f_low_hz=low, f_high_hz=high,
        peaks=extrema(1.0, "peak"), dips=extrema(-1.0, "dip"),
        low_shelf_db=shelf(LOW_SHELF_HZ), high_shelf_db=shelf(HIGH_SHELF_HZ),
    )


def peaks_with_prominence(y: np.ndarray, min_prominence: float, window: int) -> list[tuple[int, float]]:
    """``(index, prominence)`` of the local maxima of ``y`` whose prominence is at least ``min_prominence``.

    A local maximum is a sample higher than its left neighbour and than the
    first different sample to its right (a flat top is one peak, at the
    middle of the plateau, rounded down).  Its topographic prominence is its
    height above the higher of the lowest points on either side, each
    searched from the peak outwards until a higher sample or the edge of a
    window of ``window`` samples centred on the peak.  The same definitions
    as ``scipy.signal.find_peaks`` with ``prominence`` and ``wlen`` (the
    tests check one against the other); written out here so that a report
    need not import scipy.
    """
    y = np.asarray(y, dtype=float)
    n = y.size
    half = window // 2
    out = []
    i = 1
    while i < n - 1:
        if y[i - 1] < y[i]:
            j = i
            while j + 1 < n - 1 and y[j + 1] == y[i]:
                j += 1
            if y[j + 1] < y[i]:
                peak = (i + j) // 2
                lo, hi = max(0, peak - half), min(n - 1, peak + half)
                left = y[peak]
                k = peak
                while k > lo and y[k - 1] <= y[peak]:
                    k -= 1
                    left = min(left, y[k])
                right = y[peak]
                k = peak
                while k < hi and y[k + 1] <= y[peak]:
                    k += 1
                    right = min(right, y[k])
                prominence = float(y[peak] - max(left, right))
                if prominence >= min_prominence:
                    out.append((peak, prominence))
            i = j + 1
        else:
            i += 1
    return out


def golden_max(g, a: float, b: float, *, tol: float = 1e-9, maxiter: int = 200) -> float:
    """The argument of the maximum of ``g`` on ``[a, b]`` by golden-section
    search (any numerical-methods text, e.g. Press et al., "Numerical Recipes",
    section 10.2, from memory); ``g`` should have one maximum there."""
    ratio = (math.sqrt(5.0) - 1.0) / 2.0
    c, d = b - ratio * (b - a), a + ratio * (b - a)
    gc, gd = g(c), g(d)
    for _ in range(maxiter):
        if abs(b - a) <= tol:
            break
        if gc >= gd:
            b, d, gd = d, c, gc
            c = b - ratio * (b - a)
            gc = g(c)
        else:
            a, c, gc = c, d, gd
            d = a + ratio * (b - a)
            gd = g(d)
    return (a + b) / 2.0
