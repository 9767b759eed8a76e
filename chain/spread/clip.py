"""First clip of many builds at once: the quasi-static mid-band sweep of
:mod:`chain.headroom`, batched over builds.

The model is the nominal headroom analysis's, built for each build from its
own part values and operating point (:mod:`chain.headroom.network`):

* every capacitor is classified by ``ω·τ = 2π·f_ref·R·C`` with ``R`` the
  resistance it sees in the build's linearised DC network (one batched solve
  of the DC Jacobian per capacitor): held at its DC voltage (``ω·τ >= 10``),
  open (``<= 0.1``), or in between a stand-in, its reactance ``1/(2π·f_ref·C)``
  in series with the held voltage.  One branch row per capacitor covers all
  three, ``α·(v_a − v_b − V_dc) − β·i = 0``: held ``(1, 0)``, stand-in
  ``(1, 1/(ωC))``, open ``(0, 1)`` (no current).  A held capacitor that would
  close a loop of voltage branches is dropped (made open), as the DC engine
  drops it;
* inductors are shorts, the supplies and rails at their DC voltages, the
  signal source swept; triodes follow their full model (plate and grid
  current), the plate current × the build's tube factor.

Reduction to the triodes (exact; the discrete-K idea of the time-domain
solve): with ``M`` the linear part and ``N`` the incidence of the triode
currents ``i = (Ip, Ig)`` of each triode, ``M·x = r0 + v·e − N·i(u)`` and the
controlling voltages ``u = (Vpk, Vgk) = Nᵀ·x``; so per build

    u − u0 − v·w + K·i(u) = 0,    u0 = Nᵀ·M⁻¹·r0,  w = Nᵀ·M⁻¹·e,  K = Nᵀ·M⁻¹·N,

a system of two unknowns per triode, solved by Newton for all builds at once
(one factorisation of ``M`` per build, then (S, 2T, 2T) solves).

The sweep and the onsets follow :mod:`chain.headroom.curves` and
:mod:`chain.headroom.clipping`: the source from 100 µV outwards in both
polarities on the same logarithmic grid (40 points per decade, up to 20 V),
each point started from the secant through the previous two; a polarity
stops, per build, once the first stage is ``overdrive`` (4×) past the point
where one of its triodes reached grid conduction or cutoff.  Onsets per
triode and half-wave: **grid conduction** where Vgk reaches the tube's
``grid_onset_v``, **cutoff** where the plate current falls below 1 % of its
quiescent value (the nominal definitions; the nominal analysis names no
other mechanism, so none is reported here), with the nominal rules for a
limit already reached at rest.  Each crossing found between two sweep
points is refined by Newton on the sweep equations with the source voltage
as one more unknown and the onset condition as one more equation (from the
linear interpolation between the two points; the interpolation is kept
when Newton leaves the bracket).  A stage's first clip is its lowest onset
over its triodes, both mechanisms and both half-waves; the chain's first
stage to clip the stage with the lowest (the earlier stage on a tie).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from chain.circuit import GROUND, Circuit, Role, StageRecord
from chain.headroom.clipping import CUTOFF, GRID_CONDUCTION
from chain.headroom.curves import DEFAULT_CUTOFF_FRACTION
from chain.spread.engine import BatchCircuit, DcBatch
from chain.tubes import TriodeModel, grid_current_and_derivative, plate_current_and_derivatives

__all__ = ["ClipBatch", "MID_BAND_HZ", "MECHANISMS"]

#: mid-band reference frequency of the capacitor classification, Hz (as ``chain report`` runs headroom)
MID_BAND_HZ = 1000.0
#: ω·τ limits: open at or below the first, held at or above the second (as :mod:`chain.headroom.network`)
BAND = (0.1, 10.0)
#: the mechanisms, in the order the nominal analysis breaks ties (index 0, 1); "none" is -1
MECHANISMS = (GRID_CONDUCTION, CUTOFF)
#: sweep points per decade of source level (the nominal sweep has 40; here the grid only brackets the
#: crossings, each refined by Newton to the same equations, so a coarser grid costs no accuracy)
POINTS_PER_DECADE = 10
#: Newton iterations per sweep point before a build counts as failed there
MAX_ITER = 40
#: Newton iterations of the onset refinement
REFINE_ITER = 12
#: largest Newton step of a plate-cathode voltage, V
MAX_STEP_V = 20.0
#: largest Newton step of a grid-cathode voltage, V (the grid current's steep onset needs small steps)
MAX_GRID_STEP_V = 0.25
#: Newton stops when every controlling voltage moved less than this, V
TOL_V = 1e-10


@dataclass(frozen=True, slots=True, eq=False)
class ClipBatch:
    """First-clip levels of ``S`` builds.

    Attributes
    ----------
    stages : tuple[str, ...]
        Stage names in signal order.
    level_v : numpy.ndarray
        (S, stages) source peak (V) at each stage's first clipping onset; inf
        where the stage does not clip within the sweep.
    mechanism : numpy.ndarray
        (S, stages) int: 0 grid conduction, 1 cutoff (:data:`MECHANISMS`), -1 none.
    polarity : numpy.ndarray
        (S, stages) int: +1 positive, -1 negative half-wave, 0 none.
    first : numpy.ndarray
        (S,) index of the first stage to clip (-1: none clips).
    failed : numpy.ndarray
        (S,) bool: the sweep could not be solved at some point (the onsets
        after it are missing).
    refined : int
        Onsets found between two sweep points and refined (by Newton, or by
        regula falsi where Newton failed or left the bracket).
    points : int
        Sweep points per polarity.
    """

    stages: tuple[str, ...]
    level_v: np.ndarray
    mechanism: np.ndarray
    polarity: np.ndarray
    first: np.ndarray
    failed: np.ndarray
    refined: int
    points: int


class _Reduced:
    """Per build: u0, w, K of the reduced system, the triode factors and models."""

    def __init__(self, u0: np.ndarray, w: np.ndarray, k: np.ndarray, scale: np.ndarray,
                 models: tuple[TriodeModel, ...], groups: list[tuple[TriodeModel, np.ndarray]]):
        self.u0, self.w, self.k, self.scale = u0, w, k, scale
        self.models = models
        self.onset_v = np.array([m.grid_onset_v for m in models])
        self.groups = groups  # (model, triode indices) with one model each, for vectorised evaluation

    def take(self, rows: np.ndarray) -> "_Reduced":
        return _Reduced(self.u0[rows], self.w[rows], self.k[rows], self.scale[rows], self.models, self.groups)

    def currents(self, u: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """(Ip, dIp/dVpk, dIp/dVgk, Ig, dIg/dVgk), each (P, T), at controlling voltages u (P, 2T)."""
        p, t = u.shape[0], u.shape[1] // 2
        vpk, vgk = u[:, 0::2], u[:, 1::2]
        ip, d_pk, d_gk, ig, d_g = (np.empty((p, t)) for _ in range(5))
        for model, idx in self.groups:
            a, dgk, dpk = plate_current_and_derivatives(model, vpk[:, idx], vgk[:, idx])
            ip[:, idx], d_gk[:, idx], d_pk[:, idx] = a, dgk, dpk
            g, dg = grid_current_and_derivative(model, vgk[:, idx])
            ig[:, idx], d_g[:, idx] = g, dg
        c = self.scale
        return ip * c, d_pk * c, d_gk * c, ig, d_g

    def residual(self, u: np.ndarray, v: np.ndarray):
        """F(u) (P, 2T), its Jacobian (P, 2T, 2T), and the currents."""
        ip, d_pk, d_gk, ig, d_g = cur = self.currents(u)
        p, t = ip.shape
        i = np.empty((p, 2 * t))
        i[:, 0::2], i[:, 1::2] = ip, ig
        f = u - self.u0 - v[:, None] * self.w + np.einsum("pij,pj->pi", self.k, i)
        di = np.zeros((p, 2 * t, 2 * t))
        r = np.arange(t)
        di[:, 2 * r, 2 * r] = d_pk
        di[:, 2 * r, 2 * r + 1] = d_gk
        di[:, 2 * r + 1, 2 * r + 1] = d_g
        jac = np.eye(2 * t)[None] + self.k @ di
        return f, jac, cur

    def solve(self, v: np.ndarray, guess: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Newton from ``guess`` at source voltages ``v`` (P,); (u, converged)."""
        u = guess.copy()
        done = np.zeros(u.shape[0], dtype=bool)
        active = np.arange(u.shape[0])
        for _ in range(MAX_ITER):
            sub = self.take(active)
            f, jac, _ = sub.residual(u[active], v[active])
            du = _solve(jac, -f)
            bad = ~np.isfinite(du).all(axis=1)
            du[bad] = 0.0
            # a plate-cathode voltage falls at most to half its value per step: the plate current (and its
            # derivatives) vanish below 0 V, where Newton would find no way back
            vpk = u[active][:, 0::2]
            du[:, 0::2] = np.clip(du[:, 0::2], -np.clip(0.5 * vpk, 1.0, MAX_STEP_V), MAX_STEP_V)
            # a grid-cathode voltage rises freely to MAX_GRID_STEP_V below the grid-current onset, and from
            # there by at most MAX_GRID_STEP_V per step (the grid current's steep rise needs small steps)
            vgk = u[active][:, 1::2]
            up = np.maximum(MAX_GRID_STEP_V, self.onset_v - MAX_GRID_STEP_V - vgk)
            du[:, 1::2] = np.clip(du[:, 1::2], -MAX_STEP_V, up)
            u[active] += du
            ok = (np.abs(du).max(axis=1) <= TOL_V) & ~bad
            done[active[ok]] = True
            active = active[~ok & ~bad]
            if active.size == 0:
                break
        return u, done


