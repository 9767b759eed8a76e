"""Where each stage clips, which one clips first, and how.

Definitions (per stage, per half-wave of the source — "positive" is the
half-cycle where the source EMF is positive):

* **grid conduction** — the triode's grid–cathode voltage reaches the grid
  model's onset ``grid_onset_v`` (0 V for every built-in tube type), where
  the grid current is about 3 µA and rising steeply (see
  :func:`chain.tubes.grid_current`); from there the grid stopper and the
  source impedance start to drop the signal.
* **cutoff** — the plate current falls below ``cutoff_fraction`` (default
  1 %) of its quiescent value.
* **compression** — the source peak at which the stage's incremental gain
  d(output)/d(its input), read along the swept transfer curve, has fallen
  1 dB and 3 dB below its value at rest (the bench measurement: the gain
  has halved well before the plate current reaches the cutoff criterion).
  A gain that rises first (a triode's, as its grid nears 0 V) counts from
  its value at rest, not from its peak.
* **THD thresholds** — the source peak at which the THD the stage itself
  adds (:mod:`chain.headroom.distortion`) reaches each of ``thd_levels``
  (default 1 % and 5 %): for a whole sine, and for each half-wave alone.

The first two are found on the swept transfer curves and refined by
Newton's method on the network bordered by the onset condition (source
voltage to about 1e-12 relative), or Brent's method on direct solves (1e-10)
where that does not settle.
A stage's clipping point is the earlier of grid conduction and cutoff over
both half-waves; the available output swing on each side is the output's
excursion up to that half-wave's limit.  The chain's first stage to clip is
the one with the lowest clipping point (the earlier stage in signal order
on a tie).

Levels are source (EMF) peaks in V; dBV values are of the rms value of a
sine with that peak (0 dBV = 1 V rms), i.e. ``20·log10(peak/√2)``.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass
from typing import Callable, Iterable

import numpy as np

from chain.circuit import Circuit, StageRecord
from chain.dc import DcSolution, SolveOptions
from chain.errors import DcConvergenceError, error
from chain.headroom.curves import DEFAULT_CUTOFF_FRACTION, TransferCurves, build_network, sweep
from chain.headroom.distortion import Distortion, distortion_in, level_for_thd, thd_versus_level
from chain.headroom.network import MidBandNetwork
from chain.units import format_si
from chain.decibels import db as ratio_db

__all__ = [
    "GRID_CONDUCTION",
    "CUTOFF",
    "LIMITS",
    "dbv",
    "Onset",
    "Compression",
    "COMPRESSION_DB",
    "HalfWaveLimit",
    "OutputSwing",
    "StageHeadroom",
    "Headroom",
    "headroom",
]

GRID_CONDUCTION = "grid conduction"
CUTOFF = "cutoff"

#: what the quasi-static mid-band method leaves out (printed with every result)
LIMITS = (
    "Quasi-static mid-band model: coupling, cathode-bypass and rail-decoupling capacitors are held at their "
    "DC voltages (short for the signal), small capacitors are open and those in between stand in as "
    "resistors equal to their reactance at the reference frequency, so clipping does not depend on "
    "frequency here — tone-network and bright-capacitor shaping, Miller and stray capacitance and the "
    "phase shifts between stages are left out.",
    "No blocking distortion: grid current does not charge the coupling capacitors, so the bias shift after a "
    "burst of grid conduction, and its slow recovery, are not modelled; real stages driven hard clip earlier "
    "and more asymmetrically than shown.",
    "No power-supply sag: the supply and rails are held at their DC voltages; a real supply drops under "
    "sustained drive.",
    "Grid current follows an approximate model (onset at 0 V, 3/2-power law, no current division at low "
    "plate voltage).",
    "A steady sine of one frequency: no attack, recovery or intermodulation.",
)


def dbv(peak_v: float) -> float:
    """Level of a sine with this peak (V) in dBV of its rms value: ``20·log10(peak/√2)``."""
    return ratio_db(peak_v / math.sqrt(2.0)) if peak_v > 0.0 else -math.inf


@dataclass(frozen=True, slots=True)
class Onset:
    """Where one clipping mechanism sets in.

    Attributes
    ----------
    mechanism : str
        ``"grid conduction"`` or ``"cutoff"``.
    input_v : float
        Source peak at the onset, V (magnitude).
    stage_input_v : float
        Deviation of the stage's input node there, V (signed).
    output_v : float
        Deviation of the stage's output node there, V (signed).
    triode : str
        The triode that reaches the limit (one of the stage's triodes).
    ports_v : tuple[float, ...]
        Deviation of each of the stage's output ports there, V (signed; the
        first is ``output_v``).
    """

    mechanism: str
    input_v: float
    stage_input_v: float
    output_v: float
    triode: str = ""
    ports_v: tuple[float, ...] = ()

    @property
    def input_dbv(self) -> float:
        return dbv(self.input_v)


#: gain drops (dB) at which compression points are reported
COMPRESSION_DB = (1.0, 3.0)


@dataclass(frozen=True, slots=True)
class Compression:
    """Where a stage's incremental gain has fallen by ``db`` on one half-wave.

    Attributes
    ----------
    db : float
        Gain drop, dB (1 or 3).
    input_v : float
        Source peak, V.
    stage_input_v : float
        Excursion of the stage's input node there, V.
    output_v : float
        Excursion of the stage's output node there, V.
    """

    db: float
    input_v: float
    stage_input_v: float
    output_v: float

    @property
    def input_dbv(self) -> float:
        return dbv(self.input_v)


@dataclass(frozen=True, slots=True)
class HalfWaveLimit:
    """One stage on one half-wave of the source.

    Attributes
    ----------
    polarity : str
        ``"positive"`` or ``"negative"`` (sign of the source EMF).
    grid : Onset or None
        Grid-conduction onset, None when not reached in the sweep.
    cutoff : Onset or None
        Cutoff onset, None when not reached.
    thd_input_v : tuple[float | None, ...]
        Source peak at which this half-wave alone reaches each of
        :attr:`Headroom.thd_levels` of own THD, V (None: not reached).
    swept_to_v : float
        Largest source magnitude swept on this side, V.
    compression : tuple[Compression | None, ...]
        One per :data:`COMPRESSION_DB` (None: not reached in the sweep).
    """

    polarity: str
    grid: Onset | None
    cutoff: Onset | None
    thd_input_v: tuple[float | None, ...]
    swept_to_v: float
    compression: tuple[Compression | None, ...] = ()

    @property
    def first(self) -> Onset | None:
        """The earlier of grid conduction and cutoff (None if neither)."""
        found = [o for o in (self.grid, self.cutoff) if o is not None]
        return min(found, key=lambda o: o.input_v) if found else None

    @property
    def mechanism(self) -> str:
        first = self.first
        return first.mechanism if first is not None else "none"


@dataclass(frozen=True, slots=True)
class OutputSwing:
    """One output port of a stage up to the stage's clipping point.

    Attributes
    ----------
    port, node : str
        The port's name (``"out"``, ``"plate"``, ``"cathode"``, ``"plate1"`` …) and node.
    swing_pos_v, swing_neg_v : float
        The port's excursion above and below its DC point up to each
        half-wave's limit of the stage (V, >= 0 and <= 0).
    thd_input_v : tuple[float | None, ...]
        Source peak at which this port reaches each THD threshold of the
        stage's own distortion (stage input to this port), V.
    """

    port: str
    node: str
    swing_pos_v: float
    swing_neg_v: float
    thd_input_v: tuple[float | None, ...]


@dataclass(frozen=True, slots=True)
class StageHeadroom:
    """Headroom of one stage.

    Attributes
    ----------
    stage, kind : str
        Stage name and configuration.
    input_node, output_node : str
    positive, negative : HalfWaveLimit
        Per half-wave of the source.
    thd_input_v : tuple[float | None, ...]
        Source peak at which a whole sine reaches each of
        :attr:`Headroom.thd_levels` of the stage's own THD, V.
    swing_pos_v, swing_neg_v : float
        Output swing available above and below the DC point (V, >= 0 and
        <= 0): the output's excursion up to each half-wave's limit, or the
        largest reached when a half-wave never reaches one.
    margin_db : float
        ``20·log10(clip input / stated level)``: headroom left at the stated
        input level (negative: already clipping); ``inf`` when the stage
        never clips in the sweep.
    outputs : tuple[OutputSwing, ...]
        Every output port (the main one first, the same numbers as
        ``swing_pos_v``, ``swing_neg_v`` and ``thd_input_v``).
    own_thd_at_clip : float or None
        The stage's own THD (what it adds itself) at its clipping onset, a
        ratio; None when it never clips or the onset lies outside the
        symmetric sweep.
    output_thd_at_clip : float or None
        The THD at the stage's output at that onset (cumulative: everything
        from the source up to and including this stage), a ratio.
    swept_to_v : float
        The largest source peak both half-waves were swept to, V: a THD
        threshold not reached is not reached up to here.
    """

    stage: str
    kind: str
    input_node: str
    output_node: str
    positive: HalfWaveLimit
    negative: HalfWaveLimit
    thd_input_v: tuple[float | None, ...]
    swing_pos_v: float
    swing_neg_v: float
    margin_db: float
    outputs: tuple[OutputSwing, ...] = ()
    own_thd_at_clip: float | None = None
    output_thd_at_clip: float | None = None
    swept_to_v: float = math.nan

    @property
    def first(self) -> Onset | None:
        """The stage's first clipping onset over both half-waves."""
        found = [(h.first, h.polarity) for h in (self.positive, self.negative) if h.first is not None]
        return min(found, key=lambda p: p[0].input_v)[0] if found else None

    @property
    def first_polarity(self) -> str:
        first = self.first
        if first is None:
            return ""
        return "positive" if self.positive.first is first else "negative"

    @property
    def clip_input_v(self) -> float | None:
        """Source peak at the first clipping onset, V (None: never)."""
        first = self.first
        return None if first is None else first.input_v

    @property
    def clip_input_dbv(self) -> float | None:
        v = self.clip_input_v
        return None if v is None else dbv(v)

    @property
    def mechanism(self) -> str:
        first = self.first
        return "none" if first is None else first.mechanism

    def half(self, polarity: str) -> HalfWaveLimit:
        return {"positive": self.positive, "negative": self.negative}[polarity]

    def compression(self, db: float) -> Compression | None:
        """The earlier of the two half-waves' compression points for ``db`` (1 or 3)."""
        k = COMPRESSION_DB.index(db)
        found = [c for h in (self.positive, self.negative)
                 if len(h.compression) > k and (c := h.compression[k]) is not None]
        return min(found, key=lambda c: c.input_v) if found else None


