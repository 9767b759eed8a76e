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

Zeros of the transfer from the source EMF to node ``k`` are the finite
generalized eigenvalues of the pencil bordered by the source column and
the output row (the Rosenbrock system matrix; from memory of H. H.
Rosenbrock, "State-space and Multivariable Theory", 1970)::

    | G   b |         | C  0 |
    | eₖᵀ 0 |  + s ·  | 0  0 |.

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


def pencil_eigen(mna: Mna, *, vectors: bool = False):
    """Finite natural frequencies ``s`` (rad/s, complex) of ``G + s·C``.

    With ``vectors=True`` also the left and right eigenvectors in the
    unscaled coordinates, columns matching ``s``:
    ``wᴴ·(G + sC) = 0``, ``(G + sC)·v = 0``.
    """
    from scipy.linalg import eig

    gs, cs, r, col = _scaled_pencil(mna.g, mna.c)
    if vectors:
        (alpha, beta), wl, vr = eig(gs, -cs, left=True, right=True, homogeneous_eigvals=True)
    else:
        alpha, beta = eig(gs, -cs, right=False, homogeneous_eigvals=True)
    keep = _finite(alpha, beta)
    s = alpha[keep] / beta[keep] * S0
    order = np.lexsort((s.imag, _magnitude_key(s)))
    s = s[order]
    if not vectors:
        return s
    # scaled pencil: R·(G + sC)·Col; right vector v = Col·ṽ, left w = R·w̃
    v = col[:, None] * vr[:, keep][:, order]
    w = r[:, None] * wl[:, keep][:, order]
    return s, w, v


def _stamp_pair(st: Stamp, w: np.ndarray, v: np.ndarray, s: complex) -> tuple[complex, complex]:
    """``(wᴴ·dY·v, wᴴ·C_st·v)`` for the element's stamp ``dY = G_st + s·C_st``."""

    def val(vec, i):
        return vec[i] if i >= 0 else 0.0

    wa, wb = np.conj(val(w, st.a)), np.conj(val(w, st.b))
    va, vb = val(v, st.a), val(v, st.b)
    if st.kind == "R":
        return st.value * (wa - wb) * (va - vb), 0.0
    if st.kind == "C":
        q = st.value * (wa - wb) * (va - vb)
        return s * q, q
    if st.kind == "L":
        q = -st.value * np.conj(w[st.branch]) * v[st.branch]
        return s * q, q
    if st.kind == "G":
        return st.value * (wa - wb) * (val(v, st.cp) - val(v, st.cn)), 0.0
    return 0.0, 0.0


#: d ln(stamped value) / d ln(part value): resistors are stamped as conductances
_LOG_SIGN = {"R": -1.0, "C": 1.0, "L": 1.0, "G": 1.0}


def part_sensitivities(mna: Mna, s: complex, w: np.ndarray, v: np.ndarray) -> dict[str, complex]:
    """Normalised sensitivity ``(dp/dx)·(x/p)`` of the pole ``s`` to every part.

    Parts stamped in several pieces (none today) would add up under their name.
    """
    denom = np.conj(w) @ (mna.c @ v)
    out: dict[str, complex] = {}
    if denom == 0.0 or s == 0.0:
        return out
    for st in mna.stamps:
        if st.kind == "V":
            continue
        dy, _ = _stamp_pair(st, w, v, s)
        sens = -_LOG_SIGN[st.kind] * dy / denom / s
        out[st.name] = out.get(st.name, 0.0) + complex(sens)
    return out


