"""Harmonic distortion of a sine through the chain, per stage and overall.

Two routes:

* :func:`distortion` solves the mid-band network directly at ``N`` phase
  points of one period of a sine of peak ``level_v`` at the source (the
  sine's symmetry needs only ``N/2 + 1`` distinct solves), then takes the
  harmonics of every watched node's waveform (:mod:`chain.headroom.harmonics`).
* :func:`thd_versus_level` reads already swept :class:`TransferCurves`
  (monotone cubic interpolation) for many levels at once — used to find the
  level at which a stage reaches a THD threshold.

A stage's own distortion
------------------------
A stage in a chain is driven by a waveform that already carries the
earlier stages' harmonics.  What the stage itself adds is measured as in a
null test: the stage output ``y`` minus its input ``x`` scaled by the gain
at the fundamental, ``g = b1(y)/b1(x)`` (``b1`` the sine component of the
fundamental; quasi-static waveforms are functions of ``sin θ``, so their
fundamental is a pure sine component and ``g`` is real, negative for an
inverting stage)::

    r(t) = y(t) − g·x(t)
    own THD = sqrt(Σ_{n=2..9} r_n²) / y_1

with ``r_n`` the harmonics of the residual and ``y_1`` the output
fundamental.  The residual holds no fundamental; a stage that passes an
already distorted wave on linearly adds nothing; for a clean sine at the
input the own THD is the ordinary THD of the output.  Inside a feedback
loop the residual also carries distortion fed back from later stages.

Half-wave distortion
--------------------
To tell which half-wave of the input a stage distorts first, each half-wave
is also measured alone: the waveform over the half-cycle where the source
is positive (or negative) is extended to a full period as an odd-symmetric
wave, ``w(θ + π) = −w(θ)``, and the own THD of that wave is taken (it has
odd harmonics only).
"""

from __future__ import annotations

from dataclasses import dataclass
from types import MappingProxyType
from typing import Iterable, Mapping

import numpy as np

from chain.decibels import db_ratio
from chain.circuit import Circuit, StageRecord
from chain.dc import DcSolution, SolveOptions
from chain.headroom.curves import TransferCurves, build_network, watched_nodes
from chain.headroom.harmonics import HIGHEST_HARMONIC, harmonic_amplitudes, relative_db, sine_phases, thd
from chain.headroom.network import CapacitorTreatment, MidBandNetwork

__all__ = [
    "Spectrum",
    "StageDistortion",
    "Distortion",
    "distortion",
    "distortion_in",
    "thd_versus_level",
    "own_thd",
    "own_harmonics",
    "null_gain",
    "level_for_thd",
]


@dataclass(frozen=True, slots=True)
class Spectrum:
    """Harmonics of one node's waveform.

    Attributes
    ----------
    node : str
    amplitudes_v : tuple[float, ...]
        Peak amplitudes of harmonics 1 … 9, V.
    mean_shift_v : float
        Average of the waveform minus the node's DC voltage, V (the shift
        rectification by the nonlinearity gives).
    """

    node: str
    amplitudes_v: tuple[float, ...]
    mean_shift_v: float

    @property
    def fundamental_v(self) -> float:
        return self.amplitudes_v[0]

    @property
    def relative_db(self) -> tuple[float, ...]:
        """Harmonics 2 … 9 in dB relative to the fundamental."""
        return tuple(float(v) for v in relative_db(np.array(self.amplitudes_v)))

    @property
    def thd(self) -> float:
        """``sqrt(Σ_{n=2..9} h_n²)/h_1`` (ratio)."""
        return float(thd(np.array(self.amplitudes_v)))


