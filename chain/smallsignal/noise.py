"""Noise of a linearised chain at its output, by one adjoint solve per frequency.

Sources (each an independent noise *current* between two nodes, one-sided
power spectral densities in A²/Hz):

* every resistor of the circuit (plate loads, grid stoppers and leaks, pot
  sections, rail resistors, the pickup winding, the output load …):
  thermal noise, a current of density ``4·k·T/R`` in parallel with the
  resistor (Johnson–Nyquist; standard result, e.g. from memory of
  P. Horowitz, W. Hill, "The Art of Electronics", ch. 8).  A triode's plate
  resistance ``rp`` is not a resistor and makes no thermal noise of its own:
  the tube's noise is the next item;
* every triode: a noise voltage ``e_n`` in series with its grid, the
  equivalent noise resistance

      R_eq = F / gm,  F ≈ 2.5 for triodes,
      e_n² = 4·k·T·R_eq·(1 + f_c / f)   (V²/Hz),

  (shot noise of the space-charge limited current referred to the grid;
  the factor and the 1/f rise below the flicker corner ``f_c``, from memory
  of standard valve texts, e.g. M. Jones, "Valve Amplifiers"; ``F`` and
  ``f_c`` are stated parameters, :data:`GRID_NOISE_FACTOR` and
  :data:`FLICKER_CORNER_HZ`).  It acts on the triode only through its
  transconductance, so it is stamped as a current ``gm·e_n`` from plate to
  cathode (density ``gm²·e_n²``).

The adjoint solve
-----------------
With ``Y(s)·x = b`` the nodal system of :mod:`chain.smallsignal.mna` (the
signal EMF zeroed: its row stays, its right-hand side is 0), a unit current
into node ``a`` and out of node ``b`` gives the output voltage
``e_outᵀ·Y⁻¹·(e_a − e_b) = z_a − z_b`` with

    Y(s)ᵀ·z = e_out

(the adjoint, or transposed, network; from memory of S. W. Director,
R. A. Rohrer, "The generalized adjoint network and network sensitivities",
IEEE Trans. Circuit Theory 16, 1969).  One solve per frequency therefore
serves every source; the transfer from the signal EMF to the output is
``z`` at the source's branch row, with no second solve.  The output noise
density is

    S_out(f) = Σ_k |z_a,k − z_b,k|² · S_k(f)   (V²/Hz).

Totals
------
``V_rms² = ∫ S_out(f)·W(f)² df`` over the band (20 Hz–20 kHz by default),
on a log-spaced grid, the density taken as a power law between points
(:func:`band_power`),
with ``W = 1`` (unweighted) or the A-weighting of IEC 61672-1
(:func:`a_weighting`).  Input-referred: the output figures divided by
``|H(f_ref)|``, the gain from the source EMF to the output at the reference
frequency.  The signal-to-noise ratio compares the output signal
``level/√2·|H(f_ref)|`` (level in volts peak, small-signal gain, so a stage
that clips at that level is not modelled) with the output noise.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from chain.circuit import GROUND, Owner, Role
from chain.smallsignal.mna import Mna, assemble, solve
from chain.smallsignal.model import SmallSignalCircuit

__all__ = [
    "BOLTZMANN_J_K",
    "TEMPERATURE_K",
    "GRID_NOISE_FACTOR",
    "FLICKER_CORNER_HZ",
    "NOISE_BAND_HZ",
    "NoiseSource",
    "Contributor",
    "NoiseResult",
    "noise",
    "a_weighting",
    "a_weighting_db",
    "band_power",
]

#: Boltzmann constant, J/K (exact in the 2019 SI)
BOLTZMANN_J_K = 1.380649e-23
#: temperature of every resistor and of the tube noise model, K (stated assumption: a warm chassis)
TEMPERATURE_K = 300.0
#: triode equivalent noise resistance R_eq = F/gm (from memory of standard valve texts)
GRID_NOISE_FACTOR = 2.5
#: triode flicker (1/f) noise corner, Hz (stated assumption; from memory of standard valve
#: texts small-signal triodes lie between a few hundred hertz and a few kilohertz)
FLICKER_CORNER_HZ = 1000.0
#: band of the noise totals, Hz
NOISE_BAND_HZ = (20.0, 20e3)


@dataclass(frozen=True, slots=True)
class NoiseSource:
    """One noise current between solved nodes ``a`` (into) and ``b`` (out of)."""

    #: the part's name (a resistor, or the triode)
    name: str
    owner: Owner
    role: Role
    a: str
    b: str
    #: white density, A²/Hz
    white_a2_hz: float
    #: 1/f corner, Hz (0: white)
    flicker_corner_hz: float = 0.0

    def psd(self, f_hz: np.ndarray) -> np.ndarray:
        """Current density at ``f_hz``, A²/Hz: ``white·(1 + f_c/f)``."""
        return self.white_a2_hz * (1.0 + self.flicker_corner_hz / f_hz)


@dataclass(frozen=True, slots=True)
class Contributor:
    """One source's share of the output noise over the band."""

    name: str
    owner: Owner
    role: Role
    #: output noise power over the band, V² (unweighted and A-weighted)
    power_v2: float
    power_a_v2: float
    #: share of the total output noise power (0…1), unweighted and A-weighted
    fraction: float
    fraction_a: float

    @property
    def label(self) -> str:
        """``"V1 grid stopper"``, ``"tone network part"`` (owner name and role)."""
        return f"{self.owner.name} {self.role.value}" if self.owner.name else self.role.value