@dataclass(frozen=True, slots=True, eq=False)
class Headroom:
    """Large-signal headroom of a chain (compared by identity).

    Attributes
    ----------
    level_v : float
        The stated input level (source peak), V.
    stages : tuple[StageHeadroom, ...]
        In signal order.
    first : StageHeadroom or None
        The first stage to clip as the input rises.
    summary : str
        One sentence, e.g. "first to clip: stage V2, by grid conduction, at
        38 mV peak at the input …".
    thd_levels : tuple[float, ...]
        THD thresholds (ratios) of the ``thd_input_v`` fields.
    overall_thd_input_v : tuple[float | None, ...]
        Source peak at which the chain output reaches each THD threshold, V.
    cutoff_fraction : float
        Cutoff criterion (fraction of quiescent plate current).
    definitions : tuple[str, ...]
        The criteria, in words, for the report.
    limits : tuple[str, ...]
        What the method leaves out (:data:`LIMITS`).
    curves : TransferCurves
    distortion : Distortion or None
        Spectrum at ``level_v`` (None when not asked for).
    elapsed_s : float
        Wall time of the whole analysis, s.
    """

    level_v: float
    stages: tuple[StageHeadroom, ...]
    first: StageHeadroom | None
    summary: str
    thd_levels: tuple[float, ...]
    overall_thd_input_v: tuple[float | None, ...]
    cutoff_fraction: float
    definitions: tuple[str, ...]
    limits: tuple[str, ...]
    curves: TransferCurves
    distortion: Distortion | None
    elapsed_s: float

    @property
    def first_thd(self) -> StageHeadroom | None:
        """The first stage to reach the lowest THD threshold of its own
        (``thd_input_v[0]``) as the input rises; None when none does."""
        reaching = [(v, r) for r in self.stages if r.thd_input_v and (v := r.thd_input_v[0]) is not None]
        return min(reaching, key=lambda p: p[0])[1] if reaching else None

    def stage(self, name: str) -> StageHeadroom:
        for s in self.stages:
            if s.stage == name:
                return s
        raise KeyError(name)


