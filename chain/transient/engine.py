"""Nonlinear time-domain solve of a whole :class:`~chain.circuit.Circuit`.

Equations
---------
Modified nodal analysis, stamped by the circuit's own elements (a
:class:`_TransientStamper` receives every ``stamp`` call), gives the
differential-algebraic system

    C·ẋ + G·x + N·i(Nᵀ·x) = b(t)

with ``x`` the node voltages and the voltage-branch currents (supply and
signal sources, inductors), ``G`` the conductances (with ``gmin`` from every
node to ground, as in the DC solve), the branch incidences and the
source/inductor constraint rows, ``C`` the capacitances (circuit capacitors
plus every triode's ``Cgk``, ``Cgp``, ``Cpk``, as in the small-signal model)
and ``−L`` on the diagonal of each inductor's branch row
(``v(a) − v(b) − L·di/dt = 0``).  ``b`` holds the supply voltages and the
signal EMF ``u(t)``.  The triodes are the only nonlinear part: ``Nᵀ·x``
gives each triode's port voltages ``(Vpk, Vgk)`` and ``i = (Ip, Ig)`` are the
plate and grid currents of :mod:`chain.tubes` (the tube's model form) with
their analytic derivatives, entered with the
Kirchhoff pattern :data:`chain.circuit.TRIODE_KCL` (plate ``+Ip``, grid
``+Ig``, cathode ``−(Ip + Ig)``).

Integration: TR-BDF2
--------------------
Each step of length ``h`` is a trapezoidal stage to ``t + γh`` followed by a
second-order backward-difference stage to ``t + h``, ``γ = 2 − √2``
(R. E. Bank et al., "Transient simulation of silicon devices and circuits",
IEEE Trans. CAD 4(4), 1985; M. E. Hosea and L. F. Shampine, "Analysis and
implementation of TR-BDF2", Appl. Numer. Math. 20, 1996).  With ``q = C·ẋ``
carried from step to step (the companion-model history)::

    TR:    (2C/(γh) + G)·x_γ + N·i = b(t+γh) + (2C/(γh))·x_n + q_n
           q_γ = (2C/(γh))·(x_γ − x_n) − q_n
    BDF2:  (αC + G)·x_{n+1} + N·i = b(t+h) + αC·(x_γ − (1−γ)²·x_n)/(γ(2−γ)),
           α = (2−γ)/((1−γ)h)
           q_{n+1} = αC·(x_{n+1} − (x_γ − (1−γ)²·x_n)/(γ(2−γ)))

It is second order and L-stable: the very fast modes of a preamp (a grid
stopper with the Miller capacitance, ~100 ns) are damped at any step instead
of ringing from sample to sample as they would with the plain trapezoidal
rule after a sharp edge, and no special restart is needed after a
discontinuity of the input.  Both stage matrices are constant for a fixed
step, so they are inverted once.

Per stage: the nodal DK reduction
---------------------------------
With ``S = A⁻¹`` of the stage's linear matrix ``A``, ``Z = S·N`` and
``K = Nᵀ·S·N`` (D. T. Yeh, "Digital implementation of musical distortion
circuits by analysis and simulation", PhD thesis, Stanford 2009; M. Holters
and U. Zölzer, "A generalized method for the derivation of non-linear
state-space models from circuit schematics", EUSIPCO 2015), the stage
solution is ``x = S·r − Z·i(v)`` and the port voltages satisfy

    v + K·i(v) − Nᵀ·S·r = 0

— two unknowns per triode, solved by Newton with the analytic Jacobian
``I + K·∂i/∂v`` (port steps clipped to ±``max_step_v``).  A step that does
not converge is retried as two half steps (up to ``max_halvings`` times);
failure raises :class:`~chain.errors.AnalysisError` (E900) naming the time
and the stage whose triode's equation is furthest from balance.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np

from chain.circuit import GROUND, Circuit, Role
from chain.errors import AnalysisError, error
from chain.tubes import TriodeModel, grid_current_and_derivative, plate_current_and_derivatives

__all__ = [
    "TransientOptions",
    "TransientSystem",
    "compile_transient",
    "GAMMA",
]

#: TR-BDF2 stage fraction γ = 2 − √2 (the value that makes both stages share one Jacobian structure)
GAMMA = 2.0 - math.sqrt(2.0)
#: (1−γ)²/(γ(2−γ)), the weight of x_n in the BDF2 stage
_A0 = (1.0 - GAMMA) ** 2 / (GAMMA * (2.0 - GAMMA))


@dataclass(frozen=True, slots=True)
class TransientOptions:
    """Numeric settings of the time-domain solve."""

    #: Newton convergence: largest port-voltage step, V (absolute part)
    tol_v: float = 1e-10
    #: Newton convergence: relative part of the port-voltage tolerance
    rtol: float = 1e-12
    #: Newton iterations per stage before the step is halved
    max_iter: int = 40
    #: largest change of a triode port voltage in one Newton iteration, V
    max_step_v: float = 20.0
    #: how often a failing step may be halved
    max_halvings: int = 8
    #: conductance from every node to ground, S (as in the DC solve)
    gmin_s: float = 1e-12


class _TransientStamper:
    """Collects what the elements stamp for the time-domain solve (see :class:`chain.circuit.Stamper`)."""

    def __init__(self):
        self.conductances: list[tuple[str, str, float, object]] = []
        self.capacitances: list[tuple[str, str, float]] = []
        #: (name, kind, pos, neg, value, is_signal): kind "source" (value volts) or "inductor" (value henry)
        self.branches: list[tuple[str, str, str, str, float, bool]] = []
        self.triodes: list = []

    def conductance(self, part, a, b, g_s):
        if not (math.isfinite(g_s) and g_s > 0.0):
            raise AnalysisError(error(
                "E901", f"part {part.name} has a value the time-domain solve cannot use "
                f"(conductance {g_s} S)", subject=part.owner.name))
        self.conductances.append((a, b, g_s, part))

    def capacitance(self, part, a, b, c_f):
        if not (math.isfinite(c_f) and c_f >= 0.0):
            raise AnalysisError(error(
                "E901", f"capacitor {part.name} has a value the time-domain solve cannot use ({c_f} F)",
                subject=part.owner.name))
        if a != b and c_f > 0.0:
            self.capacitances.append((a, b, c_f))

    def inductance(self, part, a, b, l_h):
        if not (math.isfinite(l_h) and l_h >= 0.0):
            raise AnalysisError(error(
                "E901", f"inductor {part.name} has a value the time-domain solve cannot use ({l_h} H)",
                subject=part.owner.name))
        self.branches.append((part.name, "inductor", a, b, float(l_h), False))

    def voltage_source(self, part, pos, neg):
        signal = part.role == Role.SIGNAL
        self.branches.append((part.name, "source", pos, neg, 0.0 if signal else float(part.volts), signal))

    def transconductance(self, part, a, b, ctrl_pos, ctrl_neg, gm_s):
        raise TypeError(f"{part.name}: a transconductance has no place in the time-domain solve of a circuit")

    def triode(self, part):
        self.triodes.append(part)
        m = part.model
        for a, b, c_f in ((part.grid, part.cathode, m.cgk_f), (part.grid, part.plate, m.cgp_f),
                          (part.plate, part.cathode, m.cpk_f)):
            if a != b and c_f > 0.0:
                self.capacitances.append((a, b, float(c_f)))


@dataclass(frozen=True, slots=True)
class _Stage:
    """Precomputed matrices of one implicit stage at a fixed step."""

    s: np.ndarray   # A⁻¹
    z: np.ndarray   # S·N
    k: np.ndarray   # Nᵀ·S·N
    nts: np.ndarray  # Nᵀ·S


@dataclass(frozen=True, slots=True)
class _Stepper:
    """TR-BDF2 at one step length ``h_s``."""

    h_s: float
    c1: float       # 2/(γh)
    alpha: float    # (2−γ)/((1−γ)h)
    tr: _Stage
    bdf: _Stage
    c1c: np.ndarray  # c1·C
    ac: np.ndarray   # α·C


class TransientSystem:
    """A circuit compiled for time-domain solves (see the module docstring).

    Attributes
    ----------
    circuit : Circuit
    nodes : tuple[str, ...]
        Node order of the unknown vector (ground excluded).
    branches : tuple[str, ...]
        Voltage-branch names (sources, inductors) after the nodes.
    size : int
        Length of the unknown vector.
    triode_names : tuple[str, ...]
    x_dc : numpy.ndarray
        The DC operating point as an unknown vector (node voltages, V, then
        branch currents, A), polished on this system's own equations.
    """

    def __init__(self, circuit: Circuit, *, options: TransientOptions = TransientOptions(), dc=None):
        self.circuit = circuit
        self.options = options
        st = _TransientStamper()
        for el in circuit.elements:
            el.stamp(st)
        self.nodes = circuit.nodes()
        n = len(self.nodes)
        self._n = n
        index = {name: i for i, name in enumerate(self.nodes)}
        index[GROUND] = -1
        self.index = index
        signals = [b for b in st.branches if b[5]]
        if len(signals) != 1:
            raise AnalysisError(error("E901", f"the circuit has {len(signals)} signal sources; the time-domain "
                                      "solve needs exactly one"))
        self.branches = tuple(b[0] for b in st.branches)
        size = n + len(st.branches)
        self.size = size
        g = np.zeros((size, size))
        c = np.zeros((size, size))

        def add2(mat, a, b, val):
            ia, ib = index[a], index[b]
            if ia >= 0:
                mat[ia, ia] += val
            if ib >= 0:
                mat[ib, ib] += val
            if ia >= 0 and ib >= 0:
                mat[ia, ib] -= val
                mat[ib, ia] -= val

        for a, b, g_s, _ in st.conductances:
            add2(g, a, b, g_s)
        for a, b, c_f in st.capacitances:
            add2(c, a, b, c_f)
        g[np.arange(n), np.arange(n)] += options.gmin_s
        b_dc = np.zeros(size)
        self._signal_row = -1
        for j, (name, kind, pos, neg, value, signal) in enumerate(st.branches):
            row = n + j
            for node, sign in ((pos, 1.0), (neg, -1.0)):
                i = index[node]
                if i >= 0:
                    g[i, row] += sign
                    g[row, i] += sign
            if kind == "inductor":
                c[row, row] = -value
            elif signal:
                self._signal_row = row
            else:
                b_dc[row] = value
        self.g = g
        self.c = c
        self.b_dc = b_dc
        # triodes: port incidence N (size × 2T): columns Ip_t (plate +, cathode −) then Ig_t (grid +, cathode −)
        tri = tuple(st.triodes)
        self.triodes = tri
        self.triode_names = tuple(t.name for t in tri)
        nt = len(tri)
        self._nt = nt
        inc = np.zeros((size, 2 * nt))
        for t, tr in enumerate(tri):
            for node, col, sign in ((tr.plate, t, 1.0), (tr.cathode, t, -1.0),
                                    (tr.grid, nt + t, 1.0), (tr.cathode, nt + t, -1.0)):
                i = index[node]
                if i >= 0:
                    inc[i, col] += sign
        self.inc = inc
        groups: dict[int, tuple[TriodeModel, list[int]]] = {}
        for i, t in enumerate(tri):
            groups.setdefault(id(t.model), (t.model, []))[1].append(i)
        self._groups = tuple((m, np.array(ix, dtype=np.intp)) for m, ix in groups.values())
        self._steppers: dict[float, _Stepper] = {}
        self.x_dc = self._polish_dc(dc)

    # ------------------------------------------------------------- triodes
    def triode_eval(self, v: np.ndarray):
        """Port currents and derivatives at port voltages ``v = (Vpk…, Vgk…)``.

        Returns ``i = (Ip…, Ig…)`` (A) and per triode ``gp = ∂Ip/∂Vpk``,
        ``gm = ∂Ip/∂Vgk``, ``gg = ∂Ig/∂Vgk`` (S), from
        :func:`chain.tubes.plate_current_and_derivatives` and
        :func:`chain.tubes.grid_current_and_derivative`.
        """
        nt = self._nt
        vpk, vgk = v[:nt], v[nt:]
        if len(self._groups) == 1:
            model = self._groups[0][0]
            ip, gm, gp = plate_current_and_derivatives(model, vpk, vgk)
            ig, gg = grid_current_and_derivative(model, vgk)
            return np.concatenate((ip, ig)), np.asarray(gp), np.asarray(gm), np.asarray(gg)
        ip, ig, gm, gp, gg = (np.zeros(nt) for _ in range(5))
        for model, ix in self._groups:
            ip[ix], gm[ix], gp[ix] = plate_current_and_derivatives(model, vpk[ix], vgk[ix])
            ig[ix], gg[ix] = grid_current_and_derivative(model, vgk[ix])
        return np.concatenate((ip, ig)), gp, gm, gg

    def ports(self, x: np.ndarray) -> np.ndarray:
        """Triode port voltages ``(Vpk…, Vgk…)`` of an unknown vector, V."""
        return self.inc.T @ x

    def _dk_matrix(self, k: np.ndarray, gp, gm, gg) -> np.ndarray:
        """``K·∂i/∂v`` for the port Jacobian (columns scaled per triode)."""
        nt = self._nt
        kd = np.empty_like(k)
        kd[:, :nt] = k[:, :nt] * gp
        kd[:, nt:] = k[:, :nt] * gm + k[:, nt:] * gg
        return kd

    def _di(self, gp, gm, gg) -> np.ndarray:
        nt = self._nt
        d = np.zeros((2 * nt, 2 * nt))
        r = np.arange(nt)
        d[r, r] = gp
        d[r, nt + r] = gm
        d[nt + r, nt + r] = gg
        return d

    # ------------------------------------------------------------- DC start
    def _polish_dc(self, dc) -> np.ndarray:
        """The DC point on this system's equations, from :func:`chain.dc.solve`'s node voltages."""
        if dc is None:
            from chain.dc import solve as dc_solve

            dc = dc_solve(self.circuit)
        x = np.zeros(self.size)
        for name, value in dc.node_v.items():
            i = self.index.get(name, -1)
            if i >= 0:
                x[i] = value
        b = self.b_dc
        done = 0
        for _ in range(50):
            with np.errstate(over="ignore", invalid="ignore"):
                cur, gp, gm, gg = self.triode_eval(self.ports(x)) if self._nt else (np.zeros(0),) * 4
            f = self.g @ x + self.inc @ cur - b
            jac = self.g + self.inc @ self._di(gp, gm, gg) @ self.inc.T if self._nt else self.g
            try:
                dx = np.linalg.solve(jac, -f)
            except np.linalg.LinAlgError:
                raise AnalysisError(error(
                    "E901", "the time-domain equations are singular at DC (a loop of voltage sources and "
                    "inductors?)")) from None
            x = x + dx
            if np.abs(dx[:self._n]).max(initial=0.0) <= 1e-10 * (1.0 + np.abs(x[:self._n]).max(initial=0.0)):
                done += 1
                if done == 2:  # one more iteration past the tolerance: at rounding level
                    return x
        raise AnalysisError(error("E900", "the time-domain solve could not settle on the DC operating point"))

    def node_voltages(self, x: np.ndarray) -> dict[str, float]:
        return {name: float(x[i]) for name, i in self.index.items() if i >= 0 and i < self._n}

    # ------------------------------------------------------------- stepping
    def stepper(self, h_s: float) -> _Stepper:
        """The TR-BDF2 matrices for step ``h_s`` (s), built once and cached."""
        key = float(h_s)
        found = self._steppers.get(key)
        if found is not None:
            return found
        c1 = 2.0 / (GAMMA * h_s)
        alpha = (2.0 - GAMMA) / ((1.0 - GAMMA) * h_s)

        def stage(coef):
            a = coef * self.c + self.g
            try:
                s = np.linalg.inv(a)
            except np.linalg.LinAlgError:
                raise AnalysisError(error("E901", "the time-domain stage matrix is singular")) from None
            z = s @ self.inc
            return _Stage(s=s, z=z, k=self.inc.T @ z, nts=self.inc.T @ s)

        st = _Stepper(h_s=key, c1=c1, alpha=alpha, tr=stage(c1), bdf=stage(alpha), c1c=c1 * self.c,
                      ac=alpha * self.c)
        if len(self._steppers) > 16:
            self._steppers.clear()
        self._steppers[key] = st
        return st

    def _solve_stage(self, stage: _Stage, base: np.ndarray, r: np.ndarray, v0: np.ndarray):
        """Solve ``A·(x − base) + N·i(Nᵀx) = r`` for one stage; returns (x, v, gp, gm, gg) or None.

        The increment form keeps the right-hand side a residual-sized
        current (no large companion terms that cancel), so round-off stays
        at the level of the currents themselves.
        """
        opts = self.options
        x0 = base + stage.s @ r
        if self._nt == 0:
            return x0, v0, None, None, None
        p = self.inc.T @ x0
        k = stage.k
        v = v0.copy()
        eye = np.eye(2 * self._nt)
        for _ in range(opts.max_iter):
            cur, gp, gm, gg = self.triode_eval(v)
            f = v + k @ cur - p
            jac = eye + self._dk_matrix(k, gp, gm, gg)
            try:
                dv = np.linalg.solve(jac, -f)
            except np.linalg.LinAlgError:
                return None
            if not np.all(np.isfinite(dv)):
                return None
            np.clip(dv, -opts.max_step_v, opts.max_step_v, out=dv)
            v = v + dv
            if np.all(np.abs(dv) <= opts.tol_v + opts.rtol * np.abs(v)):
                cur, gp, gm, gg = self.triode_eval(v)
                return x0 - stage.z @ cur, v, gp, gm, gg
        self._last_failure = (v, np.abs(v + k @ self.triode_eval(v)[0] - p))
        return None

    def step(self, x: np.ndarray, q: np.ndarray, t_s: float, h_s: float, u: Callable[[float], float],
             *, tangent: bool = False):
        """One TR-BDF2 step from ``(x, q)`` at ``t_s``; the signal EMF is ``u(t)`` (V).

        Returns ``(x_next, q_next, jacobians)``; ``jacobians`` (only when
        ``tangent``) is what :meth:`propagate_tangent` needs.  A step that
        fails is halved (recursively, up to ``max_halvings``).

        Increment form of the two stages (same equations as the module
        docstring; ``a0 = (1−γ)²/(γ(2−γ))``)::

            A_TR·(x_γ − x_n)     + N·i = b(t+γh) − G·x_n + q_n
            A_BDF·(x_{n+1} − x_γ) + N·i = b(t+h) − G·x_γ + a0·αC·(x_γ − x_n)
            q_γ = (2C/(γh))·(x_γ − x_n) − q_n,   q_{n+1} = αC·((x_{n+1} − x_γ) − a0·(x_γ − x_n))
        """
        return self._step(x, q, t_s, h_s, u, tangent, 0)

    def _rhs_b(self, t_s, u):
        b = self.b_dc.copy()
        b[self._signal_row] = u(t_s)
        return b

    def _step(self, x, q, t_s, h_s, u, tangent, depth):
        st = self.stepper(h_s)
        v_n = self.ports(x)
        out1 = self._solve_stage(st.tr, x, self._rhs_b(t_s + GAMMA * h_s, u) - self.g @ x + q, v_n)
        out2 = None
        if out1 is not None:
            xg, vg, gp1, gm1, gg1 = out1
            d1 = xg - x
            r2 = self._rhs_b(t_s + h_s, u) - self.g @ xg + _A0 * (st.ac @ d1)
            v_guess = vg + (vg - v_n) * ((1.0 - GAMMA) / GAMMA)  # extrapolated start
            out2 = self._solve_stage(st.bdf, xg, r2, v_guess)
            if out2 is None:
                out2 = self._solve_stage(st.bdf, xg, r2, vg)
        if out1 is None or out2 is None:
            if depth >= self.options.max_halvings:
                raise self._failure(t_s)
            half = 0.5 * h_s
            xm, qm, j1 = self._step(x, q, t_s, half, u, tangent, depth + 1)
            x2, q2, j2 = self._step(xm, qm, t_s + half, half, u, tangent, depth + 1)
            return x2, q2, (j1 + j2 if tangent else None)
        xn, vn, gp2, gm2, gg2 = out2
        qn = st.ac @ ((xn - xg) - _A0 * d1)
        jac = None
        if tangent:
            jac = [(h_s, self._correction(st.tr, gp1, gm1, gg1), self._correction(st.bdf, gp2, gm2, gg2))]
        return xn, qn, jac

    def _correction(self, stage: _Stage, gp, gm, gg):
        """``W = D·(I + K·D)⁻¹``: linearised, ``x = x0 − Z·W·Nᵀ·x0`` (D the port Jacobian)."""
        if self._nt == 0:
            return None
        d = self._di(gp, gm, gg)
        return d @ np.linalg.inv(np.eye(2 * self._nt) + stage.k @ d)

    def propagate_tangent(self, dx: np.ndarray, dq: np.ndarray, jac) -> tuple[np.ndarray, np.ndarray]:
        """Carry state sensitivities ``(∂x, ∂q)`` (columns) through one step's linearisation."""
        for h_s, w1, w2 in jac:
            st = self.stepper(h_s)
            x0 = dx + st.tr.s @ (dq - self.g @ dx)
            dxg = x0 if w1 is None else x0 - st.tr.z @ (w1 @ (self.inc.T @ x0))
            d1 = dxg - dx
            x0 = dxg + st.bdf.s @ (_A0 * (st.ac @ d1) - self.g @ dxg)
            dxn = x0 if w2 is None else x0 - st.bdf.z @ (w2 @ (self.inc.T @ x0))
            dq = st.ac @ ((dxn - dxg) - _A0 * d1)
            dx = dxn
        return dx, dq

    def _failure(self, t_s: float) -> AnalysisError:
        v, res = getattr(self, "_last_failure", (None, None))
        subject = ""
        detail = ""
        if v is not None and res is not None and self._nt:
            t = int(np.argmax(res[:self._nt] + res[self._nt:]))
            name = self.triode_names[t]
            subject = self.circuit.stage_of_triode(name)
            detail = (f" in {self.circuit.stage_label(subject)} (there Vpk = {v[t]:.4g} V, "
                      f"Vgk = {v[self._nt + t]:.4g} V)")
        return AnalysisError(error(
            "E900", f"time-domain solve did not converge at t = {t_s * 1e3:.6g} ms{detail}, even after halving "
            f"the step {self.options.max_halvings} times",
            hint="lower the input level or raise TransientOptions.max_iter", subject=subject))


def compile_transient(circuit: Circuit, *, options: TransientOptions = TransientOptions(),
                      dc=None) -> TransientSystem:
    """Compile a circuit for time-domain solves, starting from its DC operating point.

    Parameters
    ----------
    circuit : Circuit
    options : TransientOptions
    dc : DcSolution, optional
        A solved operating point (from :func:`chain.dc.solve`); solved here when left out.
    """
    return TransientSystem(circuit, options=options, dc=dc)