def poles(ss: SmallSignalCircuit, *, mna: Mna | None = None, parts: int = 3) -> tuple[Pole, ...]:
    """Every finite natural frequency of ``ss``, lowest first, each with the
    ``parts`` parts of largest normalised sensitivity (see the module docstring).

    A triode's ``"<name>.rp"`` counts by its plate resistance; ``"<name>.gm"``
    by its transconductance.
    """
    mna = assemble(ss) if mna is None else mna
    s, w, v = pencil_eigen(mna, vectors=True)
    out = []
    for k, sk in enumerate(s):
        sens = part_sensitivities(mna, complex(sk), w[:, k], v[:, k])
        top = sorted(sens.items(), key=lambda kv: -abs(kv[1]))[:parts] if parts else []
        out.append(Pole(complex(sk) / (2.0 * math.pi), tuple(top)))
    return tuple(out)


def zeros(mna: Mna, node: int) -> np.ndarray:
    """Finite zeros ``s`` (rad/s) of the transfer from the source EMF to unknown ``node``."""
    from scipy.linalg import eig

    n = mna.size
    g = np.zeros((n + 1, n + 1))
    c = np.zeros((n + 1, n + 1))
    g[:n, :n] = mna.g
    c[:n, :n] = mna.c
    g[:n, n] = mna.source_rhs()
    g[n, node] = 1.0
    gs, cs, _, _ = _scaled_pencil(g, c)
    alpha, beta = eig(gs, -cs, right=False, homogeneous_eigvals=True)
    keep = _finite(alpha, beta)
    z = alpha[keep] / beta[keep] * S0
    return z[np.lexsort((z.imag, _magnitude_key(z)))]


def _magnitude_key(s: np.ndarray) -> np.ndarray:
    """``|s|`` rounded to 9 significant digits: the two members of a conjugate
    pair differ in their last bits of ``|s|``, and must sort by their
    imaginary part (negative first), not by rounding noise."""
    mag = np.abs(s)
    with np.errstate(divide="ignore"):
        return np.round(np.log10(mag), 9)


def _cancel(p: list[complex], z: list[complex]) -> tuple[list[complex], list[complex]]:
    """Drop pole–zero pairs that coincide within :data:`CANCEL_REL`."""
    p, z = list(p), list(z)
    kept_p = []
    for x in p:
        hit = None
        for i, y in enumerate(z):
            if abs(x - y) <= CANCEL_REL * max(abs(x), abs(y)):
                hit = i
                break
        if hit is None:
            kept_p.append(x)
        else:
            z.pop(hit)
    return kept_p, z


def pole_zero(ss: SmallSignalCircuit, node: str | None = None, *, ref_hz: float = 1e3,
              mna: Mna | None = None) -> PoleZero:
    """The transfer from the source EMF to ``node`` (default: the output) as a :class:`PoleZero`."""
    from chain.smallsignal.mna import DirectSolver

    mna = assemble(ss) if mna is None else mna
    node = ss.output_node if node is None else node
    solved = ss.node_of.get(node, node)
    if solved not in mna.index:
        raise KeyError(f"no node {node!r} in the circuit")
    k = mna.index[solved]
    s_ref = np.array([2j * math.pi * ref_hz])
    if k < 0:
        return PoleZero(node, (), (), ref_hz, 0j)
    x = DirectSolver(mna.g, mna.c, s_ref).solve(mna.source_rhs())
    h_ref = complex(x[0, k])
    p = [complex(x) / (2.0 * math.pi) for x in pencil_eigen(mna)]
    z = [complex(x) / (2.0 * math.pi) for x in zeros(mna, k)]
    p, z = _cancel(p, z)
    return PoleZero(node, tuple(_snap_conjugates(p)), tuple(_snap_conjugates(z)), ref_hz, h_ref)


def _snap_conjugates(roots: list[complex]) -> list[complex]:
    """Make real roots exactly real (tiny imaginary parts from rounding) and
    roots within rounding of the origin (a coupling capacitor's zero at DC,
    found as ~1e-14 Hz) exactly zero."""
    out = []
    for r in roots:
        if abs(r) < 1e-9:
            r = 0j
        elif abs(r.imag) <= 1e-12 * abs(r):
            r = complex(r.real, 0.0)
        out.append(r)
    return out
