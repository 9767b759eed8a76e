"""Poles and zeros of the whole linearised chain, and which parts set them.

The nodal system of :mod:`chain.smallsignal.mna` is ``(G + s·C)·x = b``.
Its natural frequencies are the values of ``s`` where the pencil is
singular, ``det(G + s·C) = 0``: the generalized eigenvalues of
``G·v = −s·C·v``.  ``C`` is singular (nodes without a capacitor, the
source and inductor branch rows), so the pencil also has eigenvalues at
infinity; the QZ algorithm returns each eigenvalue as a pair
``(α, β)`` with ``s = α/β`` and the infinite ones as ``β ≈ 0``, which are
dropped (from memory of G. H. Golub, C. F. Van Loan, "Matrix
Computations", §7.7).  Before QZ the pencil is equilibrated (rows and
columns scaled by powers of two) and ``s`` is scaled by ``s0 = 2π·1 kHz``
so that both matrices are of order one.

QZ lives in ``scipy.linalg``, whose import alone costs more than a whole
report; so the finite eigenvalues are first sought without it.  With the
singular value decomposition ``C = U·Σ·Vᵀ`` (rank ``r``) the pencil becomes
``Uᵀ(G + sC)V = [[A₁₁ + sΣ₁, A₁₂], [A₂₁, A₂₂]]``; when ``A₂₂`` is well
conditioned (the algebraic unknowns are fixed by the dynamic ones: an
index-1 system) its Schur complement ``S = A₁₁ − A₁₂·A₂₂⁻¹·A₂₁`` leaves the
ordinary eigenproblem ``−Σ₁⁻¹·S·y = s·y`` of size ``r`` whose eigenvalues
are exactly the finite ones of the pencil, and the pencil's eigenvectors
follow from ``y`` by the same elimination (from memory of Golub & Van
Loan, §7.7, on deflating the infinite eigenvalues of a pencil).  When
``A₂₂`` is ill conditioned (eigenvalues at infinity of higher index) QZ is
used.

Zeros of the transfer from the source EMF to node ``k`` are the finite
generalized eigenvalues of the pencil bordered by the source column and
the output row (the Rosenbrock system matrix; from memory of H. H.
Rosenbrock, "State-space and Multivariable Theory", 1970)::

    | G   b |         | C  0 |
    | eₖᵀ 0 |  + s ·  | 0  0 |.

A zero at infinity of high order (a long ladder read at its far end,
whose transfer falls as ``1/sⁿ``) is not resolved by any eigen-solve: it
comes out as a ring of spurious finite zeros, some in the right
half-plane.  So each computed zero is checked by solving the nodal system
at it (:func:`verified_zeros`) and those at which the output does not
vanish are left out.

Pole sensitivity (first-order eigenvalue perturbation, from memory of
Golub & Van Loan, §7.2.2, for the generalized problem): with right and
left eigenvectors ``(G + pC)·v = 0`` and ``wᴴ·(G + pC) = 0``,

    dp = −wᴴ·(dG + p·dC)·v / (wᴴ·C·v),

and the normalised sensitivity of pole ``p`` to part value ``x`` is
``S = (dp/dx)·(x/p)``; a part whose admittance is ``y(x)`` contributes
``dY = (d ln y / d ln x)·(its stamp)`` so one stamp per part gives every
``S`` from one pair of eigenvectors.  Resistors count by their
resistance (``S`` of the conductance with the sign turned), capacitors,
inductors and the triode's ``gm`` by their own value, the triode's ``rp``
by its resistance.

Units: poles and zeros are complex frequencies in Hz, ``s / (2π)``
(``σ/2π + j·ω/2π``); a pole's natural frequency is ``|s|/2π`` Hz and its
quality factor ``|s| / (−2·Re s)``.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from chain.smallsignal.mna import Mna, Stamp, assemble
from chain.smallsignal.model import SmallSignalCircuit

__all__ = [
    "Pole",
    "PoleZero",
    "pencil_eigen",
    "poles",
    "zeros",
    "pole_zero",
    "rhp_count",
    "verified_zeros",
    "UNSTABLE_REL",
]

#: scale of ``s`` inside the eigenvalue solves, rad/s (the middle of the audio band)
S0 = 2.0 * math.pi * 1e3
#: ``|β| / |α|`` below which a QZ eigenvalue counts as infinite (after scaling by S0:
#: a finite pole up to ~S0·1e11, far above any triode's, passes)
INFINITE_BETA = 1e-11
#: a pole is in the right half-plane when ``Re s > UNSTABLE_REL·|s|`` (rounding
#: of the eigenvalue solve is many orders smaller)
UNSTABLE_REL = 1e-7
#: two roots closer than this (relative) cancel between numerator and denominator
CANCEL_REL = 1e-7


@dataclass(frozen=True, slots=True)
class Pole:
    """One natural frequency of the linearised chain.

    ``s_hz`` is the complex frequency ``s/2π`` in Hz; ``f_hz`` its magnitude
    (the natural frequency); ``q`` the quality factor ``|s|/(−2·Re s)``
    (``None`` for a real pole, negative in the right half-plane);
    ``dominant`` the parts with the largest normalised sensitivities
    ``|(dp/dx)·(x/p)|``, largest first, as ``(part, S)`` with ``S`` complex.
    """

    s_hz: complex
    dominant: tuple[tuple[str, complex], ...] = ()

    @property
    def f_hz(self) -> float:
        return abs(self.s_hz)

    @property
    def oscillation_hz(self) -> float:
        """``|Im s|/2π``: the frequency of the ringing (or growing) oscillation, Hz."""
        return abs(self.s_hz.imag)

    @property
    def is_real(self) -> bool:
        return self.s_hz.imag == 0.0

    @property
    def q(self) -> float | None:
        if self.is_real or self.s_hz.real == 0.0:
            return None if self.is_real else math.inf
        return abs(self.s_hz) / (-2.0 * self.s_hz.real)

    @property
    def unstable(self) -> bool:
        """In the right half-plane: the response grows as ``exp(Re s·t)``."""
        return self.s_hz.real > UNSTABLE_REL * abs(self.s_hz)


@dataclass(frozen=True, slots=True, eq=False)
class PoleZero:
    """The transfer from source EMF to ``node`` as poles, zeros and one value.

        H(s) = h_ref · Π (s − zᵢ)/(s_ref − zᵢ) · Π (s_ref − pᵢ)/(s − pᵢ),

    with ``s_ref = j·2π·ref_hz`` and ``h_ref = H(s_ref)`` from the nodal
    solve; poles and zeros (Hz, ``s/2π``) that coincide within
    :data:`CANCEL_REL` are cancelled.  Each factor stays of order one, so
    this form evaluates ``H`` to rounding accuracy over the whole band;
    :attr:`gain` and :meth:`coefficients` give the ordinary forms.
    """

    node: str
    poles_hz: tuple[complex, ...]
    zeros_hz: tuple[complex, ...]
    ref_hz: float
    h_ref: complex
    #: computed zeros that failed :func:`verified_zeros` (``H`` does not vanish
    #: there) and are left out of :attr:`zeros_hz`
    zeros_left_out: int = 0

    def __call__(self, f_hz) -> np.ndarray:
        """``H(j·2π·f)`` for frequencies ``f_hz`` (Hz)."""
        return self.at_s(2j * math.pi * np.asarray(f_hz, dtype=float))

    def at_s(self, s) -> np.ndarray:
        """``H(s)`` for complex ``s`` (1/s)."""
        s = np.asarray(s, dtype=complex)
        s_ref = 2j * math.pi * self.ref_hz
        out = np.full(s.shape, self.h_ref, dtype=complex)
        for z in self.zeros_hz:
            zs = 2.0 * math.pi * z
            out = out * (s - zs) / (s_ref - zs)
        for p in self.poles_hz:
            ps = 2.0 * math.pi * p
            out = out * (s_ref - ps) / (s - ps)
        return out

    @property
    def gain(self) -> float:
        """``k`` of ``H(s) = k·Π(s − zᵢ)/Π(s − pᵢ)``, ``s`` in 1/s (inf if beyond floats)."""
        s_ref = 2j * math.pi * self.ref_hz
        log_k = complex(np.log(complex(self.h_ref)))
        for p in self.poles_hz:
            log_k += np.log(s_ref - 2.0 * math.pi * p)
        for z in self.zeros_hz:
            log_k -= np.log(s_ref - 2.0 * math.pi * z)
        with np.errstate(over="ignore"):
            return float(np.exp(log_k).real)

    def coefficients(self) -> tuple[np.ndarray, np.ndarray]:
        """``(numerator, denominator)`` polynomial coefficients in ``s`` (1/s),
        highest power first, the denominator monic."""
        den = np.real(np.poly([2.0 * math.pi * p for p in self.poles_hz])) if self.poles_hz else np.ones(1)
        num = np.real(np.poly([2.0 * math.pi * z for z in self.zeros_hz])) if self.zeros_hz else np.ones(1)
        return self.gain * num, den


def _scaled_pencil(g: np.ndarray, c: np.ndarray):
    from chain.smallsignal.mna import _equilibrate

    r, col = _equilibrate(np.abs(g) + S0 * np.abs(c))
    gs = r[:, None] * g * col[None, :]
    cs = r[:, None] * c * col[None, :] * S0
    return gs, cs, r, col


def _finite(alpha: np.ndarray, beta: np.ndarray) -> np.ndarray:
    return np.abs(beta) > INFINITE_BETA * np.abs(alpha)


#: fewest purely resistive unknowns (no capacitance in their row or column)
#: worth eliminating before the dense eigen work; below it the pencil is
#: taken whole, as it always was
STATIC_MIN = 64


@dataclass(frozen=True, slots=True)
class _Static:
    """The pencil with its purely resistive unknowns eliminated: ``keep`` and
    ``drop`` partition the unknowns so that ``C₁₂ = C₂₁ = C₂₂ = 0``; then
    ``det(G + sC) = det(G₂₂)·det(G₁₁ − G₁₂·G₂₂⁻¹·G₂₁ + s·C₁₁)`` (the
    determinant of a block matrix through its Schur complement), so the
    finite eigenvalues of ``(G, C)`` are those of ``(g, c)`` below when
    ``G₂₂`` is non-singular: the eliminated block has no dynamics of its own
    (from memory of Golub & Van Loan, §3.2, block elimination)."""

    keep: np.ndarray
    drop: np.ndarray
    #: ``G₁₁ − G₁₂·G₂₂⁻¹·G₂₁`` and ``C₁₁``, dense, kept × kept
    g: np.ndarray
    c: np.ndarray
    #: the sparse LU of ``G₂₂`` and the off-diagonal blocks
    lu: object
    g12: np.ndarray
    g21: np.ndarray

    def lift(self, w: np.ndarray, v: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Left and right eigenvectors of the whole pencil from the kept ones:
        ``v₂ = −G₂₂⁻¹·G₂₁·v₁`` (rows of the eliminated unknowns) and
        ``w₂ = −G₂₂⁻ᵀ·G₁₂ᵀ·w₁`` (their columns, ``G`` real)."""
        n = self.keep.size + self.drop.size
        v_full = np.empty((n, v.shape[1]), dtype=complex)
        w_full = np.empty((n, w.shape[1]), dtype=complex)
        v_full[self.keep] = v
        w_full[self.keep] = w
        v_full[self.drop] = -_solve_real(self.lu, self.g21 @ v, "N")
        w_full[self.drop] = -_solve_real(self.lu, self.g12.T @ w, "T")
        return w_full, v_full


