"""Modified nodal analysis of a :class:`SmallSignalCircuit`, vectorised over frequency.

Unknowns are the node voltages (V) followed by one branch current (A) per
inductor and one for the signal source.  With ``s = j·2π·f`` the system is

    Y(s)·x = b,     Y(s) = G + s·C,

where ``G`` holds conductances, transconductances and the incidence entries
of the branch rows, and ``C`` holds capacitances and ``−L`` on each inductor
branch row (branch equation ``v_a − v_b − s·L·i = 0``); the source row reads
``v_pos − v_neg = E`` (modified nodal analysis, from memory of C.-W. Ho,
A. E. Ruehli, P. A. Brennan, "The modified nodal approach to network
analysis", IEEE Trans. Circuits Syst. 22, 1975).

Interchangeable ways to solve it:

* :class:`ModalSolver` (default for many frequencies).  After row/column
  equilibration, with a real shift ``s0`` inside the band,

      Y(s) = G0·(I + (s − s0)·A),   G0 = G + s0·C,   A = G0⁻¹·C = V·Λ·V⁻¹,
      Y(s)⁻¹ = V · diag(1 / (1 + (s − s0)·λ)) · V⁻¹·G0⁻¹,

  so one eigen-decomposition serves every frequency and a solve is two
  matrix products.  The result is improved by iterative refinement
  (residual ``b − Y(s)·x`` computed exactly, correction solved the same
  way) until its componentwise backward error is at rounding level; if it
  does not get there, the direct solve is used instead.
* :class:`DirectSolver`: ``numpy.linalg.solve`` on the stack of ``Y(s)``.
* :class:`BandSolver`: the unknowns put in reverse Cuthill–McKee order, then
  Gaussian elimination with partial pivoting in band form, every frequency
  at once, the factors kept.  A chain of stages reorders to a band a few
  unknowns wide whatever its length, so the work per frequency grows
  linearly with the stages, and a refinement step costs two band
  triangular solves instead of a new factorisation.
* :class:`SparseSolver`: a sparse LU factorisation of each ``Y(s)``
  (SuperLU with a fill-reducing column order, through scipy), used in place
  of the dense stack from :data:`SPARSE_FROM` unknowns on when the band is
  wide.

Which one runs under ``method="auto"``: the dense solve for at most
:data:`DIRECT_BELOW` frequencies; else the modal solve up to
:data:`MODAL_UP_TO` unknowns (on long chains of equal stages it fails its
accuracy check: their clustered poles have nearly dependent eigenvectors);
a fallback, and every larger circuit, uses the direct solve — banded when
the reordered band is narrow (:func:`direct_solver`), else dense below
:data:`SPARSE_FROM` unknowns and sparse from there on.

Refinement treats each frequency on its own: only the frequencies whose
componentwise backward error is still above :data:`REFINE_TOL` are solved
again, each while its error improves.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Iterable, Literal, Sequence, overload

import numpy as np

from chain.circuit import GROUND, NO_OWNER, Owner, Role
from chain.errors import AnalysisError, error
from chain.smallsignal.model import SmallSignalCircuit

__all__ = [
    "Stamp",
    "Mna",
    "assemble",
    "ModalSolver",
    "DirectSolver",
    "SparseSolver",
    "BandSolver",
    "det_phases",
    "direct_solver",
    "Changes",
    "removal_changes",
    "solve_each_without",
    "memory_estimate",
    "check_size",
    "planned_memory",
    "band_factor_bytes",
    "solve",
    "solve_entry",
    "backward_error",
    "current_into",
]

#: componentwise backward error at which refinement stops
REFINE_TOL = 1e-15
#: largest componentwise backward error accepted from the modal solve (the
#: result is then exact for part values perturbed by at most this fraction)
BACKWARD_TOL = 1e-14
#: relative size of the last correction of a watched unknown that ends refinement
WATCH_TOL = 1e-10
#: refinement steps of the modal solve before giving up on it
MAX_REFINE = 4
#: at most this many frequencies are solved directly under method="auto"
DIRECT_BELOW = 8
#: from this many unknowns on, a direct solve factorises each Y(s) as a sparse
#: matrix instead of stacking dense ones (the crossover measured with
#: benchmarks/bench_growth.py: below it the batched dense LAPACK call is faster)
SPARSE_FROM = 64
#: above this many unknowns the modal solve is not tried under method="auto"
MODAL_UP_TO = 64
#: the sparse solver keeps its factors for at most this many frequency × unknown pairs
KEEP_FACTORS = 2_000_000
#: bytes per frequency and unknown held during a sweep (solution, residuals,
#: refinement, the per-node transfers and the impedances: complex numbers,
#: counted from the arrays the response keeps and makes)
BYTES_PER_POINT_UNKNOWN = 16 * 24


#: the most memory an analysis may plan to use, bytes (and at most half of what
#: the machine has free): past it the analysis is refused before it starts
MEMORY_BUDGET = 2 * 2**30


#: bytes per unknown of one frequency's sparse LU factors kept by
#: :class:`SparseSolver` (a chain's L and U have about ten entries per column:
#: value and index; SuperLU holds them outside numpy)
SPARSE_BYTES_PER_UNKNOWN = 10 * (16 + 4)


def memory_estimate(n_unknowns: int, n_freq: int, band: tuple[int, int] | None = None) -> int:
    """Bytes an analysis of ``n_unknowns`` at ``n_freq`` frequencies needs, roughly,
    by the direct method the sweep falls back to (the modal solve, tried
    first on small circuits, needs less):

    * dense ``N × N`` arrays: ``G`` and ``C``, their scaled and reordered
      copies, the pole solve's pencil and the DC solve's Jacobian and factors
      (``7·N²`` doubles);
    * :data:`BYTES_PER_POINT_UNKNOWN` per frequency and unknown (solution,
      residuals, refinement, transfers, impedances);
    * the solver's own store: with ``band = (lower, upper)`` (the narrow band
      :func:`direct_solver` takes) the band factors it keeps
      (:func:`band_factor_bytes`); else below :data:`SPARSE_FROM` unknowns a
      block of the dense stack and LAPACK's copy of it (at most
      :data:`STACK_BYTES` each), from there on the sparse factors
      (:data:`SPARSE_BYTES_PER_UNKNOWN`, kept up to :data:`KEEP_FACTORS`)."""
    n, nf = n_unknowns, n_freq
    need = 7 * n * n * 8 + BYTES_PER_POINT_UNKNOWN * n * nf
    if band is not None:
        return need + band_factor_bytes(n, nf, *band)
    if n < SPARSE_FROM:
        return need + 2 * min(STACK_BYTES, nf * n * n * 16)
    return need + (SPARSE_BYTES_PER_UNKNOWN * n * nf if n * nf <= KEEP_FACTORS else 0)


def _free_bytes() -> int | None:
    """Memory the machine has available (Linux /proc/meminfo), or None if unknown."""
    try:
        with open("/proc/meminfo", encoding="ascii") as fh:
            for line in fh:
                if line.split(":", 1)[0] == "MemAvailable":
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        return None
    return None


def planned_memory(circuit, n_freq: int, budget: int = MEMORY_BUDGET) -> tuple[int, int]:
    """``(unknowns, bytes)`` an analysis of ``circuit`` at ``n_freq`` frequencies
    needs (:func:`memory_estimate`), the method found from the circuit's
    structure (:func:`chain.smallsignal.model.unknown_pattern`, then the band
    plan of :func:`direct_solver`) unless the dense arrays alone exceed
    ``budget`` (bytes)."""
    from chain.smallsignal.model import unknown_pattern

    n = len(circuit.nodes()) + len(circuit.inductors) + 1
    band = None
    if 7 * n * n * 8 <= budget and n_freq > DIRECT_BELOW:
        pattern = unknown_pattern(circuit)
        n = pattern.shape[0]
        plan = _band_plan(pattern, n_freq)
        band = None if plan is None else plan[1:]
    return n, memory_estimate(n, n_freq, band)


def check_size(circuit, n_freq: int) -> None:
    """Refuse (E330) an analysis whose :func:`planned_memory` exceeds
    :data:`MEMORY_BUDGET` or half the memory free, before any solve starts."""
    free = _free_bytes()
    budget = MEMORY_BUDGET if free is None else min(MEMORY_BUDGET, free // 2)
    n, need = planned_memory(circuit, n_freq, budget)
    if need > budget:
        raise AnalysisError(error(
            "E330", f"the circuit is too large to analyse here: about {need / 2**30:.1f} GB needed "
                    f"({n} unknowns at {n_freq} frequencies), more than the {budget / 2**30:.1f} GB allowed",
            hint="use fewer sweep points ('set points 500'), or analyse the chain in parts"))


@dataclass(frozen=True, slots=True)
class Stamp:
    """One element in index form (``-1`` is ground).

    ``kind``: ``"R"`` (``value`` = conductance, S), ``"C"`` (F), ``"L"`` (H,
    current ``branch`` flows a→b through the inductor), ``"V"`` (the signal
    source; ``branch`` current flows into the source at ``a`` = pos),
    ``"G"`` (transconductance, S: current ``value·(v[cp] − v[cn])`` flows
    into the element at ``a`` and out at ``b``).
    """

    name: str
    kind: str
    a: int
    b: int
    value: float
    branch: int = -1
    cp: int = -1
    cn: int = -1
    #: the element's owner and role in the circuit (see :mod:`chain.circuit`)
    owner: Owner = NO_OWNER
    role: Role = Role.OTHER

    def touches(self, i: int) -> bool:
        """True when current of this element enters or leaves node ``i``."""
        return self.a == i or self.b == i


@dataclass(frozen=True, slots=True, eq=False)
class Mna:
    """The assembled real matrices ``G`` and ``C`` and the index maps."""

    nodes: tuple[str, ...]
    #: node name → row (ground → -1)
    index: dict
    g: np.ndarray
    c: np.ndarray
    stamps: tuple[Stamp, ...]
    source: Stamp

    @property
    def size(self) -> int:
        return self.g.shape[0]

    def source_rhs(self) -> np.ndarray:
        """Right-hand side for a unit source EMF (V)."""
        b = np.zeros(self.size)
        b[self.source.branch] = 1.0
        return b

    def without(self, removed: Iterable[Stamp]) -> "Mna":
        """The same unknowns with the ``removed`` elements taken out.

        A removed inductor keeps its branch current as an unknown, pinned to
        zero; the signal source cannot be removed (zero its EMF instead).
        """
        gone = {st.name for st in removed}
        if self.source.name in gone:
            raise ValueError("the signal source cannot be removed")
        kept = tuple(st for st in self.stamps if st.name not in gone)
        g, c = _matrices(self.size, kept)
        for st in self.stamps:
            if st.name in gone and st.kind == "L":
                g[st.branch, st.branch] = 1.0
        return Mna(self.nodes, self.index, g, c, kept, self.source)


class _AcStamper:
    """Turns the elements' ``stamp`` calls into index-form :class:`Stamp` s.

    Conductances go to ``G``, capacitances to ``C``, each inductance gets a
    branch current (numbered after the nodes, in stamping order) with ``−L``
    on its diagonal in ``C``, the signal source the last branch.
    """

    def __init__(self, index: dict, n_nodes: int):
        self.index = index
        self.n = n_nodes
        self.stamps: list[Stamp] = []
        self.inductors = 0
        self.source: tuple | None = None

    def conductance(self, part, a, b, g_s):
        self.stamps.append(Stamp(part.name, "R", self.index[a], self.index[b], g_s,
                                 owner=part.owner, role=part.role))

    def capacitance(self, part, a, b, c_f):
        self.stamps.append(Stamp(part.name, "C", self.index[a], self.index[b], c_f,
                                 owner=part.owner, role=part.role))

    def inductance(self, part, a, b, l_h):
        self.stamps.append(Stamp(part.name, "L", self.index[a], self.index[b], l_h,
                                 branch=self.n + self.inductors, owner=part.owner, role=part.role))
        self.inductors += 1

    def transconductance(self, part, a, b, ctrl_pos, ctrl_neg, gm_s):
        self.stamps.append(Stamp(part.name, "G", self.index[a], self.index[b], gm_s,
                                 cp=self.index[ctrl_pos], cn=self.index[ctrl_neg],
                                 owner=part.owner, role=part.role))

    def voltage_source(self, part, pos, neg):
        if self.source is not None:
            raise ValueError("the small-signal network has one signal source")
        self.source = (part, pos, neg)

    def triode(self, part):
        raise TypeError(f"triode {part.name} must be linearised before the small-signal solve")


def assemble(ss: SmallSignalCircuit) -> Mna:
    """Build ``G`` and ``C`` (see the module docstring) for ``ss``: every
    element of ``ss`` stamps itself (:meth:`chain.circuit.Resistor.stamp` …)."""
    nodes = ss.nodes
    index = {n: i for i, n in enumerate(nodes)}
    index[GROUND] = -1
    st = _AcStamper(index, len(nodes))
    for el in ss.elements:
        el.stamp(st)
    size = len(nodes) + st.inductors + 1
    if st.source is None:
        raise ValueError("the small-signal network has no signal source")
    part, pos, neg = st.source
    src = Stamp(part.name, "V", index[pos], index[neg], 1.0, branch=size - 1, owner=part.owner, role=part.role)
    stamps = st.stamps + [src]
    g, c = _matrices(size, stamps)
    return Mna(nodes, index, g, c, tuple(stamps), src)


def _entries(stamps: Iterable[Stamp]) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """The stamps' matrix entries in stamping order: ``(row, column, G value,
    C value)`` arrays, one entry per term (ground rows and columns left out)."""
    rows: list[int] = []
    cols: list[int] = []
    gv: list[float] = []
    cv: list[float] = []

    def add(i, j, g_val, c_val):
        if i >= 0 and j >= 0:
            rows.append(i)
            cols.append(j)
            gv.append(g_val)
            cv.append(c_val)

    for st in stamps:
        a, b = st.a, st.b
        if st.kind in ("R", "C"):
            g_val, c_val = (st.value, 0.0) if st.kind == "R" else (0.0, st.value)
            add(a, a, g_val, c_val)
            add(b, b, g_val, c_val)
            add(a, b, -g_val, -c_val)
            add(b, a, -g_val, -c_val)
        elif st.kind in ("L", "V"):
            br = st.branch
            add(a, br, 1.0, 0.0)
            add(b, br, -1.0, 0.0)
            add(br, a, 1.0, 0.0)
            add(br, b, -1.0, 0.0)
            if st.kind == "L":
                add(br, br, 0.0, -st.value)
        elif st.kind == "G":
            add(a, st.cp, st.value, 0.0)
            add(a, st.cn, -st.value, 0.0)
            add(b, st.cp, -st.value, 0.0)
            add(b, st.cn, st.value, 0.0)
        else:
            raise ValueError(f"unknown element kind {st.kind!r}")
    return (np.array(rows, dtype=np.intp), np.array(cols, dtype=np.intp),
            np.array(gv, dtype=float), np.array(cv, dtype=float))


def _matrices(size: int, stamps: Iterable[Stamp]) -> tuple[np.ndarray, np.ndarray]:
    g = np.zeros((size, size))
    c = np.zeros((size, size))
    rows, cols, gv, cv = _entries(stamps)
    # np.add.at adds unbuffered, in order: the same sums as stamping one by one
    g_term, c_term = gv != 0.0, cv != 0.0
    np.add.at(g, (rows[g_term], cols[g_term]), gv[g_term])
    np.add.at(c, (rows[c_term], cols[c_term]), cv[c_term])
    return g, c


@dataclass(frozen=True, slots=True, eq=False)
class Changes:
    """Entries added to ``G`` and ``C`` of one system of a stack each: system
    ``k`` is ``(G + ΔG_k) + s_k·(C + ΔC_k)``; at most one entry per system,
    row and column."""

    system: np.ndarray
    rows: np.ndarray
    cols: np.ndarray
    dg: np.ndarray
    dc: np.ndarray


def removal_changes(mna: Mna, removals: Sequence[Iterable[Stamp]]) -> Changes:
    """:class:`Changes` making system ``k`` the matrix of ``mna.without(removals[k])``
    (each removed element's entries subtracted; a removed inductor's branch
    current pinned to zero)."""
    parts = []
    for k, removed in enumerate(removals):
        removed = tuple(removed)
        if any(st.kind == "V" for st in removed):
            raise ValueError("the signal source cannot be removed")
        rows, cols, gv, cv = _entries(removed)
        pins = [st.branch for st in removed if st.kind == "L"]
        rows = np.r_[rows, pins].astype(np.intp)
        cols = np.r_[cols, pins].astype(np.intp)
        parts.append((np.full(rows.size, k, dtype=np.intp), rows, cols,
                      np.r_[-gv, np.ones(len(pins))], np.r_[-cv, np.zeros(len(pins))]))
    if not parts:
        empty = np.zeros(0, dtype=np.intp)
        return Changes(empty, empty, empty, np.zeros(0), np.zeros(0))
    system, rows, cols, dg, dc = (np.concatenate(a) for a in zip(*parts))
    # one entry per (system, row, column), summed in order
    n = mna.size
    key = (system * n + rows) * n + cols
    uniq, where = np.unique(key, return_inverse=True)
    sum_g = np.zeros(uniq.size)
    sum_c = np.zeros(uniq.size)
    np.add.at(sum_g, where, dg)
    np.add.at(sum_c, where, dc)
    return Changes(uniq // (n * n), (uniq // n) % n, uniq % n, sum_g, sum_c)


# -- solvers -----------------------------------------------------------------


class _Unsuitable(Exception):
    """The modal decomposition cannot be formed."""


def _equilibrate(m: np.ndarray, sweeps: int = 6) -> tuple[np.ndarray, np.ndarray]:
    """Row and column scale factors (powers of two) making ``|m|`` balanced.

    Ruiz's iteration (from memory of D. Ruiz, "A scaling algorithm to
    equilibrate both rows and columns norms in matrices", 2001), rounded to
    powers of two so that scaling adds no rounding error.
    """
    r = np.ones(m.shape[0])
    c = np.ones(m.shape[1])
    a = np.abs(m)
    for _ in range(sweeps):
        scaled = a * r[:, None] * c[None, :]
        rr = np.sqrt(scaled.max(axis=1))
        cc = np.sqrt(scaled.max(axis=0))
        rr[rr == 0.0] = 1.0
        cc[cc == 0.0] = 1.0
        r /= rr
        c /= cc
    return np.exp2(np.round(np.log2(r))), np.exp2(np.round(np.log2(c)))


class ModalSolver:
    """``Y(s)⁻¹·b = V·diag(1/(1 + (s − s0)λ))·V⁻¹·G0⁻¹·b`` for every ``s`` at once."""

    name = "modal"

    def __init__(self, g: np.ndarray, c: np.ndarray, s: np.ndarray):
        w = np.abs(s.imag)
        s0 = float(np.sqrt(w.min() * w.max()))
        self._r, self._c = _equilibrate(np.abs(g) + s0 * np.abs(c))
        gs = self._r[:, None] * g * self._c[None, :]
        cs = self._r[:, None] * c * self._c[None, :]
        try:
            g0_inv = np.linalg.inv(gs + s0 * cs)
            lam, vec = np.linalg.eig(g0_inv @ cs)
            w_mat = np.linalg.solve(vec, g0_inv)
        except np.linalg.LinAlgError as exc:
            raise _Unsuitable(str(exc)) from None
        if not (np.all(np.isfinite(lam)) and np.all(np.isfinite(w_mat))):
            raise _Unsuitable("non-finite decomposition")
        self._vt = vec.T
        self._wt = w_mat.T
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            self._d = 1.0 / (1.0 + (s - s0)[:, None] * lam[None, :])  # (nf, N)

    def coords(self, b: np.ndarray, rows: np.ndarray | None = None) -> np.ndarray:
        """Modal coordinates ``z`` (nf, N) of the solution: ``x = (V·z)·col_scale``
        (with ``rows``: at those frequencies only, as in :meth:`DirectSolver.solve`)."""
        d = self._d if rows is None else self._d[rows]
        with np.errstate(invalid="ignore", over="ignore"):
            return d * ((b * self._r) @ self._wt)

    def full(self, z: np.ndarray) -> np.ndarray:
        """Every unknown (nf, N) from modal coordinates."""
        with np.errstate(invalid="ignore", over="ignore"):
            return (z @ self._vt) * self._c

    def row(self, i: int) -> np.ndarray:
        """Vector ``v`` with ``x[:, i] = z @ v``."""
        return self._vt[:, i] * self._c[i]

    def solve(self, b: np.ndarray, rows: np.ndarray | None = None) -> np.ndarray:
        """Solutions (nf, N) for a constant (N,) or per-frequency (nf, N) RHS
        (with ``rows``: at those frequencies only, as in :meth:`DirectSolver.solve`)."""
        return self.full(self.coords(b, rows))


#: the batched dense solve stacks at most this many bytes of matrices at a time
STACK_BYTES = 64 * 2**20


class DirectSolver:
    """``numpy.linalg.solve`` on each equilibrated ``Y(s)`` (batched LAPACK calls).

    Rows and columns are scaled by powers of two computed from
    ``|G| + |s_mid|·|C|`` (``s_mid`` the geometric mean of the band); each
    frequency's rows are then scaled again by powers of two near
    ``1 / (max|G_i·| + |s|·max|C_i·|)``, so that partial pivoting sees rows
    of like size at that frequency (fewer frequencies then need a
    refinement step).  The stack of ``Y(s)`` is formed in blocks of
    frequencies of at most :data:`STACK_BYTES`, so memory does not grow
    with the number of points.
    """

    name = "direct"

    def __init__(self, g: np.ndarray, c: np.ndarray, s: np.ndarray):
        w = np.abs(s)
        s_mid = float(np.sqrt(w.min() * w.max())) if w.size else 1.0
        self._r, self._c = _equilibrate(np.abs(g) + s_mid * np.abs(c))
        self._gs = self._r[:, None] * g * self._c[None, :]
        self._cs = self._r[:, None] * c * self._c[None, :]
        self._gmax = np.abs(self._gs).max(axis=1, initial=0.0)
        self._cmax = np.abs(self._cs).max(axis=1, initial=0.0)
        self._s = s
        n = g.shape[0]
        self._block = max(1, STACK_BYTES // (16 * n * n)) if n else max(1, s.size)

    def _stack(self, s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """``(row scale (k, N), row-scaled Y(s) (k, N, N))`` for the frequencies ``s``."""
        rs = self._gmax[None, :] + np.abs(s)[:, None] * self._cmax[None, :]
        with np.errstate(divide="ignore"):
            rs = np.exp2(-np.round(np.log2(np.where(rs > 0.0, rs, 1.0))))
        n = self._gs.shape[0]
        y = np.empty((s.size, n, n), dtype=complex)
        # real and imaginary parts written in place: no complex temporaries
        if np.any(s.real != 0.0):
            np.multiply(rs[:, :, None], self._gs[None, :, :] + s.real[:, None, None] * self._cs[None, :, :],
                        out=y.real)
        else:
            np.multiply(rs[:, :, None], self._gs[None, :, :], out=y.real)
        np.multiply((rs * s.imag[:, None])[:, :, None], self._cs[None, :, :], out=y.imag)
        return rs, y

    def solve(self, b: np.ndarray, rows: np.ndarray | None = None) -> np.ndarray:
        """Solutions (nf, N) for a constant (N,) or per-frequency (nf, N) RHS;
        with ``rows`` (indices into the frequencies) only at those: the RHS is
        then (N,) or (len(rows), N), the result (len(rows), N)."""
        s = self._s if rows is None else self._s[rows]
        nf, n = s.size, self._gs.shape[0]
        rhs = np.broadcast_to(b * self._r, (nf, n))
        xs = np.full((nf, n), np.nan + 0j)
        for lo in range(0, nf, self._block):
            hi = min(nf, lo + self._block)
            rs, y = self._stack(s[lo:hi])
            part = rhs[lo:hi] * rs
            try:
                xs[lo:hi] = np.linalg.solve(y, part[:, :, None])[:, :, 0]
            except np.linalg.LinAlgError:
                for k in range(hi - lo):
                    try:
                        xs[lo + k] = np.linalg.solve(y[k], part[k])
                    except np.linalg.LinAlgError:
                        pass
        with np.errstate(over="ignore", invalid="ignore"):
            return xs * self._c


class SparseSolver:
    """A sparse LU factorisation of each equilibrated ``Y(s)`` (SuperLU, COLAMD order).

    The union pattern of ``G`` and ``C`` is found once; each frequency only
    fills in ``G + s·C`` on it and factorises.  The factors are kept when
    there are at most :data:`KEEP_FACTORS` frequency × unknown pairs, so
    refinement steps cost one triangular solve per frequency; past that
    each solve factorises again, so memory stays bounded.  A frequency
    at which ``Y(s)`` is singular gives NaN, as in :class:`DirectSolver`.
    """

    name = "sparse"

    def __init__(self, g: np.ndarray, c: np.ndarray, s: np.ndarray):
        from scipy.sparse import csc_matrix
        from scipy.sparse.linalg import splu

        n = g.shape[0]
        w = np.abs(s)
        s_mid = float(np.sqrt(w.min() * w.max())) if w.size else 1.0
        cols, rows = nonzero_positions((g != 0.0).T | (c != 0.0).T)  # column-major: CSC order
        self._r, self._c = _equilibrate_entries(rows, cols, np.abs(g[rows, cols]) + s_mid * np.abs(c[rows, cols]), n)
        scale = self._r[rows] * self._c[cols]
        gd, cd = g[rows, cols] * scale, c[rows, cols] * scale
        indptr = np.searchsorted(cols, np.arange(n + 1))
        self._n = n
        self._s = s

        def factor(sk):
            try:
                return splu(csc_matrix((gd + sk * cd, rows, indptr), shape=(n, n)), permc_spec="COLAMD")
            except RuntimeError:  # exactly singular at this frequency
                return None

        self._factor = factor
        self._lus = [factor(sk) for sk in s] if s.size * n <= KEEP_FACTORS else None

    def solve(self, b: np.ndarray, rows: np.ndarray | None = None) -> np.ndarray:
        """Solutions (nf, N) for a constant (N,) or per-frequency (nf, N) RHS
        (with ``rows``: at those frequencies only, as in :meth:`DirectSolver.solve`)."""
        which = np.arange(self._s.size) if rows is None else rows
        nf = which.size
        rhs = np.broadcast_to(b * self._r, (nf, self._n))
        xs = np.full((nf, self._n), np.nan + 0j)
        for i, k in enumerate(which):
            lu = self._lus[k] if self._lus is not None else self._factor(self._s[k])
            if lu is not None:
                xs[i] = lu.solve(rhs[i].astype(complex))
        with np.errstate(over="ignore", invalid="ignore"):
            return xs * self._c


def nonzero_positions(mask: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``np.nonzero(mask)`` of a 2-D boolean ``mask``: the same (row, column)
    pairs in the same (row-major) order, found on the flattened mask, which
    numpy scans several times faster than a 2-D one."""
    flat = np.flatnonzero(mask)
    return np.divmod(flat, mask.shape[1])


