"""What the time-domain solve tells a designer: distortion, clipping, blocking, sag.

* :func:`distortion` — harmonics 2–9 and THD at every stage output and at
  the output, from the settled periodic response to a sine (per frequency
  and level);
* :func:`first_clip` — the lowest source level at which some stage reaches
  grid conduction or cutoff in the settled response at a frequency (the
  same two criteria as the quasi-static headroom analysis);
* :func:`burst` — a loud tone burst followed by a quiet tone: per stage the
  shift of each grid's average (blocking) and how fast it recovers;
* :func:`sag` — each rail's average voltage under sustained drive.

Levels are peaks of the source EMF, V; times in s; frequencies in Hz.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Mapping, Sequence

import numpy as np

from chain.circuit import Role
from chain.errors import AnalysisError, error
from chain.transient.engine import TransientSystem
from chain.transient.run import PeriodicResponse, Waveforms, periodic_response, simulate
from chain.decibels import db_ratio

__all__ = [
    "Harmonics",
    "DistortionPoint",
    "distortion",
    "ClipPoint",
    "first_clip",
    "GridRecovery",
    "BurstResult",
    "burst",
    "tone_burst",
    "RailSag",
    "sag",
    "measured_nodes",
    "HARMONICS",
]

#: harmonics reported (2nd to 9th)
HARMONICS = tuple(range(2, 10))


@dataclass(frozen=True, slots=True)
class Harmonics:
    """Spectrum of one node's settled response."""

    node: str
    #: fundamental, V peak
    fundamental_v: float
    #: harmonic n (2…9) → its level relative to the fundamental, dB
    level_db: Mapping[int, float]
    #: sqrt(h2² + … + h9²) / h1
    thd: float


@dataclass(frozen=True, slots=True)
class DistortionPoint:
    f_hz: float
    level_v: float
    #: stage name (or "output") → Harmonics at its output
    nodes: Mapping[str, Harmonics]
    #: the settled period it was read from
    period: PeriodicResponse


def measured_nodes(system: TransientSystem) -> dict[str, str]:
    """Label → node: every stage's main output, then the output."""
    out = {st.name: st.output for st in system.circuit.stages}
    out["output"] = system.circuit.output_node
    return out


def harmonics_of(period: PeriodicResponse, node: str) -> Harmonics:
    """Harmonics 2–9 and THD of ``node`` from the DFT of one settled period.

    With ``X_k = (2/N)·Σ v_n·e^{−j2πkn/N}`` the peak of harmonic ``k``,
    ``THD = sqrt(Σ_{k=2..9} |X_k|²) / |X_1|`` (the definition of IEC 60268-3
    total harmonic distortion restricted to harmonics 2–9, as in the
    quasi-static headroom analysis).
    """
    x = period.v[node] - period.v[node].mean()
    n = x.size
    spec = np.fft.rfft(x) * 2.0 / n
    h1 = abs(spec[1])
    levels = {}
    total = 0.0
    for k in HARMONICS:
        hk = abs(spec[k]) if k < spec.size else 0.0
        total += hk * hk
        levels[k] = float(db_ratio(hk, h1)) if h1 > 0.0 else -math.inf
    thd = math.sqrt(total) / h1 if h1 > 0.0 else math.nan
    return Harmonics(node=node, fundamental_v=float(h1), level_db=levels, thd=float(thd))


def distortion(system: TransientSystem, f_hz: Sequence[float], levels_v: Sequence[float], *,
               steps: int = 256) -> tuple[DistortionPoint, ...]:
    """Harmonics at every stage output and the output, per frequency and level (settled response)."""
    nodes = measured_nodes(system)
    if steps < 2 * max(HARMONICS) + 2:
        raise AnalysisError(error("E903", f"{steps} steps per period cannot resolve the 9th harmonic"))
    out = []
    for f in f_hz:
        for level in levels_v:
            period = periodic_response(system, f, level, nodes=list(dict.fromkeys(nodes.values())), steps=steps)
            out.append(DistortionPoint(f_hz=float(f), level_v=float(level),
                                       nodes={label: harmonics_of(period, node) for label, node in nodes.items()},
                                       period=period))
    return tuple(out)


# ------------------------------------------------------------------ clipping


@dataclass(frozen=True, slots=True)
class ClipPoint:
    """Where the settled response to a sine first clips."""

    f_hz: float
    #: lowest source level (V peak) at which some stage clips
    level_v: float
    #: that stage
    stage: str
    #: "grid conduction" or "cutoff"
    mechanism: str
    #: relative width of the bracket the level was found in
    rel_tol: float


def _clip_state(system: TransientSystem, period: PeriodicResponse, cutoff_fraction: float):
    """(stage, mechanism) of the first stage in signal order that clips in ``period``, or None."""
    circuit = system.circuit
    v = period.v
    ip0 = _quiescent_ip(system)
    for st in circuit.stages:
        for name in st.triodes:
            t = circuit.triode(name)
            vgk = v[t.grid] - v[t.cathode]
            if float(vgk.max()) >= t.model.grid_onset_v:
                return st.name, "grid conduction"
            from chain.tubes import plate_current

            ip = plate_current(t.model, v[t.plate] - v[t.cathode], vgk)
            if float(np.min(ip)) < cutoff_fraction * ip0[name]:
                return st.name, "cutoff"
    return None