def _solve_real(lu, b: np.ndarray, trans: str) -> np.ndarray:
    """``G₂₂⁻¹·b`` (or ``G₂₂⁻ᵀ·b``) of a complex ``b`` with the real factors."""
    if b.shape[1] == 0:
        return b.astype(complex)
    return lu.solve(np.ascontiguousarray(b.real), trans=trans) + 1j * lu.solve(np.ascontiguousarray(b.imag), trans=trans)


def _static_split(g: np.ndarray, c: np.ndarray, kept: tuple[int, ...] = ()) -> _Static | None:
    """Eliminate the unknowns whose row and column of ``c`` are zero (all but
    ``kept``) when there are at least :data:`STATIC_MIN` of them and ``G₂₂``
    factors (SuperLU) with a reciprocal condition, estimated on the
    equilibrated block, above :data:`REDUCTION_RCOND`; else None."""
    dynamic = np.any(c != 0.0, axis=0) | np.any(c != 0.0, axis=1)
    dynamic[list(kept)] = True
    drop = np.flatnonzero(~dynamic)
    if drop.size < STATIC_MIN:
        return None
    keep = np.flatnonzero(dynamic)
    from scipy.sparse import csc_matrix, diags
    from scipy.sparse.linalg import LinearOperator, onenormest, splu

    from chain.smallsignal.mna import _equilibrate_entries

    g22 = csc_matrix(g[np.ix_(drop, drop)])
    coo = g22.tocoo()
    r, col = _equilibrate_entries(coo.row, coo.col, np.abs(coo.data), drop.size)
    scaled = csc_matrix(diags(r) @ g22 @ diags(col))
    try:
        lu_scaled = splu(scaled)
    except RuntimeError:  # exactly singular
        return None
    inverse = LinearOperator(scaled.shape, matvec=lu_scaled.solve, rmatvec=lambda x: lu_scaled.solve(x, trans="T"),
                             dtype=float)
    norm = float(abs(scaled).sum(axis=0).max())
    inv_norm = float(onenormest(inverse))
    if not np.isfinite(inv_norm) or 1.0 / (norm * inv_norm) < REDUCTION_RCOND:
        return None
    lu = _ScaledLu(lu_scaled, r, col)
    g12 = g[np.ix_(keep, drop)]
    g21 = g[np.ix_(drop, keep)]
    schur = g[np.ix_(keep, keep)] - g12 @ lu.solve(g21)
    if not np.all(np.isfinite(schur)):
        return None
    return _Static(keep, drop, schur, c[np.ix_(keep, keep)], lu, g12, g21)


