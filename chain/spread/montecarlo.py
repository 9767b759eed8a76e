"""Monte Carlo over part and tube tolerances, and worst-case corners.

:func:`spread` draws ``N`` builds of a circuit (seeded, reproducible: numpy's
PCG64 generator), every varied part uniformly inside its tolerance
(:mod:`chain.spread.tolerance`), and analyses them together with the batched
engine (:mod:`chain.spread.engine`): DC operating point, response over the
band, and per stage at the reference frequency the loaded gain
``H(output)/H(input)`` and the output impedance (as
:mod:`chain.smallsignal.response` defines it).  Results are medians and
5th–95th percentiles (``numpy.percentile``, linear interpolation).

Rating checks per sample (the tube data's ratings and the capacitors' stated
ratings): plate voltage above ``vp_max``, dissipation above ``pd_max``,
cathode current above ``ik_max``, heater–cathode voltage above ``vhk_max``,
a capacitor's DC voltage above its rating; and the bias checks of the single
analysis: plate current below the cutoff threshold, grid current above the
grid-current threshold.  For each, the fraction of samples and the first
draws that did it (the stage's own parts and tube, largest deviation first).

Worst-case corners (extreme-value analysis): the first-order sensitivity of
each figure to each varied part is found by a finite difference (one extra
sample per part, all in one batch); the corner that makes the figure largest
puts every part at the end of its band with the sign of its sensitivity, the
smallest the opposite; both corners are then analysed exactly (another
batch).  With tolerances this wide the figure is not linear, so a corner is a
good guess at the extreme, not a bound.

Fixed deviations (``fixed={"V2": -0.25}``: a tube drawing 25 % less current)
hold a group at that deviation in every sample and in a separate single
"what if" analysis.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Mapping

import numpy as np

from chain.circuit import Circuit, Owner
from chain.dc.result import DcSolution, SolveOptions
from chain.errors import AnalysisError, error
from chain.spread.engine import BatchCircuit, DcBatch
from chain.spread.tolerance import Tolerance, Varied, varied_parts

__all__ = ["Percentiles", "StageSpread", "RatingBreak", "Corner", "Instability", "ClipSpread", "FirstClip",
           "SpreadResult", "spread", "draw",
           "rank_correlation",
           "STAGE_FIGURES", "PERCENTILES"]

#: the percentiles reported
PERCENTILES = (5.0, 50.0, 95.0)
#: per-stage figures: key → (label, unit)
STAGE_FIGURES = {
    "vp_v": ("Vp", "V"), "vk_v": ("Vk", "V"), "vgk_v": ("Vgk", "V"), "ip_a": ("Ip", "A"), "pd_w": ("Pd", "W"),
    "gain_db": ("gain", "dB"), "zout_ohm": ("|Zout|", "ohm"),
}
#: relative step of the finite-difference sensitivities
SENSITIVITY_STEP = 1e-4
#: draws listed per rating break
SHOWN_DRAWS = 5
#: bytes held per build and matrix entry at the peak (real G and C, a complex Y and its factors)
BYTES_PER_ENTRY = 64
#: largest memory the batched arrays may take, bytes
MEMORY_LIMIT_BYTES = 2e9


@dataclass(frozen=True, slots=True)
class Percentiles:
    """5th, 50th (median) and 95th percentile, the nominal value, and the
    values at the low and high worst-case corners."""

    p5: float
    median: float
    p95: float
    nominal: float
    corner_low: float
    corner_high: float


@dataclass(frozen=True, slots=True)
class StageSpread:
    stage: str
    figures: Mapping[str, Percentiles]


@dataclass(frozen=True, slots=True)
class RatingBreak:
    """Samples in which one check fails."""

    subject: str
    check: str
    fraction: float
    #: (sample index, ((group label, deviation), …)) of the first few samples
    draws: tuple[tuple[int, tuple[tuple[str, float], ...]], ...]


@dataclass(frozen=True, slots=True)
class Corner:
    """One worst-case corner: the figure, which end, and the deviations used."""

    figure: str
    end: str
    value: float
    deviations: tuple[tuple[str, float], ...]
    #: False when the corner build has a pole in the right half-plane
    stable: bool = True


@dataclass(frozen=True, slots=True)
class ClipSpread:
    """One stage's first clip over the builds (source peak, V).

    ``p5``, ``median``, ``p95`` over the builds in which the stage clips within
    the sweep (``clips``: their fraction); ``mechanisms``: fraction of those
    builds per mechanism (``"grid conduction"``, ``"cutoff"``); ``nominal`` and
    ``nominal_mechanism`` of the nominal build (inf and "none" when it does
    not clip); ``influence``: the groups of largest Spearman rank correlation
    of their deviation with this stage's first-clip level.
    """

    stage: str
    nominal: float
    nominal_mechanism: str
    p5: float
    median: float
    p95: float
    clips: float
    mechanisms: Mapping[str, float]
    influence: tuple[tuple[str, float], ...]


@dataclass(frozen=True, slots=True)
class FirstClip:
    """Which stage clips first, over the builds.

    ``nominal``: the nominal build's first stage ("" when none clips);
    ``fractions``: stage → fraction of the builds in which it clips first;
    ``changed``: fraction in which another stage than the nominal one clips
    first; ``draws``: the first few such builds (sample, first stage, the
    largest deviations of the parts and tubes of the two stages);
    ``influence``: groups ranked by Spearman's rank correlation of their
    deviation with the first stage having changed.  ``counted``: builds in
    these statistics (converged, stable, sweep solved); ``failed``: builds
    whose large-signal sweep could not be solved at some level.
    """

    nominal: str
    fractions: Mapping[str, float]
    changed: float
    draws: tuple[tuple[int, str, tuple[tuple[str, float], ...]], ...]
    influence: tuple[tuple[str, float], ...]
    counted: int
    failed: int


@dataclass(frozen=True, slots=True)
class Instability:
    """Builds with a pole in the right half-plane (as
    :mod:`chain.smallsignal.stability` decides for one circuit).  They are left
    out of every percentile, the response band and the checks.

    ``draws`` are the first few unstable builds with their largest part and
    tube deviations; ``influence`` ranks the varied groups by Spearman's rank
    correlation of their deviation with being unstable (ties averaged;
    positive: a high value makes instability likelier), largest ``|ρ|`` first.
    """

    count: int
    fraction: float
    #: oscillation frequency |Im s|/2π of each unstable build's worst pole: 5 %, median, 95 %, Hz
    oscillation_hz: tuple[float, float, float]
    draws: tuple[tuple[int, tuple[tuple[str, float], ...]], ...]
    influence: tuple[tuple[str, float], ...]


@dataclass(frozen=True, slots=True, eq=False)
class SpreadResult:
    samples: int
    seed: int
    groups: tuple[Varied, ...]
    #: (samples, groups) relative deviations drawn
    deviations: np.ndarray
    #: group label → deviation held in every sample
    fixed: Mapping[str, float]
    stages: tuple[StageSpread, ...]
    overall_gain_db: Percentiles
    #: response envelope: frequencies and |H| in dB at the percentiles (3, nf), nominal (nf,)
    f_hz: np.ndarray
    envelope_db: np.ndarray
    nominal_db: np.ndarray
    breaks: tuple[RatingBreak, ...]
    corners: tuple[Corner, ...]
    #: samples whose DC Newton did not converge (left out of the statistics)
    unconverged: int
    #: samples whose response was re-solved after the direct check
    resolved: int
    #: the single "what if" analysis with only the fixed deviations (None without any)
    what_if: Mapping[str, Mapping[str, float]] | None
    nominal: Mapping[str, Mapping[str, float]]
    reference_hz: float
    #: unstable builds (left out of the statistics)
    instability: Instability | None = None
    #: the nominal build's worst right-half-plane pole s/2π (Hz), None when it is stable
    nominal_rhp_hz: complex | None = None
    #: builds in the statistics: converged and stable
    counted: int = 0
    #: first clip per stage (signal order) and which stage clips first; empty/None when not computed
    clips: tuple[ClipSpread, ...] = ()
    first_clip: FirstClip | None = None
    #: the what-if build's first clip per stage: (source peak V, inf when none; mechanism), and its first stage
    what_if_clip: Mapping[str, tuple[float, str]] | None = None
    what_if_first: str = ""


def draw(groups: tuple[Varied, ...], samples: int, seed: int,
         fixed: Mapping[int, float] | None = None) -> np.ndarray:
    """(samples, groups) deviations, uniform over each group's tolerance band;
    ``fixed`` (group index → deviation) holds some groups."""
    rng = np.random.default_rng(seed)
    low = np.array([g.tolerance.low for g in groups])
    high = np.array([g.tolerance.high for g in groups])
    d = low + (high - low) * rng.random((samples, len(groups)))
    for i, v in (fixed or {}).items():
        d[:, i] = v
    return d


class _Model:
    """The batched analysis of one circuit for deviation arrays."""

    def __init__(self, circuit: Circuit, dc: DcSolution, groups, f_hz, reference_hz, options):
        self.groups = groups
        names = tuple(n for g in groups for n in g.names)
        self.group_of_col = np.array([gi for gi, g in enumerate(groups) for _ in g.names], dtype=int)
        self.batch = BatchCircuit(circuit, dc, names, options=options)
        self.circuit = circuit
        self.f_hz = np.asarray(f_hz, dtype=float)
        self.reference_hz = float(reference_hz)
        b = self.batch
        self.out = b.index_of(circuit.output_node)
        self.stages = [st for st in circuit.stages if len(st.triodes) == 1]
        tri_index = {t.name: i for i, t in enumerate(circuit.triodes)}
        self.stage_triode = [tri_index[st.triode] for st in self.stages]
        self.removed = []
        for st in self.stages:
            me = Owner("stage", st.name)
            node = b.index_of(st.output)
            self.removed.append((node, np.array([not (e.owner != me and e.owner.kind != "rail" and e.touches(node))
                                                 for e in b._stamps])))

    def factors(self, deviations: np.ndarray) -> np.ndarray:
        return 1.0 + deviations[:, self.group_of_col]

    def run(self, deviations: np.ndarray, *, sweep: bool, clip: bool = False) -> dict[str, Any]:
        b = self.batch
        fac = self.factors(deviations)
        dc = b.dc(fac)
        vals = b.stamp_values(fac, dc)
        g, c = b.matrices(vals)
        rhs = b.source_rhs
        x_ref = b.solve_at(g, c, self.reference_hz, rhs)
        # figure name -> (S,) array; also "_dc" -> DcBatch and "_clip" -> the clip batch
        out: dict[str, Any] = {"converged": dc.converged}
        h_out = x_ref[:, self.out] if self.out >= 0 else np.zeros(x_ref.shape[0])
        with np.errstate(divide="ignore"):
            out["overall_gain_db"] = 20 * np.log10(np.abs(h_out))
        for st, t, (node, keep) in zip(self.stages, self.stage_triode, self.removed):
            i_in, i_out = b.index_of(st.input), b.index_of(st.output)
            with np.errstate(divide="ignore", invalid="ignore"):
                out[f"{st.name}.gain_db"] = 20 * np.log10(np.abs(x_ref[:, i_out] / x_ref[:, i_in]))
            gz, cz = b.matrices(vals, keep)
            unit = np.zeros(b.size)
            unit[node] = 1.0
            out[f"{st.name}.zout_ohm"] = np.abs(b.solve_at(gz, cz, self.reference_hz, unit)[:, node])
            out[f"{st.name}.vp_v"] = dc.vp_v[:, t]
            out[f"{st.name}.vk_v"] = dc.vk_v[:, t]
            out[f"{st.name}.vgk_v"] = dc.vg_v[:, t] - dc.vk_v[:, t]
            out[f"{st.name}.ip_a"] = dc.ip_a[:, t]
            out[f"{st.name}.pd_w"] = dc.pd_w[:, t]
        out["_dc"] = dc
        if sweep:
            checks = (self.f_hz[0], self.reference_hz, self.f_hz[-1])
            h, resolved, rhp = b.output_response(g, c, self.f_hz, self.out, checks)
            with np.errstate(divide="ignore"):
                out["response_db"] = 20 * np.log10(np.abs(h))
            out["resolved"] = np.array(resolved)
        else:
            rhp = b.rhp_poles(g, c)
        out["rhp_hz"] = rhp
        out["stable"] = np.isnan(rhp.real)
        if clip:
            from chain.spread.clip import clip_batch

            out["_clip"] = clip_batch(b, self.circuit, fac, dc)
        return out


def _figure_keys(model: _Model) -> list[str]:
    keys = ["overall_gain_db"]
    for st in model.stages:
        keys += [f"{st.name}.{k}" for k in STAGE_FIGURES]
    return keys


def _checks(model: _Model, dc: DcBatch, options: SolveOptions) -> dict[tuple[str, str], np.ndarray]:
    """(subject, check) → (S,) bool: the sample fails the check."""
    b = model.batch
    out = {}
    for t, tri in enumerate(model.circuit.triodes):
        r = tri.model.ratings
        who = tri.owner.name or tri.name
        vpk = dc.vp_v[:, t] - dc.vk_v[:, t]
        if r.vp_max_v is not None:
            out[(who, f"plate voltage above {r.vp_max_v:g} V rating")] = vpk > r.vp_max_v
        if r.pd_max_w is not None:
            out[(who, f"dissipation above {r.pd_max_w:g} W rating")] = dc.pd_w[:, t] > r.pd_max_w
        if r.ik_max_a is not None:
            out[(who, f"cathode current above {r.ik_max_a * 1e3:g} mA rating")] = \
                dc.ip_a[:, t] + dc.ig_a[:, t] > r.ik_max_a
        if r.vhk_max_v is not None:
            out[(who, f"heater-cathode voltage above {r.vhk_max_v:g} V rating")] = \
                np.abs(dc.vk_v[:, t] - tri.heater_v) > r.vhk_max_v
        out[(who, "cut off (plate current below the cutoff threshold)")] = dc.ip_a[:, t] < options.cutoff_a
        out[(who, "grid conduction at the operating point")] = dc.ig_a[:, t] > options.grid_current_a
    for cap in model.circuit.capacitors:
        if cap.rated_v:
            v = np.abs(b.node_voltage(dc, cap.a) - b.node_voltage(dc, cap.b))
            out[(cap.name, f"DC voltage above its {cap.rated_v:g} V rating")] = v > cap.rated_v
    return out


def _own_groups(model: _Model, subject: str) -> list[int]:
    """Groups that belong to ``subject`` (a stage or a part name)."""
    own = [gi for gi, g in enumerate(model.groups) if subject in g.names]
    for el in model.circuit.elements:
        if el.owner.kind == "stage" and el.owner.name == subject:
            own += [gi for gi, g in enumerate(model.groups) if el.name in g.names]
    return sorted(set(own))


def ranks(x: np.ndarray) -> np.ndarray:
    """Ranks 0…n−1 of ``x`` along its first axis, ties given their average rank."""
    x = np.asarray(x, dtype=float)
    order = np.argsort(x, axis=0, kind="mergesort")
    r = np.empty_like(x)
    np.put_along_axis(r, order, np.arange(x.shape[0], dtype=float).reshape((-1,) + (1,) * (x.ndim - 1)), axis=0)
    cols = r.reshape(x.shape[0], -1)
    flat = x.reshape(x.shape[0], -1)
    for j in range(flat.shape[1]):
        _, inv, counts = np.unique(flat[:, j], return_inverse=True, return_counts=True)
        if counts.size < flat.shape[0]:
            cols[:, j] = (np.bincount(inv, weights=cols[:, j]) / counts)[inv]
    return cols.reshape(x.shape)


def rank_correlation(deviations: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Spearman's rank correlation of each column of ``deviations`` (S, G) with
    ``y`` (S,): Pearson's correlation of the ranks (ties averaged); 0 for a
    constant column or a constant ``y``."""
    rx = ranks(deviations)
    ry = ranks(y)
    rx = rx - rx.mean(axis=0)
    ry = ry - ry.mean()
    den = np.sqrt((rx ** 2).sum(axis=0) * (ry ** 2).sum())
    with np.errstate(invalid="ignore", divide="ignore"):
        rho = (rx * ry[:, None]).sum(axis=0) / den
    return np.where(den > 0, rho, 0.0)