def _quiescent_ip(system: TransientSystem) -> dict[str, float]:
    from chain.tubes import plate_current

    x = system.x_dc
    out = {}
    for t in system.circuit.triodes:
        vp, vg, vk = (0.0 if system.index[n] < 0 else x[system.index[n]] for n in (t.plate, t.grid, t.cathode))
        out[t.name] = float(plate_current(t.model, vp - vk, vg - vk))
    return out


def _pin_nodes(system: TransientSystem) -> list[str]:
    nodes = []
    for t in system.circuit.triodes:
        nodes += [t.plate, t.grid, t.cathode]
    return [n for n in dict.fromkeys(nodes) if n in system.index and system.index[n] >= 0]


def first_clip(system: TransientSystem, f_hz: float, *, guess_v: float = 1e-3, rel_tol: float = 0.01,
               steps: int = 64, cutoff_fraction: float = 0.01, max_v: float = 50.0) -> ClipPoint:
    """Lowest source level at which a stage reaches grid conduction or cutoff in the settled response.

    Criteria as in :mod:`chain.headroom`: grid conduction when the
    grid–cathode voltage reaches the tube model's grid-current onset, cutoff
    when the plate current falls below ``cutoff_fraction`` of its quiescent
    value — here at any instant of the settled period at ``f_hz``, so the
    coupling and bypass capacitors, the Miller capacitance and the grid
    current's charging of the coupling capacitors are all in.  Bracketed by
    doubling from ``guess_v``, then bisection on a log scale to ``rel_tol``.
    """
    nodes = _pin_nodes(system)

    def clips(level):
        pr = periodic_response(system, f_hz, level, nodes=nodes, steps=steps)
        return _clip_state(system, pr, cutoff_fraction)

    lo, hi = None, None
    level = guess_v
    found = clips(level)
    if found is None:
        lo = level
        while found is None:
            level *= 2.0
            if level > max_v:
                raise AnalysisError(error("E903", f"no stage clips below {max_v:g} V at {f_hz:g} Hz"))
            found = clips(level)
            if found is None:
                lo = level
        hi, hi_state = level, found
    else:
        hi, hi_state = level, found
        while found is not None:
            level /= 2.0
            if level < 1e-9:
                raise AnalysisError(error("E903", f"the chain clips at rest at {f_hz:g} Hz"))
            found = clips(level)
            if found is not None:
                hi, hi_state = level, found
        lo = level
    while hi / lo > 1.0 + rel_tol:
        mid = math.sqrt(lo * hi)
        state = clips(mid)
        if state is None:
            lo = mid
        else:
            hi, hi_state = mid, state
    return ClipPoint(f_hz=float(f_hz), level_v=float(hi), stage=hi_state[0], mechanism=hi_state[1],
                     rel_tol=float(rel_tol))


# ------------------------------------------------------------------ burst


def tone_burst(f_hz: float, loud_v: float, quiet_v: float, *, lead_s: float, burst_s: float, after_s: float,
               fs_hz: float) -> np.ndarray:
    """A quiet tone, a loud burst, a quiet tone again: source EMF samples, V.

    The burst starts and ends at zero crossings of the tone (whole periods);
    the level steps there.
    """
    period = 1.0 / f_hz
    lead = math.ceil(lead_s / period) * period
    burst_len = max(1, round(burst_s / period)) * period
    total = lead + burst_len + after_s
    t = np.arange(int(round(total * fs_hz)) + 1) / fs_hz
    amp = np.where((t >= lead) & (t < lead + burst_len), loud_v, quiet_v)
    return amp * np.sin(2.0 * math.pi * f_hz * t)


@dataclass(frozen=True, slots=True)
class GridRecovery:
    """One stage's grid through a burst (averages over one period of the tone)."""

    stage: str
    #: the grid node
    node: str
    #: how the stage input is fed: "capacitor", "direct" (from the previous stage) or "source"
    coupling: str
    #: average grid voltage before the burst, V
    before_v: float
    #: most negative shift of the average from ``before_v`` during or after the burst, V
    shift_v: float
    #: shift of the average at the end of the burst, V
    shift_at_end_v: float
    #: time after the burst until the shift is down to 1/e of its value at the end (the
    #: recovery time constant of an exponential return), s; NaN if not reached in the run
    recovery_s: float
    #: time after the burst until the shift is within 10 % of its end value, s (NaN if not reached)
    recovery_10_s: float

    @property
    def coupled(self) -> bool:
        return self.coupling == "capacitor"


@dataclass(frozen=True, slots=True)
class BurstResult:
    f_hz: float
    loud_v: float
    quiet_v: float
    #: burst start and end, s
    start_s: float
    end_s: float
    grids: tuple[GridRecovery, ...]
    #: stage outputs and the output node (recorded in ``waveforms``)
    outputs: tuple[str, ...]
    waveforms: Waveforms
    #: node → its average over one period of the tone, for every recorded node
    averages: Mapping[str, np.ndarray]


