"""Large-signal headroom: where each stage clips, which one first, and how it distorts.

Everything here works on the quasi-static mid-band model of
:mod:`chain.headroom.network` — coupling, bypass and rail-decoupling
capacitors held at their DC voltages, small capacitors open, those in
between standing in as resistors of their reactance, inductors shorted,
triodes with their full plate- and grid-current model.

* :func:`transfer_curves` → :class:`TransferCurves` — every stage's input and
  output node, and the chain output, against the swept source voltage;
* :func:`headroom` → :class:`Headroom` — per stage the grid-conduction and
  cutoff onsets and the 1 dB / 3 dB compression points per half-wave, THD thresholds, output swing, margin at the
  stated level; the first stage to clip and a one-line summary; the limits
  of the method;
* :func:`distortion` → :class:`Distortion` — harmonics 2–9 and THD of a sine
  through the chain, per stage and overall;
* :mod:`chain.headroom.harmonics` — FFT harmonics and THD of a sampled period.
"""

from chain.headroom.clipping import (
    COMPRESSION_DB,
    CUTOFF,
    Compression,
    GRID_CONDUCTION,
    LIMITS,
    HalfWaveLimit,
    Headroom,
    Onset,
    StageHeadroom,
    dbv,
    headroom,
)
from chain.headroom.curves import TransferCurves, transfer_curves
from chain.headroom.distortion import Distortion, Spectrum, StageDistortion, distortion, thd_versus_level
from chain.headroom.harmonics import harmonic_amplitudes, relative_db, thd
from chain.headroom.network import CapacitorTreatment, MidBandNetwork, mid_band_capacitors

__all__ = [
    "transfer_curves",
    "TransferCurves",
    "headroom",
    "Headroom",
    "StageHeadroom",
    "HalfWaveLimit",
    "Onset",
    "Compression",
    "COMPRESSION_DB",
    "GRID_CONDUCTION",
    "CUTOFF",
    "LIMITS",
    "dbv",
    "distortion",
    "Distortion",
    "StageDistortion",
    "Spectrum",
    "thd_versus_level",
    "harmonic_amplitudes",
    "thd",
    "relative_db",
    "mid_band_capacitors",
    "CapacitorTreatment",
    "MidBandNetwork",
]
