"""Nonlinear nodal (MNA) DC solve of a :class:`~chain.circuit.Circuit`.

The unknowns are the voltages of every non-ground node and the currents of
every *voltage branch* (supply and signal sources, inductors, held
capacitors).  The equations are Kirchhoff's current law at every node and the
constraint ``v(pos) - v(neg) = E`` of every voltage branch (modified nodal
analysis).  The linear part is stamped once when the circuit is compiled; the
triodes are evaluated together, vectorised, on every Newton iteration.

DC rules
--------
* resistors conduct; capacitors are open, except the ones named in
  ``held_caps``, which become ideal sources holding the given voltage
  ``v(a) - v(b)`` (used by the large-signal sweep: coupling and bypass
  capacitors keep their DC charge while the input moves);
* inductors are shorts (0 V branches);
* supply sources sit at their volts, the signal source at ``signal_v``;
* each triode draws its plate current from plate to cathode and its grid
  current from grid to cathode (cathode current = Ip + Ig).

gmin
----
Every node has a conductance ``gmin_s`` (default 1e-12 S, see
:class:`~chain.dc.result.SolveOptions`) to ground.  It makes nodes that are
reached only through capacitors (a coupling node at DC) solvable — they settle
at 0 V — and keeps the Jacobian regular when a triode is cut off.  At 300 V
it carries 0.3 nA, far below anything a report shows.

Solving
-------
1. Start: the caller's guess (continuation), or a stage-by-stage guess: each
   triode, in signal order, is put on its own exact DC load line and bias
   line — the linear network seen from its plate, grid and cathode with all
   other triodes held at their present currents — for a few Gauss–Seidel
   sweeps.  Rails come out at their loaded voltage, cathodes above their
   grids, cathode followers' cathodes just above their grids.
2. Damped Newton: each node-voltage step clipped to ±``max_step_v``
   (default 50 V); steps whose model evaluation is not finite are rejected.
3. Fallbacks when Newton fails: the stage-by-stage guess (when a caller's
   guess was used, after at most 40 iterations from it), Newton with a line
   search instead of clipping, source stepping (every source ramped up from
   0 V), gmin stepping (a large gmin reduced decade by decade), then
   ``scipy.optimize.root``.
4. The residual of every node equation (A) and every branch equation (V) is
   checked at the returned point; failure raises
   :class:`~chain.errors.DcConvergenceError` naming the likely stage.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Literal, Mapping, cast, overload

import logging
import numpy as np

from chain.circuit import GROUND, TRIODE_KCL, Circuit, Unions
from chain.dc.result import OperatingPoint, SolveOptions
from chain.errors import DcConvergenceError, error
from chain.tubes import (
    TriodeModel,
    grid_current_and_derivative,
    plate_current_and_derivatives,
    small_signal,
)

__all__ = [
    "NetworkState",
    "NetworkSystem",
    "LoadLineCoefficients",
    "compile_network",
    "solve_network",
]

#: rounding allowance of a node equation, relative to the sum of the
#: magnitudes of its terms, on top of the absolute current tolerance
_ROUNDING_RTOL = 256 * np.finfo(float).eps
#: weight (S) turning branch-equation residuals (V) into currents in the
#: line-search merit function
_BRANCH_WEIGHT_S = 1e-3
#: Armijo sufficient-decrease constant of the line search
_ARMIJO = 1e-4
#: halvings tried by the line search before a step is taken anyway
_MAX_HALVINGS = 12
#: Gauss–Seidel sweeps of the stage-by-stage starting guess
_GUESS_SWEEPS = 6
#: progress of slow steps (which fallback runs and why); the command line
#: shows these on standard error once a command has run for a second
PROGRESS = logging.getLogger("chain.progress")
#: Newton iterations allowed from a caller's guess before the stage-by-stage guess takes over
_GUESS_MAX_ITER = 40
#: unknowns from which a system is solved by sparse LU instead of dense LU: one Newton
#: step of a cascade's headroom network took about the same time both ways near 100
#: unknowns (one BLAS thread), dense being faster below and sparse above
SPARSE_MIN_SIZE = 120
#: right-hand sides solved together by :meth:`NetworkSystem.solve_jacobian` in the sparse
#: form, so that its work space stays linear in the size
_SOLVE_BLOCK = 32


@dataclass(frozen=True, slots=True)
class NetworkState:
    """One solved DC state of a network.

    Attributes
    ----------
    node_v : Mapping[str, float]
        Every node voltage, V (ground excluded).
    source_i_a : Mapping[str, float]
        Per voltage source, the current it delivers out of its ``pos``
        terminal into the circuit, A (positive for a supply feeding loads).
    branch_i_a : Mapping[str, float]
        Per inductor and held capacitor, the current through it from its
        ``a`` to its ``b`` terminal, A (0 for parts in :attr:`NetworkSystem.dropped`).
    iterations : int
        Newton iterations spent, all attempts together.
    max_residual_a : float
        Largest absolute node-current residual at the returned point, A.
    signal_v : float
        Signal-source voltage of this state, V.
    x : numpy.ndarray
        The raw unknown vector (node voltages, then branch currents); pass it
        back as ``guess`` to :meth:`NetworkSystem.solve` for continuation.
    """

    node_v: Mapping[str, float]
    source_i_a: Mapping[str, float]
    branch_i_a: Mapping[str, float]
    iterations: int
    max_residual_a: float
    signal_v: float
    x: np.ndarray = field(compare=False, repr=False)


@dataclass(frozen=True, slots=True)
class LoadLineCoefficients:
    """A triode's exact DC load and bias lines in the solved network.

    With every other triode held at its solved currents (and this triode's
    grid current held too) the linear network gives

        Vpk(Ip) = vpk0_v + dvpk_dip_ohm · Ip
        Vgk(Ip) = vgk0_v + dvgk_dip_ohm · Ip

    For a lone self-biased stage these are the textbook lines
    ``Vpk = Vb − Ip·(RL + Rk)`` and ``Vgk = Vg − Ip·Rk``.
    """

    triode: str
    #: plate–cathode voltage at zero plate current, V
    vpk0_v: float
    #: slope of the load line, ohm (negative: −(RL + Rk) for a simple stage)
    dvpk_dip_ohm: float
    #: grid–cathode voltage at zero plate current, V
    vgk0_v: float
    #: slope of the bias line, ohm (−Rk for a simple stage)
    dvgk_dip_ohm: float


#: order of the voltage branches in the unknown vector: (kind, is the signal source)
_BRANCH_RANK = {("source", False): 0, ("source", True): 1, ("inductor", False): 2, ("held", False): 3}


class _DcStamper:
    """Collects what the elements stamp for a DC solve (see :class:`chain.circuit.Stamper`).

    Conductances are kept as ``(i, j, g)`` with node indices (``-1`` is
    ground); inductors become 0 V branches; capacitors are open unless held,
    then a branch at the held voltage; sources are branches at their volts
    (the signal source at 0 V, set per solve); triodes are evaluated
    separately, vectorised, by the system.
    """

    def __init__(self, circuit: Circuit, held: Mapping[str, float], index: Mapping[str, int]):
        self.circuit = circuit
        self.held = held
        self.index = index
        self.conductances: list[tuple[int, int, float]] = []
        #: (name, kind, pos, neg, volts, is_signal)
        self.branches: list[tuple[str, str, str, str, float, bool]] = []

    def conductance(self, part, a: str, b: str, g_s: float) -> None:
        ohms = getattr(part, "ohms", 1.0 / g_s if g_s else np.inf)
        if not (np.isfinite(ohms) and ohms > 0.0):
            raise DcConvergenceError(error(
                "E403", f"resistor {part.name} has a non-positive or non-finite value ({ohms} ohm)",
                subject=self.circuit.stage_of_node(a)))
        self.conductances.append((self.index[a], self.index[b], g_s))

    def capacitance(self, part, a: str, b: str, c_f: float) -> None:
        if part.name in self.held:
            self.branches.append((part.name, "held", a, b, self.held[part.name], False))

    def inductance(self, part, a: str, b: str, l_h: float) -> None:
        self.branches.append((part.name, "inductor", a, b, 0.0, False))

    def voltage_source(self, part, pos: str, neg: str) -> None:
        signal = part.role == "signal"
        self.branches.append((part.name, "source", pos, neg, 0.0 if signal else float(part.volts), signal))

    def transconductance(self, part, a, b, ctrl_pos, ctrl_neg, gm_s) -> None:
        raise TypeError(f"{part.name}: a transconductance has no place in the DC solve of a circuit")

    def triode(self, part) -> None:
        pass  # evaluated vectorised by NetworkSystem (TRIODE_KCL)


class NetworkSystem:
    """A circuit compiled for repeated DC solves.

    Build it with :func:`compile_network`.  The linear part (resistors,
    gmin, voltage-branch incidence) is stamped once into a matrix; the
    triodes are evaluated vectorised (one call per distinct tube model) and
    scattered into residual and Jacobian through precomputed index arrays.

    Small systems keep that matrix dense and solve each Newton step by dense
    LU (LAPACK).  From :data:`SPARSE_MIN_SIZE` unknowns up (long chains) it is
    kept in compressed-column form over the Jacobian's fixed pattern and each
    step is solved by sparse LU (SuperLU, partial pivoting, column order by
    approximate minimum degree: scipy.sparse.linalg.splu).  A chain's nodal
    matrix has a few entries per unknown, so a Newton step then costs time
    and memory linear in the size instead of the cube and square; the supply
    node, shared by every stage's rail, gives no band ordering a narrow band,
    which is why it is a general sparse LU and not a band solve.

    Attributes
    ----------
    circuit : Circuit
    held_caps : Mapping[str, float]
        Held capacitor voltages, V (a minus b).
    nodes : tuple[str, ...]
        Node order of the unknown vector.
    branches : tuple[str, ...]
        Voltage-branch names (sources, inductors, held capacitors), in the
        order of their currents in the unknown vector after the nodes.
    dropped : tuple[str, ...]
        Inductors or held capacitors left out because they would close a loop
        of voltage branches (their voltage is already fixed by the others).
    triode_names : tuple[str, ...]
        Triodes in :attr:`Circuit.triodes` order.
    size : int
        Length of the unknown vector.
    sparse : bool
        True when the linear algebra is sparse (see above).
    """

    def __init__(self, circuit: Circuit, *, held_caps: Mapping[str, float] | None = None,
                 gmin_s: float = 1e-12, sparse: bool | None = None):
        held = {name: float(v) for name, v in (held_caps or {}).items()}
        unknown = sorted(set(held) - {c.name for c in circuit.capacitors})
        if unknown:
            raise ValueError(f"held_caps names no capacitor of the circuit: {', '.join(unknown)}")
        self.circuit = circuit
        self.held_caps = held
        self.gmin_s = float(gmin_s)
        self.nodes = circuit.nodes()
        self._n = len(self.nodes)
        #: voltage index of each node; ground is the padded index n
        self._vindex = {name: i for i, name in enumerate(self.nodes)}
        self._vindex[GROUND] = -1
        self._stamp(circuit, held)
        self.size = self._n + len(self.branches)
        self.sparse = self.size >= SPARSE_MIN_SIZE if sparse is None else bool(sparse)
        self._compile_triodes(circuit)
        #: the linear matrix: a dense array, or a scipy CSC matrix over the Jacobian's pattern
        self._a: Any = self._stamp_sparse() if self.sparse else self._stamp_linear()
        self._a_abs: Any = abs(self._a)
        self._z: np.ndarray | None = None
        self._lin_lu: Any = None
        self._d: np.ndarray | None = None
        self._dvpk: np.ndarray | None = None
        self._dvgk: np.ndarray | None = None

    # ------------------------------------------------------------- compiling
    def _stamp(self, circuit: Circuit, held: Mapping[str, float]) -> None:
        """Let every element stamp itself; order the voltage branches.

        Branches (supplies first, then the signal source, inductors and held
        capacitors) that would close a loop of voltage branches are dropped —
        their voltage is already fixed by the others — except sources, which
        are an error then.
        """
        st = _DcStamper(circuit, held, self._vindex)
        for el in circuit.elements:
            el.stamp(st)
        n = self._n
        unions = Unions(n + 1)
        names: list[str] = []
        kinds: list[str] = []
        ends: list[tuple[int, int]] = []
        volts: list[float] = []
        dropped: list[str] = []
        self._signal_branch = -1
        for name, kind, pos, neg, e_v, signal in sorted(st.branches, key=lambda b: _BRANCH_RANK[b[1], b[5]]):
            ipos, ineg = self._vindex[pos], self._vindex[neg]
            if not unions.union(ipos % (n + 1), ineg % (n + 1)):
                if kind == "source":
                    raise DcConvergenceError(error(
                        "E402", f"voltage source {name} closes a loop of sources and inductors between "
                        f"nodes '{pos}' and '{neg}': the DC problem has no unique solution",
                        subject=circuit.stage_of_node(pos)))
                dropped.append(name)
                continue
            if signal:
                self._signal_branch = len(names)
            names.append(name)
            kinds.append(kind)
            ends.append((ipos, ineg))
            volts.append(e_v)
        self.branches = tuple(names)
        self._branch_kinds = tuple(kinds)
        self._branch_ends = tuple(ends)
        self._e = np.array(volts, dtype=float)
        self.dropped = tuple(dropped)
        self._conductances = tuple(st.conductances)

    def _stamp_linear(self) -> np.ndarray:
        """Dense MNA matrix of the stamped conductances, gmin and voltage-branch incidence."""
        n, size = self._n, self.size
        a = np.zeros((size, size))
        for i, j, g in self._conductances:
            if i >= 0:
                a[i, i] += g
            if j >= 0:
                a[j, j] += g
            if i >= 0 and j >= 0:
                a[i, j] -= g
                a[j, i] -= g
        a[np.arange(n), np.arange(n)] += self.gmin_s
        # branch current y_j flows through the branch from pos to neg:
        # KCL at pos gains +y_j (leaving), at neg -y_j; row n+j: v_pos - v_neg = E_j
        for j, (ipos, ineg) in enumerate(self._branch_ends):
            for node, sign in ((ipos, 1.0), (ineg, -1.0)):
                if node >= 0:
                    a[node, n + j] += sign
                    a[n + j, node] += sign
        return a

    def _stamp_sparse(self) -> Any:
        """The linear matrix in compressed-column form (scipy CSC) over the
        Jacobian's whole pattern: the linear entries as :meth:`_stamp_linear`
        sums them, every node's diagonal, and each triode entry as an explicit
        zero.  Sets ``_j_slot`` (each triode entry's place in the data array)
        and ``_diag_slot`` (each node diagonal's)."""
        from scipy.sparse import csc_matrix

        n, size = self._n, self.size
        rows: list[int] = []
        cols: list[int] = []
        vals: list[float] = []
        for i, j, g in self._conductances:
            for r, c, v in ((i, i, g), (j, j, g), (i, j, -g), (j, i, -g)):
                if r >= 0 and c >= 0:
                    rows.append(r)
                    cols.append(c)
                    vals.append(v)
        for j, (ipos, ineg) in enumerate(self._branch_ends):
            for node, sign in ((ipos, 1.0), (ineg, -1.0)):
                if node >= 0:
                    rows += [node, n + j]
                    cols += [n + j, node]
                    vals += [sign, sign]
        diag = np.arange(n, dtype=np.intp)
        all_rows = np.concatenate([np.array(rows, dtype=np.intp), diag, self._j_pos // size])
        all_cols = np.concatenate([np.array(cols, dtype=np.intp), diag, self._j_pos % size])
        values = np.concatenate([np.array(vals, dtype=float), np.full(n, self.gmin_s), np.zeros(self._j_pos.size)])
        key = all_cols.astype(np.int64) * size + all_rows
        uniq, slot = np.unique(key, return_inverse=True)
        slot = slot.reshape(-1)
        data = np.bincount(slot, weights=values, minlength=uniq.size)
        indptr = np.concatenate([[0], np.cumsum(np.bincount(uniq // size, minlength=size))])
        first = len(rows)
        self._diag_slot = slot[first:first + n]
        self._j_slot = slot[first + n:]
        return csc_matrix((data, (uniq % size).astype(np.int32), indptr.astype(np.int32)), shape=(size, size))

    def _with_data(self, data: np.ndarray) -> Any:
        """A CSC matrix of the system's pattern holding ``data``."""
        from scipy.sparse import csc_matrix

        return csc_matrix((data, self._a.indices, self._a.indptr), shape=self._a.shape)

    def _dense(self, m: Any) -> np.ndarray:
        """``m`` as a dense array."""
        return m.toarray() if self.sparse else m

    def _linear_solve(self, m: Any, rhs: np.ndarray) -> np.ndarray:
        """``m⁻¹·rhs`` by LU (dense LAPACK or SuperLU, see the class docstring).

        Raises
        ------
        numpy.linalg.LinAlgError
            When ``m`` is singular.
        """
        if not self.sparse:
            return np.linalg.solve(m, rhs)
        return self._factor(m).solve(rhs)

    def _factor(self, m: Any) -> Any:
        """SuperLU factors of a sparse ``m`` (LinAlgError when singular or not finite)."""
        from scipy.sparse.linalg import splu

        if not np.all(np.isfinite(m.data)):
            raise np.linalg.LinAlgError("matrix has entries that are not finite")
        try:
            return splu(m)
        except RuntimeError as exc:  # SuperLU: "Factor is exactly singular"
            raise np.linalg.LinAlgError(str(exc)) from None

    def _compile_triodes(self, circuit: Circuit) -> None:
        """Index arrays for the vectorised triode evaluation and scatter."""
        size = self.size
        tri = circuit.triodes
        self.triode_names = tuple(t.name for t in tri)
        self._models = tuple(t.model for t in tri)
        self._p = np.array([self._vindex[t.plate] for t in tri], dtype=np.intp)
        self._g = np.array([self._vindex[t.grid] for t in tri], dtype=np.intp)
        self._k = np.array([self._vindex[t.cathode] for t in tri], dtype=np.intp)
        groups: dict[int, tuple[TriodeModel, list[int]]] = {}
        for i, t in enumerate(tri):
            groups.setdefault(id(t.model), (t.model, []))[1].append(i)
        self._groups = tuple((model, np.array(ix, dtype=np.intp)) for model, ix in groups.values())
        self._stacked = _stacked_model(self._models) if len(self._groups) > 1 else None

        # the triode's KCL pattern (chain.circuit.TRIODE_KCL) scattered by node index
        f_rows, f_tri, f_ci, f_cg = [], [], [], []
        j_pos, j_tri, j_c = [], [], []
        for k, one in enumerate(tri):
            for pin, ci, cg, cols in TRIODE_KCL:
                row = self._vindex[one.pin(pin)]
                if row < 0:
                    continue
                f_rows.append(row); f_tri.append(k); f_ci.append(ci); f_cg.append(cg)
                merged: dict[int, np.ndarray] = {}
                for col_pin, pattern in cols:
                    col = self._vindex[one.pin(col_pin)]
                    if col >= 0:
                        merged[col] = merged.get(col, np.zeros(3)) + np.asarray(pattern, dtype=float)
                for col, summed in merged.items():
                    j_pos.append(row * size + col); j_tri.append(k); j_c.append(summed)
        self._f_rows = np.array(f_rows, dtype=np.intp)
        self._f_tri = np.array(f_tri, dtype=np.intp)
        self._f_ci = np.array(f_ci, dtype=float)
        self._f_cg = np.array(f_cg, dtype=float)
        self._j_pos = np.array(j_pos, dtype=np.intp)
        self._j_tri = np.array(j_tri, dtype=np.intp)
        self._j_c = np.array(j_c, dtype=float).reshape(-1, 3)
        order: list[int] = []
        for stage in circuit.stages:
            for name in stage.triodes:
                if name in self.triode_names:
                    i = self.triode_names.index(name)
                    if i not in order:
                        order.append(i)
        order += [i for i in range(len(tri)) if i not in order]
        self._order = tuple(order)

    # ------------------------------------------------------------ evaluation
    def rhs(self, signal_v: float = 0.0, *, scale: float = 1.0) -> np.ndarray:
        """Right-hand side: zeros for the nodes, branch voltages (V) after."""
        b = np.zeros(self.size)
        b[self._n:] = self._e
        if self._signal_branch >= 0:
            b[self._n + self._signal_branch] = signal_v
        if scale != 1.0:
            b *= scale
        return b

    def newton_and_tangent(self, x: np.ndarray, signal_v: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Residual, Newton step and tangent at ``x`` for source voltage ``signal_v``.

        With ``F(x, v) = A·x + T(x) − b(v)`` the residual (:meth:`residual`) and
        ``J`` its Jacobian in ``x``: returns ``F``, the Newton step ``−J⁻¹·F``
        and the tangent ``J⁻¹·∂b/∂v`` (V and A per volt of source: how the
        solution moves with the source, to first order), both from one LU.

        Raises
        ------
        numpy.linalg.LinAlgError
            When ``J`` is singular.
        """
        x = np.asarray(x, dtype=float)
        f, jac, _ = self._residual_jacobian(x, self.rhs(signal_v), self._a)
        db_dv = np.zeros(self.size)
        if self._signal_branch >= 0:
            db_dv[self._n + self._signal_branch] = 1.0
        both = self._linear_solve(jac, np.stack([-f, db_dv], axis=1))
        return f, both[:, 0], both[:, 1]

    def _padded_v(self, x: np.ndarray) -> np.ndarray:
        v = np.empty(self._n + 1)
        v[:self._n] = x[:self._n]
        v[self._n] = 0.0
        return v

    def triode_currents(self, x: np.ndarray) -> tuple[np.ndarray, ...]:
        """Triode terminal quantities at the unknown vector ``x``.

        Returns
        -------
        ip_a, ig_a, gm_s, gp_s, gg_s, vpk_v, vgk_v : numpy.ndarray
            Per triode (in :attr:`triode_names` order): plate and grid
            currents (A), dIp/dVgk, dIp/dVpk, dIg/dVgk (S), and the
            plate–cathode and grid–cathode voltages (V).
        """
        v = self._padded_v(x)
        vk = v[self._k]
        vpk = v[self._p] - vk
        vgk = v[self._g] - vk
        if len(self._groups) == 1 or self._stacked is not None:
            model = self._groups[0][0] if self._stacked is None else cast(TriodeModel, self._stacked)
            ip, gm, gp = plate_current_and_derivatives(model, vpk, vgk)
            ig, gg = grid_current_and_derivative(model, vgk)
            return (np.asarray(ip, dtype=float), np.asarray(ig, dtype=float), np.asarray(gm, dtype=float),
                    np.asarray(gp, dtype=float), np.asarray(gg, dtype=float), vpk, vgk)
        t = len(self.triode_names)
        ip, ig, gm, gp, gg = (np.zeros(t) for _ in range(5))
        for model, ix in self._groups:
            ip[ix], gm[ix], gp[ix] = plate_current_and_derivatives(model, vpk[ix], vgk[ix])
            ig[ix], gg[ix] = grid_current_and_derivative(model, vgk[ix])
        return ip, ig, gm, gp, gg, vpk, vgk

    def residual(self, x: np.ndarray, b: np.ndarray, a: np.ndarray | None = None) -> np.ndarray:
        """Residual: node rows in A (current leaving), branch rows in V."""
        return self._residual_jacobian(x, b, self._a if a is None else a, jacobian=False)[0]

    def jacobian(self, x: np.ndarray) -> np.ndarray:
        """Analytic Jacobian of :meth:`residual` at ``x`` (S in node rows/voltage columns).

        Independent of the right-hand side, so of the signal voltage.  Its
        solve with a unit current injected at a node gives the small-signal
        (DC-coupled, capacitors as in this system) response to that current.
        A dense array (size²); :meth:`solve_jacobian` solves with it without
        forming that in a sparse system.
        """
        jac = self._residual_jacobian(np.asarray(x, dtype=float), np.zeros(self.size), self._a)[1]
        assert jac is not None
        return self._dense(jac)

    def solve_jacobian(self, x: np.ndarray, rhs: np.ndarray) -> np.ndarray:
        """``J(x)⁻¹·rhs`` (``rhs`` of shape (size,) or (size, k)), J the :meth:`jacobian`.

        Dense systems: one LAPACK solve of the dense Jacobian.  Sparse ones:
        one sparse LU, the columns solved in blocks of ``_SOLVE_BLOCK``.
        """
        jac = self._residual_jacobian(np.asarray(x, dtype=float), np.zeros(self.size), self._a)[1]
        if not self.sparse:
            return np.linalg.solve(jac, rhs)
        lu = self._factor(jac)
        rhs = np.asarray(rhs, dtype=float)
        if rhs.ndim == 1:
            return lu.solve(rhs)
        out = np.empty_like(rhs)
        for lo in range(0, rhs.shape[1], _SOLVE_BLOCK):
            out[:, lo:lo + _SOLVE_BLOCK] = lu.solve(np.ascontiguousarray(rhs[:, lo:lo + _SOLVE_BLOCK]))
        return out

    @overload
    def _residual_jacobian(self, x: np.ndarray, b: np.ndarray, a: Any, *,
                           jacobian: Literal[True] = ...) -> tuple[np.ndarray, Any, np.ndarray]: ...

    @overload
    def _residual_jacobian(self, x: np.ndarray, b: np.ndarray, a: Any, *,
                           jacobian: Literal[False]) -> tuple[np.ndarray, None, np.ndarray]: ...

    def _residual_jacobian(self, x: np.ndarray, b: np.ndarray, a: Any, *,
                           jacobian: bool = True) -> tuple[np.ndarray, Any, np.ndarray]:
        """Residual, Jacobian (the type of ``a``: dense array or CSC matrix, or None
        when not asked for) and each triode's |Ip| + |Ig| (A) at ``x``."""
        f = a @ x - b
        if not self.triode_names:
            return f, (a if jacobian else None), np.zeros(0)
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            ip, ig, gm, gp, gg, _, _ = self.triode_currents(x)
            f += np.bincount(self._f_rows, weights=ip[self._f_tri] * self._f_ci + ig[self._f_tri] * self._f_cg,
                             minlength=self.size)
            jac = None
            if jacobian:
                d = np.stack((gp, gm, gg), axis=1)
                vals = np.einsum("ij,ij->i", self._j_c, d[self._j_tri])
                if self.sparse:
                    jac = self._with_data(a.data + np.bincount(self._j_slot, weights=vals, minlength=a.data.size))
                else:
                    jac = a + np.bincount(self._j_pos, weights=vals, minlength=self.size * self.size).reshape(
                        self.size, self.size)
        return f, jac, np.abs(ip) + np.abs(ig)

    def _merit(self, f: np.ndarray) -> float:
        n = self._n
        return float(f[:n] @ f[:n]) + _BRANCH_WEIGHT_S ** 2 * float(f[n:] @ f[n:])

    def _residual_ok(self, x: np.ndarray, f: np.ndarray, a_abs: Any, tcur: np.ndarray,
                     options: SolveOptions, b: np.ndarray) -> bool:
        """Every node row within tol_a (plus rounding), every branch row within tol_v."""
        n = self._n
        if not np.all(np.isfinite(f)):
            return False
        fn = np.abs(f[:n])
        fb = np.abs(f[n:])
        branch_ok = fb.size == 0 or bool(np.all(fb <= options.tol_v + _ROUNDING_RTOL * np.abs(b[n:])))
        if fn.size == 0 or float(fn.max()) <= options.tol_a:
            return branch_ok
        scale = (a_abs @ np.abs(x))[:n] if self.sparse else a_abs[:n] @ np.abs(x)
        if tcur.size:
            scale += np.bincount(self._f_rows, weights=tcur[self._f_tri], minlength=self.size)[:n]
        return branch_ok and bool(np.all(fn <= options.tol_a + _ROUNDING_RTOL * scale))

    def _at_rounding_floor(self, x: np.ndarray, f: np.ndarray, a_abs: Any, tcur: np.ndarray,
                           b: np.ndarray) -> bool:
        """Every row's residual within the rounding of the terms that make it up
        (``_ROUNDING_RTOL`` times the sum of their magnitudes)."""
        n = self._n
        if not np.all(np.isfinite(f)):
            return False
        scale = a_abs @ np.abs(x) + np.abs(b)
        if tcur.size:
            scale += np.bincount(self._f_rows, weights=tcur[self._f_tri], minlength=self.size)
        return bool(np.all(np.abs(f) <= _ROUNDING_RTOL * scale)) and n > 0

    # ---------------------------------------------------------------- Newton
    def _newton(self, x: np.ndarray, b: np.ndarray, options: SolveOptions, *, max_iter: int,
                a: Any = None, line_search: bool = False
                ) -> tuple[np.ndarray, int, bool, np.ndarray]:
        """Damped Newton from ``x``; returns (x, iterations, converged, residual).

        Without ``line_search`` each node-voltage component of the step is
        clipped to ±``max_step_v`` (cheap, not monotone, the usual choice for
        circuits); with it the whole step is scaled to that limit and then
        halved until the residual norm decreases (Armijo rule).  Converged
        when the next step is below ``tol_v`` and every equation's residual
        is within tolerance at the returned point.
        """
        a = self._a if a is None else a
        a_abs = self._a_abs if a is self._a else abs(a)
        n = self._n
        x = np.array(x, dtype=float)
        f, jac, tcur = self._residual_jacobian(x, b, a)
        if not np.all(np.isfinite(f)):
            return x, 0, False, f
        phi = self._merit(f)
        for it in range(1, max_iter + 1):
            try:
                dx = self._linear_solve(jac, -f)
            except np.linalg.LinAlgError:
                return x, it, False, f
            if not np.all(np.isfinite(dx)):
                return x, it, False, f
            step = float(np.abs(dx[:n]).max()) if n else 0.0
            if step <= options.tol_v and self._residual_ok(x, f, a_abs, tcur, options, b):
                return x, it, True, f
            if self._at_rounding_floor(x, f, a_abs, tcur, b):
                # every equation holds to the rounding of its own terms, so the
                # step is rounding noise amplified by the system's conditioning
                # (a DC-coupled chain of high-gain stages: 10¹⁴ over eight), and
                # no step can make the point better
                return x, it, True, f
            if not line_search:
                if step > options.max_step_v:
                    np.clip(dx[:n], -options.max_step_v, options.max_step_v, out=dx[:n])
                xt = x + dx
                ft, jt, tt = self._residual_jacobian(xt, b, a)
            else:
                if step > options.max_step_v:
                    dx *= options.max_step_v / step
                alpha = 1.0
                for _ in range(_MAX_HALVINGS):
                    xt = x + alpha * dx
                    ft, jt, tt = self._residual_jacobian(xt, b, a)
                    if np.all(np.isfinite(ft)) and (
                            self._merit(ft) <= (1.0 - 2.0 * _ARMIJO * alpha) * phi
                            or (n and float(np.abs(ft[:n]).max()) <= options.tol_a)):
                        break
                    alpha *= 0.5
            if not np.all(np.isfinite(ft)):
                return x, it, False, f
            x, f, jac, tcur = xt, ft, jt, tt
            if line_search:
                phi = self._merit(f)
        return x, max_iter, False, f

    # ---------------------------------------------------------- start guess
    def _prepare_guess(self) -> tuple[np.ndarray | None, np.ndarray, np.ndarray, np.ndarray]:
        """Inverse of the linear matrix (None in a sparse system, which keeps its
        LU factors instead) and each triode's load/bias slopes:
        ``(z, d, dvpk, dvgk)``, computed once."""
        if self._d is not None and self._dvpk is not None and self._dvgk is not None:
            return self._z, self._d, self._dvpk, self._dvgk
        n, t = self._n, len(self.triode_names)
        if self.sparse:
            self._lin_lu = self._factor(self._a)
            # response of x to a unit plate current of triode t (leaves p, enters k)
            unit = np.zeros((n + 1, t))
            cols = np.arange(t)
            np.add.at(unit, (self._k, cols), 1.0)
            np.add.at(unit, (self._p, cols), -1.0)
            rhs = np.zeros((self.size, t))
            rhs[:n] = unit[:n]
            self._d = self._lin_lu.solve(rhs) if t else np.zeros((self.size, 0))
        else:
            self._z = np.linalg.inv(self._a)
            zpad = np.zeros((self.size, n + 1))
            zpad[:, :n] = self._z[:, :n]
            # response of x to a unit plate current of triode t (leaves p, enters k)
            self._d = zpad[:, self._k] - zpad[:, self._p] if t else np.zeros((self.size, 0))
        dpad = np.zeros((n + 1, t))
        dpad[:n] = self._d[:n]
        cols = np.arange(t)
        self._dvpk = dpad[self._p, cols] - dpad[self._k, cols]
        self._dvgk = dpad[self._g, cols] - dpad[self._k, cols]
        return self._z, self._d, self._dvpk, self._dvgk

    def cold_solution(self, signal_v: float = 0.0) -> np.ndarray:
        """The unknown vector with every triode drawing no current (cold tubes), V/A."""
        return self._linear_solution(self.rhs(signal_v))

    def _linear_solution(self, b: np.ndarray) -> np.ndarray:
        """Solution of the linear network alone (triodes drawing no current) for ``b``."""
        z, _, _, _ = self._prepare_guess()
        return z @ b if z is not None else self._lin_lu.solve(b)

    def _guess_levels(self, dpk: np.ndarray, dgk: np.ndarray) -> list[np.ndarray]:
        """The triodes in groups that one Gauss–Seidel sweep in signal order may
        update together with the same result: two triodes whose load or bias
        lines move with each other's current at all (``dpk``, ``dgk``: V per A
        of the other's plate current, not exactly zero) go in groups in the
        order the sweep meets them; a triode joins the first group after all
        earlier triodes it is coupled to (stages on rails of their own from an
        ideal supply, with no coupling between them, all share one group)."""
        t = dpk.shape[0]
        coupled = (dpk != 0.0) | (dgk != 0.0)
        coupled |= coupled.T
        level = np.zeros(t, dtype=np.intp)
        done = np.zeros(t, dtype=bool)
        for i in self._order:
            earlier = coupled[i] & done
            level[i] = int(level[earlier].max()) + 1 if earlier.any() else 0
            done[i] = True
        position = np.empty(t, dtype=np.intp)
        position[list(self._order)] = np.arange(t)
        groups = []
        for lv in range(int(level.max()) + 1 if t else 0):
            members = np.flatnonzero(level == lv)
            groups.append(members[np.argsort(position[members])])
        return groups

    def initial_guess(self, signal_v: float = 0.0) -> np.ndarray:
        """Stage-by-stage starting point for Newton.

        Each triode in signal order is placed on its exact load line and bias
        line given the present currents of all the others (grid current
        neglected), repeated for a few Gauss–Seidel sweeps.  Triodes whose
        lines do not move with each other's current are placed together
        (:meth:`_guess_levels`, :func:`_load_points`): the same sweep, one
        vectorised step per group.
        """
        _, d, dvpk, dvgk = self._prepare_guess()
        x_base = self._linear_solution(self.rhs(signal_v))
        t = len(self.triode_names)
        if t == 0:
            return x_base
        # Only each triode's own vpk and vgk are needed, and they are linear in the
        # currents: vpk = base_pk + Dpk @ current (Dpk: t × t), so one Gauss-Seidel
        # step costs O(t) instead of forming every node voltage, O(N·t)
        dpad = np.zeros((self._n + 1, t))
        dpad[:self._n] = d[:self._n]
        dpk = dpad[self._p] - dpad[self._k]
        dgk = dpad[self._g] - dpad[self._k]
        v = self._padded_v(x_base)
        base_pk = v[self._p] - v[self._k]
        base_gk = v[self._g] - v[self._k]
        groups = self._guess_levels(dpk, dgk)
        own_pk, own_gk = np.diagonal(dpk), np.diagonal(dgk)
        current = np.zeros(t)
        for _ in range(_GUESS_SWEEPS):
            change = 0.0
            for ix in groups:
                vpk0 = base_pk[ix] + dpk[ix] @ current - own_pk[ix] * current[ix]
                vgk0 = base_gk[ix] + dgk[ix] @ current - own_gk[ix] * current[ix]
                if ix.size == 1:
                    new = np.array([_load_point(self._models[ix[0]], float(vpk0[0]), float(dvpk[ix[0]]),
                                                float(vgk0[0]), float(dvgk[ix[0]]))])
                else:
                    new = _load_points(self._models, ix, vpk0, dvpk[ix], vgk0, dvgk[ix])
                change = max(change, float(np.abs(new - current[ix]).max()))
                current[ix] = new
            if change <= 1e-9 + 1e-4 * float(np.abs(current).max()):
                break
        return x_base + d @ current

    def vector_from_voltages(self, node_v: Mapping[str, float], signal_v: float = 0.0) -> np.ndarray:
        """Unknown vector from node voltages; missing nodes from the cold solution."""
        x = self.cold_solution(signal_v)
        for name, value in node_v.items():
            if name in self._vindex and name != GROUND:
                x[self._vindex[name]] = float(value)
        return x

    # ---------------------------------------------------------------- solving
    def solve(self, signal_v: float = 0.0, guess: np.ndarray | None = None, *,
              options: SolveOptions = SolveOptions()) -> NetworkState:
        """Solve the DC state at one signal-source voltage.

        Parameters
        ----------
        signal_v : float
            Signal-source voltage, V.
        guess : numpy.ndarray, optional
            Starting unknown vector, e.g. ``previous_state.x`` (continuation).
            Without it the stage-by-stage guess is used.
        options : SolveOptions

        Returns
        -------
        NetworkState

        Raises
        ------
        DcConvergenceError
            When every strategy fails; the diagnostic names the likely stage.
        """
        x, iterations, residual = self.solve_vector(signal_v, guess, options=options)
        return self.state(x, iterations=iterations, max_residual_a=residual, signal_v=signal_v)

    def solve_vector(self, signal_v: float = 0.0, guess: np.ndarray | None = None, *,
                     options: SolveOptions = SolveOptions()) -> tuple[np.ndarray, int, float]:
        """As :meth:`solve`, returning (x, iterations, max_residual_a) only."""
        b = self.rhs(signal_v)
        total = 0
        worst: tuple[np.ndarray, np.ndarray] | None = None
        # (start, line search, iteration limit): a caller's guess is a continuation
        # point and gets a short clipped-Newton try before the stage-by-stage guess
        attempts: list[tuple[np.ndarray | None, bool, int]] = []
        if guess is not None:
            g = np.asarray(guess, dtype=float)
            if g.shape != (self.size,):
                raise ValueError(f"guess must have shape ({self.size},), got {g.shape}")
            attempts.append((g, False, min(options.max_iter, _GUESS_MAX_ITER)))
        attempts += [(None, False, options.max_iter), (None, True, options.max_iter)]
        x_stage = None
        for start, line_search, max_iter in attempts:
            if start is None:
                x_stage = self.initial_guess(signal_v) if x_stage is None else x_stage
                start = x_stage
            x, it, ok, f = self._newton(start, b, options, max_iter=max_iter, line_search=line_search)
            total += it
            if ok:
                return x, total, self._max_node_residual(f)
            worst = _better(worst, (x, f), self._n)
        why = "Newton's method did not converge from the stage-by-stage starting point"
        if worst is not None:
            fn = np.abs(worst[1][:self._n])
            if fn.size and np.any(np.isfinite(fn)):
                k = int(np.nanargmax(np.where(np.isfinite(fn), fn, -1.0)))
                why += f" (largest current imbalance {fn[k]:.3g} A at node '{self.nodes[k]}')"
        for strategy, what in ((self._source_stepping, "source stepping: every source ramped up from 0 V"),
                               (self._gmin_stepping, "gmin stepping: a large conductance to ground at every "
                                                     "node, reduced decade by decade"),
                               (self._scipy_root, "a hybrid (dogleg) root finder, the last resort")):
            PROGRESS.info("DC solve of %d unknowns: %s; trying %s", self.size, why, what)
            why = "that did not converge either"
            x, it, ok, f = strategy(signal_v, options)
            total += it
            if ok:
                return x, total, self._max_node_residual(f)
            if x is not None:
                worst = _better(worst, (x, f), self._n)
        raise self._failure(worst, total, options, signal_v)

    def _max_node_residual(self, f: np.ndarray) -> float:
        return float(np.abs(f[:self._n]).max()) if self._n else 0.0

    def _source_stepping(self, signal_v: float, options: SolveOptions):
        """Ramp every source from 0 to its value, Newton at each step."""
        lam, step, total = 0.0, 0.1, 0
        x = np.zeros(self.size)
        f = None
        sub_iter = min(options.max_iter, 50)
        for _ in range(100):
            target = min(1.0, lam + step)
            x_new, it, ok, f_new = self._newton(x, self.rhs(signal_v, scale=target), options, max_iter=sub_iter)
            total += it
            if ok:
                x, f, lam = x_new, f_new, target
                if lam >= 1.0:
                    return x, total, True, f
                step = min(step * 2.0, 0.5)
            else:
                step *= 0.25
                if step < 1e-4:
                    break
        return x, total, False, self.residual(x, self.rhs(signal_v))

    def _gmin_stepping(self, signal_v: float, options: SolveOptions):
        """Large gmin to ground on every node, reduced a decade at a time."""
        b = self.rhs(signal_v)
        x = self.cold_solution(signal_v)
        total = 0
        sub_iter = min(options.max_iter, 50)
        for g in 10.0 ** np.arange(-3.0, -13.0, -1.0):
            if g <= self.gmin_s:
                break
            a = self._a.copy()
            if self.sparse:
                a.data[self._diag_slot] += g
            else:
                a[np.arange(self._n), np.arange(self._n)] += g
            x_new, it, ok, _ = self._newton(x, b, options, max_iter=sub_iter, a=a)
            total += it
            if not ok:
                return x, total, False, self.residual(x, b)
            x = x_new
        x, it, ok, f = self._newton(x, b, options, max_iter=options.max_iter)
        return x, total + it, ok, f

    def _scipy_root(self, signal_v: float, options: SolveOptions):
        """Last resort: MINPACK hybrid (dogleg) method with the analytic Jacobian, then Newton."""
        from scipy.optimize import root

        b = self.rhs(signal_v)
        x0 = self.initial_guess(signal_v)

        def fun(x):
            return self._residual_jacobian(x, b, self._a, jacobian=False)[0]

        def jac(x):
            return self._dense(self._residual_jacobian(x, b, self._a)[1])

        with np.errstate(over="ignore", invalid="ignore"):
            sol = root(fun, x0, jac=jac, method="hybr", options={"maxfev": max(options.max_iter, 1)})
        if not np.all(np.isfinite(sol.x)):
            return x0, int(sol.nfev), False, self.residual(x0, b)
        # MINPACK stops on a relative step of 1.5e-8; Newton polishes to tol_a/tol_v
        x, it, ok, f = self._newton(sol.x, b, options, max_iter=options.max_iter)
        return x, int(sol.nfev) + it, ok, f

    def _failure(self, worst, iterations: int, options: SolveOptions, signal_v: float) -> DcConvergenceError:
        """Build the DcConvergenceError that names the likely stage."""
        circuit = self.circuit
        floating = set(circuit.dc_floating_nodes(self.held_caps))
        for tri in circuit.triodes:
            for pin_name, node in (("grid", tri.grid), ("cathode", tri.cathode), ("plate", tri.plate)):
                if node in floating:
                    subject = circuit.stage_of_triode(tri.name)
                    diag = error(
                        "E401",
                        f"DC solve did not converge: {circuit.stage_label(subject)} has no DC path from its "
                        f"{pin_name} (node '{node}') to ground — only capacitors reach it, so its bias is undefined",
                        hint="give the grid a grid leak to ground (or the plate a load to a rail, the cathode "
                             "a resistor to ground)",
                        subject=subject)
                    return self._error(diag, worst, iterations)
        if worst is None:
            diag = error("E401", f"DC solve did not converge after {iterations} iterations", subject="")
            return self._error(diag, worst, iterations)
        x, f = worst
        fn = np.abs(f[:self._n])
        fn = np.where(np.isfinite(fn), fn, np.inf)
        node = self.nodes[int(np.argmax(fn))] if self._n else ""
        subject = circuit.stage_of_node(node)
        where = f"at node '{node}'"
        if subject:
            where += f" of {circuit.stage_label(subject)}"
        detail = ""
        triode = next((s.triode for s in circuit.stages if s.name == subject), subject)
        if triode in self.triode_names:
            i = self.triode_names.index(triode)
            v = self._padded_v(x)
            vpk = v[self._p[i]] - v[self._k[i]]
            vgk = v[self._g[i]] - v[self._k[i]]
            detail = f"; there Vpk = {vpk:.4g} V, Vgk = {vgk:.4g} V"
            if vgk > 0.0:
                detail += " (grid driven positive)"
            elif vpk <= 0.0:
                detail += " (plate at or below its cathode)"
        residual = float(fn.max()) if fn.size else float("nan")
        diag = error(
            "E401",
            f"DC solve did not converge after {iterations} iterations (signal {signal_v:g} V): the largest "
            f"current imbalance, {residual:.3g} A, is {where}{detail}",
            hint="check that every grid has a grid leak, every plate a load to a rail and every cathode a "
                 "path to ground; or raise SolveOptions.max_iter",
            subject=subject)
        return self._error(diag, worst, iterations)

    def _error(self, diag, worst, iterations: int) -> DcConvergenceError:
        if worst is None:
            return DcConvergenceError(diag, iterations=iterations)
        x, f = worst
        fn = np.abs(f[:self._n])
        residual = float(np.nanmax(fn)) if fn.size and np.any(np.isfinite(fn)) else float("nan")
        guess = {name: float(x[i]) for i, name in enumerate(self.nodes)}
        return DcConvergenceError(diag, iterations=iterations, residual_a=residual, last_guess=guess)

    # ------------------------------------------------------------- reading
    def state(self, x: np.ndarray, *, iterations: int = 0, max_residual_a: float | None = None,
              signal_v: float = 0.0) -> NetworkState:
        """Package an unknown vector as a :class:`NetworkState`."""
        n = self._n
        if max_residual_a is None:
            max_residual_a = self._max_node_residual(self.residual(x, self.rhs(signal_v)))
        node_v = dict(zip(self.nodes, x[:n].tolist()))
        source_i, branch_i = {}, {}
        for j, (name, kind) in enumerate(zip(self.branches, self._branch_kinds)):
            if kind == "source":
                source_i[name] = -float(x[n + j])
            else:
                branch_i[name] = float(x[n + j])
        for name in self.dropped:
            branch_i[name] = 0.0
        return NetworkState(node_v=node_v, source_i_a=source_i, branch_i_a=branch_i, iterations=iterations,
                            max_residual_a=float(max_residual_a), signal_v=float(signal_v), x=np.array(x))

    def operating_points(self, x: np.ndarray) -> dict[str, OperatingPoint]:
        """Per triode the :class:`OperatingPoint` at the unknown vector ``x``."""
        v = self._padded_v(x)
        ip, ig, _, _, _, vpk, vgk = self.triode_currents(x)
        points = {}
        for i, name in enumerate(self.triode_names):
            ss = small_signal(self._models[i], float(vpk[i]), float(vgk[i]))
            points[name] = OperatingPoint(
                name=name, vp_v=float(v[self._p[i]]), vg_v=float(v[self._g[i]]), vk_v=float(v[self._k[i]]),
                ip_a=float(ip[i]), ig_a=float(ig[i]), pd_w=float(vpk[i] * ip[i]),
                gm_s=float(ss.gm_s), rp_ohm=float(ss.rp_ohm), mu=float(ss.mu))
        return points

    def load_line(self, x: np.ndarray, triode: str) -> LoadLineCoefficients:
        """Exact DC load and bias lines of one triode around the state ``x``.

        All other triodes (and this triode's grid current) are held at their
        currents in ``x``; the linear network then makes Vpk and Vgk affine in
        this triode's plate current.
        """
        _, _, dvpk, dvgk = self._prepare_guess()
        i = self.triode_names.index(triode)
        ip, _, _, _, _, vpk, vgk = self.triode_currents(x)
        return LoadLineCoefficients(
            triode=triode,
            vpk0_v=float(vpk[i] - ip[i] * dvpk[i]), dvpk_dip_ohm=float(dvpk[i]),
            vgk0_v=float(vgk[i] - ip[i] * dvgk[i]), dvgk_dip_ohm=float(dvgk[i]))

    def branch_current_out_of(self, x: np.ndarray, node: str, *, exclude=frozenset()) -> float:
        """Current leaving ``node`` through the voltage branches not named in ``exclude``, A."""
        n = self._n
        idx = self._vindex[node]
        total = 0.0
        for j, name in enumerate(self.branches):
            if name in exclude:
                continue
            ipos, ineg = self._branch_ends[j]
            if ipos == idx and ineg != idx:
                total += float(x[n + j])
            elif ineg == idx and ipos != idx:
                total -= float(x[n + j])
        return total

    def voltage(self, x: np.ndarray, node: str) -> float:
        """Voltage of one node in the unknown vector ``x`` (0 for ground), V."""
        i = self._vindex[node]
        return 0.0 if i < 0 else float(x[i])


class _StackedModel:
    """Several triode models' parameters as arrays, one entry per triode.

    The tube functions are elementwise numpy code over the parameters, so a
    stack evaluates every triode of a mixed circuit in one call.  Used only
    after :func:`_stacked_model` has checked it against the per-model calls.
    """

    __slots__ = _STACKED_FIELDS = ("name", "mu", "ex", "kg1", "kp", "kvb", "grid_perveance_a_v15",
                                   "grid_onset_v", "grid_knee_v")

    def __init__(self, models):
        self.name = "stack"
        for attr in self._STACKED_FIELDS[1:]:
            setattr(self, attr, np.array([getattr(m, attr) for m in models], dtype=float))


def _stacked_model(models) -> _StackedModel | None:
    """A :class:`_StackedModel` if it reproduces the per-model evaluation, else None."""
    try:
        stack = _StackedModel(models)
        vpk = np.linspace(50.0, 300.0, len(models))
        vgk = np.linspace(-3.0, 0.5, len(models))
        as_model = cast(TriodeModel, stack)
        together = (*plate_current_and_derivatives(as_model, vpk, vgk), *grid_current_and_derivative(as_model, vgk))
    except (AttributeError, TypeError, ValueError):
        return None
    for i, model in enumerate(models):
        alone = (*plate_current_and_derivatives(model, vpk[i], vgk[i]), *grid_current_and_derivative(model, vgk[i]))
        for a, b in zip(together, alone):
            if not np.isclose(np.asarray(a)[i], b, rtol=1e-12, atol=0.0):
                return None
    return stack


def _better(worst, candidate, n: int):
    """Keep the failed iterate nearest to a solution (for the report).

    Nearness is the line-search merit: squared node residuals (A²) plus
    squared branch residuals weighted by ``_BRANCH_WEIGHT_S``.
    """
    if worst is None:
        return candidate

    def merit(pair):
        f = pair[1]
        if not np.all(np.isfinite(f)):
            return np.inf
        return float(f[:n] @ f[:n]) + _BRANCH_WEIGHT_S ** 2 * float(f[n:] @ f[n:])

    return candidate if merit(candidate) < merit(worst) else worst


def _load_point(model: TriodeModel, vpk0: float, dvpk: float, vgk0: float, dvgk: float) -> float:
    """Plate current where the tube curve meets its load and bias lines, A.

    Solves ``Ip = f(vpk0 + dvpk·Ip, vgk0 + dvgk·Ip)`` by safeguarded
    Newton–bisection on ``h(I) = f(...) − I`` (h(0) ≥ 0, h < 0 once the load
    line reaches Vpk = 0).
    """
    def h(i_a: float) -> tuple[float, float]:
        with np.errstate(over="ignore", invalid="ignore"):
            ip, gm, gp = plate_current_and_derivatives(model, np.array([vpk0 + dvpk * i_a]),
                                                       np.array([vgk0 + dvgk * i_a]))
        return float(ip[0]) - i_a, float(gp[0]) * dvpk + float(gm[0]) * dvgk - 1.0

    h0, dh = h(0.0)
    if not np.isfinite(h0) or h0 <= 0.0:
        return 0.0
    lo = 0.0
    hi = vpk0 / -dvpk if dvpk < 0.0 and vpk0 > 0.0 else max(h0, 1e-3)
    for _ in range(60):
        h_hi, _ = h(hi)
        if not np.isfinite(h_hi) or h_hi < 0.0:
            break
        lo, hi = hi, hi * 2.0
    i_a = lo - h0 / dh if dh < 0.0 else 0.5 * (lo + hi)
    for _ in range(100):
        if not (lo < i_a < hi):
            i_a = 0.5 * (lo + hi)
        value, dh = h(i_a)
        if not np.isfinite(value):
            hi = i_a
            i_a = 0.5 * (lo + hi)
            continue
        if value > 0.0:
            lo = i_a
        else:
            hi = i_a
        new = i_a - value / dh if dh < 0.0 else 0.5 * (lo + hi)
        if abs(new - i_a) <= 1e-13 + 1e-10 * abs(i_a) or hi - lo <= 1e-13 + 1e-10 * hi:
            return float(min(max(new, lo), hi))
        i_a = new
    return float(i_a)


def _load_points(models, ix: np.ndarray, vpk0: np.ndarray, dvpk: np.ndarray, vgk0: np.ndarray,
                 dvgk: np.ndarray) -> np.ndarray:
    """Plate current where each tube curve meets its load and bias lines, A.

    For each triode ``ix[m]`` (model ``models[ix[m]]``) solves
    ``Ip = f(vpk0 + dvpk·Ip, vgk0 + dvgk·Ip)`` by safeguarded Newton–bisection
    on ``h(I) = f(...) − I`` (h(0) ≥ 0, h < 0 once the load line reaches
    Vpk = 0) as :func:`_load_point` does for one: all triodes at once, each
    with its own bracket, stopping when its own step is small, so that each
    gets the value it would get alone.
    """
    m = ix.size
    groups: dict[int, list[int]] = {}
    for pos, i in enumerate(ix):
        groups.setdefault(id(models[i]), []).append(pos)
    by_model = [(models[ix[pos[0]]], np.array(pos, dtype=np.intp)) for pos in groups.values()]

    def h(which: np.ndarray, i_a: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """``(h, dh/dI)`` of the triodes at positions ``which`` at currents ``i_a``."""
        value = np.empty(which.size)
        slope = np.empty(which.size)
        for model, pos in by_model:
            sel = np.flatnonzero(np.isin(which, pos))
            if sel.size == 0:
                continue
            w, cur = which[sel], i_a[sel]
            with np.errstate(over="ignore", invalid="ignore"):
                ip, gm, gp = plate_current_and_derivatives(model, vpk0[w] + dvpk[w] * cur, vgk0[w] + dvgk[w] * cur)
            value[sel] = np.asarray(ip, dtype=float) - cur
            slope[sel] = np.asarray(gp, dtype=float) * dvpk[w] + np.asarray(gm, dtype=float) * dvgk[w] - 1.0
        return value, slope

    every = np.arange(m)
    out = np.zeros(m)
    h0, dh = h(every, np.zeros(m))
    live = np.isfinite(h0) & (h0 > 0.0)
    lo = np.zeros(m)
    with np.errstate(divide="ignore", invalid="ignore"):
        hi = np.where((dvpk < 0.0) & (vpk0 > 0.0), vpk0 / -dvpk, np.maximum(h0, 1e-3))
    # widen each bracket until h(hi) < 0 (or not finite)
    growing = live.copy()
    for _ in range(60):
        which = np.flatnonzero(growing)
        if which.size == 0:
            break
        h_hi, _ = h(which, hi[which])
        stop = ~np.isfinite(h_hi) | (h_hi < 0.0)
        up = which[~stop]
        lo[up], hi[up] = hi[up], hi[up] * 2.0
        growing[which[stop]] = False
    with np.errstate(divide="ignore", invalid="ignore"):
        i_a = np.where(dh < 0.0, lo - h0 / dh, 0.5 * (lo + hi))
    running = live.copy()
    for _ in range(100):
        which = np.flatnonzero(running)
        if which.size == 0:
            break
        cur = i_a[which]
        outside = ~((lo[which] < cur) & (cur < hi[which]))
        cur = np.where(outside, 0.5 * (lo[which] + hi[which]), cur)
        value, slope = h(which, cur)
        bad = ~np.isfinite(value)
        # not finite: shrink the bracket from above and try its middle
        nb = which[bad]
        hi[nb] = cur[bad]
        i_a[nb] = 0.5 * (lo[nb] + hi[nb])
        ok = ~bad
        w, c, val, sl = which[ok], cur[ok], value[ok], slope[ok]
        pos = val > 0.0
        lo[w[pos]] = c[pos]
        hi[w[~pos]] = c[~pos]
        with np.errstate(divide="ignore", invalid="ignore"):
            new = np.where(sl < 0.0, c - val / sl, 0.5 * (lo[w] + hi[w]))
        done = (np.abs(new - c) <= 1e-13 + 1e-10 * np.abs(c)) | (hi[w] - lo[w] <= 1e-13 + 1e-10 * hi[w])
        fin = w[done]
        out[fin] = np.minimum(np.maximum(new[done], lo[fin]), hi[fin])
        running[fin] = False
        i_a[w[~done]] = new[~done]
    # a triode that used up its iterations keeps its last point
    out[running] = i_a[running]
    return out


def compile_network(circuit: Circuit, *, held_caps: Mapping[str, float] | None = None,
                    gmin_s: float = 1e-12, sparse: bool | None = None) -> NetworkSystem:
    """Compile a circuit for repeated DC solves.

    Parameters
    ----------
    circuit : Circuit
    held_caps : Mapping[str, float], optional
        Capacitor name → voltage held across it (node a minus node b), V.
        Held capacitors become ideal sources; all others are open.
    gmin_s : float
        Conductance from every node to ground, S.
    sparse : bool, optional
        Force sparse (True) or dense (False) linear algebra; by default sparse
        from :data:`SPARSE_MIN_SIZE` unknowns up (see :class:`NetworkSystem`).

    Returns
    -------
    NetworkSystem
    """
    return NetworkSystem(circuit, held_caps=held_caps, gmin_s=gmin_s, sparse=sparse)


def solve_network(circuit: Circuit, *, signal_v: float = 0.0, held_caps: Mapping[str, float] | None = None,
                  guess: Mapping[str, float] | None = None, options: SolveOptions = SolveOptions()) -> NetworkState:
    """Solve a circuit's DC state once (see the module docstring for the rules).

    Parameters
    ----------
    circuit : Circuit
    signal_v : float
        Signal-source voltage, V (0 for the quiescent point).
    held_caps : Mapping[str, float], optional
        Capacitor name → held voltage (a minus b), V.
    guess : Mapping[str, float], optional
        Starting node voltages, V; nodes left out start at their cold value.
    options : SolveOptions

    Returns
    -------
    NetworkState

    Raises
    ------
    DcConvergenceError
    """
    system = compile_network(circuit, held_caps=held_caps, gmin_s=options.gmin_s)
    x0 = system.vector_from_voltages(guess, signal_v) if guess is not None else None
    return system.solve(signal_v, x0, options=options)