@dataclass(frozen=True, slots=True)
class _ScaledLu:
    """Solves with ``G₂₂ = R⁻¹·A·K⁻¹`` from the LU of the equilibrated ``A``:
    ``G₂₂⁻¹·b = K·A⁻¹·R·b`` and ``G₂₂⁻ᵀ·b = R·A⁻ᵀ·K·b``."""

    lu: object
    r: np.ndarray
    col: np.ndarray

    def solve(self, b: np.ndarray, trans: str = "N") -> np.ndarray:
        if trans == "T":
            return self.r[:, None] * self.lu.solve(self.col[:, None] * b, trans="T")  # type: ignore[attr-defined]
        return self.col[:, None] * self.lu.solve(self.r[:, None] * b)  # type: ignore[attr-defined]


def pencil_eigen(mna: Mna, *, vectors: bool = False):
    """Finite natural frequencies ``s`` (rad/s, complex) of ``G + s·C``.

    With ``vectors=True`` also the left and right eigenvectors in the
    unscaled coordinates, columns matching ``s``:
    ``wᴴ·(G + sC) = 0``, ``(G + sC)·v = 0``.  Purely resistive unknowns are
    eliminated first when there are many (:func:`_static_split`).
    """
    static = _static_split(mna.g, mna.c)
    g, c = (mna.g, mna.c) if static is None else (static.g, static.c)
    gs, cs, r, col = _scaled_pencil(g, c)
    got = _reduced_eigen(gs, cs, vectors=vectors)
    if got is None:
        got = _qz_eigen(gs, cs, vectors=vectors)
    s, wl, vr = got
    s = s * S0
    order = np.lexsort((s.imag, _magnitude_key(s)))
    s = s[order]
    if not vectors:
        return s
    # scaled pencil: R·(G + sC)·Col; right vector v = Col·ṽ, left w = R·w̃
    v = col[:, None] * vr[:, order]
    w = r[:, None] * wl[:, order]
    if static is not None:
        w, v = static.lift(w, v)
    return s, w, v


#: a singular value of the scaled ``C`` below this fraction of the largest is zero
RANK_REL = 1e-13
#: reciprocal condition of ``A₂₂`` below which the reduction gives way to QZ
REDUCTION_RCOND = 1e-10
#: largest relative step of the Rayleigh-quotient correction of an eigenvalue
RQ_STEP_REL = 1e-6


@dataclass(frozen=True, slots=True)
class _Reduced:
    """The scaled pencil with its infinite eigenvalues deflated (module docstring):
    ``Uᵀ(gs + s̃·cs)V = [[A₁₁ + s̃Σ₁, A₁₂], [A₂₁, A₂₂]]`` and
    ``S = A₁₁ − A₁₂·A₂₂⁻¹·A₂₁``; the state matrix is ``−Σ₁⁻¹·S``."""

    k: int
    sig: np.ndarray
    u: np.ndarray
    v: np.ndarray
    #: A₂₂⁻¹·A₂₁ and A₁₂·A₂₂⁻¹
    x21: np.ndarray
    x12: np.ndarray
    a22: np.ndarray
    schur: np.ndarray | None

    @property
    def state(self) -> np.ndarray:
        assert self.schur is not None
        return -(self.schur / self.sig[:, None])