@dataclass(frozen=True, slots=True, eq=False)
class NoiseResult:
    """Output noise of a chain (see the module docstring); SI units."""

    #: frequencies, Hz (log-spaced over the band, the reference frequency included)
    f_hz: np.ndarray
    #: output noise density, V²/Hz, per frequency
    output_psd_v2_hz: np.ndarray
    #: transfer from the source EMF to the output (V/V), per frequency
    gain: np.ndarray
    band_hz: tuple[float, float]
    reference_hz: float
    temperature_k: float
    grid_noise_factor: float
    flicker_corner_hz: float
    #: output noise over the band, V rms: unweighted and A-weighted
    output_rms_v: float
    output_rms_a_v: float
    #: |H(f_ref)|, V/V
    gain_ref: float
    #: output density at the reference frequency, V/√Hz
    output_density_ref_v: float
    #: signal level (V peak) the signal-to-noise ratio is given for
    level_v: float
    #: contributors, largest (unweighted) first
    contributors: tuple[Contributor, ...]

    @property
    def input_rms_v(self) -> float:
        """Input-referred noise over the band, V rms (output / |H(f_ref)|)."""
        return self.output_rms_v / self.gain_ref if self.gain_ref > 0 else float("inf")

    @property
    def input_rms_a_v(self) -> float:
        return self.output_rms_a_v / self.gain_ref if self.gain_ref > 0 else float("inf")

    @property
    def input_density_ref_v(self) -> float:
        """Input-referred density at the reference frequency, V/√Hz."""
        return self.output_density_ref_v / self.gain_ref if self.gain_ref > 0 else float("inf")

    @property
    def signal_rms_v(self) -> float:
        """Output signal at ``level_v`` (V peak), small-signal, V rms."""
        return self.level_v / np.sqrt(2.0) * self.gain_ref

    @property
    def snr_db(self) -> float:
        return _ratio_db(self.signal_rms_v, self.output_rms_v)

    @property
    def snr_a_db(self) -> float:
        return _ratio_db(self.signal_rms_v, self.output_rms_a_v)


def _ratio_db(signal: float, noise_v: float) -> float:
    if noise_v > 0 and signal > 0:
        return float(20.0 * np.log10(signal / noise_v))
    return float("nan")


def a_weighting(f_hz) -> np.ndarray:
    """The A-weighting as an amplitude factor (linear), IEC 61672-1:2013 eq. (E.6)/(E.1):

        R_A(f) = f1²·f⁴ / ((f² + f4²)·√((f² + f2²)(f² + f3²))·(f² + f1²)),
        A(f) = 20·log10 R_A(f) + 2.00 dB,

    ``f1 = 12194 Hz``, ``f2 = 107.7 Hz``, ``f3 = 737.9 Hz``, ``f4 = 20.6 Hz``
    (from memory of IEC 61672-1, annex E; the constants are the rounded
    pole frequencies the standard gives).  Returns ``10^(A/20)``.
    """
    f = np.asarray(f_hz, dtype=float)
    f2 = f * f
    ra = (12194.0 ** 2 * f2 * f2) / ((f2 + 20.6 ** 2) * np.sqrt((f2 + 107.7 ** 2) * (f2 + 737.9 ** 2))
                                    * (f2 + 12194.0 ** 2))
    return ra * 10.0 ** (2.0 / 20.0)