# ------------------------------------------------------------------ onsets
def _side(curves: TransferCurves, polarity: str) -> np.ndarray:
    """Point indices from the zero point outwards on one side."""
    zero = curves.zero_index
    if polarity == "positive":
        return np.arange(zero, curves.input_v.size)
    return np.arange(zero, -1, -1)


def _refine(net: MidBandNetwork, quantity: Callable[[np.ndarray], float],
            slope: Callable[[np.ndarray, np.ndarray], np.ndarray], v_a: float, x_a: np.ndarray,
            v_b: float, x_b: np.ndarray) -> tuple[float, np.ndarray]:
    """Source voltage between v_a and v_b where ``quantity`` changes sign, and its state.

    Newton's method on the network bordered by ``quantity = 0``
    (:meth:`MidBandNetwork.solve_where`, ``slope`` its directional derivative)
    from the linear interpolation between the two swept points: a few LUs.
    Should it leave the bracket or stall, Brent's method on full solves
    (scipy.optimize.brentq, source voltage to 1e-10 relative).
    """
    def guess(v: float) -> np.ndarray:
        return x_a + (x_b - x_a) * ((v - v_a) / (v_b - v_a))

    qa, qb = quantity(x_a), quantity(x_b)
    v0 = v_a + (qa / (qa - qb) if qa != qb else 0.5) * (v_b - v_a)
    found = net.solve_where(quantity, slope, v0, guess(v0), (v_a, v_b))
    if found is not None:
        return found
    from scipy.optimize import brentq

    def f(v: float) -> float:
        return quantity(net.solve(v, guess(v)))

    try:
        root = brentq(f, v_a, v_b, xtol=1e-15, rtol=1e-10, maxiter=100)
        return float(root), net.solve(root, guess(root))
    except (DcConvergenceError, ValueError):
        # sign change lost to solver tolerance or a failed solve: interpolate linearly
        qa, qb = quantity(x_a), quantity(x_b)
        t = qa / (qa - qb) if qa != qb else 1.0
        v = v_a + t * (v_b - v_a)
        return float(v), guess(v)