def _influence(groups, deviations: np.ndarray, y: np.ndarray, count: int = 4) -> tuple[tuple[str, float], ...]:
    """The ``count`` groups of largest |ρ| (Spearman) with ``y``, largest first."""
    if deviations.shape[0] < 3:
        return ()
    rho = rank_correlation(deviations, y.astype(float))
    order = np.argsort(-np.abs(rho), kind="mergesort")[:count]
    return tuple((groups[i].label, float(rho[i])) for i in order if rho[i] != 0.0)


def _largest(groups, row: np.ndarray, among: list[int] | None = None, count: int = 4):
    idx = range(len(groups)) if among is None else among
    pairs = sorted(((groups[gi].label, float(row[gi])) for gi in idx), key=lambda p: -abs(p[1]))
    return tuple(pairs[:count])


def _pct(values: np.ndarray, ok: np.ndarray) -> tuple[float, float, float]:
    v = values[ok & np.isfinite(values)]
    if v.size == 0:
        return (float("nan"),) * 3
    p = np.percentile(v, PERCENTILES)
    return float(p[0]), float(p[1]), float(p[2])


def spread(circuit: Circuit, dc: DcSolution, *, f_hz: np.ndarray, reference_hz: float, samples: int = 1000,
           seed: int = 1, by_kind: Mapping[str, Tolerance] | None = None,
           by_part: Mapping[str, Tolerance] | None = None, fixed: Mapping[str, float] | None = None,
           options: SolveOptions = SolveOptions(), corners: bool = True, clip: bool = True) -> SpreadResult:
    """Monte Carlo and worst-case corners (see the module docstring).

    ``fixed`` maps a varied element's name (or a stage name for its tube) to a
    deviation held in every sample (``-0.25``: 25 % low).
    """
    groups = varied_parts(circuit, by_kind=by_kind, by_part=by_part)
    fixed = dict(fixed or {})
    fixed_idx: dict[int, float] = {}
    for name, v in fixed.items():
        hits = [gi for gi, g in enumerate(groups)
                if name in g.names or (g.kind == "tubes" and any(
                    el.name in g.names and el.owner.name == name for el in circuit.triodes))]
        if not hits:
            raise KeyError(name)
        for gi in hits:
            fixed_idx[gi] = float(v)
    model = _Model(circuit, dc, groups, f_hz, reference_hz, options)
    need = samples * model.batch.size ** 2 * BYTES_PER_ENTRY
    if need > MEMORY_LIMIT_BYTES:
        raise AnalysisError(error(
            "E952", f"{samples} builds of a circuit with {model.batch.size} unknowns need about "
                    f"{need / 1e9:.1f} GB", hint=f"ask for fewer builds (at most about "
                                                 f"{int(MEMORY_LIMIT_BYTES // (model.batch.size ** 2 * BYTES_PER_ENTRY))})"))
    dev = draw(groups, samples, seed, fixed_idx)
    res = model.run(dev, sweep=True, clip=clip)
    ok = res["converged"] & res["stable"]
    keys = _figure_keys(model)

    # nominal, corners, what-if: one more batch
    n_groups = len(groups)
    extra = [np.zeros(n_groups)]
    if fixed_idx:
        wi = np.zeros(n_groups)
        for gi, v in fixed_idx.items():
            wi[gi] = v
        extra.append(wi)
    base = extra[-1]
    sens_rows = []
    if corners:
        for gi in range(n_groups):
            if gi in fixed_idx:
                continue
            row = base.copy()
            row[gi] += SENSITIVITY_STEP
            sens_rows.append((gi, row))
    first = model.run(np.array(extra + [r for _, r in sens_rows]), sweep=False)
    nominal = {k: float(first[k][0]) for k in keys}
    what_if = {k: float(first[k][1]) for k in keys} if fixed_idx else None
    corner_list: list[Corner] = []
    corner_values: dict[str, tuple[float, float]] = {}
    if corners and sens_rows:
        at_base = 1 if fixed_idx else 0
        off = len(extra)
        low = np.array([g.tolerance.low for g in groups])
        high = np.array([g.tolerance.high for g in groups])
        rows = []
        for k in keys:
            slope = np.zeros(n_groups)
            for j, (gi, _) in enumerate(sens_rows):
                slope[gi] = first[k][off + j] - first[k][at_base]
            up = np.where(slope >= 0, high, low)
            down = np.where(slope >= 0, low, high)
            for gi, v in fixed_idx.items():
                up[gi] = down[gi] = v
            rows += [down, up]
        corner_res = model.run(np.array(rows), sweep=False)
        for i, k in enumerate(keys):
            lo_v, hi_v = float(corner_res[k][2 * i]), float(corner_res[k][2 * i + 1])
            corner_values[k] = (lo_v, hi_v)
            for j, (end, r, v) in enumerate((("low", rows[2 * i], lo_v), ("high", rows[2 * i + 1], hi_v))):
                corner_list.append(Corner(k, end, v, tuple((groups[gi].label, float(r[gi]))
                                                              for gi in range(n_groups)),
                                          stable=bool(corner_res["stable"][2 * i + j])))

    def pct(k):
        p5, med, p95 = _pct(res[k], ok)
        lo_v, hi_v = corner_values.get(k, (float("nan"), float("nan")))
        return Percentiles(p5, med, p95, nominal[k], lo_v, hi_v)

    instability = None
    bad = res["converged"] & ~res["stable"]
    if bad.any():
        osc = np.abs(res["rhp_hz"][bad].imag)
        instability = Instability(
            count=int(bad.sum()), fraction=float(bad.sum() / max(res["converged"].sum(), 1)),
            oscillation_hz=tuple(float(x) for x in np.percentile(osc, PERCENTILES)),  # type: ignore[arg-type]
            draws=tuple((int(i), _largest(groups, dev[i])) for i in np.flatnonzero(bad)[:SHOWN_DRAWS]),
            influence=_influence(groups, dev[res["converged"]], bad[res["converged"]]))
    rhp0 = complex(first["rhp_hz"][0])
    clips: tuple[ClipSpread, ...] = ()
    first_clip = None
    what_if_clip: dict[str, tuple[float, str]] | None = None
    what_if_first = ""
    if clip:
        nominal_clip = model.run(np.array(extra), sweep=False, clip=True)["_clip"]  # nominal (and what-if) build
        clips, first_clip = _clip_statistics(model, groups, dev, res["_clip"], nominal_clip, ok)
        if fixed_idx:
            what_if_clip = {name: (float(nominal_clip.level_v[1, j]), _mechanism(int(nominal_clip.mechanism[1, j])))
                            for j, name in enumerate(nominal_clip.stages)}
            f1 = int(nominal_clip.first[1])
            what_if_first = nominal_clip.stages[f1] if f1 >= 0 else ""

    stages = tuple(StageSpread(st.name, {f: pct(f"{st.name}.{f}") for f in STAGE_FIGURES}) for st in model.stages)

    breaks = []
    for (subject, check), fails in _checks(model, res["_dc"], options).items():
        fails = fails & ok
        if not fails.any():
            continue
        own = _own_groups(model, subject)
        shown = []
        for i in np.flatnonzero(fails)[:SHOWN_DRAWS]:
            pairs = sorted(((groups[gi].label, float(dev[i, gi])) for gi in own), key=lambda p: -abs(p[1]))
            shown.append((int(i), tuple(pairs[:4])))
        breaks.append(RatingBreak(subject, check, float(fails.sum() / max(ok.sum(), 1)), tuple(shown)))

    resp = res["response_db"][ok]
    env = np.percentile(resp, PERCENTILES, axis=0) if resp.size else np.full((3, model.f_hz.size), np.nan)
    nom_resp = model.run(np.zeros((1, n_groups)), sweep=True)["response_db"][0]
    return SpreadResult(
        samples=samples, seed=seed, groups=groups, deviations=dev,
        fixed={groups[gi].label: v for gi, v in fixed_idx.items()}, stages=stages,
        overall_gain_db=pct("overall_gain_db"), f_hz=model.f_hz, envelope_db=env, nominal_db=nom_resp,
        breaks=tuple(breaks), corners=tuple(corner_list), unconverged=int((~res["converged"]).sum()),
        resolved=int(res["resolved"]), what_if=_by_stage(what_if, model.stages) if what_if else None,
        nominal=_by_stage(nominal, model.stages), reference_hz=float(reference_hz), instability=instability,
        nominal_rhp_hz=None if np.isnan(rhp0.real) else rhp0, counted=int(ok.sum()),
        clips=clips, first_clip=first_clip, what_if_clip=what_if_clip, what_if_first=what_if_first,
    )