def _reduce(gs: np.ndarray, cs: np.ndarray, *, allow_singular: bool = False) -> _Reduced | None:
    """Deflate the infinite eigenvalues of ``gs + s̃·cs``; None when ``A₂₂`` is
    too ill conditioned for that (eigenvalues at infinity of higher index),
    or with ``allow_singular`` the rotations alone (``schur`` None)."""
    n = gs.shape[0]
    rows = np.flatnonzero(np.any(cs != 0.0, axis=1))
    cols = np.flatnonzero(np.any(cs != 0.0, axis=0))
    if rows.size == 0:
        return None
    u, sig, vt = np.linalg.svd(cs[np.ix_(rows, cols)])
    k = int(np.sum(sig > RANK_REL * sig[0]))
    # orthogonal U, V acting on the dynamic rows and columns only; the k
    # directions with a capacitance first, then everything else
    big_u = np.eye(n)
    big_u[np.ix_(rows, rows)] = u
    big_v = np.eye(n)
    big_v[np.ix_(cols, cols)] = vt.T
    rest_r = np.setdiff1d(np.arange(n), rows[:k], assume_unique=True)
    rest_c = np.setdiff1d(np.arange(n), cols[:k], assume_unique=True)
    # column j < k of the reordered U is column rows[j] of big_u (u's j-th left vector)
    big_u = big_u[:, np.r_[rows[:k], rest_r]]
    big_v = big_v[:, np.r_[cols[:k], rest_c]]
    a = big_u.T @ gs @ big_v
    a11, a12, a21, a22 = a[:k, :k], a[:k, k:], a[k:, :k], a[k:, k:]
    if a22.size:
        try:
            if 1.0 / np.linalg.cond(a22, 1) < REDUCTION_RCOND:
                raise np.linalg.LinAlgError("ill conditioned")
            x21 = np.linalg.solve(a22, a21)
            x12 = np.linalg.solve(a22.T, a12.T).T
        except np.linalg.LinAlgError:
            if not allow_singular:
                return None
            return _Reduced(k, sig[:k], big_u, big_v, np.zeros((0, k)), np.zeros((k, 0)), a22, None)
        schur = a11 - a12 @ x21
    else:
        x21 = np.zeros((0, k))
        x12 = np.zeros((k, 0))
        schur = a11
    return _Reduced(k, sig[:k], big_u, big_v, x21, x12, a22, schur)


def _reduced_eigen(gs: np.ndarray, cs: np.ndarray, *, vectors: bool):
    """Finite eigenvalues ``s̃`` of the scaled pencil ``gs + s̃·cs`` (and left,
    right eigenvectors) by deflating the infinite ones (module docstring);
    None when ``A₂₂`` is too ill conditioned for that."""
    if not np.any(cs != 0.0):
        empty = np.empty((gs.shape[0], 0), dtype=complex)
        return np.empty(0, dtype=complex), empty, empty
    red = _reduce(gs, cs)
    if red is None:
        return None
    k, sig, big_u, big_v, x21, x12 = red.k, red.sig, red.u, red.v, red.x21, red.x12
    lam, y = np.linalg.eig(red.state)
    try:
        # rows of Y⁻¹ are the left eigenvectors of m: uᴴ·m = λ·uᴴ
        u_left = np.linalg.inv(y).conj().T
    except np.linalg.LinAlgError:
        return None
    keep = np.abs(lam) * INFINITE_BETA < 1.0
    lam, y, u_left = lam[keep], y[:, keep], u_left[:, keep]
    # right: ξ = [y; −A₂₂⁻¹A₂₁·y];  left: zᴴ = uᴴ·Σ₁⁻¹, ηᴴ = −zᴴ·A₁₂·A₂₂⁻¹
    z = u_left / sig[:k, None]
    right = big_v @ np.vstack([y, -(x21 @ y)])
    left = big_u @ np.vstack([z, -(x12.T @ z)])
    # the elimination costs some digits on close poles; the two-sided Rayleigh
    # quotient −wᴴ·G·v / wᴴ·C·v on the whole pencil wins them back (its error is
    # the product of the two vectors' errors); a step larger than a rounding
    # correction (a nearly defective pair, wᴴ·C·v ≈ 0) is not taken
    den = np.sum(left.conj() * (cs @ right), axis=0)
    num = np.sum(left.conj() * (gs @ right), axis=0)
    with np.errstate(divide="ignore", invalid="ignore"):
        rq = -num / den
    take = np.isfinite(rq) & (np.abs(rq - lam) <= RQ_STEP_REL * np.abs(lam))
    # a real eigenvalue of the real reduced matrix stays real
    rq = np.where(lam.imag == 0.0, rq.real + 0j, rq)
    lam = np.where(take, rq, lam)
    if not vectors:
        return lam, None, None
    return lam, left, right


def _qz_eigen(gs: np.ndarray, cs: np.ndarray, *, vectors: bool):
    """Finite eigenvalues of the scaled pencil by QZ (``scipy.linalg.eig``)."""
    from scipy.linalg import eig

    if vectors:
        (alpha, beta), wl, vr = eig(gs, -cs, left=True, right=True, homogeneous_eigvals=True)
    else:
        alpha, beta = eig(gs, -cs, right=False, homogeneous_eigvals=True)
    keep = _finite(alpha, beta)
    lam = alpha[keep] / beta[keep]
    if not vectors:
        return lam, None, None
    return lam, wl[:, keep], vr[:, keep]


#: d ln(stamped value) / d ln(part value): resistors are stamped as conductances
_LOG_SIGN = {"R": -1.0, "C": 1.0, "L": 1.0, "G": 1.0}