def _onset(net: MidBandNetwork, curves: TransferCurves, stage: StageRecord, polarity: str, mechanism: str,
           ) -> tuple[Onset | None, int]:
    """The onset of one mechanism on one side over all the stage's triodes (the
    earliest), and the last sweep index before it."""
    found = [_triode_onset(net, curves, stage, name, polarity, mechanism) for name in stage.triodes]
    hits = [(o, k) for o, k in found if o is not None]
    if not hits:
        return None, min(k for _, k in found)
    return min(hits, key=lambda f: f[0].input_v)


def _triode_onset(net: MidBandNetwork, curves: TransferCurves, stage: StageRecord, triode: str, polarity: str,
                  mechanism: str) -> tuple[Onset | None, int]:
    """The onset of one mechanism in one triode on one side, and the last sweep index before it."""
    t = net.triode_index(triode)
    model = net.circuit.triodes[t].model
    idx = _side(curves, polarity)
    iq = curves.quiescent_ip_a[triode]
    threshold = curves.cutoff_fraction * iq
    if mechanism == GRID_CONDUCTION:
        # "active" when >= 0
        values = curves.vgk_v[triode][idx] - model.grid_onset_v

        def quantity(x: np.ndarray) -> float:
            return net.triode_state(x, t)[0] - model.grid_onset_v

        def slope(x: np.ndarray, ys: np.ndarray) -> np.ndarray:
            _, g, k = net.triode_pins(ys, t)
            return g - k
    else:
        values = threshold - curves.ip_a[triode][idx]

        def quantity(x: np.ndarray) -> float:
            return threshold - net.triode_state(x, t)[1]

        def slope(x: np.ndarray, ys: np.ndarray) -> np.ndarray:
            gm_s, gp_s = net.triode_slopes(x, t)
            p, g, k = net.triode_pins(ys, t)
            return -(gp_s * (p - k) + gm_s * (g - k))
    active = values >= 0.0
    start = 0
    if active[0]:
        if idx.size < 2 or values[1] >= values[0]:
            # already past the limit at rest, and driven further in on this side
            return Onset(mechanism, 0.0, 0.0, 0.0, triode, tuple(0.0 for _ in stage.outputs)), 0
        # driven out of it on this side: look for a fresh onset once it has left
        left = np.flatnonzero(~active)
        if left.size == 0:
            return None, int(idx.size - 1)
        start = int(left[0])
    hit = np.flatnonzero(active[start:]) + start
    if hit.size == 0:
        return None, int(idx.size - 1)
    k = int(hit[0])
    nodes = (stage.input, *stage.outputs.values())
    dc_v = net.node_voltages(net.x0[None, :], nodes)[0]
    a, b = int(idx[k - 1]), int(idx[k])
    v, x = _refine(net, quantity, slope, float(curves.input_v[a]), np.asarray(curves.states[a]),
                   float(curves.input_v[b]), np.asarray(curves.states[b]))
    volts = net.node_voltages(x[None, :], nodes)[0] - dc_v
    return Onset(mechanism, abs(v), float(volts[0]), float(volts[1]), triode,
                 tuple(float(x) for x in volts[1:])), k - 1