@dataclass(frozen=True, slots=True)
class StageDistortion:
    """One stage driven as it really is in the chain.

    Attributes
    ----------
    stage : str
    input, output : Spectrum
        Harmonics at the stage's input and output node.
    gain_db : float
        Output fundamental over input fundamental, dB.
    small_signal_gain : float
        Slope dy/dx of the stage's transfer curve at the operating point
        (V/V, negative for an inverting stage).
    own_amplitudes_v : tuple[float, ...]
        Harmonics 1 … 9 of the null residual ``y − g·x`` (module
        docstring), V; the first is 0 up to rounding.
    """

    stage: str
    input: Spectrum
    output: Spectrum
    gain_db: float
    small_signal_gain: float
    own_amplitudes_v: tuple[float, ...]

    @property
    def own_relative_db(self) -> tuple[float, ...]:
        """The stage's own harmonics 2 … 9 in dB relative to its output fundamental."""
        h = np.array(self.own_amplitudes_v)
        return tuple(float(v) for v in db_ratio(h[1:], self.output.fundamental_v))

    @property
    def own_thd(self) -> float:
        """THD the stage adds itself (ratio; module docstring)."""
        h = np.array(self.own_amplitudes_v)
        return float(np.sqrt(np.sum(h[1:] ** 2)) / self.output.fundamental_v)


@dataclass(frozen=True, slots=True, eq=False)
class Distortion:
    """Distortion of a sine of peak ``level_v`` at the source (compared by identity).

    Attributes
    ----------
    level_v : float
        Source peak, V.
    points : int
        Phase points per period.
    phase_rad : numpy.ndarray
        The phases, rad.
    waveforms_v : Mapping[str, numpy.ndarray]
        Per watched node, its deviation from DC at each phase, V.
    stages : tuple[StageDistortion, ...]
        In signal order.
    overall : Spectrum
        The chain output.
    overall_gain_db : float
        Output fundamental over the source peak, dB.
    solves : int
        Network solves spent.
    """

    level_v: float
    points: int
    phase_rad: np.ndarray
    waveforms_v: Mapping[str, np.ndarray]
    stages: tuple[StageDistortion, ...]
    overall: Spectrum
    overall_gain_db: float
    solves: int

    def stage(self, name: str) -> StageDistortion:
        for s in self.stages:
            if s.stage == name:
                return s
        raise KeyError(name)


