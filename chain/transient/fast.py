"""The time-stepping loop of :mod:`chain.transient.engine`, compiled with numba.

The same TR-BDF2 stages in increment form, the same DK port Newton and the
same Koren and grid-current equations as :mod:`chain.tubes.model`
(re-stated here in scalar form so that the compiler can inline them; a test
checks them against the library functions and a whole run against the numpy
stepper).  Only the loop is compiled: the matrices come from
:meth:`TransientSystem.stepper`.

A step the kernel cannot converge is handed back to the numpy stepper,
which halves it (see :meth:`TransientSystem.step`), and the kernel resumes
after it.

numba is optional: without it :data:`AVAILABLE` is False and
:func:`chain.transient.simulate` uses the numpy stepper (about two hundred
times slower, see docs/performance.md).
"""

from __future__ import annotations

import math

import numpy as np

from chain.tubes.model import V_LIMIT_V

try:  # pragma: no cover - depends on the environment
    import numba

    AVAILABLE = True
except ImportError:  # pragma: no cover
    AVAILABLE = False

__all__ = ["AVAILABLE", "triode_params", "run_kernel", "koren_scalar"]


def _jit(fn):
    if not AVAILABLE:
        return fn
    return numba.njit(cache=True, fastmath=False)(fn)


def triode_params(models) -> np.ndarray:
    """Per triode one row: form flag (0 Koren, 1 Dempwolf–Zölzer), then the parameters of both forms."""
    rows = []
    for m in models:
        if m.form not in ("koren", "dempwolf"):
            raise ValueError(f"{m.name}: the compiled loop knows the koren and dempwolf forms, not {m.form!r}")
        rows.append([0.0 if m.form == "koren" else 1.0, m.mu, m.ex, m.kg1, m.kp, m.kvb,
                     m.grid_perveance_a_v15, m.grid_onset_v, m.grid_knee_v, m.vct,
                     m.dz_mu, m.dz_g, m.dz_gamma, m.dz_c, m.dz_vct, m.dz_gg, m.dz_xi, m.dz_cg, m.dz_ig0])
    return np.array(rows, dtype=float).reshape(-1, 19)


@_jit
def _softplus(u):
    if u > 0.0:
        return u + math.log1p(math.exp(-u))
    return math.log1p(math.exp(u))


@_jit
def koren_scalar(prm, vpk_in, vgk_in, out):
    """``out = (Ip, gm, gp, Ig, gg)`` of one triode: the equations of
    :func:`chain.tubes.plate_current_and_derivatives` and
    :func:`chain.tubes.grid_current_and_derivative`, both forms (see there for the sources)."""
    in_p = 1.0 if abs(vpk_in) < V_LIMIT_V else 0.0
    in_g = 1.0 if abs(vgk_in) < V_LIMIT_V else 0.0
    vpk = min(max(vpk_in, -V_LIMIT_V), V_LIMIT_V)
    vgk = min(max(vgk_in, -V_LIMIT_V), V_LIMIT_V)
    if prm[0] != 0.0:
        # Dempwolf–Zölzer: Ik on Vpk/mu + Vgk + Vct, Ig on Vgk, Ip = Ik − Ig held at 0 below
        dz_mu, dz_g, dz_gamma, dz_c, dz_vct = prm[10], prm[11], prm[12], prm[13], prm[14]
        dz_gg, dz_xi, dz_cg, dz_ig0 = prm[15], prm[16], prm[17], prm[18]
        xg = dz_cg * vgk
        spg = _softplus(xg)
        sigg = math.exp(xg - spg)
        baseg = spg / dz_cg
        ig = dz_gg * baseg ** dz_xi + dz_ig0
        dig = dz_gg * dz_xi * baseg ** (dz_xi - 1.0) * sigg
        x = dz_c * (vpk / dz_mu + vgk + dz_vct)
        sp = _softplus(x)
        sig = math.exp(x - sp)
        base = sp / dz_c
        ik = dz_g * base ** dz_gamma
        dik = dz_g * dz_gamma * base ** (dz_gamma - 1.0) * sig
        ip = ik - ig
        if ip > 0.0:
            out[0] = ip
            out[1] = (dik - dig) * in_g
            out[2] = dik / dz_mu * in_p
        else:
            out[0] = 0.0
            out[1] = 0.0
            out[2] = 0.0
        out[3] = ig
        out[4] = dig * in_g
        return
    mu, ex, kg1, kp, kvb, vct = prm[1], prm[2], prm[3], prm[4], prm[5], prm[9]
    s = math.sqrt(kvb + vpk * vpk)
    u = kp * (1.0 / mu + (vgk + vct) / s)
    sp = _softplus(u)
    logistic = math.exp(u - sp)
    e1 = vpk / kp * sp
    if e1 > 0.0:
        ip = 2.0 / kg1 * e1 ** ex
        dip_de1 = 2.0 * ex / kg1 * e1 ** (ex - 1.0)
        gm = dip_de1 * (vpk * logistic / s) * in_g
        gp = dip_de1 * (sp / kp - logistic * (vgk + vct) * (vpk * vpk) / (s * s * s)) * in_p
    else:
        ip = 0.0
        gm = 0.0
        gp = 0.0
    kg, v0, w = prm[6], prm[7], prm[8]
    x = (vgk - v0) / w
    spg = _softplus(x)
    ramp = w * spg
    lg = math.exp(x - spg)
    ig = kg * ramp ** 1.5
    gg = 1.5 * kg * math.sqrt(ramp) * lg * in_g
    out[0] = ip
    out[1] = gm
    out[2] = gp
    out[3] = ig
    out[4] = gg