def _compression(curves: TransferCurves, stage: StageRecord, polarity: str) -> tuple[Compression | None, ...]:
    """Compression points of one stage on one half-wave, from the swept curve.

    The incremental gain on each sweep segment is Δ(output)/Δ(input) of the
    stage's own nodes; the reference is the first segment (the small-signal
    gain at rest).  The crossing of ``reference · 10^(−dB/20)`` is
    interpolated linearly in the segment index between the two segments
    around it (segment midpoints), and the levels there likewise.
    """
    idx = _side(curves, polarity)
    if idx.size < 3:
        return tuple(None for _ in COMPRESSION_DB)
    v = np.abs(curves.input_v[idx])
    x = curves.node_dv[stage.input][idx]
    y = curves.node_dv[stage.output][idx]
    dx, dy = np.diff(x), np.diff(y)
    ok = np.abs(dx) > 1e-12 * max(float(np.abs(x).max()), 1e-30)
    gain = np.full(dx.size, np.nan)
    gain[ok] = np.abs(dy[ok] / dx[ok])
    if not np.isfinite(gain[0]) or gain[0] <= 0.0:
        return tuple(None for _ in COMPRESSION_DB)
    mid_v = 0.5 * (v[1:] + v[:-1])
    mid_x = 0.5 * (x[1:] + x[:-1])
    mid_y = 0.5 * (y[1:] + y[:-1])
    out: list[Compression | None] = []
    for db in COMPRESSION_DB:
        target = gain[0] * 10.0 ** (-db / 20.0)
        below = np.flatnonzero(np.isfinite(gain) & (gain <= target))
        if below.size == 0:
            out.append(None)
            continue
        k = int(below[0])
        if k == 0:
            out.append(Compression(db, 0.0, 0.0, 0.0))
            continue
        g0, g1 = gain[k - 1], gain[k]
        t = (g0 - target) / (g0 - g1) if np.isfinite(g0) and g0 != g1 else 1.0
        lerp = (lambda a: float(a[k - 1] + t * (a[k] - a[k - 1])))
        out.append(Compression(db, lerp(mid_v), lerp(mid_x), lerp(mid_y)))
    return tuple(out)


def _thd_thresholds(curves: TransferCurves, stage: StageRecord, levels: np.ndarray, thd_levels, *,
                    half: str | None, output: str | None = None) -> tuple[float | None, ...]:
    if levels.size == 0:
        return tuple(None for _ in thd_levels)
    values = thd_versus_level(curves, stage.input, output or stage.output, levels, half=half)
    return tuple(level_for_thd(levels, values, target) for target in thd_levels)