def _band_order(pattern: np.ndarray) -> np.ndarray:
    """A reverse Cuthill–McKee order of the unknowns for the non-zero
    ``pattern`` (N, N) (from memory of E. Cuthill, J. McKee, "Reducing the
    bandwidth of sparse symmetric matrices", 1969, reversed as A. George
    proposed): breadth-first from a least-connected unknown, neighbours in
    order of increasing degree, each connected part in turn, then reversed."""
    n = pattern.shape[0]
    sym = pattern | pattern.T
    np.fill_diagonal(sym, False)
    degree = sym.sum(axis=1)
    neighbours = [np.flatnonzero(row) for row in sym]
    seen = np.zeros(n, dtype=bool)
    order: list[int] = []
    for start in np.argsort(degree, kind="stable"):
        if seen[start]:
            continue
        seen[start] = True
        queue = [int(start)]
        head = 0
        while head < len(queue):
            node = queue[head]
            head += 1
            nxt = [int(j) for j in neighbours[node] if not seen[j]]
            nxt.sort(key=lambda j: (degree[j], j))
            for j in nxt:
                seen[j] = True
            queue.extend(nxt)
        order.extend(queue)
    return np.array(order[::-1], dtype=int)


def _bandwidths(pattern: np.ndarray) -> tuple[int, int]:
    """``(lower, upper)`` bandwidth of the non-zero ``pattern``."""
    i, j = nonzero_positions(pattern)
    if i.size == 0:
        return 0, 0
    return int(max(0, (i - j).max())), int(max(0, (j - i).max()))