@_jit
def _stage(base, r, s_mat, z_mat, k_mat, v, pl, gr, ca, prm, tol_v, rtol, max_iter, max_step_v,
           x_out, xpad, cur, gp, gm, gg, jac, f, ev, p):
    """One implicit stage: ``x_out = base + S·r − Z·i(v)`` with ``v`` solved by Newton (in place). True if converged."""
    size = base.shape[0]
    nt = pl.shape[0]
    m = 2 * nt
    for i in range(size):
        acc = 0.0
        for j in range(size):
            acc += s_mat[i, j] * r[j]
        xpad[i] = base[i] + acc
    xpad[size] = 0.0
    for t in range(nt):
        p[t] = xpad[pl[t]] - xpad[ca[t]]
        p[nt + t] = xpad[gr[t]] - xpad[ca[t]]
    converged = False
    prev_norm = 0.0
    for _ in range(max_iter):
        for t in range(nt):
            koren_scalar(prm[t], v[t], v[nt + t], ev)
            cur[t] = ev[0]
            gm[t] = ev[1]
            gp[t] = ev[2]
            cur[nt + t] = ev[3]
            gg[t] = ev[4]
        for a in range(m):
            acc = v[a] - p[a]
            for b in range(m):
                acc += k_mat[a, b] * cur[b]
            f[a] = -acc
            for t in range(nt):
                jac[a, t] = k_mat[a, t] * gp[t]
                jac[a, nt + t] = k_mat[a, t] * gm[t] + k_mat[a, nt + t] * gg[t]
            jac[a, a] += 1.0
        # Gaussian elimination with partial pivoting, f becomes the step
        for col in range(m):
            piv = col
            big = abs(jac[col, col])
            for row in range(col + 1, m):
                if abs(jac[row, col]) > big:
                    big = abs(jac[row, col])
                    piv = row
            if big == 0.0 or not math.isfinite(big):
                return False
            if piv != col:
                for c in range(m):
                    tmp = jac[col, c]
                    jac[col, c] = jac[piv, c]
                    jac[piv, c] = tmp
                tmp = f[col]
                f[col] = f[piv]
                f[piv] = tmp
            for row in range(col + 1, m):
                fac = jac[row, col] / jac[col, col]
                if fac != 0.0:
                    for c in range(col, m):
                        jac[row, c] -= fac * jac[col, c]
                    f[row] -= fac * f[col]
        for row in range(m - 1, -1, -1):
            acc = f[row]
            for c in range(row + 1, m):
                acc -= jac[row, c] * f[c]
            f[row] = acc / jac[row, row]
        small = True
        norm = 0.0
        tol_here = tol_v
        for a in range(m):
            d = f[a]
            if not math.isfinite(d):
                return False
            if d > max_step_v:
                d = max_step_v
            elif d < -max_step_v:
                d = -max_step_v
            v[a] += d
            if abs(d) > norm:
                norm = abs(d)
            if abs(d) > tol_v + rtol * abs(v[a]):
                small = False
            if tol_v + rtol * abs(v[a]) > tol_here:
                tol_here = tol_v + rtol * abs(v[a])
        # converged when this step is within tolerance, or when quadratic convergence
        # (e_next ≈ C·e², C ≈ |dv_k|/|dv_{k-1}|²) puts the next one there
        if small or (prev_norm > 0.0 and norm < 0.5 * prev_norm and norm < 1e-3
                     and norm * norm * norm <= tol_here * prev_norm * prev_norm):
            converged = True
            break
        prev_norm = norm
    if not converged:
        return False
    for t in range(nt):
        koren_scalar(prm[t], v[t], v[nt + t], ev)
        cur[t] = ev[0]
        cur[nt + t] = ev[3]
    for i in range(size):
        acc = 0.0
        for j in range(m):
            acc += z_mat[i, j] * cur[j]
        x_out[i] = xpad[i] - acc
    return True