def _mechanism(index: int) -> str:
    from chain.spread.clip import MECHANISMS

    return MECHANISMS[index] if index >= 0 else "none"


def _clip_statistics(model: _Model, groups, dev: np.ndarray, batch, nominal, ok: np.ndarray):
    """Per stage the first-clip percentiles and mechanisms; the first stage to clip
    (see :class:`ClipSpread`, :class:`FirstClip`)."""
    from chain.spread.clip import MECHANISMS

    use = ok & ~batch.failed
    names = batch.stages
    out = []
    for j, name in enumerate(names):
        lv = batch.level_v[use, j]
        hit = np.isfinite(lv)
        p5, med, p95 = (np.percentile(lv[hit], PERCENTILES) if hit.any() else (math.nan,) * 3)
        mech = batch.mechanism[use, j][hit]
        shares = {m: float((mech == i).sum() / max(hit.sum(), 1)) for i, m in enumerate(MECHANISMS)}
        # the level's rank correlation; a build where the stage never clips ranks above every finite level
        influence = _influence(groups, dev[use], np.where(hit, lv, np.inf), count=3) if use.sum() > 2 else ()
        m0 = int(nominal.mechanism[0, j])
        out.append(ClipSpread(name, float(nominal.level_v[0, j]), MECHANISMS[m0] if m0 >= 0 else "none",
                              float(p5), float(med), float(p95), float(hit.sum() / max(use.sum(), 1)),
                              shares, influence))
    f0 = int(nominal.first[0])
    first = batch.first[use]
    counted = int(use.sum())
    fractions = {name: float((first == j).sum() / max(counted, 1)) for j, name in enumerate(names)}
    if (first < 0).any():
        fractions["none"] = float((first < 0).sum() / max(counted, 1))
    changed = first != f0
    idx = np.flatnonzero(use)[changed]
    draws = []
    for i in idx[:SHOWN_DRAWS]:
        j = int(batch.first[i])
        involved = sorted(set((_own_groups(model, names[f0]) if f0 >= 0 else [])
                              + (_own_groups(model, names[j]) if j >= 0 else [])))
        draws.append((int(i), names[j] if j >= 0 else "none", _largest(groups, dev[i], involved)))
    influence = _influence(groups, dev[use], changed) if changed.any() and counted > 2 else ()
    return tuple(out), FirstClip(names[f0] if f0 >= 0 else "", fractions,
                                 float(changed.sum() / max(counted, 1)), tuple(draws), influence, counted,
                                 int((ok & batch.failed).sum()))


def _by_stage(flat: Mapping[str, float], stages) -> dict[str, dict[str, float]]:
    """The flat figures (``overall_gain_db`` and ``<stage>.<figure>``) grouped
    under ``"overall"`` and each stage, looked up by the stages' names."""
    out: dict[str, dict[str, float]] = {"overall": {"overall_gain_db": flat["overall_gain_db"]}}
    for st in stages:
        out[st.name] = {f: flat[f"{st.name}.{f}"] for f in STAGE_FIGURES}
    return out