def _reach(curves: TransferCurves, node: str, polarity: str, limit: HalfWaveLimit, k_grid: int, k_cut: int,
           onset_at: Callable[[Onset], float]) -> tuple[float, float]:
    """A node's excursion (max, min) on one half-wave up to that half-wave's limit."""
    idx = _side(curves, polarity)
    y = curves.node_dv[node][idx]
    first = limit.first
    if first is None:
        reach = y
    else:
        last = k_grid if first is limit.grid else k_cut
        reach = np.append(y[:last + 1], onset_at(first))
    return float(max(reach.max(), 0.0)), float(min(reach.min(), 0.0))


def _half_wave(net: MidBandNetwork, curves: TransferCurves, stage: StageRecord, polarity: str,
               thd_levels) -> tuple[HalfWaveLimit, dict[str, tuple[float, float]]]:
    """One half-wave's limits, and each output port's excursion (max, min) up to its limit."""
    grid, k_grid = _onset(net, curves, stage, polarity, GRID_CONDUCTION)
    cut, k_cut = _onset(net, curves, stage, polarity, CUTOFF)
    idx = _side(curves, polarity)
    levels = np.abs(curves.input_v[idx[1:]])
    limit = HalfWaveLimit(polarity=polarity, grid=grid, cutoff=cut,
                          thd_input_v=_thd_thresholds(curves, stage, levels, thd_levels, half=polarity),
                          swept_to_v=float(levels[-1]) if levels.size else 0.0,
                          compression=_compression(curves, stage, polarity))
    reaches = {}
    for i, (port, node) in enumerate(stage.outputs.items()):
        reaches[port] = _reach(curves, node, polarity, limit, k_grid, k_cut, lambda o: o.ports_v[i])
    return limit, reaches


def _stage_headroom(net: MidBandNetwork, curves: TransferCurves, stage: StageRecord, level_v: float,
                    thd_levels) -> StageHeadroom:
    pos, reach_p = _half_wave(net, curves, stage, "positive", thd_levels)
    neg, reach_n = _half_wave(net, curves, stage, "negative", thd_levels)
    span = min(pos.swept_to_v, neg.swept_to_v)
    idx = _side(curves, "positive")
    levels = np.abs(curves.input_v[idx[1:]])
    levels = levels[levels <= span]
    found = [h.first.input_v for h in (pos, neg) if h.first is not None]
    if not found:
        margin = math.inf
    else:
        margin = ratio_db(min(found) / level_v) if min(found) > 0.0 else -math.inf
    outputs = []
    for port, node in stage.outputs.items():
        (hi_p, lo_p), (hi_n, lo_n) = reach_p[port], reach_n[port]
        thd = _thd_thresholds(curves, stage, levels, thd_levels, half=None, output=node)
        outputs.append(OutputSwing(port, node, max(hi_p, hi_n), min(lo_p, lo_n), thd))
    main = outputs[0]
    own_at_clip = output_at_clip = None
    if found and 0.0 < min(found) <= span:
        at = np.array([min(found)])
        own_at_clip = _finite(thd_versus_level(curves, stage.input, stage.output, at)[0])
        output_at_clip = _finite(thd_versus_level(curves, None, stage.output, at)[0])
    return StageHeadroom(stage=stage.name, kind=stage.kind, input_node=stage.input, output_node=stage.output,
                         positive=pos, negative=neg, thd_input_v=main.thd_input_v,
                         swing_pos_v=main.swing_pos_v, swing_neg_v=main.swing_neg_v, margin_db=margin,
                         outputs=tuple(outputs), own_thd_at_clip=own_at_clip, output_thd_at_clip=output_at_clip,
                         swept_to_v=span)


def _finite(x: float) -> float | None:
    return float(x) if math.isfinite(x) else None