@_jit
def _one_step(x, q, ua, ub, use_pred, v_prev, gamma, a0, g_mat, b_dc, sig, s1, z1, k1, s2, z2, k2, ac,
              pl, gr, ca, prm, tol_v, rtol, max_iter, max_step_v, bufs, xg, xn, r, d1, xpad, xs, cur, gp, gm, gg,
              jac, f, ev, pbuf, v, vg):
    """One TR-BDF2 step in place (EMF ``ua`` at t+γh, ``ub`` at t+h). False (x, q untouched) if it fails.

    ``v_prev`` holds the ports at the previous step's start; with
    ``use_pred`` the first stage starts from the line through them.
    """
    size = x.shape[0]
    nt = pl.shape[0]
    m = 2 * nt
    for i in range(size):
        xs[i] = x[i]
    xs[size] = 0.0
    for t in range(nt):
        v[t] = xs[pl[t]] - xs[ca[t]]
        v[nt + t] = xs[gr[t]] - xs[ca[t]]
    # stage 1 (TR): A1·(xg − x) + N·i = b(t+γh) − G·x + q
    for i in range(size):
        acc = b_dc[i]
        for jj in range(size):
            acc -= g_mat[i, jj] * x[jj]
        r[i] = acc + q[i]
    r[sig] += ua
    for a in range(m):
        vg[a] = v[a] + gamma * (v[a] - v_prev[a]) if use_pred else v[a]
    ok = _stage(x, r, s1, z1, k1, vg, pl, gr, ca, prm, tol_v, rtol, max_iter, max_step_v,
                xg, xpad, cur, gp, gm, gg, jac, f, ev, pbuf)
    if not ok and use_pred:
        for a in range(m):
            vg[a] = v[a]
        ok = _stage(x, r, s1, z1, k1, vg, pl, gr, ca, prm, tol_v, rtol, max_iter, max_step_v,
                    xg, xpad, cur, gp, gm, gg, jac, f, ev, pbuf)
    if not ok:
        return False
    # stage 2 (BDF2): A2·(xn − xg) + N·i = b(t+h) − G·xg + a0·αC·(xg − x)
    for i in range(size):
        d1[i] = xg[i] - x[i]
    for i in range(size):
        acc = b_dc[i]
        for jj in range(size):
            acc += a0 * ac[i, jj] * d1[jj] - g_mat[i, jj] * xg[jj]
        r[i] = acc
    r[sig] += ub
    for a in range(m):
        bufs[a] = vg[a] + (vg[a] - v[a]) * ((1.0 - gamma) / gamma)
    ok = _stage(xg, r, s2, z2, k2, bufs, pl, gr, ca, prm, tol_v, rtol, max_iter, max_step_v,
                xn, xpad, cur, gp, gm, gg, jac, f, ev, pbuf)
    if not ok:
        for a in range(m):
            bufs[a] = vg[a]
        ok = _stage(xg, r, s2, z2, k2, bufs, pl, gr, ca, prm, tol_v, rtol, max_iter, max_step_v,
                    xn, xpad, cur, gp, gm, gg, jac, f, ev, pbuf)
    if not ok:
        return False
    # q_{n+1} = αC·((xn − xg) − a0·(xg − x))
    for i in range(size):
        acc = 0.0
        for jj in range(size):
            acc += ac[i, jj] * ((xn[jj] - xg[jj]) - a0 * d1[jj])
        q[i] = acc
    for a in range(m):
        v_prev[a] = v[a]
    for i in range(size):
        x[i] = xn[i]
    return True


