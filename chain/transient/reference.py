"""An independent reference for the time-domain solve: the same equations through scipy's Radau.

The circuit's equations ``C·ẋ + G·x + N·i(Nᵀx) = b(t)`` (as stamped by
:class:`~chain.transient.engine.TransientSystem`) form an index-1
differential-algebraic system.  Here they become an ordinary differential
equation for :func:`scipy.integrate.solve_ivp` (method ``"Radau"``, an
implicit Runge–Kutta method of order 5 with its own error control; E. Hairer
and G. Wanner, "Solving Ordinary Differential Equations II", Springer 1996):

* the node-capacitance block of ``C`` (symmetric) is diagonalised,
  ``C_nodes = U·Λ·Uᵀ``; with ``y = Uᵀ·v`` the directions with ``λ ≠ 0``
  carry charge (differential unknowns), the others none;
* inductor branch currents are differential unknowns of their own rows;
* every right-hand-side evaluation solves the algebraic rest (node
  directions without capacitance, source currents) by Newton, then returns
  ``ẏ_D = Λ_D⁻¹·(Uᵀ·(b − G·x − N·i))_D``.

It shares nothing with the TR-BDF2 stepper but the stamped matrices and the
tube functions (called per triode, not through the stepper's port
evaluation).  It is slow: use it for short signals and small circuits.
"""

from __future__ import annotations

from typing import Callable, Sequence

import numpy as np

from chain.errors import AnalysisError, error
from chain.tubes import grid_current_and_derivative, plate_current_and_derivatives

__all__ = ["reference_solve"]


def reference_solve(system, u: Callable[[float], float], t_eval_s: np.ndarray, *,
                    nodes: Sequence[str], rtol: float = 1e-9, atol: float = 1e-12) -> dict[str, np.ndarray]:
    """Node voltages at ``t_eval_s`` (s) from the DC point of ``system`` with source EMF ``u(t)`` (V).

    Parameters
    ----------
    system : TransientSystem
    u : callable
        Source EMF as a function of time, V.
    t_eval_s : numpy.ndarray
        Increasing output times starting at 0, s.
    nodes : sequence of str
    rtol, atol : float
        Tolerances passed to ``solve_ivp``.
    """
    from scipy.integrate import solve_ivp

    g, c, b_dc = system.g, system.c, system.b_dc
    n, size = system._n, system.size
    sig = system._signal_row
    triodes = system.triodes
    pins = [(system.index[t.plate], system.index[t.grid], system.index[t.cathode]) for t in triodes]

    p_ix = np.array([pp for pp, _, _ in pins], dtype=np.intp)
    g_ix = np.array([gg for _, gg, _ in pins], dtype=np.intp)
    k_ix = np.array([kk for _, _, kk in pins], dtype=np.intp)
    models = [t.model for t in triodes]

    def currents(x):
        """f(x) = N·i(Nᵀx) and its Jacobian (triode pins by their own node indices)."""
        f = np.zeros(size + 1)
        jac = np.zeros((size + 1, size + 1))
        xp = np.append(x, 0.0)  # index -1 reads ground
        vpk, vgk = xp[p_ix] - xp[k_ix], xp[g_ix] - xp[k_ix]
        for t, model in enumerate(models):
            ip, gm, gp = (float(a) for a in plate_current_and_derivatives(model, vpk[t], vgk[t]))
            ig, gg = (float(a) for a in grid_current_and_derivative(model, vgk[t]))
            p, gr, k = pins[t]
            # KCL rows: plate +Ip, grid +Ig, cathode −(Ip+Ig); columns by node voltage (row/col −1 is a dump)
            f[p] += ip
            f[gr] += ig
            f[k] -= ip + ig
            jac[p, p] += gp; jac[p, gr] += gm; jac[p, k] -= gp + gm
            jac[gr, gr] += gg; jac[gr, k] -= gg
            jac[k, p] -= gp; jac[k, gr] -= gm + gg; jac[k, k] += gp + gm + gg
        return f[:size], jac[:size, :size]

    # change of variables: x = T·z; z = (charge directions, inductor currents | the rest)
    cn = c[:n, :n]
    lam, vecs = np.linalg.eigh(cn)
    scale = max(float(np.abs(lam).max(initial=0.0)), 1e-300)
    charged = np.abs(lam) > 1e-12 * scale  # eigenvalues below that are round-off of zero
    inductor_rows = [j for j in range(n, size) if c[j, j] != 0.0]
    other_rows = [j for j in range(n, size) if c[j, j] == 0.0]
    t_mat = np.zeros((size, size))
    t_mat[:n, :n] = vecs
    order_d = [i for i in range(n) if charged[i]] + inductor_rows
    order_a = [i for i in range(n) if not charged[i]] + other_rows
    perm = order_d + order_a
    for j in range(n, size):
        t_mat[j, j] = 1.0
    t_mat = t_mat[:, perm]
    lam_full = np.concatenate((lam, np.diag(c)[n:]))
    lam_d = lam_full[order_d]
    nd = len(order_d)
    # rows: project KCL with Tᵀ (node block) and keep branch rows
    tt = t_mat.T

    def residual_rows(x, t):
        b = b_dc.copy()
        b[sig] = u(t)
        fx, jx = currents(x)
        return tt @ (b - g @ x - fx), tt @ (g + jx) @ t_mat

    state = {"za": np.linalg.solve(t_mat, system.x_dc)[nd:]}

    def algebraic(zd, t):
        za = state["za"].copy()
        for _ in range(60):
            x = t_mat @ np.concatenate((zd, za))
            r, jz = residual_rows(x, t)
            ra = r[nd:]
            dz = np.linalg.solve(jz[nd:, nd:], ra)
            za = za + dz
            if np.abs(dz).max(initial=0.0) <= 1e-13 + 1e-12 * np.abs(za).max(initial=0.0):
                break
        else:
            raise AnalysisError(error("E900", f"reference solve: algebraic part did not converge at t = {t:g} s"))
        state["za"] = za
        return za

    def rhs(t, zd):
        za = algebraic(zd, t)
        x = t_mat @ np.concatenate((zd, za))
        r, _ = residual_rows(x, t)
        return r[:nd] / lam_d

    def jac(t, zd):
        za = algebraic(zd, t)
        x = t_mat @ np.concatenate((zd, za))
        _, jz = residual_rows(x, t)
        # ẏ_D = Λ⁻¹·r_D, r = −J·z; eliminate z_A with r_A = 0 (Schur complement)
        jdd, jda, jad, jaa = jz[:nd, :nd], jz[:nd, nd:], jz[nd:, :nd], jz[nd:, nd:]
        schur = jdd - jda @ np.linalg.solve(jaa, jad)
        return -schur / lam_d[:, None]

    z0 = np.linalg.solve(t_mat, system.x_dc)
    t_eval_s = np.asarray(t_eval_s, dtype=float)
    sol = solve_ivp(rhs, (0.0, float(t_eval_s[-1])), z0[:nd], method="Radau", t_eval=t_eval_s, rtol=rtol,
                    atol=atol, jac=jac)
    if not sol.success:
        raise AnalysisError(error("E900", f"reference solve failed: {sol.message}"))
    out = {name: np.empty(t_eval_s.size) for name in nodes}
    state["za"] = z0[nd:]
    for k, tk in enumerate(sol.t):
        zd = sol.y[:, k]
        za = algebraic(zd, tk)
        x = t_mat @ np.concatenate((zd, za))
        for name in nodes:
            out[name][k] = x[system.index[name]]
    return out