#: the banded solve is used when its reordered ``Y`` has (lower + 1)·(lower +
#: upper + 1) at most this fraction of N² (see :func:`direct_solver`)
BAND_FRACTION = 0.25
#: the banded solve keeps its factors for at most this many bytes
BAND_BYTES = 256 * 2**20


class BandSolver:
    """Gaussian elimination with partial pivoting of each equilibrated ``Y(s)``
    in band form, vectorised over the frequencies; the factors are kept.

    The unknowns are put in reverse Cuthill–McKee order (:func:`_band_order`):
    a chain of stages then has a narrow band (lower and upper bandwidth ``p``
    and ``q`` of a few unknowns whatever the number of stages).  Elimination
    runs over a window of ``p + 1`` rows and ``p + q + 1`` columns that
    slides down the diagonal, every frequency at once, as LAPACK's band
    factorisation does (from memory of E. Anderson et al., "LAPACK Users'
    Guide", xGBTRF: row interchanges within the band let ``U`` grow to
    ``p + q`` upper diagonals).  The pivots are the same as those of the
    dense partial-pivoting solve of the same matrix: it is that algorithm,
    skipping entries known to be zero.  Scaling is that of
    :class:`DirectSolver` (per-frequency row scale included).  Solves
    (the first and each refinement step) then cost ``O(N·(p + q))`` per
    frequency.  A frequency at which ``Y(s)`` is singular gives NaN.
    """

    name = "banded"

    def __init__(self, g: np.ndarray, c: np.ndarray, s: np.ndarray,
                 order: np.ndarray | None = None, changes: "Changes | None" = None, *, keep: bool = True):
        pattern = (g != 0.0) | (c != 0.0)
        if changes is not None:
            pattern[changes.rows, changes.cols] = True
        if order is None:
            order = _band_order(pattern)
        w = np.abs(s)
        s_mid = float(np.sqrt(w.min() * w.max())) if w.size else 1.0
        self._r, self._c = _equilibrate(np.abs(g) + s_mid * np.abs(c))
        self._order = order
        gs = (self._r[:, None] * g * self._c[None, :])[np.ix_(order, order)]
        cs = (self._r[:, None] * c * self._c[None, :])[np.ix_(order, order)]
        n = g.shape[0]
        lo, up = _bandwidths(pattern[np.ix_(order, order)])
        self._n, self._lo, self._up = n, lo, up
        self._s = s
        # original band, row i: columns i - lo … i + up (zero outside the matrix)
        width = lo + up + 1
        cols = np.arange(n)[:, None] - lo + np.arange(width)[None, :]
        inside = (cols >= 0) & (cols < n)
        safe = np.where(inside, cols, 0)
        gb = np.where(inside, np.take_along_axis(gs, safe, axis=1), 0.0)
        cb = np.where(inside, np.take_along_axis(cs, safe, axis=1), 0.0)
        gmax, cmax = np.abs(gs).max(axis=1, initial=0.0), np.abs(cs).max(axis=1, initial=0.0)
        #: arg det Y(s) when the factors are not kept (``keep=False``: only :meth:`det_phase` then)
        self._arg_det: np.ndarray | None = None
        if not keep and changes is None:
            # each band row formed as the elimination reaches it: memory per
            # frequency a few band rows, not the whole band (:func:`det_phases`)
            self._arg_det = self._eliminate(self._row_maker(gb, cb, gmax, cmax), keep=False)
            return
        self._rs = _row_scales(gmax[:, None], cmax[:, None], w[None, :])  # (N, nf)
        # frequencies last throughout: every slice below is a contiguous run
        rows = self._band_rows(gb, cb)
        if changes is not None:
            self._apply(rows, changes)
        if keep:
            self._piv, self._l, self._u = self._eliminate(rows.__getitem__)
        else:
            self._arg_det = self._eliminate(rows.__getitem__, keep=False)

    def _band_rows(self, gb: np.ndarray, cb: np.ndarray) -> np.ndarray:
        """Every scaled band row ``rs·(G + s·C)``, then ``lo + 1`` rows of zeros
        past the matrix: (N + lo + 1, lo + up + 1, nf)."""
        n, lo, up, s = self._n, self._lo, self._up, self._s
        rows = np.zeros((n + lo + 1, lo + up + 1, s.size), dtype=complex)
        np.multiply(self._rs[:, None, :], gb[:, :, None], out=rows.real[:n])
        if np.any(s.real != 0.0):
            rows.real[:n] += self._rs[:, None, :] * cb[:, :, None] * s.real[None, None, :]
        np.multiply(self._rs[:, None, :] * s.imag[None, None, :], cb[:, :, None], out=rows.imag[:n])
        return rows

    def _row_maker(self, gb: np.ndarray, cb: np.ndarray, gmax: np.ndarray, cmax: np.ndarray):
        """``row(k)``: band row ``k`` as :meth:`_band_rows` forms it (the same
        operations, element by element), its row scale included; zeros past N."""
        n, s = self._n, self._s
        w = np.abs(s)
        real = bool(np.any(s.real != 0.0))
        zero = np.zeros((self._lo + self._up + 1, s.size), dtype=complex)

        def row(k: int) -> np.ndarray:
            if k >= n:
                return zero
            rs = _row_scales(gmax[k], cmax[k], w)
            out = np.empty_like(zero)
            np.multiply(rs[None, :], gb[k][:, None], out=out.real)
            if real:
                out.real += rs[None, :] * cb[k][:, None] * s.real[None, :]
            np.multiply((rs * s.imag)[None, :], cb[k][:, None], out=out.imag)
            return out

        return row

    def _apply(self, rows: np.ndarray, changes: "Changes") -> None:
        """Add each system's own entries (``changes``, in the original unknowns'
        numbering) to its band, scaled as the rest."""
        where = np.empty(self._n, dtype=np.intp)
        where[self._order] = np.arange(self._n)
        i, j = where[changes.rows], where[changes.cols]
        band = j - i + self._lo
        k = changes.system
        scale = self._rs[i, k] * self._r[changes.rows] * self._c[changes.cols]
        np.add.at(rows, (i, band, k), scale * (changes.dg + self._s[k] * changes.dc))

    @overload
    def _eliminate(self, row: Callable[[int], np.ndarray]) -> tuple[np.ndarray, np.ndarray, np.ndarray]: ...

    @overload
    def _eliminate(self, row: Callable[[int], np.ndarray], keep: Literal[False]) -> np.ndarray: ...

    def _eliminate(self, row: Callable[[int], np.ndarray], keep: bool = True):
        """The factors of the band whose row ``k`` is ``row(k)`` ((wide, nf), see
        :meth:`_band_rows`; zeros for ``k ≥ N``): ``(row interchange per step
        (N, nf), multipliers (N, lo, nf), rows of U (N, wide, nf))``; with
        ``keep=False`` only ``arg det`` (nf,) (the sum of the pivots' arguments
        and π per interchange), no factor stored."""
        n, lo, up = self._n, self._lo, self._up
        nf = self._s.size
        wide = lo + up + 1
        shape = (n, nf) if keep else (0, nf)
        piv = np.zeros(shape, dtype=np.intp)
        low = np.zeros((shape[0], lo, nf), dtype=complex)
        upp = np.zeros((shape[0], wide, nf), dtype=complex)
        arg = np.zeros(nf)
        swaps = np.zeros(nf, dtype=np.intp)
        # window row r, column t: Y[k + r, k + t] at step k
        win = np.zeros((lo + 1, wide, nf), dtype=complex)
        for r in range(lo + 1):
            win[r, :up + 1 + r] = row(r)[lo - r:]
        spare = np.zeros_like(win)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            for k in range(n):
                if lo:
                    p = np.argmax(np.abs(win[:, 0]), axis=0)
                    swap = np.flatnonzero(p)
                    if swap.size:
                        if keep:
                            piv[k, swap] = p[swap]
                        else:
                            swaps[swap] += 1
                        top = win[p[swap], :, swap]  # (len(swap), wide)
                        win[p[swap], :, swap] = win[0, :, swap]
                        win[0, :, swap] = top
                    mult = win[1:, 0] / win[0, 0]
                    win[1:, 1:] -= mult[:, None, :] * win[0, None, 1:]
                    if keep:
                        low[k] = mult
                if keep:
                    upp[k] = win[0]
                else:
                    arg += np.angle(win[0, 0])
                # slide: rows 1 … lo move up and left, the next band row enters at the bottom
                spare[:lo, :wide - 1] = win[1:, 1:]
                spare[:lo, wide - 1] = 0.0
                spare[lo] = row(k + 1 + lo)
                win, spare = spare, win
        if not keep:
            return arg + np.pi * swaps
        return piv, low, upp

    def det_phase(self) -> np.ndarray:
        """``arg det Y(s)`` (rad, not wrapped) at every frequency: the sum of
        the arguments of ``U``'s diagonal plus ``π`` per row interchange
        (``det = ±Π u_kk``; the reordering is symmetric and the scale
        factors positive, so neither changes the argument).  0 where ``Y(s)``
        is singular."""
        if self._arg_det is not None:
            return self._arg_det
        return np.angle(self._u[:, 0]).sum(axis=0) + np.pi * np.count_nonzero(self._piv, axis=0)

    def solve(self, b: np.ndarray, rows: np.ndarray | None = None) -> np.ndarray:
        """Solutions (nf, N) for a constant (N,) or per-frequency (nf, N) RHS
        (with ``rows``: at those frequencies only, as in :meth:`DirectSolver.solve`)."""
        n, lo, up = self._n, self._lo, self._up
        if rows is None:
            rs, piv, low, upp = self._rs, self._piv, self._l, self._u
        else:
            rs, piv, low, upp = self._rs[:, rows], self._piv[:, rows], self._l[:, :, rows], self._u[:, :, rows]
        nf = rs.shape[1]
        y = np.zeros((n + lo + up + 1, nf), dtype=complex)
        y[:n] = np.broadcast_to((b * self._r)[..., self._order], (nf, n)).T * rs
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            for k in range(n):
                if lo:
                    swap = np.flatnonzero(piv[k])
                    if swap.size:
                        p = k + piv[k, swap]
                        top = y[p, swap]
                        y[p, swap] = y[k, swap]
                        y[k, swap] = top
                    y[k + 1:k + 1 + lo] -= low[k] * y[k]
            y[n:] = 0.0  # back substitution in place; entries past N stay zero
            for k in range(n - 1, -1, -1):
                acc = (upp[k, 1:] * y[k + 1:k + 1 + lo + up]).sum(axis=0)
                y[k] = (y[k] - acc) / upp[k, 0]
        out = np.empty((nf, n), dtype=complex)
        out[:, self._order] = y[:n].T
        with np.errstate(over="ignore", invalid="ignore"):
            return out * self._c