def _summary(first: StageHeadroom | None, level_v: float, first_thd: StageHeadroom | None = None,
             thd_level: float | None = None) -> str:
    """One sentence: the first clipping onset, the stage's own THD there, and —
    when another stage gets there first — the first stage to reach the lowest
    THD threshold of its own."""
    if first is None:
        text = "no stage clips within the sweep (neither grid conduction nor cutoff was reached)"
    else:
        onset = first.first
        assert onset is not None  # a stage that clips has an onset
        if onset.input_v == 0.0:
            return (f"first to clip: stage {first.stage}, by {onset.mechanism}, already at rest "
                    f"({first.first_polarity} half-wave: the DC operating point is past the limit)")
        text = (f"first to clip: stage {first.stage}, by {onset.mechanism} (onset), at "
                f"{format_si(onset.input_v, 'V')} peak at the input ({onset.input_dbv:.1f} dBV; "
                f"{first.first_polarity} half-wave; {format_si(abs(onset.stage_input_v), 'V')} peak at its own "
                f"input {first.input_node})")
        if first.margin_db >= 0.0:
            text += f"; {first.margin_db:.1f} dB above the stated level of {format_si(level_v, 'V')} peak"
        else:
            text += f"; the stated level of {format_si(level_v, 'V')} peak is {-first.margin_db:.1f} dB past it"
        if first.own_thd_at_clip is not None:
            text += f"; its own THD there is {_pct(first.own_thd_at_clip)}"
    if thd_level is not None:
        pct = f"{100 * thd_level:g} %"
        thd_v = first_thd.thd_input_v[0] if first_thd is not None else None
        if first_thd is None or thd_v is None:
            text += f"; no stage reaches {pct} THD of its own in the sweep"
        elif first is None or first_thd is not first:
            text += (f"; first to reach {pct} THD of its own: stage {first_thd.stage}, at "
                     f"{format_si(thd_v, 'V')} peak at the input")
        else:
            text += f" and it is also the first to reach {pct} THD of its own, at " \
                    f"{format_si(thd_v, 'V')} peak at the input"
    return text


def _pct(ratio: float) -> str:
    return f"{100 * ratio:.3g} %"


def _definitions(cutoff_fraction: float, thd_levels) -> tuple[str, ...]:
    levels = " and ".join(f"{100 * t:g} %" for t in thd_levels)
    return (
        "grid conduction: the grid-cathode voltage reaches the grid-current onset of the tube model "
        "(0 V for the built-in types, where the grid draws about 3 µA and rising)",
        f"cutoff: the plate current falls below {100 * cutoff_fraction:g} % of its quiescent value",
        "compression (1 dB, 3 dB): the stage's incremental gain d(output)/d(its input) has fallen that far "
        "below its value at rest, on either half-wave",
        f"own THD and its thresholds ({levels}): the distortion a stage adds itself, sqrt(r2² + … + r9²)/y1 "
        "with r the stage output minus its actual input scaled by the gain at the fundamental (a null test); "
        "per half-wave on the odd-symmetric extension of that half-wave",
        "THD at a stage output (cumulative): the ordinary THD of the signal there for a pure sine at the "
        "source, i.e. everything added from the source up to and including that stage; the chain output's "
        "THD is the cumulative THD at the output",
        "clipping onset and THD: an onset is where a mechanism begins (the grid starts to draw current, the "
        "plate current starts to cut off); a soft onset (grid current through a small source resistance) "
        "adds little distortion at first, so a stage can clip first while its own THD there is still small",
        "levels are source (EMF) peaks; dBV of the rms value of a sine with that peak",
    )