def _moving_average(x: np.ndarray, n: int) -> np.ndarray:
    """Average over the ``n`` samples ending at each sample (the first n−1 use what there is)."""
    c = np.cumsum(np.concatenate(([0.0], x)))
    out = np.empty_like(x)
    idx = np.arange(1, x.size + 1)
    lo = np.maximum(idx - n, 0)
    out[:] = (c[idx] - c[lo]) / (idx - lo)
    return out


def _coupled(system: TransientSystem, node: str) -> bool:
    """Does a capacitor (not the pickup's or a stray) feed ``node``?"""
    for c in system.circuit.capacitors:
        if node in (c.a, c.b) and c.owner.kind in ("coupling", "network") and c.role != Role.STRAY:
            return True
    return False


def burst(system: TransientSystem, f_hz: float, loud_v: float, quiet_v: float, *, lead_s: float = 0.02,
          burst_s: float = 0.1, after_s: float = 0.3, fs_hz: float = 48e3, oversample: int = 2,
          progress=None) -> BurstResult:
    """Loud burst then quiet tone: per stage the shift of its grid's average and its recovery.

    The average is over exactly one period of the tone, so the tone itself
    drops out and what is left is the bias.  Grid conduction during a loud
    burst charges the coupling capacitor; afterwards the grid sits more
    negative and returns through the grid leak with the time constant
    ``C·(R_source + R_leak)`` (blocking; common practice).
    """
    u = tone_burst(f_hz, loud_v, quiet_v, lead_s=lead_s, burst_s=burst_s, after_s=after_s, fs_hz=fs_hz)
    circuit = system.circuit
    grids = {}
    for st in circuit.stages:
        grids[st.name] = (circuit.triode(st.triode).grid, st.input)
    nodes = list(dict.fromkeys([g for g, _ in grids.values()] + [i for _, i in grids.values()]
                               + [s.output for s in circuit.stages] + [circuit.output_node]
                               + list(circuit.rail_names())))
    w = simulate(system, u, fs_hz, nodes=nodes, oversample=oversample, progress=progress)
    per = max(1, int(round(fs_hz / f_hz)))
    avg = {n: _moving_average(w.v[n], per) for n in nodes}
    period = 1.0 / f_hz
    start = math.ceil(lead_s / period) * period
    end = start + max(1, round(burst_s / period)) * period
    i_start, i_end = int(round(start * fs_hz)), int(round(end * fs_hz))
    out = []
    for st in circuit.stages:
        g, inp = grids[st.name]
        a = avg[g]
        before = float(a[max(i_start - 1, 0)])
        shift = a - before
        worst = float(shift[i_start:].min()) if i_start < a.size else 0.0
        at_end = float(shift[min(i_end, a.size - 1)])
        rec = math.nan
        rec10 = math.nan
        tail = shift[i_end:]
        if at_end < 0.0 and tail.size:
            # first time the shift has come back to within 1/e (10 %) of its end value
            hit = np.nonzero(tail > at_end / math.e)[0]
            if hit.size:
                rec = hit[0] / fs_hz
            hit = np.nonzero(tail > 0.1 * at_end)[0]
            if hit.size:
                rec10 = hit[0] / fs_hz
        how = "source" if inp == circuit.input_node else ("capacitor" if _coupled(system, inp) else "direct")
        out.append(GridRecovery(stage=st.name, node=g, coupling=how, before_v=before,
                                shift_v=worst, shift_at_end_v=at_end, recovery_s=float(rec),
                                recovery_10_s=float(rec10)))
    return BurstResult(f_hz=float(f_hz), loud_v=float(loud_v), quiet_v=float(quiet_v), start_s=start, end_s=end,
                       grids=tuple(out), outputs=tuple(dict.fromkeys([s.output for s in circuit.stages]
                                                                     + [circuit.output_node])),
                       waveforms=w, averages=avg)


# ------------------------------------------------------------------ sag


@dataclass(frozen=True, slots=True)
class RailSag:
    rail: str
    dc_v: float
    #: average over the settled period under drive, V
    driven_v: float
    #: lowest instant of the settled period, V
    lowest_v: float

    @property
    def sag_v(self) -> float:
        """Drop of the average under drive, V (positive when the rail sags)."""
        return self.dc_v - self.driven_v


def sag(system: TransientSystem, f_hz: float, level_v: float, *, steps: int = 128) -> tuple[RailSag, ...]:
    """Each rail's average and lowest voltage under sustained drive (settled periodic response)."""
    rails = list(system.circuit.rail_names())
    pr = periodic_response(system, f_hz, level_v, nodes=rails, steps=steps)
    return tuple(RailSag(rail=r, dc_v=pr.dc_v[r], driven_v=float(pr.v[r].mean()), lowest_v=float(pr.v[r].min()))
                 for r in rails)