def null_gain(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Gain at the fundamental ``b1(y)/b1(x)`` along the last axis (samples at ``2πj/N``)."""
    s = np.sin(sine_phases(np.shape(x)[-1]))
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.sum(y * s, axis=-1) / np.sum(x * s, axis=-1)


def own_harmonics(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Harmonics 1 … 9 (peak) of the null residual ``y − g·x`` (module docstring)."""
    g = null_gain(x, y)
    return harmonic_amplitudes(y - np.asarray(g)[..., None] * x)


def own_thd(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Own THD ``sqrt(Σ_{n=2..9} r_n²)/y_1`` of ``x → y`` along the last axis (module docstring)."""
    r = own_harmonics(x, y)
    h = harmonic_amplitudes(y)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.sqrt(np.sum(r[..., 1:] ** 2, axis=-1)) / h[..., 0]


def _spectrum(node: str, wave: np.ndarray) -> Spectrum:
    h = harmonic_amplitudes(wave, n_max=HIGHEST_HARMONIC)
    return Spectrum(node=node, amplitudes_v=tuple(float(v) for v in h), mean_shift_v=float(np.mean(wave)))


def _slopes(net: MidBandNetwork, stages: tuple[StageRecord, ...], delta_v: float) -> list[float]:
    """Small-signal gain dy/dx of each stage from two solves at ±delta_v (central difference)."""
    if not stages:
        return []
    xs = np.array([net.solve(delta_v, net.x0), net.solve(-delta_v, net.x0)])
    out = []
    for stage in stages:
        v = net.node_voltages(xs, (stage.input, stage.output))
        dx = v[0, 0] - v[1, 0]
        out.append(float((v[0, 1] - v[1, 1]) / dx) if dx != 0.0 else float("nan"))
    return out


def distortion_in(net: MidBandNetwork, *, level_v: float, points: int = 128) -> Distortion:
    """As :func:`distortion`, on an already compiled network."""
    if not (np.isfinite(level_v) and level_v > 0.0):
        raise ValueError(f"level_v must be positive, got {level_v!r}")
    if points % 4 or points < 32:
        raise ValueError(f"points must be a multiple of 4 and at least 32, got {points}")
    solves0 = net.solves
    phase = sine_phases(points)
    quarter = points // 4
    # distinct values: level·sin(2πj/N) for j = 0 … N/4 (rising) and their negatives
    rising = level_v * np.sin(phase[:quarter + 1])
    pos = [net.x0]
    neg = [net.x0]
    for k in range(1, quarter + 1):
        back_v = rising[k - 2] if k >= 2 else None
        pos.append(net.step(rising[k], rising[k - 1], pos[-1], back_v, pos[-2] if k >= 2 else None))
        neg.append(net.step(-rising[k], -rising[k - 1], neg[-1], None if back_v is None else -back_v,
                            neg[-2] if k >= 2 else None))
    # sample j: rising to N/4, falling back to N/2, then the negative half the same way
    order = []
    for j in range(points):
        if j <= quarter:
            order.append(pos[j])
        elif j <= 2 * quarter:
            order.append(pos[2 * quarter - j])
        elif j <= 3 * quarter:
            order.append(neg[j - 2 * quarter])
        else:
            order.append(neg[4 * quarter - j])
    circuit = net.circuit
    nodes = watched_nodes(circuit)
    volts = net.node_voltages(np.array(order), nodes)
    dc_v = net.node_voltages(net.x0[None, :], nodes)[0]
    waves = {n: volts[:, i] - dc_v[i] for i, n in enumerate(nodes)}
    slopes = _slopes(net, tuple(circuit.stages), min(1e-4, 1e-2 * level_v))
    stages = []
    for s, slope in zip(circuit.stages, slopes):
        x_in, y_out = waves[s.input], waves[s.output]
        own = own_harmonics(x_in, y_out)
        spec_in, spec_out = _spectrum(s.input, x_in), _spectrum(s.output, y_out)
        gain_db = _db(spec_out.fundamental_v, spec_in.fundamental_v)
        stages.append(StageDistortion(stage=s.name, input=spec_in, output=spec_out, gain_db=gain_db,
                                      small_signal_gain=slope,
                                      own_amplitudes_v=tuple(float(v) for v in own)))
    overall = _spectrum(circuit.output_node, waves[circuit.output_node])
    for w in waves.values():
        w.setflags(write=False)
    phase.setflags(write=False)
    return Distortion(level_v=float(level_v), points=points, phase_rad=phase,
                      waveforms_v=MappingProxyType(waves), stages=tuple(stages), overall=overall,
                      overall_gain_db=_db(overall.fundamental_v, level_v),
                      solves=net.solves - solves0)


def distortion(circuit: Circuit, dc: DcSolution, *, level_v: float, points: int = 128,
               f_ref_hz: float = 1000.0, held_caps: Iterable[str] | None = None,
               treatment: CapacitorTreatment | None = None,
               options: SolveOptions | None = None) -> Distortion:
    """Harmonics 2–9 and THD of a sine through the chain, per stage and overall.

    The mid-band network (see :mod:`chain.headroom.network`) is solved at
    ``points`` equally spaced phases of ``level_v · sin θ`` at the source;
    harmonic amplitudes by FFT (:func:`chain.headroom.harmonics.harmonic_amplitudes`),
    ``THD = sqrt(Σ_{n=2..9} h_n²)/h_1``.  Per stage the input and output
    spectra are reported with the stage driven by the waveform it really
    receives in the chain, plus the distortion the stage adds itself (module
    docstring).

    Parameters
    ----------
    circuit : Circuit
    dc : DcSolution
    level_v : float
        Source peak, V.
    points : int
        Phase points per period (a multiple of 4, >= 32; 128 keeps the
        aliasing of hard clipping far below the harmonics 2–9).
    f_ref_hz : float
        Mid-band reference frequency, Hz.
    held_caps : Iterable[str], optional
        Short exactly these capacitors (all others open, no stand-ins).
    treatment : CapacitorTreatment, optional
        A ready capacitor treatment (overrides ``f_ref_hz``/``held_caps``).
    options : SolveOptions, optional

    Returns
    -------
    Distortion
    """
    net = build_network(circuit, dc, f_ref_hz=f_ref_hz, held_caps=held_caps, treatment=treatment,
                        options=options)
    return distortion_in(net, level_v=level_v, points=points)


# ------------------------------------------------------------------ from curves
def _interpolator(curves: TransferCurves, nodes: tuple[str, ...]):
    from scipy.interpolate import PchipInterpolator

    data = np.stack([curves.node_dv[n] for n in nodes], axis=1)
    return PchipInterpolator(curves.input_v, data, axis=0, extrapolate=False)


def thd_versus_level(curves: TransferCurves, input_node: str | None, output_node: str, levels_v: np.ndarray, *,
                     half: str | None = None, points: int = 128) -> np.ndarray:
    """Own THD of ``input_node → output_node`` for source peaks ``levels_v``.

    Reads the transfer curves (monotone cubic interpolation in the source
    voltage).  ``half`` = ``"positive"``/``"negative"`` measures one
    half-wave alone (odd-symmetric extension, module docstring).  Levels
    outside the swept range give ``nan``.

    Parameters
    ----------
    curves : TransferCurves
    input_node : str or None
        Node giving ``x`` of the own-THD definition; None takes the source
        EMF itself (a pure sine), which makes the result the ordinary THD
        of ``output_node`` — the chain's overall THD with the chain output.
    output_node : str
        Node giving ``y``.
    levels_v : numpy.ndarray
        Source peaks, V (> 0).
    half : {None, "positive", "negative"}
    points : int
        Phase points per period (even).

    Returns
    -------
    numpy.ndarray
        THD ratio per level.
    """
    levels = np.asarray(levels_v, dtype=float)
    nodes = (output_node,) if input_node is None else (output_node, input_node)
    interp = _interpolator(curves, nodes)
    phase = sine_phases(points)
    if half is None:
        src = levels[:, None] * np.sin(phase)[None, :]
    else:
        if half not in ("positive", "negative"):
            raise ValueError(f"half must be 'positive', 'negative' or None, got {half!r}")
        sign = 1.0 if half == "positive" else -1.0
        src = sign * levels[:, None] * np.sin(phase[:points // 2])[None, :]
    v = interp(src)
    y = v[..., 0]
    x = src if input_node is None else v[..., 1]
    if half is not None:
        x = np.concatenate([x, -x], axis=-1)
        y = np.concatenate([y, -y], axis=-1)
    return own_thd(x, y)


def level_for_thd(levels_v: np.ndarray, thd_values: np.ndarray, target: float) -> float | None:
    """First source peak at which ``thd_values`` reaches ``target`` (log–log interpolation), V.

    ``None`` when it is never reached within the levels.
    """
    levels = np.asarray(levels_v, dtype=float)
    values = np.asarray(thd_values, dtype=float)
    hit = np.flatnonzero(np.nan_to_num(values, nan=-1.0) >= target)
    if hit.size == 0:
        return None
    i = int(hit[0])
    if i == 0 or not (values[i - 1] > 0.0):
        return float(levels[i])
    la, lb = np.log(levels[i - 1]), np.log(levels[i])
    ta, tb = np.log(values[i - 1]), np.log(values[i])
    if tb == ta:
        return float(levels[i])
    return float(np.exp(la + (np.log(target) - ta) * (lb - la) / (tb - ta)))


def _db(num_v, den_v) -> float:
    """``20·log10(num/den)``; −inf or NaN (not a crash) when there is no signal."""
    return float(db_ratio(num_v, den_v))