def headroom(circuit: Circuit, dc: DcSolution, *, level_v: float, f_ref_hz: float = 1000.0,
             held_caps: Iterable[str] | None = None, thd_levels: tuple[float, ...] = (0.01, 0.05),
             cutoff_fraction: float = DEFAULT_CUTOFF_FRACTION, max_input_v: float = 20.0,
             overdrive: float = 4.0, points_per_decade: int = 40, spectrum: bool = True,
             spectrum_points: int = 128, options: SolveOptions | None = None) -> Headroom:
    """Where each stage clips, which one clips first, and how.

    Sweeps the mid-band transfer curves (:func:`chain.headroom.transfer_curves`),
    finds per stage and half-wave the grid-conduction and cutoff onsets and
    the THD thresholds (definitions in the module docstring), the available
    output swing and the margin at ``level_v``, and — with ``spectrum`` —
    the harmonics at ``level_v`` (:func:`chain.headroom.distortion`).

    Parameters
    ----------
    circuit : Circuit
    dc : DcSolution
        Its DC operating point.
    level_v : float
        The stated input level (source peak), V.
    f_ref_hz : float
        Mid-band reference frequency (decides which capacitors are held), Hz.
    held_caps : Iterable[str], optional
        Short exactly these capacitors (all others open, no stand-ins)
        instead of the automatic choice.
    thd_levels : tuple[float, ...]
        THD thresholds, ratios (0.01 = 1 %).
    cutoff_fraction : float
        Cutoff criterion, fraction of the quiescent plate current.
    max_input_v, overdrive, points_per_decade
        Sweep range and density (see :func:`chain.headroom.transfer_curves`).
    spectrum : bool
        Also compute the spectrum at ``level_v``.
    spectrum_points : int
        Phase points per period of the spectrum (multiple of 4).
    options : SolveOptions, optional
        Solver settings (default: those of ``dc``).

    Returns
    -------
    Headroom
    """
    if not (math.isfinite(level_v) and level_v > 0.0):
        raise ValueError(f"level_v must be positive, got {level_v!r}")
    if not (0.0 < cutoff_fraction < 1.0):
        raise ValueError(f"cutoff_fraction must lie in (0, 1), got {cutoff_fraction!r}")
    t0 = time.perf_counter()
    try:
        net = build_network(circuit, dc, f_ref_hz=f_ref_hz, held_caps=held_caps, options=options)
    except DcConvergenceError as exc:
        # the operating point itself was found; what failed is the same state in
        # the held network, where the stages are DC-coupled through their
        # coupling capacitors and the chain's whole gain multiplies rounding
        raise DcConvergenceError(
            (error("E404", "headroom: the quasi-static mid-band network (coupling capacitors held at their "
                           "DC voltage, so the stages are DC-coupled) could not be solved at zero input, "
                           "although the operating point was; a chain whose gain exceeds about 10^14 "
                           "(some ten high-gain stages) multiplies rounding beyond what double precision "
                           "resolves there",
                   hint="analyse without headroom (--no-headroom), or the headroom of a shorter part "
                        "of the chain"),) + exc.diagnostics,
            exc.iterations, exc.residual_a, exc.last_guess) from None
    curves = sweep(net, points_per_decade=points_per_decade, max_input_v=max_input_v, overdrive=overdrive,
                   cutoff_fraction=cutoff_fraction)
    thd_levels = tuple(float(t) for t in thd_levels)
    rows = tuple(_stage_headroom(net, curves, s, level_v, thd_levels) for s in circuit.stages)
    clipping = [(v, r) for r in rows if (v := r.clip_input_v) is not None]
    first = min(clipping, key=lambda p: p[0])[1] if clipping else None
    span = min(abs(float(curves.input_v[0])), float(curves.input_v[-1]))
    levels = np.abs(curves.input_v[curves.zero_index + 1:])
    levels = levels[levels <= span]
    if levels.size:
        overall = thd_versus_level(curves, None, circuit.output_node, levels)
        overall_thd = tuple(level_for_thd(levels, overall, t) for t in thd_levels)
    else:
        overall_thd = tuple(None for _ in thd_levels)
    spec = distortion_in(net, level_v=level_v, points=spectrum_points) if spectrum else None
    reaching = [(v, r) for r in rows if r.thd_input_v and (v := r.thd_input_v[0]) is not None]
    first_thd = min(reaching, key=lambda p: p[0])[1] if reaching else None
    summary = _summary(first, level_v, first_thd, thd_levels[0] if thd_levels else None)
    return Headroom(level_v=float(level_v), stages=rows, first=first, summary=summary,
                    thd_levels=thd_levels, overall_thd_input_v=overall_thd,
                    cutoff_fraction=float(cutoff_fraction), definitions=_definitions(cutoff_fraction, thd_levels),
                    limits=LIMITS, curves=curves, distortion=spec, elapsed_s=time.perf_counter() - t0)