def _solve(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Batched ``a⁻¹·b`` (b: (P, n)); a singular row gives NaN."""
    try:
        return np.linalg.solve(a, b[:, :, None])[:, :, 0]
    except np.linalg.LinAlgError:
        with np.errstate(all="ignore"):
            det = np.linalg.det(a)
        bad = ~np.isfinite(det) | (det == 0.0)
        a = a.copy()
        a[bad] = np.eye(a.shape[1])
        out = np.linalg.solve(a, b[:, :, None])[:, :, 0]
        out[bad] = np.nan
        return out


class _Unions:
    def __init__(self, n: int):
        self.parent = list(range(n))

    def find(self, i: int) -> int:
        while self.parent[i] != i:
            self.parent[i] = self.parent[self.parent[i]]
            i = self.parent[i]
        return i

    def union(self, a: int, b: int) -> bool:
        ra, rb = self.find(a), self.find(b)
        if ra == rb:
            return False
        self.parent[ra] = rb
        return True


def _classes(batch: BatchCircuit, circuit: Circuit, factors: np.ndarray, dc: DcBatch,
             f_ref_hz: float) -> tuple[np.ndarray, np.ndarray]:
    """(S, ncap) class of each capacitor per build (0 open, 1 held, 2 stand-in)
    and the stand-in resistance (ohm), by ω·τ as :func:`chain.headroom.network.mid_band_capacitors`."""
    caps = circuit.capacitors
    s_count = factors.shape[0]
    if not caps:
        return np.zeros((s_count, 0), dtype=int), np.zeros((s_count, 0))
    jac = batch.jacobian(factors, dc)
    m = batch.m
    rhs = np.zeros((m + 1, len(caps)))
    ia = np.array([batch.column_of(c.a) for c in caps])
    ib = np.array([batch.column_of(c.b) for c in caps])
    rhs[ia, np.arange(len(caps))] += 1.0
    rhs[ib, np.arange(len(caps))] -= 1.0
    z = np.linalg.solve(jac, np.broadcast_to(rhs[:m], (s_count, m, len(caps))))
    zp = np.concatenate([z, np.zeros((s_count, 1, len(caps)))], axis=1)
    cols = np.arange(len(caps))
    seen = np.abs(zp[:, ia, cols] - zp[:, ib, cols])
    farads = np.array([c.farads for c in caps])[None, :] * _factors_of(batch, factors, [c.name for c in caps])
    omega = 2.0 * np.pi * f_ref_hz
    wt = omega * seen * farads
    cls = np.where(wt >= BAND[1], 1, np.where(wt <= BAND[0], 0, 2))
    return cls, 1.0 / (omega * farads)


def _factors_of(batch: BatchCircuit, factors: np.ndarray, names: list[str]) -> np.ndarray:
    col = {n: i for i, n in enumerate(batch.elements)}
    out = np.ones((factors.shape[0], len(names)))
    for j, n in enumerate(names):
        if n in col:
            out[:, j] = factors[:, col[n]]
    return out


def _drop_loops(batch: BatchCircuit, circuit: Circuit, cls: np.ndarray) -> np.ndarray:
    """Held capacitors that would close a loop of voltage branches become open
    (as the DC engine drops them), per distinct pattern of classes."""
    if cls.shape[1] == 0:
        return cls
    out = cls.copy()
    patterns, inverse = np.unique(cls, axis=0, return_inverse=True)
    n = batch.n
    ground = n  # union-find slot of ground

    def slot(node: str) -> int:
        return ground if node == GROUND else batch.column_of(node)

    for p, pattern in enumerate(patterns):
        u = _Unions(n + 1)
        for pos, neg, _ in batch.branches:
            u.union(slot(pos), slot(neg))
        for k, cap in enumerate(circuit.capacitors):
            if pattern[k] == 1 and not u.union(slot(cap.a), slot(cap.b)):
                out[np.asarray(inverse).ravel() == p, k] = 0
    return out


def _reduce(batch: BatchCircuit, circuit: Circuit, factors: np.ndarray, dc: DcBatch,
            f_ref_hz: float) -> tuple[_Reduced, np.ndarray]:
    """The reduced system of every build, and its controlling voltages at rest."""
    s_count = factors.shape[0]
    g_lin = batch.linear_matrix(factors)
    m = batch.m
    caps = circuit.capacitors
    ncap = len(caps)
    size = m + ncap
    mat = np.zeros((s_count, size, size))
    mat[:, :m, :m] = g_lin
    r0 = np.zeros((s_count, size))
    r0[:, :m] = batch.rhs_dc
    e = np.zeros(size)
    signal = [k for k, b in enumerate(batch.branches) if b[2] == Role.SIGNAL.value]
    if signal:
        e[batch.n + signal[0]] = 1.0
    cls, stand_in = _classes(batch, circuit, factors, dc, f_ref_hz)
    cls = _drop_loops(batch, circuit, cls)
    alpha = (cls > 0).astype(float)
    beta = np.where(cls == 0, 1.0, np.where(cls == 2, stand_in, 0.0))
    for k, cap in enumerate(caps):
        row = m + k
        a, b = batch.column_of(cap.a), batch.column_of(cap.b)
        vdc = batch.node_voltage(dc, cap.a) - batch.node_voltage(dc, cap.b)
        for node, sign in ((a, 1.0), (b, -1.0)):
            if node < m:
                mat[:, node, row] += sign  # the branch current leaves a, enters b
                mat[:, row, node] += sign * alpha[:, k]
        mat[:, row, row] = -beta[:, k]
        r0[:, row] = alpha[:, k] * vdc
    triodes = circuit.triodes
    t_count = len(triodes)
    inc = np.zeros((size + 1, 2 * t_count))
    for t, tri in enumerate(triodes):
        p, g, k = (batch.column_of(x) for x in (tri.plate, tri.grid, tri.cathode))
        p, g, k = (size if x >= m else x for x in (p, g, k))
        inc[p, 2 * t] += 1.0
        inc[k, 2 * t] -= 1.0
        inc[g, 2 * t + 1] += 1.0
        inc[k, 2 * t + 1] -= 1.0
    inc = inc[:size]
    rhs = np.concatenate([np.broadcast_to(inc, (s_count, size, 2 * t_count)), r0[:, :, None],
                          np.broadcast_to(e[:, None], (s_count, size, 1))], axis=2)
    sol = np.linalg.solve(mat, rhs)
    proj = np.einsum("mi,smj->sij", inc, sol)  # Nᵀ·M⁻¹·[N, r0, e]
    k_mat, u0, w = proj[:, :, :2 * t_count], proj[:, :, 2 * t_count], proj[:, :, 2 * t_count + 1]
    groups: dict[int, tuple[TriodeModel, list[int]]] = {}
    for t, tri in enumerate(triodes):
        groups.setdefault(id(tri.model), (tri.model, []))[1].append(t)
    red = _Reduced(u0, w, k_mat, batch.plate_factors(factors), tuple(t.model for t in triodes),
                   [(mod, np.array(idx)) for mod, idx in groups.values()])
    u_rest = np.empty((s_count, 2 * t_count))
    u_rest[:, 0::2] = dc.vp_v - dc.vk_v
    u_rest[:, 1::2] = dc.vg_v - dc.vk_v
    u_rest, _ = red.solve(np.zeros(s_count), u_rest)
    return red, u_rest


def _levels(start_v: float, ratio: float, max_input_v: float) -> np.ndarray:
    """Source magnitudes of the sweep, as :func:`chain.headroom.curves.sweep` steps them."""
    out = []
    magnitude = start_v
    while True:
        magnitude = min(magnitude, max_input_v)
        out.append(magnitude)
        if magnitude >= max_input_v:
            break
        magnitude *= ratio
    return np.array(out)


def clip_batch(batch: BatchCircuit, circuit: Circuit, factors: np.ndarray, dc: DcBatch, *,
               f_ref_hz: float = MID_BAND_HZ, cutoff_fraction: float = DEFAULT_CUTOFF_FRACTION,
               start_v: float = 1e-4, points_per_decade: int = POINTS_PER_DECADE, max_input_v: float = 20.0,
               overdrive: float = 4.0) -> ClipBatch:
    """First-clip level, mechanism and half-wave of every stage in every build
    (see the module docstring); parameters as :func:`chain.headroom.headroom`."""
    factors = np.atleast_2d(np.asarray(factors, dtype=float))
    s_count = factors.shape[0]
    stages = tuple(circuit.stages)
    red, u_rest = _reduce(batch, circuit, factors, dc, f_ref_hz)
    t_count = len(circuit.triodes)
    tri_index = {t.name: i for i, t in enumerate(circuit.triodes)}
    onset_v = np.array([t.model.grid_onset_v for t in circuit.triodes])
    iq = red.currents(u_rest)[0]
    threshold = cutoff_fraction * iq
    first_stage = [tri_index[n] for n in stages[0].triodes] if stages else []
    stage_cols = [np.array([tri_index[n] for n in st.triodes]) for st in stages]
    mags = _levels(start_v, 10.0 ** (1.0 / points_per_decade), max_input_v)

    # onset candidates: (S, side, mechanism, triode) level (inf: none) and their count refined
    level = np.full((s_count, 2, 2, t_count), np.inf)
    failed = np.zeros(s_count, dtype=bool)
    refined = 0
    for side, sign in enumerate((1.0, -1.0)):
        p_count = mags.size + 1
        us = np.full((p_count, s_count, 2 * t_count), np.nan)
        vgk = np.full((p_count, s_count, t_count), np.nan)
        ip = np.full((p_count, s_count, t_count), np.nan)
        us[0] = u_rest
        vgk[0], ip[0] = u_rest[:, 1::2], iq
        valid = np.zeros((p_count, s_count), dtype=bool)
        valid[0] = True
        running = np.ones(s_count, dtype=bool)
        limit_at = np.full(s_count, np.inf)
        active0 = np.stack([vgk[0] - onset_v >= 0.0, threshold - iq >= 0.0], axis=2)  # (S, T, 2) at rest
        found = np.zeros_like(active0)
        left = np.zeros_like(active0)
        for j, mag in enumerate(mags, start=1):
            rows = np.flatnonzero(running)
            if rows.size == 0:
                break
            v_to = sign * mag
            v_from = sign * (mags[j - 2] if j >= 2 else 0.0)
            guess = us[j - 1, rows]
            if j >= 2:
                v_back = sign * (mags[j - 3] if j >= 3 else 0.0)
                guess = guess + (us[j - 1, rows] - us[j - 2, rows]) * ((v_to - v_from) / (v_from - v_back))
            sub = red.take(rows)
            u, ok = sub.solve(np.full(rows.size, v_to), guess)
            if not ok.all():  # a second try from the last point itself, as the nominal sweep splits a failed step
                again, ok2 = sub.solve(np.full(rows.size, v_to), us[j - 1, rows])
                u = np.where(ok[:, None], u, again)
                ok = ok | ok2
            failed[rows[~ok]] = True
            running[rows[~ok]] = False
            rows, u = rows[ok], u[ok]
            us[j, rows] = u
            cur = red.take(rows).currents(u)[0]
            vgk[j, rows], ip[j, rows] = u[:, 1::2], cur
            valid[j, rows] = True
            if first_stage:
                fs = np.array(first_stage)
                hit = ((u[:, 1::2][:, fs] >= onset_v[fs]) | (cur[:, fs] <= threshold[rows][:, fs])).any(axis=1)
                fresh = hit & ~np.isfinite(limit_at[rows])
                limit_at[rows[fresh]] = mag
            done = mag >= overdrive * limit_at[rows]
            running[rows[done]] = False
            # an onset found (by the rules of _onsets) for every stage on this side: nothing later
            # on this side can lower a stage's first clip, so the build is done here
            act = np.stack([u[:, 1::2] - onset_v >= 0.0, threshold[rows] - cur >= 0.0], axis=2)  # (R, T, 2)
            if j == 1:
                found[rows] |= active0[rows] & ~((u[:, 1::2] - onset_v < vgk[0, rows] - onset_v)[:, :, None]
                                                  & np.array([True, False]) |
                                                  (cur > ip[0, rows])[:, :, None] & np.array([False, True]))
            left[rows] |= active0[rows] & ~act
            found[rows] |= act & (~active0[rows] | left[rows])
            staged = np.stack([found[rows][:, cols].any(axis=(1, 2)) for cols in stage_cols], axis=1)
            running[rows[staged.all(axis=1)]] = False
        v_grid = np.concatenate([[0.0], sign * mags])
        for mech in (0, 1):
            values = vgk - onset_v if mech == 0 else threshold[None] - ip  # (P, S, T): active when >= 0
            lv, case = _onsets(values, valid, v_grid)
            level[:, side, mech, :] = lv
            refined += _refine(red, us, values, v_grid, case, mech, onset_v, threshold,
                               level[:, side, mech, :])
    return _summarise(stages, tri_index, level, failed, refined, mags.size)


def _onsets(values: np.ndarray, valid: np.ndarray, v_grid: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per build and triode: the onset level by the nominal rules (0 at rest,
    inf when none) and the bracket index k (the crossing lies between points
    k−1 and k; 0 for none or at rest)."""
    p_count, s_count, t_count = values.shape
    ok = valid[:, :, None] & np.isfinite(values)
    active = ok & (values >= 0.0)
    level = np.full((s_count, t_count), np.inf)
    bracket = np.zeros((s_count, t_count), dtype=int)
    idx = np.arange(p_count)[:, None, None]
    # past the limit at rest and driven further in on this side (or no second point): the onset is at rest
    rising = ~ok[1] | (values[1] >= values[0]) if p_count >= 2 else np.ones((s_count, t_count), dtype=bool)
    at_rest = active[0] & rising
    level[at_rest] = 0.0
    # where active at rest but driven out of it: look for a fresh onset once it has left
    left = ok & ~active
    first_left = np.where(left.any(axis=0), np.argmax(left, axis=0), p_count)
    start = np.where(active[0], first_left, 0)
    after = active & (idx >= start[None])
    has = after.any(axis=0) & ~at_rest & (start < p_count)
    k = np.argmax(after, axis=0)
    bracket[has] = k[has]
    # a hit at index 0 cannot happen here (start >= 1 when active at rest)
    level[has] = np.abs(v_grid[k[has]])  # provisional: the refinement replaces it
    return level, bracket


def _refine(red: _Reduced, us: np.ndarray, values: np.ndarray, v_grid: np.ndarray,
            bracket: np.ndarray, mech: int, onset_v: np.ndarray, threshold: np.ndarray,
            out: np.ndarray) -> int:
    """Refine the bracketed onsets in place (``out``: (S, T) levels); returns
    how many there were.

    The onset condition is ``Vgk − onset = 0`` for grid conduction and
    ``ln(Ip) − ln(threshold) = 0`` for cutoff (the logarithm makes the plate
    current's exponential tail nearly linear in the source voltage).  Newton
    on the sweep equations with the source voltage as one more unknown, from
    the solution at the interpolated level; where it fails or leaves the
    bracket, regula falsi (Illinois) on the bracket.
    """
    s_idx, t_idx = np.nonzero(bracket > 0)
    if s_idx.size == 0:
        return 0
    k = bracket[s_idx, t_idx]
    thr = threshold[s_idx, t_idx]

    def q_of(vals: np.ndarray) -> np.ndarray:
        if mech == 0:
            return vals
        ip = np.maximum(thr - vals, 1e-300)
        return np.log(thr) - np.log(ip)

    qa = q_of(values[k - 1, s_idx, t_idx])
    qb = q_of(values[k, s_idx, t_idx])
    xa, xb = v_grid[k - 1], v_grid[k]
    frac = np.where(qb != qa, -qa / (qb - qa), 1.0)
    v = xa + frac * (xb - xa)
    out[s_idx, t_idx] = np.abs(v)  # the interpolation, kept where the refinement fails
    sub = red.take(s_idx)
    ua = us[k - 1, s_idx]
    u, ok = sub.solve(v, ua)
    u = np.where(ok[:, None], u, ua)
    n2 = u.shape[1]
    rows = np.arange(s_idx.size)
    done = np.zeros(s_idx.size, dtype=bool)

    def condition(u: np.ndarray, ip: np.ndarray) -> np.ndarray:
        if mech == 0:
            return u[rows, 2 * t_idx + 1] - onset_v[t_idx]
        return np.log(thr) - np.log(np.maximum(ip[rows, t_idx], 1e-300))

    for _ in range(REFINE_ITER):
        f, jac, (ip, d_pk, d_gk, _, _) = sub.residual(u, v)
        aug = np.zeros((s_idx.size, n2 + 1, n2 + 1))
        aug[:, :n2, :n2] = jac
        aug[:, :n2, n2] = -sub.w
        rhs = np.zeros((s_idx.size, n2 + 1))
        rhs[:, :n2] = -f
        rhs[:, n2] = -condition(u, ip)
        if mech == 0:
            aug[rows, n2, 2 * t_idx + 1] = 1.0
        else:
            cur = np.maximum(ip[rows, t_idx], 1e-300)
            aug[rows, n2, 2 * t_idx] = -d_pk[rows, t_idx] / cur
            aug[rows, n2, 2 * t_idx + 1] = -d_gk[rows, t_idx] / cur
        step = _solve(aug, rhs)
        step[~np.isfinite(step).all(axis=1)] = 0.0
        u = u + np.clip(step[:, :n2], -MAX_STEP_V, MAX_STEP_V)
        v = v + step[:, n2]
        done = (np.abs(step[:, :n2]).max(axis=1) <= TOL_V) & (np.abs(step[:, n2]) <= 1e-12 * np.abs(v) + 1e-15)
        if done.all():
            break
    lo, hi = np.minimum(xa, xb), np.maximum(xa, xb)
    inside = done & (v >= lo - 1e-12 * np.abs(lo)) & (v <= hi + 1e-12 * np.abs(hi))
    out[s_idx[inside], t_idx[inside]] = np.abs(v[inside])
    rest = np.flatnonzero(~inside)
    if rest.size:
        tr = t_idx[rest]

        def cond(uu: np.ndarray, ip: np.ndarray) -> np.ndarray:
            r = np.arange(rest.size)
            if mech == 0:
                return uu[r, 2 * tr + 1] - onset_v[tr]
            return np.log(thr[rest]) - np.log(np.maximum(ip[r, tr], 1e-300))

        out[s_idx[rest], t_idx[rest]] = _illinois(sub.take(rest), ua[rest], xa[rest], xb[rest], qa[rest],
                                                  qb[rest], cond)
    return int(s_idx.size)


#: regula-falsi iterations of the fallback refinement
ILLINOIS_ITER = 60


def _illinois(sub: _Reduced, u: np.ndarray, a: np.ndarray, b: np.ndarray, fa: np.ndarray, fb: np.ndarray,
              cond) -> np.ndarray:
    """Regula falsi with the Illinois modification on brackets ``[a, b]``
    (source voltages) of ``cond`` (values ``fa < 0 <= fb``); |root| per row."""
    a, b, fa, fb = a.copy(), b.copy(), fa.copy(), fb.copy()
    last = np.zeros(a.size, dtype=int)  # which end moved last: -1 a, +1 b
    c = a.copy()
    for _ in range(ILLINOIS_ITER):
        with np.errstate(invalid="ignore", divide="ignore"):
            c = np.where(fb != fa, (a * fb - b * fa) / (fb - fa), 0.5 * (a + b))
        c = np.where(np.isfinite(c) & ((c - a) * (c - b) <= 0), c, 0.5 * (a + b))
        uc, ok = sub.solve(c, u)
        u = np.where(ok[:, None], uc, u)
        fc = cond(uc, sub.currents(uc)[0])
        fc = np.where(ok & np.isfinite(fc), fc, -1.0)  # an unsolved point counts as before the onset
        move_a = fc < 0
        fb = np.where(move_a & (last == -1), 0.5 * fb, fb)
        fa = np.where(~move_a & (last == 1), 0.5 * fa, fa)
        a, fa = np.where(move_a, c, a), np.where(move_a, fc, fa)
        b, fb = np.where(move_a, b, c), np.where(move_a, fb, fc)
        last = np.where(move_a, -1, 1)
        if (np.abs(b - a) <= 1e-10 * np.maximum(np.abs(a), np.abs(b))).all():
            break
    return np.abs(0.5 * (a + b))


def _summarise(stages: tuple[StageRecord, ...], tri_index: dict[str, int], level: np.ndarray,
               failed: np.ndarray, refined: int, points: int) -> ClipBatch:
    s_count = level.shape[0]
    n = len(stages)
    lv = np.full((s_count, n), np.inf)
    mech = np.full((s_count, n), -1, dtype=int)
    pol = np.zeros((s_count, n), dtype=int)
    for j, st in enumerate(stages):
        cols = [tri_index[t] for t in st.triodes]
        # candidates in the nominal tie order: positive before negative, grid before cutoff, triodes in order
        cand = level[:, :, :, cols].reshape(s_count, -1)
        best = np.argmin(cand, axis=1)
        value = cand[np.arange(s_count), best]
        side, m, _ = np.unravel_index(best, (2, 2, len(cols)))
        hit = np.isfinite(value)
        lv[hit, j] = value[hit]
        mech[hit, j] = m[hit]
        pol[hit, j] = np.where(side[hit] == 0, 1, -1)
    first = np.where(np.isfinite(lv).any(axis=1), np.argmin(lv, axis=1), -1) if n else np.full(s_count, -1)
    return ClipBatch(stages=tuple(st.name for st in stages), level_v=lv, mechanism=mech, polarity=pol,
                     first=first, failed=failed, refined=refined, points=points)