def _row_scales(gmax, cmax, w):
    """Per-frequency row scales: the powers of two nearest ``1 / (gmax + |s|·cmax)``
    (1 where that sum is 0); ``gmax``, ``cmax`` and ``w = |s|`` broadcast together."""
    rs = gmax + cmax * w
    with np.errstate(divide="ignore"):
        return np.exp2(-np.round(np.log2(np.where(rs > 0.0, rs, 1.0))))


def _equilibrate_entries(rows: np.ndarray, cols: np.ndarray, values: np.ndarray, n: int,
                         sweeps: int = 6) -> tuple[np.ndarray, np.ndarray]:
    """:func:`_equilibrate` on a matrix given by its non-zero entries (same result)."""
    r = np.ones(n)
    c = np.ones(n)
    for _ in range(sweeps):
        scaled = values * r[rows] * c[cols]
        rr = np.zeros(n)
        cc = np.zeros(n)
        np.maximum.at(rr, rows, scaled)
        np.maximum.at(cc, cols, scaled)
        rr = np.sqrt(rr)
        cc = np.sqrt(cc)
        rr[rr == 0.0] = 1.0
        cc[cc == 0.0] = 1.0
        r /= rr
        c /= cc
    return np.exp2(np.round(np.log2(r))), np.exp2(np.round(np.log2(c)))


