"""Which parts move the gain, the corners and the bias currents: normalised sensitivities.

Every figure here is a normalised sensitivity ``S = d ln y / d ln x`` of a
result ``y`` to a part value ``x`` (a 1 % larger part moves ``y`` by about
``S`` %), computed from the solved circuit by derivatives, never by
analysing the circuit again per part.

Gain (adjoint method)
---------------------
With ``Y(s)·x = b`` (:mod:`chain.smallsignal.mna`) and the output
``H = eₖᵀ·x``, the adjoint ``λ = Y⁻ᵀ·eₖ`` gives every part at once:

    dH/dp = −λᵀ·(dY/dp)·x,

(the adjoint network of Director and Rohrer; from memory of S. W.
Director, R. A. Rohrer, "The generalized adjoint network and network
sensitivities", IEEE Trans. Circuit Theory 16, 1969).  A part's stamp is
linear in its value, so ``p·dY/dp`` is its own stamp (with the sign turned
for a resistor, stamped as a conductance).  The gain's sensitivity is the
real part ``Re(d ln H / d ln x) = d ln|H| / d ln x``.

Corners
-------
A −3 dB corner ``f_c`` is where ``ln|H(f_c)| − ln|H(f_ref)| = −½·ln 2``.
Differentiating that implicit equation,

    d ln f_c / d ln x = −(S_H(f_c) − S_H(f_ref)) / (d ln|H| / d ln f at f_c),

with ``d ln H/d ln s = −s·λᵀ·C·x / H`` from the same adjoint (``dY/ds = C``).

Bias currents
-------------
At the DC solution ``F(v, x) = 0`` (:mod:`chain.dc`), the implicit
function theorem gives ``dv/dx = −J⁻¹·∂F/∂x`` with ``J`` the analytic
Jacobian of the DC solve; a resistor ``R`` between ``a`` and ``b``
contributes ``∂F/∂ln R = ∓(v_a − v_b)/R`` to rows ``a`` and ``b``, a supply
``E`` contributes ``−E`` to its branch row.  A triode's plate current then
moves by ``dIp = gp·dVpk + gm·dVgk``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Mapping

import numpy as np

from chain.circuit import Capacitor, Inductor, Resistor
from chain.smallsignal.mna import Mna, Stamp, assemble, direct_solver
from chain.smallsignal.model import SmallSignalCircuit
from chain.decibels import db

__all__ = ["Ranking", "gain_sensitivity", "corner_sensitivity", "bias_sensitivity", "rankings", "SHOWN"]

#: parts named per quantity in the report
SHOWN = 3

#: d ln(stamped value) / d ln(part value): resistors are stamped as conductances
_LOG_SIGN = {"R": -1.0, "C": 1.0, "L": 1.0, "G": 1.0}


@dataclass(frozen=True, slots=True)
class Ranking:
    """Normalised sensitivities of one result to every part, largest ``|S|`` first.

    ``quantity`` names the result (``"overall gain"``, ``"low corner"``,
    ``"high corner"``, ``"V1 plate current"``); ``value`` is it in ``unit``
    (dB for the gain, Hz for corners, A for currents).
    """

    quantity: str
    value: float | None
    unit: str
    parts: tuple[tuple[str, float], ...]

    def top(self, n: int = SHOWN) -> tuple[tuple[str, float], ...]:
        return self.parts[:n]


def _pair(st: Stamp, lam: np.ndarray, x: np.ndarray, s: complex) -> complex:
    """``λᵀ·(p·dY/dp)·x`` for one element at ``s`` (no conjugation: the adjoint)."""

    def v(vec, i):
        return vec[i] if i >= 0 else 0.0

    if st.kind in ("R", "C"):
        y = st.value if st.kind == "R" else s * st.value
        return y * (v(lam, st.a) - v(lam, st.b)) * (v(x, st.a) - v(x, st.b))
    if st.kind == "L":
        return -s * st.value * lam[st.branch] * x[st.branch]
    if st.kind == "G":
        return st.value * (v(lam, st.a) - v(lam, st.b)) * (v(x, st.cp) - v(x, st.cn))
    return 0.0


def _adjoint(mna: Mna, k: int, f_hz: float) -> tuple[complex, np.ndarray, np.ndarray, complex]:
    """``(s, x, λ, H)`` at ``f_hz``: one direct solve each (:func:`direct_solver`
    at one frequency: dense below ``SPARSE_FROM`` unknowns, a sparse LU from there)."""
    s = 2j * math.pi * f_hz
    sv = np.array([s])
    x = direct_solver(mna.g, mna.c, sv).solve(mna.source_rhs())[0]
    e = np.zeros(mna.size)
    e[k] = 1.0
    lam = direct_solver(mna.g.T, mna.c.T, sv).solve(e)[0]
    return s, x, lam, complex(x[k])


class _Adjoints:
    """:func:`_adjoint` of one transfer, each frequency solved once (the
    rankings ask for the reference frequency's several times)."""

    def __init__(self, mna: Mna, k: int):
        self._mna, self._k = mna, k
        self._done: dict[float, tuple[complex, np.ndarray, np.ndarray, complex]] = {}

    def __call__(self, f_hz: float) -> tuple[complex, np.ndarray, np.ndarray, complex]:
        if f_hz not in self._done:
            self._done[f_hz] = _adjoint(self._mna, self._k, f_hz)
        return self._done[f_hz]


def gain_sensitivity(mna: Mna, k: int, f_hz: float, parts: set[str] | None = None, *,
                     adjoint: _Adjoints | None = None) -> dict[str, complex]:
    """``d ln H / d ln x`` of the transfer to unknown ``k`` at ``f_hz`` for every part (complex)."""
    s, x, lam, h = (adjoint or _Adjoints(mna, k))(f_hz)
    out: dict[str, complex] = {}
    if h == 0:
        return out
    for st in mna.stamps:
        if st.kind == "V" or (parts is not None and st.name not in parts):
            continue
        out[st.name] = out.get(st.name, 0.0) - _LOG_SIGN[st.kind] * _pair(st, lam, x, s) / h
    return out


def _dlnh_dlnf(mna: Mna, k: int, f_hz: float, adjoint: _Adjoints | None = None) -> float:
    s, x, lam, h = (adjoint or _Adjoints(mna, k))(f_hz)
    return float((-s * (lam @ (mna.c @ x)) / h).real)


def corner_sensitivity(mna: Mna, k: int, f_corner_hz: float, f_ref_hz: float,
                       parts: set[str] | None = None, *, adjoint: _Adjoints | None = None) -> dict[str, float]:
    """``d ln f_c / d ln x`` of a −3 dB corner relative to the gain at ``f_ref_hz``."""
    adjoint = adjoint or _Adjoints(mna, k)
    at_c = gain_sensitivity(mna, k, f_corner_hz, parts, adjoint=adjoint)
    at_ref = gain_sensitivity(mna, k, f_ref_hz, parts, adjoint=adjoint)
    slope = _dlnh_dlnf(mna, k, f_corner_hz, adjoint)
    if slope == 0.0:
        return {}
    return {name: float(-(at_c[name].real - at_ref.get(name, 0.0).real) / slope) for name in at_c}


def bias_sensitivity(circuit, dc) -> dict[str, dict[str, float]]:
    """Per triode, ``d ln Ip / d ln x`` for every resistor and supply voltage ``x``."""
    from chain.circuit import Role
    from chain.dc.engine import compile_network

    system = compile_network(circuit, gmin_s=dc.options.gmin_s if dc.options is not None else 1e-12)
    x = system.vector_from_voltages(dc.node_v)
    index = {name: i for i, name in enumerate(system.nodes)}
    n = len(system.nodes)

    def volt(node):
        i = index.get(node, -1)
        return x[i] if i >= 0 else 0.0

    names, cols = [], []
    for r in circuit.resistors:
        if not (r.ohms > 0.0 and math.isfinite(r.ohms)):
            continue
        col = np.zeros(system.size)
        i_r = (volt(r.a) - volt(r.b)) / r.ohms
        if r.a in index:
            col[index[r.a]] -= i_r
        if r.b in index:
            col[index[r.b]] += i_r
        names.append(r.name)
        cols.append(col)
    for src in circuit.sources:
        if src.role == Role.SUPPLY and src.name in system.branches and src.volts != 0.0:
            col = np.zeros(system.size)
            col[n + system.branches.index(src.name)] = -src.volts
            names.append(src.name)
            cols.append(col)
    if not cols:
        return {}
    # one LU of the DC Jacobian: dense LAPACK, or sparse on a long network
    dx = -system.solve_jacobian(x, np.array(cols).T)  # (size, parts)
    ip, _, gm, gp, _, _, _ = system.triode_currents(x)
    out: dict[str, dict[str, float]] = {}
    for t_i, t_name in enumerate(system.triode_names):
        t = circuit.triode(t_name)

        def dv(node):
            i = index.get(node, -1)
            return dx[i] if i >= 0 else np.zeros(dx.shape[1])

        d_ip = gp[t_i] * (dv(t.plate) - dv(t.cathode)) + gm[t_i] * (dv(t.grid) - dv(t.cathode))
        if ip[t_i] > 0.0:
            out[t_name] = {name: float(v / ip[t_i]) for name, v in zip(names, d_ip)}
    return out


def _ranked(quantity: str, value, unit: str, sens: Mapping[str, float]) -> Ranking:
    items = sorted(((k, float(v)) for k, v in sens.items() if math.isfinite(v)), key=lambda kv: -abs(kv[1]))
    return Ranking(quantity, value, unit, tuple(items))


def rankings(ss: SmallSignalCircuit, dc, *, ref_hz: float, f_low_hz: float | None,
             f_high_hz: float | None, mna: Mna | None = None) -> tuple[Ranking, ...]:
    """Sensitivity rankings of the overall gain (at ``ref_hz``), each corner
    and each stage's plate current, over the circuit's own parts (a tube's
    small-signal elements are not parts)."""
    mna = assemble(ss) if mna is None else mna
    circuit = ss.circuit
    passive: tuple[Resistor | Capacitor | Inductor, ...] = (*circuit.resistors, *circuit.capacitors, *circuit.inductors)
    parts = {p.name for p in passive}
    k = mna.index.get(ss.node_of.get(ss.output_node, ss.output_node), -1)
    out: list[Ranking] = []
    if k >= 0:
        adjoint = _Adjoints(mna, k)
        g = gain_sensitivity(mna, k, ref_hz, parts, adjoint=adjoint)
        h_ref = abs(adjoint(ref_hz)[3])
        gain_db = db(h_ref) if h_ref > 0 else None
        out.append(_ranked("overall gain", gain_db, "dB", {n: v.real for n, v in g.items()}))
        for name, f_c in (("low corner", f_low_hz), ("high corner", f_high_hz)):
            if f_c is not None:
                out.append(_ranked(name, f_c, "Hz", corner_sensitivity(mna, k, f_c, ref_hz, parts, adjoint=adjoint)))
    bias = bias_sensitivity(circuit, dc)
    for st in circuit.stages:
        for t in st.triodes:
            if t in bias:
                label = f"{st.name} plate current" if len(st.triodes) == 1 else f"{t} plate current"
                out.append(_ranked(label, dc.points[t].ip_a, "A", bias[t]))
    return tuple(out)
