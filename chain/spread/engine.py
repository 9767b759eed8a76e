"""Many builds of one circuit at once: the DC operating point and the small-signal
response vectorised over samples.

Each sample is a set of factors, one per varied element (value × factor; a
triode's plate current × factor, see :mod:`chain.spread.tolerance`).  Nothing
here loops over samples:

DC (batched Newton)
    The same nodal equations as :mod:`chain.dc` (KCL at every node, one row
    per voltage branch: supplies, the signal source at 0 V, inductors and
    zero-ohm links as 0 V branches; capacitors open; ``gmin`` from every node
    to ground), for ``S`` samples at once::

        F_s(x_s) = G_s·x_s + i_triodes(x_s) − b = 0,
        J_s = G_s + ∂i_triodes/∂x,     x_s ← x_s − clip(J_s⁻¹·F_s).

    ``G_s = G_fixed + Σ_k g_k,s·P_k`` (``P_k`` the stamp pattern of resistor
    ``k``); the ``S`` Jacobians are stacked and solved by one call of
    ``numpy.linalg.solve``; the triodes are evaluated on ``(S,)`` arrays by
    the Koren model of :mod:`chain.tubes`.  The start is the nominal solution;
    node steps are clipped to ``max_step_v`` as in the single solve.

Small-signal (batched)
    ``Y_s(s) = G_s + s·C_s`` with the nominal circuit's stamps
    (:func:`chain.smallsignal.mna.assemble` of the nominal linearisation), each
    value replaced per sample (part values × factor; each triode's ``gm`` and
    ``rp`` from its own operating point).  The response over the band comes
    from one eigen-decomposition per sample, batched:

        A_s = (G_s + s0·C_s)⁻¹·C_s = V·Λ·V⁻¹,
        x_s(s) = V·diag(1/(1 + (s − s0)·λ))·V⁻¹·(G_s + s0·C_s)⁻¹·b,

    (as :class:`chain.smallsignal.mna.ModalSolver`, rows and columns scaled
    by the nominal circuit's equilibration).  It is checked against direct
    solves at a few frequencies; a sample that disagrees by more than
    :data:`CHECK_RTOL` is solved again by the single-circuit solver.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from chain.circuit import GROUND, Circuit, Role
from chain.dc.result import DcSolution, SolveOptions
from chain.smallsignal.mna import Mna, _equilibrate, _matrices, assemble, solve
from chain.smallsignal.model import SmallSignalCircuit
from chain.smallsignal.poles import INFINITE_BETA, S0, UNSTABLE_REL
from chain.tubes import grid_current_and_derivative, plate_current_and_derivatives

__all__ = ["DcBatch", "BatchCircuit", "CHECK_RTOL"]

#: largest relative disagreement of the batched modal response with a direct solve
CHECK_RTOL = 1e-6
#: Newton iterations of the batched DC solve
MAX_ITER = 60
#: samples per chunk of the batched response (bounds the memory of the (S, nf, N) products)
CHUNK = 64


@dataclass(frozen=True, slots=True, eq=False)
class DcBatch:
    """Operating points of ``S`` samples (arrays of shape (S,) or (S, T))."""

    #: node voltages (S, n_nodes), in :attr:`BatchCircuit.nodes` order
    node_v: np.ndarray
    #: per triode (S, T): plate, grid, cathode voltage to ground, V
    vp_v: np.ndarray
    vg_v: np.ndarray
    vk_v: np.ndarray
    #: plate and grid current, A; plate dissipation Vpk·Ip, W
    ip_a: np.ndarray
    ig_a: np.ndarray
    pd_w: np.ndarray
    #: ∂Ip/∂Vgk (S), rp = 1/(∂Ip/∂Vpk) (ohm), mu = gm·rp
    gm_s: np.ndarray
    rp_ohm: np.ndarray
    mu: np.ndarray
    #: (S,) True where Newton met the tolerance
    converged: np.ndarray
    iterations: int


class BatchCircuit:
    """A circuit prepared for batched solves (see the module docstring).

    Parameters
    ----------
    circuit, dc
        The circuit and its nominal DC solution (the start of every Newton run).
    elements
        Names of the elements whose values vary (columns of the factor arrays).
    """

    def __init__(self, circuit: Circuit, dc: DcSolution, elements: tuple[str, ...], *,
                 options: SolveOptions = SolveOptions()):
        self.circuit = circuit
        self.options = options
        self.elements = tuple(elements)
        col = {name: i for i, name in enumerate(self.elements)}
        self._col = col
        self.nodes = circuit.nodes()
        n = len(self.nodes)
        index = {node: i for i, node in enumerate(self.nodes)}
        # -- voltage branches: sources, inductors, zero-ohm links
        branches = [(s.pos, s.neg, float(s.volts) if s.role == Role.SUPPLY else 0.0) for s in circuit.sources]
        branches += [(ind.a, ind.b, 0.0) for ind in circuit.inductors]
        branches += [(r.a, r.b, 0.0) for r in circuit.resistors if r.ohms == 0.0]
        m = n + len(branches)
        self.n, self.m = n, m
        #: the voltage branches (pos, neg, role) after the nodes among the unknowns: supplies and the
        #: signal source (its role "signal"), inductors ("inductor") and zero-ohm links ("link")
        self.branches = tuple([(s.pos, s.neg, str(s.role.value)) for s in circuit.sources]
                              + [(ind.a, ind.b, "inductor") for ind in circuit.inductors]
                              + [(r.a, r.b, "link") for r in circuit.resistors if r.ohms == 0.0])
        ground = m  # padded index of ground
        self._ground = ground
        ix = {**index, GROUND: ground}
        self._ix = ix
        size = m + 1
        g_fixed = np.zeros((size, size))
        for i in range(n):
            g_fixed[i, i] += options.gmin_s
        b = np.zeros(size)
        for k, (pos, neg, volts) in enumerate(branches):
            br = n + k
            p, q = ix[pos], ix[neg]
            g_fixed[p, br] += 1.0
            g_fixed[q, br] -= 1.0
            g_fixed[br, p] += 1.0
            g_fixed[br, q] -= 1.0
            b[br] = volts
        self._b = b[:m]
        # -- resistors: nominal conductance and unit pattern
        res = [r for r in circuit.resistors if r.ohms > 0.0 and np.isfinite(r.ohms)]
        pattern = np.zeros((len(res), size, size))
        for k, r in enumerate(res):
            a, c = ix[r.a], ix[r.b]
            pattern[k, a, a] += 1.0
            pattern[k, c, c] += 1.0
            pattern[k, a, c] -= 1.0
            pattern[k, c, a] -= 1.0
        self._g0 = np.array([1.0 / r.ohms for r in res])
        self._res_col = np.array([col.get(r.name, -1) for r in res], dtype=int)
        self._pattern = pattern[:, :m, :m].reshape(len(res), m * m)
        self._g_fixed = g_fixed[:m, :m]
        # -- triodes
        self.triodes = circuit.triodes
        self._tp = np.array([ix[t.plate] for t in self.triodes], dtype=int)
        self._tg = np.array([ix[t.grid] for t in self.triodes], dtype=int)
        self._tk = np.array([ix[t.cathode] for t in self.triodes], dtype=int)
        self._tcol = np.array([col.get(t.name, -1) for t in self.triodes], dtype=int)
        # -- nominal start
        x0 = np.zeros(m)
        for node, i in index.items():
            x0[i] = dc.node_v.get(node, 0.0)
        self._x0 = x0
        self._dc_nominal = dc
        self._ac_ready = False

    # ------------------------------------------------------------------ DC
    def _column(self, factors: np.ndarray, cols: np.ndarray) -> np.ndarray:
        """Per-sample factors of the elements at ``cols`` (-1: nominal) → (S, len(cols))."""
        s = factors.shape[0]
        out = np.ones((s, cols.size))
        take = cols >= 0
        out[:, take] = factors[:, cols[take]]
        return out

    def linear_matrix(self, factors: np.ndarray) -> np.ndarray:
        """(S, m, m) the DC nodal matrix without the triodes: resistors (value ×
        factor), gmin and the voltage-branch incidence, in the order of the
        unknowns (:attr:`nodes`, then the branches of :attr:`branches`)."""
        factors = np.atleast_2d(np.asarray(factors, dtype=float))
        s_count = factors.shape[0]
        g = self._g0[None, :] / self._column(factors, self._res_col)  # (S, R)
        return self._g_fixed[None] + (g @ self._pattern).reshape(s_count, self.m, self.m)

    @property
    def rhs_dc(self) -> np.ndarray:
        """(m,) the DC right-hand side: each supply branch's volts (the signal source at 0 V)."""
        return self._b.copy()

    def plate_factors(self, factors: np.ndarray) -> np.ndarray:
        """(S, T) each triode's plate-current factor."""
        return self._column(np.atleast_2d(np.asarray(factors, dtype=float)), self._tcol)

    def column_of(self, node: str) -> int:
        """Index of a node's voltage among the unknowns (``m`` for ground)."""
        return self._ix[node]

    def jacobian(self, factors: np.ndarray, batch: DcBatch) -> np.ndarray:
        """(S, m, m) the DC Jacobian at each build's operating point (the
        linearised DC network: what :func:`chain.headroom.network.seen_resistances`
        solves for one circuit)."""
        g_lin = self.linear_matrix(factors)
        x = np.zeros((g_lin.shape[0], self.m))
        x[:, :self.n] = batch.node_v
        return self._residual(x, g_lin, self.plate_factors(factors))[1]

    def dc(self, factors: np.ndarray) -> DcBatch:
        """Batched DC solve for ``factors`` (S, len(elements))."""
        factors = np.atleast_2d(np.asarray(factors, dtype=float))
        s_count = factors.shape[0]
        m, n = self.m, self.n
        g_lin = self.linear_matrix(factors)
        scale = self._column(factors, self._tcol)  # (S, T) plate-current factors
        x = np.broadcast_to(self._x0, (s_count, m)).copy()
        done = np.zeros(s_count, dtype=bool)
        tol_a, tol_v = max(self.options.tol_a, 1e-11), max(self.options.tol_v, 1e-9)
        it = 0
        for it in range(1, MAX_ITER + 1):
            f, jac, parts = self._residual(x, g_lin, scale)
            node_res = np.abs(f[:, :n]).max(axis=1) if n else np.zeros(s_count)
            try:
                dx = np.linalg.solve(jac, -f[:, :, None])[:, :, 0]
            except np.linalg.LinAlgError:
                dx = np.zeros_like(x)
                for i in range(s_count):
                    try:
                        dx[i] = np.linalg.solve(jac[i], -f[i])
                    except np.linalg.LinAlgError:
                        dx[i] = np.nan
            step = np.abs(dx[:, :n]).max(axis=1) if n else np.zeros(s_count)
            done = (step <= tol_v) | (node_res <= tol_a)
            dx[:, :n] = np.clip(dx[:, :n], -self.options.max_step_v, self.options.max_step_v)
            dx[~np.isfinite(dx)] = 0.0
            x = x + dx
            if done.all():
                break
        f, _, parts = self._residual(x, g_lin, scale)
        return self._result(x, parts, scale, done, it)

    def _residual(self, x, g_lin, scale):
        s_count, m = x.shape
        ground = self._ground
        xp = np.concatenate([x, np.zeros((s_count, 1))], axis=1)
        f = np.einsum("sij,sj->si", g_lin, x) - self._b[None]
        fp = np.concatenate([f, np.zeros((s_count, 1))], axis=1)
        jac = np.zeros((s_count, m + 1, m + 1))
        jac[:, :m, :m] = g_lin
        parts = []
        for t, tri in enumerate(self.triodes):
            p, gi, k = self._tp[t], self._tg[t], self._tk[t]
            vpk = xp[:, p] - xp[:, k]
            vgk = xp[:, gi] - xp[:, k]
            ip, d_gk, d_pk = plate_current_and_derivatives(tri.model, vpk, vgk)
            c = scale[:, t]
            ip, d_pk, d_gk = ip * c, d_pk * c, d_gk * c
            ig, d_g = grid_current_and_derivative(tri.model, vgk)
            # currents leaving each node: plate +Ip, grid +Ig, cathode −(Ip + Ig)
            fp[:, p] += ip
            fp[:, gi] += ig
            fp[:, k] -= ip + ig
            d_pk_k = -(d_pk + d_gk)
            for row, sign, dp, dg, dk in ((p, 1.0, d_pk, d_gk, d_pk_k), (k, -1.0, d_pk, d_gk, d_pk_k)):
                jac[:, row, p] += sign * dp
                jac[:, row, gi] += sign * dg
                jac[:, row, k] += sign * dk
            jac[:, gi, gi] += d_g
            jac[:, gi, k] -= d_g
            jac[:, k, gi] -= d_g
            jac[:, k, k] += d_g
            parts.append((vpk, vgk, ip, ig, d_pk, d_gk))
        fp[:, ground] = 0.0
        return fp[:, :m], jac[:, :m, :m], parts

    def _result(self, x, parts, scale, done, it) -> DcBatch:
        s_count = x.shape[0]
        xp = np.concatenate([x, np.zeros((s_count, 1))], axis=1)
        cols = lambda k: np.stack([p[k] for p in parts], axis=1) if parts else np.zeros((s_count, 0))
        vpk, vgk, ip, ig, d_pk, d_gk = (cols(k) for k in range(6))
        with np.errstate(divide="ignore", invalid="ignore"):
            rp = np.where(d_pk > 0, 1.0 / d_pk, np.inf)
            mu = d_gk * rp
        return DcBatch(
            node_v=x[:, :self.n], vp_v=xp[:, self._tp], vg_v=xp[:, self._tg], vk_v=xp[:, self._tk],
            ip_a=ip, ig_a=ig, pd_w=vpk * ip, gm_s=d_gk, rp_ohm=rp, mu=mu, converged=done, iterations=it,
        )

    def node_voltage(self, batch: DcBatch, node: str) -> np.ndarray:
        """(S,) DC voltage of ``node`` (0 for ground)."""
        i = self._ix[node]
        return np.zeros(batch.node_v.shape[0]) if i >= self.n else batch.node_v[:, i]

    # ------------------------------------------------------------------ AC
    def _ac(self) -> "BatchCircuit":
        """The small-signal structure, from the nominal linearisation (made on first use)."""
        if not self._ac_ready:
            from chain.smallsignal import linearize

            self._ss: SmallSignalCircuit = linearize(self.circuit, self._dc_nominal)
            self._mna: Mna = assemble(self._ss)
            self._ac_prepare()
            self._ac_ready = True
        return self

    def _ac_prepare(self) -> None:
        mna = self._mna
        size = mna.size
        owner_of = {}
        for t_index, triode in enumerate(self.triodes):
            for el in triode.small_signal_elements(gm_s=1.0, rp_ohm=1.0):
                owner_of[el.name] = t_index
        kinds, cols, tri, v0 = [], [], [], []
        pg1, pc1 = [], []
        g_base, c_base = np.zeros((size, size)), np.zeros((size, size))
        stamps = [st for st in mna.stamps if st.kind != "V"]
        for st in stamps:
            g0m, c0m = _matrices(size, [replace(st, value=0.0)])
            g1m, c1m = _matrices(size, [replace(st, value=1.0)])
            g_base += g0m
            c_base += c0m
            pg1.append((g1m - g0m).ravel())
            pc1.append((c1m - c0m).ravel())
            t_index = owner_of.get(st.name, -1)
            if t_index >= 0 and st.role in (Role.PLATE_RESISTANCE, Role.TRANSCONDUCTANCE):
                kinds.append("rp" if st.role == Role.PLATE_RESISTANCE else "gm")
            elif t_index >= 0:
                kinds.append("fixed")
            else:
                kinds.append(st.kind)
            tri.append(t_index)
            cols.append(self._col.get(st.name, -1))
            v0.append(st.value)
        src_g, src_c = _matrices(size, [mna.source])
        g_base += src_g
        c_base += src_c
        self._stamps = stamps
        self._st_kind = np.array(kinds)
        self._st_col = np.array(cols, dtype=int)
        self._st_tri = np.array(tri, dtype=int)
        self._st_v0 = np.array(v0)
        self._pg1 = np.array(pg1)
        self._pc1 = np.array(pc1)
        self._g_base, self._c_base = g_base, c_base
        self.size = size

    def stamp_values(self, factors: np.ndarray, batch: DcBatch) -> np.ndarray:
        """(S, K) per-sample value of every small-signal stamp (S, F, H)."""
        self._ac()
        f = self._column(factors, self._st_col)
        vals = np.broadcast_to(self._st_v0, f.shape).copy()
        k = self._st_kind
        vals[:, k == "R"] = self._st_v0[k == "R"] / f[:, k == "R"]  # conductance of R·factor
        for name in ("C", "L"):
            vals[:, k == name] = self._st_v0[k == name] * f[:, k == name]
        for t in range(len(self.triodes)):
            with np.errstate(divide="ignore"):
                vals[:, (k == "rp") & (self._st_tri == t)] = (1.0 / batch.rp_ohm[:, t])[:, None]
                vals[:, (k == "gm") & (self._st_tri == t)] = (batch.mu[:, t] / batch.rp_ohm[:, t])[:, None]
        return vals

    def matrices(self, vals: np.ndarray, keep: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
        """``G_s``, ``C_s`` (S, N, N); ``keep`` (K,) bool drops stamps (as
        :meth:`chain.smallsignal.mna.Mna.without`: a dropped inductor's branch
        current is pinned to zero)."""
        self._ac()
        size = self.size
        s_count = vals.shape[0]
        if keep is None:
            g = self._g_base.ravel() + vals @ self._pg1
            c = self._c_base.ravel() + vals @ self._pc1
            return g.reshape(s_count, size, size), c.reshape(s_count, size, size)
        kept = [st for st, k in zip(self._stamps, keep) if k]
        g0, c0 = _matrices(size, [replace(st, value=0.0) for st in kept] + [self._mna.source])
        for st, k in zip(self._stamps, keep):
            if not k and st.kind == "L":
                g0[st.branch, st.branch] = 1.0
        g = g0.ravel() + vals[:, keep] @ self._pg1[keep]
        c = c0.ravel() + vals[:, keep] @ self._pc1[keep]
        return g.reshape(s_count, size, size), c.reshape(s_count, size, size)

    def index_of(self, node: str) -> int:
        """Row of a circuit node in the small-signal system (-1: ground)."""
        self._ac()
        return self._mna.index[self._ss.node_of[node]]

    @property
    def source_rhs(self) -> np.ndarray:
        self._ac()
        return self._mna.source_rhs()

    def solve_at(self, g: np.ndarray, c: np.ndarray, f_hz: float, rhs: np.ndarray) -> np.ndarray:
        """(S, N) solutions of ``(G_s + j2πf·C_s)·x = rhs`` at one frequency."""
        y = g + 2j * np.pi * f_hz * c
        r, cs = self._scales
        ys = r[None, :, None] * y * cs[None, None, :]
        x = np.linalg.solve(ys, np.broadcast_to(rhs * r, y.shape[:2])[:, :, None])[:, :, 0]
        return x * cs

    @property
    def _scales(self):
        if not hasattr(self, "_scale_cache"):
            s_mid = 2 * np.pi * 1e3
            self._scale_cache = _equilibrate(np.abs(self._mna.g) + s_mid * np.abs(self._mna.c))
        return self._scale_cache

    def rhp_poles(self, g: np.ndarray, c: np.ndarray) -> np.ndarray:
        """(S,) the right-half-plane pole of largest real part of each build, as
        ``s/2π`` (Hz, complex); NaN for a stable build.

        The natural frequencies are those of the pencil ``G + s·C`` (as
        :func:`chain.smallsignal.poles.pencil_eigen`), found here from the
        eigenvalues ``λ`` of ``(G + s0·C)⁻¹·C`` (``s = s0 − 1/λ``), batched; a
        pole counts as finite and unstable by the same rules as the single
        analysis (:data:`chain.smallsignal.poles.INFINITE_BETA`,
        :data:`~chain.smallsignal.poles.UNSTABLE_REL`).
        """
        s0 = S0
        r, cs = _equilibrate(np.abs(self._mna.g) + s0 * np.abs(self._mna.c))
        gs = r[None, :, None] * g * cs[None, None, :]
        ccs = r[None, :, None] * c * cs[None, None, :]
        out = np.full(g.shape[0], np.nan, dtype=complex)
        for lo in range(0, g.shape[0], CHUNK):
            sl = slice(lo, min(lo + CHUNK, g.shape[0]))
            try:
                lam = np.linalg.eigvals(np.linalg.solve(gs[sl] + s0 * ccs[sl], ccs[sl]))
            except np.linalg.LinAlgError:
                for i in range(sl.start, sl.stop):
                    out[i] = self._rhp_single(g[i], c[i])
                continue
            out[sl] = _worst_rhp(lam, s0)
        return out

    def _rhp_single(self, g: np.ndarray, c: np.ndarray) -> complex:
        from chain.smallsignal.poles import pencil_eigen

        s = pencil_eigen(Mna(self._mna.nodes, self._mna.index, g, c, self._mna.stamps, self._mna.source))
        bad = s[s.real > UNSTABLE_REL * np.abs(s)]
        return complex(bad[np.argmax(bad.real)] / (2 * np.pi)) if bad.size else complex(np.nan, np.nan)

    def output_response(self, g: np.ndarray, c: np.ndarray, f_hz: np.ndarray, node: int,
                        check_hz: tuple[float, ...] = ()) -> tuple[np.ndarray, int, np.ndarray]:
        """(S, nf) transfer from the source EMF to unknown ``node`` over ``f_hz``;
        also the number of samples re-solved after the direct check, and each
        build's worst right-half-plane pole (as :meth:`rhp_poles`, from the
        same eigen-decomposition)."""
        s = 2j * np.pi * np.asarray(f_hz, dtype=float)
        w = np.abs(s.imag)
        s0 = float(np.sqrt(w.min() * w.max()))
        r, cs = _equilibrate(np.abs(self._mna.g) + s0 * np.abs(self._mna.c))
        gs = r[None, :, None] * g * cs[None, None, :]
        ccs = r[None, :, None] * c * cs[None, None, :]
        b = self.source_rhs * r
        s_count = g.shape[0]
        h = np.empty((s_count, s.size), dtype=complex)
        rhp = np.full(s_count, np.nan, dtype=complex)
        bad = np.zeros(s_count, dtype=bool)
        for lo in range(0, s_count, CHUNK):
            sl = slice(lo, min(lo + CHUNK, s_count))
            g0 = gs[sl] + s0 * ccs[sl]
            try:
                a = np.linalg.solve(g0, ccs[sl])
                lam, vec = np.linalg.eig(a)
                y = np.linalg.solve(g0, np.broadcast_to(b, g0.shape[:2])[:, :, None])
                wv = np.linalg.solve(vec, y)[:, :, 0]
            except np.linalg.LinAlgError:
                bad[sl] = True
                continue
            rhp[sl] = _worst_rhp(lam, s0)
            coef = vec[:, node, :] * wv  # (chunk, N)
            with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
                d = 1.0 / (1.0 + (s[None, :, None] - s0) * lam[:, None, :])
                h[sl] = np.einsum("sk,sfk->sf", coef, d) * cs[node]
        # check against direct solves; redo disagreeing samples one by one
        rhs = self.source_rhs
        for fc in check_hz:
            k = int(np.argmin(np.abs(np.asarray(f_hz) - fc)))
            exact = self.solve_at(g, c, float(f_hz[k]), rhs)[:, node]
            with np.errstate(divide="ignore", invalid="ignore"):
                err = np.abs(h[:, k] - exact) / np.abs(exact)
            bad |= ~(err <= CHECK_RTOL)
        for i in np.flatnonzero(bad):
            one = Mna(self._mna.nodes, self._mna.index, g[i], c[i], self._mna.stamps, self._mna.source)
            x, _ = solve(one, s, rhs, "auto")
            h[i] = x[:, node]
            rhp[i] = self._rhp_single(g[i], c[i])
        return h, int(bad.sum()), rhp


def _worst_rhp(lam: np.ndarray, s0: float) -> np.ndarray:
    """(S,) from eigenvalues ``λ`` (S, N) of ``(G + s0·C)⁻¹·C``: the finite pole
    ``s = s0 − 1/λ`` of largest real part if it lies in the right half-plane,
    as ``s/2π`` (Hz), else NaN."""
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        s = s0 - 1.0 / lam
    finite = np.isfinite(s) & (np.abs(s) < S0 / INFINITE_BETA)
    unstable = finite & (s.real > UNSTABLE_REL * np.abs(s))
    re = np.where(unstable, s.real, -np.inf)
    k = np.argmax(re, axis=1)
    with np.errstate(invalid="ignore"):
        worst = np.take_along_axis(s, k[:, None], axis=1)[:, 0] / (2 * np.pi)
    return np.where(unstable.any(axis=1), worst, complex(np.nan, np.nan))