def sensitivity_matrix(mna: Mna, s: np.ndarray, w: np.ndarray, v: np.ndarray) -> tuple[tuple[str, ...], np.ndarray]:
    """Normalised sensitivities ``(dp/dx)·(x/p)`` of the poles ``s`` (rad/s,
    eigenvector columns ``w``, ``v``) to every part: ``(names, S)`` with
    ``S[i, k]`` for part ``names[i]`` and pole ``k``, all stamps at once.

    Parts stamped in several pieces (none today) add up under their name; a
    pole at ``s = 0`` or with ``wᴴ·C·v = 0`` gets a column of NaN.
    """
    n_pole = s.size
    pad = np.zeros((1, n_pole), dtype=complex)
    wc = np.vstack([np.conj(w), pad])  # index -1 reads the zero row
    vp = np.vstack([v, pad])
    denom = np.sum(wc[:-1] * (mna.c @ v), axis=0)
    stamps = [st for st in mna.stamps if st.kind != "V"]
    names = tuple(dict.fromkeys(st.name for st in stamps))
    row = {name: i for i, name in enumerate(names)}
    out = np.zeros((len(names), n_pole), dtype=complex)
    for kind in ("R", "C", "L", "G"):
        group = [st for st in stamps if st.kind == kind]
        if not group:
            continue
        val = np.array([st.value for st in group])[:, None]
        if kind == "L":
            br = np.array([st.branch for st in group])
            dy = -val * wc[br] * vp[br] * s[None, :]
        else:
            a = np.array([st.a for st in group])
            b = np.array([st.b for st in group])
            dw = wc[a] - wc[b]
            if kind == "G":
                dv = vp[np.array([st.cp for st in group])] - vp[np.array([st.cn for st in group])]
            else:
                dv = vp[a] - vp[b]
            dy = val * dw * dv
            if kind == "C":
                dy = dy * s[None, :]
        with np.errstate(divide="ignore", invalid="ignore"):
            sens = -_LOG_SIGN[kind] * dy / denom[None, :] / s[None, :]
        np.add.at(out, np.array([row[st.name] for st in group]), sens)
    bad = (denom == 0.0) | (s == 0.0)
    out[:, bad] = np.nan
    return names, out


def part_sensitivities(mna: Mna, s: complex, w: np.ndarray, v: np.ndarray) -> dict[str, complex]:
    """Normalised sensitivity ``(dp/dx)·(x/p)`` of the pole ``s`` to every part
    (empty when the pole is at ``s = 0`` or ``wᴴ·C·v = 0``)."""
    names, sens = sensitivity_matrix(mna, np.array([s], dtype=complex), w[:, None], v[:, None])
    if np.any(np.isnan(sens)):
        return {}
    return {name: complex(x) for name, x in zip(names, sens[:, 0])}


def poles(ss: SmallSignalCircuit, *, mna: Mna | None = None, parts: int = 3,
          eigen: tuple[np.ndarray, np.ndarray, np.ndarray] | None = None) -> tuple[Pole, ...]:
    """Every finite natural frequency of ``ss``, lowest first, each with the
    ``parts`` parts of largest normalised sensitivity (see the module docstring).

    A triode's ``"<name>.rp"`` counts by its plate resistance; ``"<name>.gm"``
    by its transconductance.  ``eigen``: ``pencil_eigen(mna, vectors=True)``
    when the caller already has it.
    """
    mna = assemble(ss) if mna is None else mna
    s, w, v = pencil_eigen(mna, vectors=True) if eigen is None else eigen
    names, sens = sensitivity_matrix(mna, s, w, v) if parts else ((), np.zeros((0, s.size)))
    out = []
    for k, sk in enumerate(s):
        top: list[tuple[str, complex]] = []
        if parts and not np.any(np.isnan(sens[:, k])):
            # largest first, ties in stamp order (a stable sort)
            order = np.argsort(-np.abs(sens[:, k]), kind="stable")[:parts]
            top = [(names[i], complex(sens[i, k])) for i in order]
        out.append(Pole(complex(sk) / (2.0 * math.pi), tuple(top)))
    return tuple(out)


def zeros(mna: Mna, node: int) -> np.ndarray:
    """Finite zeros ``s`` (rad/s) of the transfer from the source EMF to unknown ``node``.

    By Cramer's rule (on the transposed system) the transfer's numerator is
    the determinant of the pencil with the source's own equation (the row
    of its branch: the EMF across its nodes) replaced by ``x_node = 0``;
    that row holds no capacitance, so ``C`` stays as it is.  Purely resistive
    unknowns other than the source branch and ``node`` are eliminated first
    when there are many (:func:`_static_split`).
    """
    g = mna.g.copy()
    br = mna.source.branch
    g[br, :] = 0.0
    g[br, node] = 1.0
    c = mna.c
    # the source's branch and the output stay: the numerator's border
    static = _static_split(g, c, kept=(br, node))
    if static is not None:
        g, c = static.g, static.c
    gs, cs, _, _ = _scaled_pencil(g, c)
    z = _finite_eigenvalues(gs, cs)
    if z is None:
        z = _qz_eigen(gs, cs, vectors=False)[0]
    z = z * S0
    return z[np.lexsort((z.imag, _magnitude_key(z)))]


#: real shifts (scaled, ``s̃``) for the zeros' shift-and-invert, tried in turn
ZERO_SHIFTS = (1.0, 2.0 ** 0.5, 3.0)
#: the shift for the zeros far above the band (10 MHz), whose digits a shift near
#: 1 kHz loses
FAR_SHIFT = 1e4
#: an eigenvalue ``μ`` of the shifted inverse below this fraction of the largest
#: stands for a zero at infinity
INFINITE_MU = 1e-8