@_jit
def run_kernel(x, q, u_tr, u_bdf, u_first, k_start, k_end, oversample, gamma, a0,
               g_mat, b_dc, sig, s1, z1, k1, s2, z2, k2, ac, s1h, z1h, k1h, s2h, z2h, k2h, ach,
               pl, gr, ca, prm, tol_v, rtol, max_iter, max_step_v, rec_idx, out):
    """Steps over the sample intervals ``k_start … k_end − 1`` → ``k`` (state ``x``, ``q`` updated in place).

    ``u_tr[n]`` and ``u_bdf[n]`` are the source EMF at the two stage times
    of internal step ``n = (k − 1)·oversample + j``; ``u_first`` the EMF at
    the start of step ``(k_start − 1)·oversample``.  A step that fails is
    retried as two half steps (matrices ``…h``; the EMF taken as a straight
    line across the step, which it is for sampled input).  Records
    ``x[rec_idx]`` into ``out[k]`` after each sample.  Returns the sample
    whose interval still failed (the state is left at its start), or
    ``k_end`` when done.
    """
    size = x.shape[0]
    nt = pl.shape[0]
    m = 2 * nt
    xg = np.empty(size)
    xn = np.empty(size)
    r = np.empty(size)
    d1 = np.empty(size)
    xpad = np.empty(size + 1)
    xs = np.empty(size + 1)
    cur = np.empty(m)
    gp = np.empty(nt)
    gm = np.empty(nt)
    gg = np.empty(nt)
    jac = np.empty((m, m))
    f = np.empty(m)
    ev = np.empty(5)
    pbuf = np.empty(m)
    bufs = np.empty(m)
    v = np.empty(m)
    vg = np.empty(m)
    v_prev = np.empty(m)
    x_keep = np.empty(size)
    q_keep = np.empty(size)
    have_prev = False
    u_start = u_first
    for k in range(k_start, k_end):
        for i in range(size):
            x_keep[i] = x[i]
            q_keep[i] = q[i]
        for j in range(oversample):
            n = (k - 1) * oversample + j
            ua = u_tr[n]
            ub = u_bdf[n]
            ok = _one_step(x, q, ua, ub, have_prev, v_prev, gamma, a0, g_mat, b_dc, sig, s1, z1, k1, s2, z2, k2,
                           ac, pl, gr, ca, prm, tol_v, rtol, max_iter, max_step_v, bufs, xg, xn, r, d1, xpad, xs,
                           cur, gp, gm, gg, jac, f, ev, pbuf, v, vg)
            if not ok:
                # two half steps; the EMF is a straight line from u_start to ub across the step
                du = ub - u_start
                ok = _one_step(x, q, u_start + 0.5 * gamma * du, u_start + 0.5 * du, False, v_prev, gamma, a0,
                               g_mat, b_dc, sig, s1h, z1h, k1h, s2h, z2h, k2h, ach, pl, gr, ca, prm, tol_v, rtol,
                               max_iter, max_step_v, bufs, xg, xn, r, d1, xpad, xs, cur, gp, gm, gg, jac, f, ev,
                               pbuf, v, vg)
                if ok:
                    ok = _one_step(x, q, u_start + (0.5 + 0.5 * gamma) * du, ub, False, v_prev, gamma, a0,
                                   g_mat, b_dc, sig, s1h, z1h, k1h, s2h, z2h, k2h, ach, pl, gr, ca, prm, tol_v,
                                   rtol, max_iter, max_step_v, bufs, xg, xn, r, d1, xpad, xs, cur, gp, gm, gg, jac,
                                   f, ev, pbuf, v, vg)
                have_prev = False
            else:
                have_prev = True
            if not ok:
                for i in range(size):
                    x[i] = x_keep[i]
                    q[i] = q_keep[i]
                return k
            u_start = ub
        for c in range(rec_idx.shape[0]):
            out[k, c] = x[rec_idx[c]]
    return k_end