def a_weighting_db(f_hz) -> np.ndarray:
    """The A-weighting in dB (see :func:`a_weighting`)."""
    with np.errstate(divide="ignore"):
        return 20.0 * np.log10(a_weighting(f_hz))


def band_power(f_hz: np.ndarray, psd: np.ndarray, band_hz: tuple[float, float]) -> np.ndarray:
    """``∫ psd df`` over the grid points inside ``band_hz``; ``psd`` may carry
    more axes after the first.

    Between two grid points the density is taken as a power law
    ``S(f) = S0·(f/f0)^α`` (a straight line on log-log axes), whose integral
    is exact: ``S0·f0·((f1/f0)^(α+1) − 1)/(α + 1)`` (``S0·f0·ln(f1/f0)`` for
    ``α = −1``); flat, 1/f and every asymptote of a rational response are
    integrated without error.  A segment with a zero end uses the trapezoid.
    """
    f = np.asarray(f_hz, dtype=float)
    inside = (f >= band_hz[0] * (1 - 1e-12)) & (f <= band_hz[1] * (1 + 1e-12))
    f, p = f[inside], np.asarray(psd, dtype=float)[inside]
    if f.size < 2:
        return np.zeros(p.shape[1:])
    shape = (-1,) + (1,) * (p.ndim - 1)
    f0, f1 = f[:-1].reshape(shape), f[1:].reshape(shape)
    s0, s1 = p[:-1], p[1:]
    trapezoid = 0.5 * (s0 + s1) * (f1 - f0)
    positive = (s0 > 0) & (s1 > 0)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        lr = np.log(f1 / f0)
        alpha = np.log(np.where(positive, s1, 1.0) / np.where(positive, s0, 1.0)) / lr
        a1 = alpha + 1.0
        near = np.abs(a1 * lr) < 1e-8
        power = np.where(near, s0 * f0 * lr * (1.0 + 0.5 * a1 * lr),
                         s0 * f0 * np.expm1(a1 * lr) / np.where(near, 1.0, a1))
    return np.sum(np.where(positive, power, trapezoid), axis=0)


def noise_sources(ss: SmallSignalCircuit, *, temperature_k: float = TEMPERATURE_K,
                  grid_noise_factor: float = GRID_NOISE_FACTOR,
                  flicker_corner_hz: float = FLICKER_CORNER_HZ) -> tuple[NoiseSource, ...]:
    """Every noise source of ``ss`` (see the module docstring), circuit order."""
    four_kt = 4.0 * BOLTZMANN_J_K * temperature_k
    out = []
    for r in ss.resistors:
        if r.role == Role.PLATE_RESISTANCE:
            continue
        out.append(NoiseSource(r.name, r.owner, r.role, r.a, r.b, four_kt / r.ohms))
    owners = {t.name: t.owner for t in ss.circuit.triodes}
    for t in ss.triodes:
        # gm²·4kT·(F/gm) = 4kT·F·gm, from plate to cathode
        out.append(NoiseSource(t.name, owners.get(t.name, Owner("other", t.name)), Role.TRIODE,
                               t.plate, t.cathode, four_kt * grid_noise_factor * t.gm_s,
                               flicker_corner_hz))
    return tuple(out)