def _finite_eigenvalues(gs: np.ndarray, cs: np.ndarray) -> np.ndarray | None:
    """Finite eigenvalues ``s̃`` of ``gs + s̃·cs`` by shift and invert.

    ``(gs + σ·cs)⁻¹·cs·v = μ·v`` with ``s̃ = σ − 1/μ``: the eigenvalues at
    infinity become ``μ = 0`` (exactly, or within rounding of it when they
    are of higher index, as when the output node has a capacitance; from
    memory of Golub & Van Loan, §7.6, shift-and-invert).  An eigenvalue
    near the shift comes out to full accuracy, one far from it loses
    ``|s̃/σ|`` in relative accuracy; so those far above the band are taken
    from a second solve shifted to :data:`FAR_SHIFT`.  The shifts are real
    so that real eigenvalues stay real.  None when every shift is (nearly)
    an eigenvalue.
    """
    near = None
    for sigma in ZERO_SHIFTS:
        near = _shift_invert(gs, cs, sigma)
        if near is not None:
            break
    if near is None or near.size == 0 or np.max(np.abs(near)) < math.sqrt(FAR_SHIFT):
        return near
    far = _shift_invert(gs, cs, FAR_SHIFT)
    if far is None or far.size == 0:
        return near
    out = near.copy()
    for i in np.flatnonzero(np.abs(near) > math.sqrt(FAR_SHIFT)):
        j = int(np.argmin(np.abs(far - near[i])))
        if abs(far[j] - near[i]) <= 1e-4 * abs(near[i]):
            out[i] = far[j]
    return out


def _shift_invert(gs: np.ndarray, cs: np.ndarray, sigma: float) -> np.ndarray | None:
    if gs.shape[0] == 0 or not np.any(cs != 0.0):
        return np.empty(0, dtype=complex)
    shifted = gs + sigma * cs
    try:
        m = np.linalg.solve(shifted, cs)
    except np.linalg.LinAlgError:
        return None
    if not np.all(np.isfinite(m)):
        return None
    mu = np.linalg.eigvals(m)
    big = np.max(np.abs(mu))
    if big == 0.0:
        return np.empty(0, dtype=complex)
    mu = mu[np.abs(mu) > INFINITE_MU * big]
    return _finite_only(sigma - 1.0 / mu.astype(complex))


def _finite_only(lam: np.ndarray) -> np.ndarray:
    return lam[np.abs(lam) * INFINITE_BETA < 1.0]


def _magnitude_key(s: np.ndarray) -> np.ndarray:
    """``|s|`` rounded to 9 significant digits: the two members of a conjugate
    pair differ in their last bits of ``|s|``, and must sort by their
    imaginary part (negative first), not by rounding noise."""
    mag = np.abs(s)
    with np.errstate(divide="ignore"):
        return np.round(np.log10(mag), 9)


def _cancel(p: list[complex], z: list[complex]) -> tuple[list[complex], list[complex]]:
    """Drop pole–zero pairs that coincide within :data:`CANCEL_REL`: each pole
    in turn takes the first zero, in order, that no earlier pole took and that
    lies within ``CANCEL_REL·max(|p|, |z|)`` of it.  Which pairs are close is
    found for all of them at once; only poles with a close zero are walked."""
    p, z = list(p), list(z)
    if not p or not z:
        return p, z
    pa, za = np.array(p, dtype=complex), np.array(z, dtype=complex)
    close = np.abs(pa[:, None] - za[None, :]) <= CANCEL_REL * np.maximum(np.abs(pa)[:, None], np.abs(za)[None, :])
    taken = np.zeros(za.size, dtype=bool)
    dropped = np.zeros(pa.size, dtype=bool)
    for i in np.flatnonzero(close.any(axis=1)):
        free = np.flatnonzero(close[i] & ~taken)
        if free.size:
            taken[free[0]] = True
            dropped[i] = True
    return ([x for x, d in zip(p, dropped) if not d], [y for y, t in zip(z, taken) if not t])


def pole_zero(ss: SmallSignalCircuit, node: str | None = None, *, ref_hz: float = 1e3,
              mna: Mna | None = None, poles_rad_s: np.ndarray | None = None) -> PoleZero:
    """The transfer from the source EMF to ``node`` (default: the output) as a :class:`PoleZero`
    (``poles_rad_s``: ``pencil_eigen(mna)`` when the caller already has it)."""
    from chain.smallsignal.mna import direct_solver

    mna = assemble(ss) if mna is None else mna
    node = ss.output_node if node is None else node
    solved = ss.node_of.get(node, node)
    if solved not in mna.index:
        raise KeyError(f"no node {node!r} in the circuit")
    k = mna.index[solved]
    s_ref = np.array([2j * math.pi * ref_hz])
    if k < 0:
        return PoleZero(node, (), (), ref_hz, 0j)
    x = direct_solver(mna.g, mna.c, s_ref).solve(mna.source_rhs())  # dense, or sparse LU when large
    h_ref = complex(x[0, k])
    p = [complex(x) / (2.0 * math.pi) for x in (pencil_eigen(mna) if poles_rad_s is None else poles_rad_s)]
    z = [complex(x) / (2.0 * math.pi) for x in zeros(mna, k)]
    p, z = _cancel(p, z)
    p, z = _snap_conjugates(p), _snap_conjugates(z)
    kept = verified_zeros(mna, k, z, p)
    return PoleZero(node, tuple(p), tuple(kept), ref_hz, h_ref, len(z) - len(kept))


#: relative distance ``δ`` of the points around a zero where ``|H|`` is compared
ZERO_CHECK_STEP = 1e-3
#: a zero checks out when ``|H(z)| ≤ ZERO_CHECK_RATIO·min |H(neighbour)|``
ZERO_CHECK_RATIO = 1e-2