def _band_plan(pattern: np.ndarray, n_freq: int) -> tuple[np.ndarray, int, int] | None:
    """``(reverse Cuthill–McKee order, lower, upper bandwidth)`` of the non-zero
    ``pattern`` when the banded solve suits it at ``n_freq`` frequencies — the
    reordered band narrow, (lower + 1)·(lower + upper + 1) at most
    :data:`BAND_FRACTION` of N², so that its work per frequency is a small
    part of the dense elimination's, and its factors within
    :data:`BAND_BYTES` — else None."""
    n = pattern.shape[0]
    if n == 0:
        return None
    order = _band_order(pattern)
    lo, up = _bandwidths(pattern[np.ix_(order, order)])
    narrow = (lo + 1) * (lo + up + 1) <= BAND_FRACTION * n * n
    if narrow and band_factor_bytes(n, n_freq, lo, up) <= BAND_BYTES:
        return order, lo, up
    return None


def band_factor_bytes(n_unknowns: int, n_freq: int, lower: int, upper: int) -> int:
    """Bytes :class:`BandSolver` keeps for its factors: per frequency and
    unknown, ``lower`` multipliers and ``lower + upper + 1`` entries of ``U``
    (complex), a pivot index and a row scale (8 bytes each)."""
    return n_freq * n_unknowns * ((2 * lower + upper + 1) * 16 + 16)