def noise(ss: SmallSignalCircuit, *, reference_hz: float = 1000.0, level_v: float = 0.1,
          band_hz: tuple[float, float] = NOISE_BAND_HZ, points: int = 241,
          f_hz: np.ndarray | None = None, temperature_k: float = TEMPERATURE_K,
          grid_noise_factor: float = GRID_NOISE_FACTOR, flicker_corner_hz: float = FLICKER_CORNER_HZ,
          method: str = "auto") -> NoiseResult:
    """Output noise of ``ss`` (see the module docstring).

    Parameters
    ----------
    ss
        The linearised circuit; noise is taken at ``ss.output_node``.
    reference_hz, level_v
        Reference frequency (Hz) for the input-referred figures and the
        signal level (V peak) for the signal-to-noise ratio.
    band_hz, points
        The band of the totals (Hz) and the number of log-spaced points over
        it; ``f_hz`` replaces that grid (totals still over ``band_hz``).
    temperature_k, grid_noise_factor, flicker_corner_hz
        The stated noise parameters (:data:`TEMPERATURE_K`,
        :data:`GRID_NOISE_FACTOR`, :data:`FLICKER_CORNER_HZ`).
    """
    if f_hz is None:
        f = np.geomspace(band_hz[0], band_hz[1], points)
    else:
        f = np.asarray(f_hz, dtype=float)
    f = np.sort(np.append(f, reference_hz))
    f = f[np.r_[True, f[1:] != f[:-1]]]  # np.unique imports numpy.ma on first use (start-up)
    s = 2j * np.pi * f
    mna = assemble(ss)
    sources = noise_sources(ss, temperature_k=temperature_k, grid_noise_factor=grid_noise_factor,
                            flicker_corner_hz=flicker_corner_hz)
    z = adjoint(mna, ss.node_of[ss.output_node], s, method=method)
    gain = z[:, mna.source.branch]
    zp = np.concatenate([z, np.zeros((z.shape[0], 1))], axis=1)  # zp[:, -1] is ground
    ia = np.array([mna.index[src.a] for src in sources], dtype=int)
    ib = np.array([mna.index[src.b] for src in sources], dtype=int)
    ia[ia < 0] = zp.shape[1] - 1
    ib[ib < 0] = zp.shape[1] - 1
    transfer2 = np.abs(zp[:, ia] - zp[:, ib]) ** 2  # (nf, k), ohm²
    white = np.array([src.white_a2_hz for src in sources])
    corner = np.array([src.flicker_corner_hz for src in sources])
    each = transfer2 * white[None, :] * (1.0 + corner[None, :] / f[:, None])  # V²/Hz
    total = each.sum(axis=1)
    w2 = a_weighting(f) ** 2
    p_each = band_power(f, each, band_hz)
    p_each_a = band_power(f, each * w2[:, None], band_hz)
    p_tot, p_tot_a = float(p_each.sum()), float(p_each_a.sum())
    contributors = [
        Contributor(src.name, src.owner, src.role, float(p), float(pa),
                    float(p / p_tot) if p_tot > 0 else 0.0, float(pa / p_tot_a) if p_tot_a > 0 else 0.0)
        for src, p, pa in zip(sources, p_each, p_each_a)
    ]
    contributors.sort(key=lambda c: -c.power_v2)
    iref = int(np.argmin(np.abs(f - reference_hz)))
    return NoiseResult(
        f_hz=_frozen(f), output_psd_v2_hz=_frozen(total), gain=_frozen(gain), band_hz=(band_hz[0], band_hz[1]),
        reference_hz=float(reference_hz), temperature_k=float(temperature_k),
        grid_noise_factor=float(grid_noise_factor), flicker_corner_hz=float(flicker_corner_hz),
        output_rms_v=float(np.sqrt(p_tot)), output_rms_a_v=float(np.sqrt(p_tot_a)),
        gain_ref=float(abs(gain[iref])), output_density_ref_v=float(np.sqrt(total[iref])),
        level_v=float(level_v), contributors=tuple(contributors),
    )


def adjoint(mna: Mna, node: str, s: np.ndarray, *, method: str = "auto") -> np.ndarray:
    """``z`` (nf, N) with ``Y(s)ᵀ·z = e_node`` at every ``s``: ``z[:, k]`` is the
    voltage at ``node`` per unit current injected at unknown ``k`` (per volt of
    EMF at a source branch).  Zero when ``node`` is ground."""
    if node == GROUND:
        return np.zeros((s.size, mna.size), dtype=complex)
    transposed = Mna(mna.nodes, mna.index, np.ascontiguousarray(mna.g.T), np.ascontiguousarray(mna.c.T),
                     mna.stamps, mna.source)
    e = np.zeros(mna.size)
    e[mna.index[node]] = 1.0
    z, _ = solve(transposed, s, e, method)
    return z


def _frozen(a: np.ndarray) -> np.ndarray:
    a = np.array(a, copy=True)
    a.flags.writeable = False
    return a