def verified_zeros(mna: Mna, node: int, zeros_hz: Sequence[complex],
                   poles_hz: Sequence[complex] = ()) -> list[complex]:
    """The zeros (Hz, ``s/2π``) at which the transfer to unknown ``node`` does vanish.

    Each computed zero ``z`` is checked by solving the nodal system itself,
    ``(G + s·C)·x = b``, at ``s = z`` and at four points around it,
    ``z·(1 ± δ)`` and ``z ± jδ|z|`` (``δ`` = :data:`ZERO_CHECK_STEP`; for a
    zero at the origin ``|z|`` is replaced by the smallest non-zero pole or
    zero, or ``S0``).  Near a true zero of multiplicity ``m``,
    ``H(s) ≈ K·(s − z)^m``, so a zero computed with relative error ``r``
    gives ``|H(z)| / |H(neighbour)| ≈ (r/δ)^m``; a point that is no zero at
    all, where ``H`` is smooth and non-zero on the scale ``δ|z|``, gives a
    ratio near 1 (``|H|`` changes by about ``δ·|z·H'/H|`` across the
    points).  The threshold :data:`ZERO_CHECK_RATIO` = 10⁻² sits between:
    it keeps a simple zero located to ``r < 10⁻⁵`` (the eigen-solve locates
    well separated zeros to ~10⁻¹⁰, a double one to ~√ε ≈ 10⁻⁸, whose ratio
    is then ~10⁻¹⁰), and rejects a point where ``|H|`` changes by less than
    a factor 100 within ``δ|z|``, as it does not unless a true zero lies
    within about ``δ|z|`` of it (a pole that close makes ``|H(z)|`` the
    larger).  Measured: the demos' zeros give ratios of
    at most ~4·10⁻⁷; the spurious zeros of a 70-section RC ladder about 1.04.
    The check is exact in principle (a zero of ``H`` is where the solved
    output vanishes), whatever went wrong in the eigen-solve.  A zero whose
    points cannot be solved (a singular or non-finite solve), or where
    ``H`` is zero at all five, is kept: it cannot be decided.  The verdict of a complex zero is shared by its
    conjugate (``H(z̄) = conj H(z)`` for real ``G``, ``C``, ``b``).
    """
    if not zeros_hz:
        return []
    mags = [abs(x) * 2.0 * math.pi for x in (*poles_hz, *zeros_hz) if x != 0]
    # one of each conjugate pair (Im ≥ 0), each once
    reps = list(dict.fromkeys(complex(z.real, abs(z.imag)) for z in zeros_hz))
    ratio = _zero_ratios(mna, node, np.array(reps) * 2.0 * math.pi, min(mags) if mags else S0)
    good = {r for r, q in zip(reps, ratio) if not q > ZERO_CHECK_RATIO}  # NaN (undecided) is kept
    return [z for z in zeros_hz if complex(z.real, abs(z.imag)) in good]


def _zero_ratios(mna: Mna, node: int, z: np.ndarray, origin_scale: float) -> np.ndarray:
    """``|H(z)| / min |H(neighbour)|`` for each ``z`` (rad/s), the neighbours
    as in :func:`verified_zeros`; NaN where a solve failed.  All points in one
    batched direct solve."""
    from chain.smallsignal.mna import direct_solver

    rho = ZERO_CHECK_STEP * np.where(z != 0, np.abs(z), origin_scale)
    pts = np.stack([z, z + rho, z - rho, z + 1j * rho, z - 1j * rho], axis=1)
    h = np.abs(direct_solver(mna.g, mna.c, pts.ravel()).solve(mna.source_rhs())[:, node]).reshape(pts.shape)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = h[:, 0] / np.min(h[:, 1:], axis=1)
    ratio[~np.all(np.isfinite(h), axis=1)] = np.nan
    return ratio


def _snap_conjugates(roots: list[complex]) -> list[complex]:
    """Make real roots exactly real (tiny imaginary parts from rounding) and
    roots within rounding of the origin (a coupling capacitor's zero at DC,
    found as ~1e-14 Hz) exactly zero.  A double real root (two equal stages'
    plate-to-grid zeros) comes out of any eigen-solver as two roots about
    √ε·|r| apart, as often a complex pair as two real ones; a pair that close
    to the real axis (``|Im r| ≤ 1e-6·|r|``) is taken as real."""
    out = []
    for r in roots:
        if abs(r) < 1e-9:
            r = 0j
        elif abs(r.imag) <= 1e-6 * abs(r):
            r = complex(r.real, 0.0)
        out.append(r)
    return out


# -- counting right-half-plane poles without locating them ------------------------

#: largest phase change (rad) of det Y(jω) between two samples, as predicted from
#: the located poles when placing them, and as measured before an interval is halved
WINDING_MAX_STEP = math.pi / 4
#: samples per decade at least
WINDING_PER_DECADE = 40
#: halvings of one interval at most
WINDING_MAX_DEPTH = 30
#: roots whose phases along the fine grid are formed together in :func:`rhp_count`
TURN_BLOCK = 64


class _Determinant:
    """``arg det Y(s)`` of ``Y(s) = G + s·C`` by LU factorisations: banded and
    batched over the points when the reordered band is narrow
    (:func:`chain.smallsignal.mna.det_phases`), else one dense (or, past
    :data:`chain.smallsignal.mna.SPARSE_FROM` unknowns, sparse) LU per point."""

    def __init__(self, mna: Mna):
        from chain.smallsignal.mna import SPARSE_FROM, nonzero_positions

        self.g, self.c = mna.g, mna.c
        self.sparse = mna.size >= SPARSE_FROM
        if self.sparse:
            cols, rows = nonzero_positions((mna.g != 0.0).T | (mna.c != 0.0).T)  # column-major: CSC order
            self.rows, self.indptr, self.n = rows, np.searchsorted(cols, np.arange(mna.size + 1)), mna.size
            self.gd, self.cd = mna.g[rows, cols], mna.c[rows, cols]

    def phases(self, s: np.ndarray) -> np.ndarray:
        """``arg det Y(s)`` (rad, up to whole turns) at every point of ``s``."""
        from chain.smallsignal.mna import det_phases

        banded = det_phases(self.g, self.c, s) if s.size > 1 else None
        if banded is not None:
            return banded
        return np.array([self.phase(sk) for sk in s])

    def phase(self, s: complex) -> float:
        if not self.sparse:
            sign, _ = np.linalg.slogdet(self.g + s * self.c)
            return float(np.angle(sign))
        from scipy.sparse import csc_matrix
        from scipy.sparse.linalg import splu

        y = csc_matrix((self.gd + s * self.cd, self.rows, self.indptr), shape=(self.n, self.n))
        lu = splu(y, permc_spec="COLAMD")
        d = lu.U.diagonal()  # L has a unit diagonal
        odd = (_permutation_parity(lu.perm_r) + _permutation_parity(lu.perm_c)) % 2
        return float(np.sum(np.angle(d)) + math.pi * odd)