#: the determinants of :func:`det_phases` are formed in blocks of frequencies
#: whose elimination windows and band rows in flight take at most this many bytes
DET_BLOCK_BYTES = 8 * 2**20


def det_phases(g: np.ndarray, c: np.ndarray, s: np.ndarray) -> np.ndarray | None:
    """``arg det (G + s·C)`` (rad, not wrapped) at every ``s`` by banded LU
    factorisations (:meth:`BandSolver.det_phase`, no factors kept), in blocks
    whose band rows take at most :data:`DET_BLOCK_BYTES`; None when the
    reordered band is not narrow (then a dense or sparse LU per frequency is
    the better way)."""
    n = g.shape[0]
    plan = _band_plan((g != 0.0) | (c != 0.0), 1)
    if plan is None:
        return None
    order, lo, up = plan
    # per frequency: the window and its spare ((lo + 1) rows each), the next
    # band row and the elimination's temporaries (about four rows more)
    block = max(1, DET_BLOCK_BYTES // ((2 * (lo + 1) + 5) * (lo + up + 1) * 16))
    out = np.empty(s.size)
    for start in range(0, s.size, block):
        part = s[start:start + block]
        out[start:start + part.size] = BandSolver(g, c, part, order, keep=False).det_phase()
    return out


def direct_solver(g: np.ndarray, c: np.ndarray, s: np.ndarray):
    """The direct solver for this matrix: :class:`BandSolver` when
    :func:`_band_plan` accepts its pattern at more than :data:`DIRECT_BELOW`
    frequencies; else dense below :data:`SPARSE_FROM` unknowns, sparse from
    there on."""
    n = g.shape[0]
    if n and s.size > DIRECT_BELOW:
        plan = _band_plan((g != 0.0) | (c != 0.0), s.size)
        if plan is not None:
            return BandSolver(g, c, s, plan[0])
    return SparseSolver(g, c, s) if n >= SPARSE_FROM else DirectSolver(g, c, s)


def solve_each_without(mna: Mna, s: complex | np.ndarray, removals: Sequence[Iterable[Stamp]],
                       b: np.ndarray) -> np.ndarray:
    """``x[k]`` (K, N) solving ``Y_k(s_k)·x[k] = b[k]``, ``Y_k`` the matrix of
    ``mna.without(removals[k])`` and ``s_k`` one ``s`` for all or ``s[k]``,
    refined as :func:`solve` refines a direct solve.

    When the band of ``G`` and ``C`` is narrow all ``K`` systems are one
    :class:`BandSolver` (the removals are :func:`removal_changes` to the
    base band: no matrix is stamped again, and the work is linear in ``K·N``);
    otherwise each is stamped and solved on its own.
    """
    removals = [tuple(r) for r in removals]
    b = np.asarray(b, dtype=float)
    k = len(removals)
    if k == 0:
        return np.zeros((0, mna.size), dtype=complex)
    changes = removal_changes(mna, removals)
    pattern = (mna.g != 0.0) | (mna.c != 0.0)
    pattern[changes.rows, changes.cols] = True
    plan = _band_plan(pattern, k)
    sv = np.broadcast_to(np.asarray(s, dtype=complex), (k,)).copy()
    if plan is None:
        # each distinct removal stamped once, its systems solved together
        same: dict[tuple[str, ...], list[int]] = {}
        for i, removed in enumerate(removals):
            same.setdefault(tuple(st.name for st in removed), []).append(i)
        out = np.empty((k, mna.size), dtype=complex)
        for members in same.values():
            at = np.array(members)
            m = mna.without(removals[at[0]])
            out[at] = _refine_all(direct_solver(m.g, m.c, sv[at]), _Checker(m, sv[at], b[at]), b[at], accept=None)
        return out
    solver = BandSolver(mna.g, mna.c, sv, plan[0], changes)
    return _refine_all(solver, _Checker(mna, sv, b, changes), b, accept=None)


def solve(mna: Mna, s: np.ndarray, b: np.ndarray, method: str = "auto") -> tuple[np.ndarray, str]:
    """Solve ``Y(s)·x = b`` at every ``s``; returns ``(x (nf, N), method used)``.

    ``method``: ``"modal"``, ``"direct"`` or ``"auto"`` (direct for at most
    :data:`DIRECT_BELOW` frequencies, otherwise modal with refinement,
    falling back to direct when the modal result is not accurate enough).

    The modal result is refined until its componentwise backward error is
    at most :data:`REFINE_TOL` (or stops improving) and accepted when it is
    at most :data:`BACKWARD_TOL`.
    """
    if method not in ("auto", "modal", "direct"):
        raise ValueError(f"method must be 'auto', 'modal' or 'direct', not {method!r}")
    check = _Checker(mna, s, b)
    if method == "direct" or (method == "auto" and (s.size <= DIRECT_BELOW or mna.size > MODAL_UP_TO)):
        solver = direct_solver(mna.g, mna.c, s)
        return _refine_all(solver, check, b, accept=None), _name(solver)
    try:
        solver = ModalSolver(mna.g, mna.c, s)
    except _Unsuitable:
        solver = None
    if solver is not None:
        x = _refine_all(solver, check, b)
        if x is not None:
            return x, "modal"
    if method == "modal":
        raise AnalysisError(error(
            "E506", "the modal frequency solve is inaccurate for this circuit",
            hint="use method='direct'"))
    solver = direct_solver(mna.g, mna.c, s)
    return _refine_all(solver, check, b, accept=None), _name(solver)


def _name(solver) -> str:
    """The method's name as :class:`Response` records it ("direct" or "direct (sparse)")."""
    if isinstance(solver, SparseSolver):
        return "direct (sparse)"
    return "direct (banded)" if isinstance(solver, BandSolver) else "direct"


def solve_entry(mna: Mna, s: np.ndarray, b: np.ndarray, index: int,
                method: str = "auto") -> np.ndarray:
    """Only ``x[:, index]`` of ``Y(s)·x = b`` (nf,), cheaper than :func:`solve`.

    The modal result is refined until the last correction of this entry is
    below :data:`WATCH_TOL` of its value at every frequency (the other
    unknowns may stay less accurate); otherwise, or for few frequencies, the
    direct solve is used.
    """
    if method not in ("auto", "modal", "direct"):
        raise ValueError(f"method must be 'auto', 'modal' or 'direct', not {method!r}")
    if not (method == "direct" or (method == "auto" and (s.size <= DIRECT_BELOW or mna.size > MODAL_UP_TO))):
        try:
            solver = ModalSolver(mna.g, mna.c, s)
        except _Unsuitable:
            solver = None
        if solver is not None:
            value = _refine_entry(solver, mna, s, b, index)
            if value is not None:
                return value
        if method == "modal":
            raise AnalysisError(error(
                "E506", "the modal frequency solve is inaccurate for this circuit",
                hint="use method='direct'"))
    x = _refine_all(direct_solver(mna.g, mna.c, s), _Checker(mna, s, b), b, accept=None)
    return x[:, index]


def _refine_entry(solver: ModalSolver, mna: Mna, s: np.ndarray, b: np.ndarray,
                  index: int) -> np.ndarray | None:
    # the residual is formed from x itself: forming it from the modal
    # coordinates would carry the eigenvector conditioning into it
    check = _Checker(mna, s, b)
    v = solver.row(index)
    x = solver.solve(b)
    for _ in range(MAX_REFINE):
        dz = solver.coords(check.residual(x))
        dx = solver.full(dz)
        x = x + dx
        value = x[:, index]
        with np.errstate(divide="ignore", invalid="ignore"):
            rel = np.abs(dz @ v) / np.abs(value)
        if np.all(np.isfinite(value)) and np.all(rel <= WATCH_TOL):
            return value
    return None


@overload
def _refine_all(solver, check: "_Checker", b: np.ndarray, *, accept: None) -> np.ndarray: ...


@overload
def _refine_all(solver, check: "_Checker", b: np.ndarray, *, accept: float = ...) -> np.ndarray | None: ...


def _refine_all(solver, check: "_Checker", b: np.ndarray, *,
                accept: float | None = BACKWARD_TOL) -> np.ndarray | None:
    """Iterative refinement (from memory of Higham, "Accuracy and Stability of
    Numerical Algorithms", ch. 12): ``x ← x + solve(b − Y·x)`` at each frequency
    while its componentwise backward error is above :data:`REFINE_TOL` and
    improves (frequencies are independent systems: one already at rounding
    level is not solved again); None unless the largest ends ≤ ``accept``
    (``accept=None``: the result is kept whatever its backward error)."""
    x = solver.solve(b)
    if isinstance(solver, ModalSolver):
        # the modal solve is never at rounding level by itself: one correction
        # step always pays, so skip measuring the first backward error
        x = x + solver.solve(check.residual(x))
    r, berr = check.each(x)
    todo = np.flatnonzero(berr > REFINE_TOL)
    for _ in range(MAX_REFINE):
        if todo.size == 0:
            break
        x_new = x[todo] + solver.solve(r[todo], todo)
        r_new, berr_new = check.each(x_new, todo)
        better = berr_new < berr[todo]
        keep = todo[better]
        x[keep], r[keep], berr[keep] = x_new[better], r_new[better], berr_new[better]
        todo = keep[berr[keep] > REFINE_TOL]
    worst = float(berr.max()) if berr.size else 0.0
    return x if accept is None or worst <= accept else None


class _Checker:
    """Residual ``b − Y(s)·x`` and componentwise backward error of ``x`` (nf, N)."""

    def __init__(self, mna: Mna, s: np.ndarray, b: np.ndarray, changes: Changes | None = None):
        n = mna.size
        self._n = n
        #: with ``changes``, "frequency" k is system k of the stack (see :class:`Changes`)
        self._patch = None if changes is None else _RowPatch(mna, changes)
        self._s = s
        self._abs_s = np.abs(s)[:, None]
        self._b = b
        self._abs_b = np.abs(b)
        # one product for G·x and C·x together: a dense GEMM, or from SPARSE_FROM
        # unknowns on a sparse one (its cost linear in the number of parts)
        if n >= SPARSE_FROM:
            self._gc = _stacked_csr(mna.g, mna.c)  # (2N, N) = [G; C]: both @ x.T
            self._abs_gc = abs(self._gc)
        else:
            self._gc = np.hstack([mna.g.T, mna.c.T])
            self._abs_gc = np.abs(self._gc)

    def _product(self, m, x: np.ndarray) -> np.ndarray:
        """``x @ [Gᵀ Cᵀ]`` (nf, 2N) for the dense or the sparse form of ``m``."""
        if isinstance(m, np.ndarray):
            return x @ m
        return (m @ x.T).T

    def residual(self, x: np.ndarray, rows: np.ndarray | None = None) -> np.ndarray:
        """``b − G·x − s·C·x`` for every frequency (nf, N), or for ``x`` at the
        frequencies ``rows`` only."""
        n = self._n
        s = self._s if rows is None else self._s[rows]
        b = self._b if rows is None or self._b.ndim == 1 else self._b[rows]
        both = self._product(self._gc, x)
        r = b - both[:, :n] - both[:, n:] * s[:, None]
        if self._patch is not None:
            at, i, product, _ = self._patch.rows_times(x, self._s, rows)
            r[at, i] = (self._b[..., i] if self._b.ndim == 1 else self._b[self._patch.system_of(rows, at), i]) \
                - product
        return r

    def each(self, x: np.ndarray, rows: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
        """``(residual, componentwise backward error per frequency)`` (inf where
        ``x`` is not finite); with ``rows``, ``x`` is at those frequencies only."""
        n = self._n
        abs_s = self._abs_s if rows is None else self._abs_s[rows]
        abs_b = self._abs_b if rows is None or self._abs_b.ndim == 1 else self._abs_b[rows]
        finite = np.all(np.isfinite(x), axis=1)
        xf = np.where(finite[:, None], x, 0.0)
        r = self.residual(xf, rows)
        mags = self._product(self._abs_gc, np.abs(xf))
        scale = mags[:, :n] + mags[:, n:] * abs_s + abs_b
        if self._patch is not None:
            at, i, _, mag = self._patch.rows_times(xf, self._s, rows)
            scale[at, i] = mag + abs_b[..., i] if abs_b.ndim == 1 else mag + abs_b[at, i]
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = np.where(scale > 0.0, np.abs(r) / scale, 0.0)
        berr = ratio.max(axis=1, initial=0.0)
        berr[~finite] = np.inf
        return r, berr

    def __call__(self, x: np.ndarray) -> tuple[np.ndarray, float]:
        """``(residual, largest componentwise backward error)``; inf if ``x`` is not finite."""
        if not np.all(np.isfinite(x)):
            return np.zeros_like(x), np.inf
        r, berr = self.each(x)
        return r, float(berr.max()) if berr.size else 0.0


def _stacked_csr(g: np.ndarray, c: np.ndarray):
    """``[G; C]`` (2N, N) as a CSR matrix of its non-zero entries, built from
    their positions (row by row, columns increasing: the canonical order a
    conversion from the dense stack gives) without forming that stack."""
    from scipy.sparse import csr_matrix

    n = g.shape[0]
    gi, gj = nonzero_positions(g != 0.0)
    ci, cj = nonzero_positions(c != 0.0)
    rows = np.r_[gi, ci + n]
    indptr = np.zeros(2 * n + 1, dtype=np.intp)
    np.cumsum(np.bincount(rows, minlength=2 * n), out=indptr[1:])
    return csr_matrix((np.r_[g[gi, gj], c[ci, cj]], np.r_[gj, cj], indptr), shape=(2 * n, n))


class _RowPatch:
    """The rows of a stack of systems (:class:`Changes`) that differ from
    ``G + s·C``, each with its own entries: their products with ``x`` are formed
    from the system's own matrix, so that the residual and its scale carry no
    rounding from terms of removed elements (a removed transconductance times
    a large voltage would otherwise swamp the residual of the row)."""

    def __init__(self, mna: Mna, changes: Changes):
        n = mna.size
        pair_key, pair_of = np.unique(changes.system * n + changes.rows, return_inverse=True)
        #: (system, row) of every changed row
        self.system, self.row = pair_key // n, pair_key % n
        pattern = (mna.g != 0.0) | (mna.c != 0.0)
        rows_at, cols = np.nonzero(pattern[self.row])  # the base entries of each changed row
        pair = np.r_[rows_at, pair_of]
        col = np.r_[cols, changes.cols]
        gv = np.r_[mna.g[self.row[rows_at], cols], changes.dg]
        cv = np.r_[mna.c[self.row[rows_at], cols], changes.dc]
        # one entry per (changed row, column): the base entry plus its change
        key, where = np.unique(pair * n + col, return_inverse=True)
        self.pair, self.col = key // n, key % n
        self.g = np.zeros(key.size)
        self.c = np.zeros(key.size)
        np.add.at(self.g, where, gv)
        np.add.at(self.c, where, cv)

    def system_of(self, rows: np.ndarray | None, at: np.ndarray) -> np.ndarray:
        """The system number of each position ``at`` of an ``x`` at the systems ``rows``."""
        return at if rows is None else rows[at]

    def rows_times(self, x: np.ndarray, s: np.ndarray, rows: np.ndarray | None
                   ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """``(position in x, row, (Y_k·x)[row], (|G_k| + |s|·|C_k|)·|x| [row])`` of every
        changed row whose system is in ``rows`` (all when None)."""
        if rows is None:
            pos = self.system
        else:
            where = np.full(s.size, -1, dtype=np.intp)
            where[rows] = np.arange(rows.size)
            pos = where[self.system]
        keep = pos >= 0
        e = keep[self.pair]
        pair = self.pair[e]
        sys_e = self.system[pair]
        xe = x[pos[pair], self.col[e]]
        value = (self.g[e] + s[sys_e] * self.c[e]) * xe
        mag = (np.abs(self.g[e]) + np.abs(s[sys_e]) * np.abs(self.c[e])) * np.abs(xe)
        total = np.zeros(self.system.size, dtype=complex)
        size = np.zeros(self.system.size)
        np.add.at(total, pair, value)
        np.add.at(size, pair, mag)
        return pos[keep], self.row[keep], total[keep], size[keep]


def backward_error(mna: Mna, s: np.ndarray, x: np.ndarray, b: np.ndarray) -> float:
    """Largest componentwise backward error of ``x`` (nf, N) for ``Y(s)·x = b``.

    ``max_i |r_i| / (|G|·|x| + |s|·|C|·|x| + |b|)_i`` over all frequencies
    (Oettli–Prager; from memory of N. J. Higham, "Accuracy and Stability of
    Numerical Algorithms"): ``x`` is the exact solution for a network whose
    every matrix entry — every part value — is perturbed by at most this
    relative amount.  Infinite when ``x`` is not finite.
    """
    return _Checker(mna, s, b)(x)[1]


# -- derived quantities -------------------------------------------------------


def current_into(stamp: Stamp, node: int, x: np.ndarray, s: np.ndarray) -> np.ndarray:
    """Current (A) flowing from ``stamp`` into ``node`` for solutions ``x`` (nf, N)."""

    def v(i):
        return x[:, i] if i >= 0 else np.zeros(x.shape[0], dtype=complex)

    sign = 1.0 if stamp.a == node else -1.0  # +1: node is terminal a
    other = stamp.b if stamp.a == node else stamp.a
    if stamp.kind == "R":
        return stamp.value * (v(other) - v(node))
    if stamp.kind == "C":
        return s * stamp.value * (v(other) - v(node))
    if stamp.kind in ("L", "V"):
        # the branch current leaves terminal a into the element, enters at b
        return -sign * x[:, stamp.branch]
    if stamp.kind == "G":
        return -sign * stamp.value * (v(stamp.cp) - v(stamp.cn))
    raise ValueError(f"unknown element kind {stamp.kind!r}")