def _permutation_parity(p: np.ndarray) -> int:
    """0 for an even permutation, 1 for an odd one (length minus number of cycles)."""
    perm = p.tolist()
    seen = [False] * len(perm)
    cycles = 0
    for i in range(len(perm)):
        if not seen[i]:
            cycles += 1
            j = i
            while not seen[j]:
                seen[j] = True
                j = perm[j]
    return (len(perm) - cycles) % 2


def rhp_count(mna: Mna, estimates: np.ndarray | None = None) -> int | None:
    """How many natural frequencies lie in the right half-plane, counted by
    the argument principle instead of located.

    ``det Y(s)`` is a real polynomial of degree ``d`` (the number of finite
    natural frequencies); walking ``s = jω`` from 0 to ∞ its phase turns by
    ``+π/2`` per root in the left half-plane and ``−π/2`` per root in the
    right one, so ``n_rhp = (d − 2·Δφ/π)/2`` (the argument principle, from
    memory of e.g. R. C. Dorf, R. H. Bishop, "Modern Control Systems", the
    Nyquist criterion).  Each ``det`` comes from an LU factorisation, whose
    error stays at rounding relative to the entries it combines; the
    eigenvalues of a long chain of similar stages do not: they sit in
    near-multiple clusters whose computed positions move by many percent with
    rounding (a cluster of ``m`` equal poles by about ``ε^{1/m}``), which can
    put some on the wrong side of the axis.  ``estimates`` (rad/s, the
    located poles by default) place the samples: close enough that their
    phase, as if they were exact, turns by at most :data:`WINDING_MAX_STEP`
    between two; an interval whose measured turn is larger is halved.  None
    when the count does not come out within 0.1 of a whole number (a root on
    the axis, or a walk that could not be resolved).
    """
    s_est = pencil_eigen(mna) if estimates is None else np.asarray(estimates, dtype=complex)
    d = int(s_est.size)
    if d == 0:
        return 0
    mags = np.abs(s_est[np.abs(s_est) > 0.0])
    # past ``hi`` each root turns the phase by less than |p|/hi more: at most
    # d·1e-3 rad in all, a tenth of the count's margin for d below 300
    lo = float(mags.min()) * 1e-3 if mags.size else 1.0
    hi = float(mags.max()) * 1e3 if mags.size else 1.0
    fine = np.geomspace(lo, hi, int(200 * math.log10(hi / lo)) + 2)
    # each root's phase arg(jω − p) is monotonic in ω; the sum of how far each has
    # turned (its sign aside: a root misplaced across the axis turns the other
    # way, the true one as much) says how densely to sample
    turned = _turned(s_est, fine)
    # one sample each time the roots have turned by a quarter of the allowed step
    # in all (located clusters are spread out by rounding, the true ones are
    # tighter and turn faster), and at least WINDING_PER_DECADE per decade
    marks = np.floor(turned / (0.25 * WINDING_MAX_STEP))
    take = np.r_[True, marks[1:] != marks[:-1]]
    take[::max(1, 200 // WINDING_PER_DECADE)] = True
    take[-1] = True
    w = fine[take]
    total = _winding(_Determinant(mna), w)
    count = (d - 2.0 * total / math.pi) / 2.0
    nearest = round(count)
    if abs(count - nearest) > 0.1 or nearest < 0:
        return None
    return int(nearest)


def _turned(roots: np.ndarray, w: np.ndarray) -> np.ndarray:
    """``Σ_p |arg(jω − p) − arg(jω₀ − p)|`` (rad) along the increasing grid ``w``
    (rad/s), each root's phase unwrapped along it: the phases of a block of
    :data:`TURN_BLOCK` roots formed together, the sum taken root by root."""
    turned = np.zeros(w.size)
    jw = 1j * w
    for lo in range(0, roots.size, TURN_BLOCK):
        phase = np.angle(jw[None, :] - roots[lo:lo + TURN_BLOCK, None])
        for row in np.abs(np.unwrap(phase, axis=1) - phase[:, :1]):
            turned += row
    return turned


def _wrapped(a):
    """``a`` (rad, scalar or array) wrapped into [−π, π)."""
    return (a + math.pi) % (2.0 * math.pi) - math.pi


def _winding(det: _Determinant, w: np.ndarray) -> float:
    """Phase change (rad) of det Y(jω) from ω = 0 along the samples ``w``
    (rad/s, increasing): each interval whose wrapped step exceeds
    :data:`WINDING_MAX_STEP` is halved (geometrically), at most
    :data:`WINDING_MAX_DEPTH` times; the new midpoints of every interval are
    evaluated together, one batch per halving."""
    points = np.r_[0.0, w]
    ph = det.phases(1j * points)
    w0, w1, ph0, ph1 = points[:-1], points[1:], ph[:-1], ph[1:]
    total = 0.0
    for depth in range(WINDING_MAX_DEPTH + 1):
        step = _wrapped(ph1 - ph0)
        done = np.abs(step) <= WINDING_MAX_STEP
        if depth == WINDING_MAX_DEPTH:
            done[:] = True
        total += float(step[done].sum())
        w0, w1, ph0, ph1 = w0[~done], w1[~done], ph0[~done], ph1[~done]
        if w0.size == 0:
            break
        wm = np.where(w0 > 0.0, np.sqrt(w0 * w1), w1 / 2.0)
        phm = det.phases(1j * wm)
        w0, w1 = np.r_[w0, wm], np.r_[wm, w1]
        ph0, ph1 = np.r_[ph0, phm], np.r_[phm, ph1]
    return total
