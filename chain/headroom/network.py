"""The chain at mid-band as a resistive nonlinear network, solved point by point.

Quasi-static mid-band model
---------------------------
Large-signal behaviour is computed at "mid-band": frequencies high enough
that the coupling, cathode-bypass and rail-decoupling capacitors are short
circuits for the signal, and low enough that the small capacitors (pickup
and cable capacitance, strays) are open.  At such a frequency the circuit
has no memory over one cycle, so the output at each instant is a fixed
(nonlinear) function of the input at that instant — the transfer curve.

Each capacitor is classified by ``ω·τ`` at the reference frequency, with
``τ = R·C`` and ``R`` the resistance it sees between its terminals in the
linearised DC network with every other capacitor open (the open-circuit
time-constant estimate; ``ω·τ = 1`` is the corner of the pole it makes with
that resistance):

* ``ω·τ >= 10`` — **held**: an ideal source keeping its DC voltage, so it
  carries no signal voltage (a short for the signal);
* ``ω·τ <= 0.1`` — **open**;
* in between — a **stand-in**: its reactance magnitude ``1/(ωC)`` as a
  resistor, in series with a held source at its DC voltage.  Its impedance
  is within a factor of ten of its surroundings, so neither short nor open
  is right; the stand-in keeps the magnitude but not the phase (bright
  capacitors, tone-network capacitors, small bypass capacitors).

Inductors (the pickup winding) are shorts; the signal source is swept.
Triodes follow the full tube model — plate current and grid current, with
the grid current flowing through the grid stopper and the source impedance.

The network is solved by :class:`chain.dc.NetworkSystem`; each point starts
from the previous ones (secant continuation), so a sweep costs a few Newton
iterations per point.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from types import MappingProxyType
from typing import Callable, Iterable, Mapping

import numpy as np

from chain.circuit import GROUND, Circuit, Resistor, Role
from chain.dc import DcSolution, SolveOptions, compile_network
from chain.errors import DcConvergenceError

__all__ = ["CapacitorTreatment", "seen_resistances", "mid_band_capacitors", "mid_band_circuit", "MidBandNetwork"]

#: continuation: halvings of a failed step before giving up
_MAX_SPLITS = 6


@dataclass(frozen=True, slots=True)
class CapacitorTreatment:
    """How each capacitor is treated in the quasi-static mid-band model.

    Attributes
    ----------
    f_ref_hz : float
        Reference (mid-band) frequency, Hz.
    held : Mapping[str, float]
        Capacitors kept at their DC voltage (node a minus node b), V — the
        shorts and the stand-ins.
    stand_in_ohm : Mapping[str, float]
        The stand-ins among them: name → the series resistance ``1/(ωC)``, ohm.
    open : tuple[str, ...]
        Capacitors treated as open circuits.
    omega_tau : Mapping[str, float]
        Per capacitor ``2π·f_ref·R·C`` (R the resistance it sees).
    band : tuple[float, float]
        ``ω·τ`` limits: open at or below the first, short at or above the
        second, stand-in between.
    chosen_by_caller : bool
        True when the held set was given explicitly (no stand-ins then).
    """

    f_ref_hz: float
    held: Mapping[str, float]
    stand_in_ohm: Mapping[str, float]
    open: tuple[str, ...]
    omega_tau: Mapping[str, float] = field(compare=False)
    band: tuple[float, float] = (0.1, 10.0)
    chosen_by_caller: bool = False

    @property
    def shorted(self) -> tuple[str, ...]:
        """Held capacitors that are plain shorts for the signal."""
        return tuple(n for n in self.held if n not in self.stand_in_ohm)


def seen_resistances(circuit: Circuit, dc: DcSolution) -> dict[str, float]:
    """Small-signal resistance seen by each capacitor, ohm.

    The DC network (every capacitor open, supplies and the signal source
    zeroed, inductors shorted) is linearised at the operating point; a unit
    current injected into the capacitor's ``a`` node and taken out of its
    ``b`` node gives ``R = v(a) − v(b)``.
    """
    if not circuit.capacitors:
        return {}
    options = dc.options
    system = compile_network(circuit, gmin_s=options.gmin_s)
    x, _, _ = system.solve_vector(0.0, system.vector_from_voltages(dc.node_v, 0.0), options=options)
    index = {name: i for i, name in enumerate(system.nodes)}
    rhs = np.zeros((system.size, len(circuit.capacitors)))
    for k, cap in enumerate(circuit.capacitors):
        if cap.a != GROUND:
            rhs[index[cap.a], k] += 1.0
        if cap.b != GROUND:
            rhs[index[cap.b], k] -= 1.0
    # residual rows are currents leaving a node: an injected current I gives J·dx = I·e
    dx = system.solve_jacobian(x, rhs)
    out = {}
    for k, cap in enumerate(circuit.capacitors):
        va = dx[index[cap.a], k] if cap.a != GROUND else 0.0
        vb = dx[index[cap.b], k] if cap.b != GROUND else 0.0
        out[cap.name] = float(abs(va - vb))
    return out


def mid_band_capacitors(circuit: Circuit, dc: DcSolution, *, f_ref_hz: float = 1000.0,
                        held: Iterable[str] | None = None,
                        band: tuple[float, float] = (0.1, 10.0)) -> CapacitorTreatment:
    """Decide which capacitors are short, open or stood in for at mid-band.

    With ``ω·τ = 2π·f_ref·R·C`` (R from :func:`seen_resistances`): open
    when ``ω·τ <= band[0]``, short (held at its DC voltage) when
    ``ω·τ >= band[1]``, otherwise a stand-in resistor ``1/(2π·f_ref·C)`` in
    series with the held DC voltage (module docstring).

    Parameters
    ----------
    circuit : Circuit
    dc : DcSolution
        The DC operating point of ``circuit``.
    f_ref_hz : float
        Mid-band reference frequency, Hz.
    held : Iterable[str], optional
        Short exactly these capacitors instead, all others open, no stand-ins.
    band : tuple[float, float]
        The ``ω·τ`` limits (use ``(1.0, 1.0)`` for a plain short/open split at
        the corner).

    Returns
    -------
    CapacitorTreatment
    """
    if not (np.isfinite(f_ref_hz) and f_ref_hz > 0.0):
        raise ValueError(f"f_ref_hz must be positive, got {f_ref_hz!r}")
    lo, hi = (float(b) for b in band)
    if not (0.0 < lo <= hi):
        raise ValueError(f"band must satisfy 0 < low <= high, got {band!r}")
    resistance = seen_resistances(circuit, dc)
    omega = 2.0 * np.pi * f_ref_hz
    omega_tau = {c.name: omega * resistance[c.name] * c.farads for c in circuit.capacitors}
    names = {c.name for c in circuit.capacitors}
    stand_in: dict[str, float] = {}
    if held is not None:
        chosen = set(held)
        unknown = sorted(chosen - names)
        if unknown:
            raise ValueError(f"held names no capacitor of the circuit: {', '.join(unknown)}")
    else:
        chosen = {name for name, wt in omega_tau.items() if wt >= hi}
        for c in circuit.capacitors:
            if lo < omega_tau[c.name] < hi:
                stand_in[c.name] = 1.0 / (omega * c.farads)
        chosen |= set(stand_in)
    keep = {c.name: float(dc.capacitors[c.name].v) for c in circuit.capacitors if c.name in chosen}
    return CapacitorTreatment(
        f_ref_hz=float(f_ref_hz), held=MappingProxyType(keep), stand_in_ohm=MappingProxyType(stand_in),
        open=tuple(c.name for c in circuit.capacitors if c.name not in chosen),
        omega_tau=MappingProxyType(omega_tau), band=(lo, hi), chosen_by_caller=held is not None)


def mid_band_circuit(circuit: Circuit, treatment: CapacitorTreatment,
                     node_v: Mapping[str, float] | None = None) -> Circuit:
    """The circuit with every stand-in capacitor split into resistor + capacitor.

    A stand-in ``C`` between ``a`` and ``b`` gets a new node ``C.name +
    ".Xc"`` and the resistor ``C.name + ".Xc"`` of ``1/(ωC)``, on the side of
    the end with the smaller DC voltage magnitude (from ``node_v``), so that
    the new node sits near that voltage and its gmin leakage stays
    negligible; the capacitor keeps its name and holds ``v(a) − v(b)``.
    Stage and other node names are kept.
    """
    if not treatment.stand_in_ohm:
        return circuit
    volts = dict(node_v or {})
    volts[GROUND] = 0.0
    resistors = list(circuit.resistors)
    capacitors = []
    for c in circuit.capacitors:
        ohms = treatment.stand_in_ohm.get(c.name)
        if ohms is None:
            capacitors.append(c)
            continue
        node = f"{c.name}.Xc"
        if abs(volts.get(c.a, 0.0)) >= abs(volts.get(c.b, 0.0)):
            # a —C— node —R— b
            resistors.append(Resistor(f"{c.name}.Xc", node, c.b, ohms, c.owner, Role.REACTANCE))
            capacitors.append(replace(c, b=node))
        else:
            # a —R— node —C— b
            resistors.append(Resistor(f"{c.name}.Xc", c.a, node, ohms, c.owner, Role.REACTANCE))
            capacitors.append(replace(c, a=node))
    return replace(circuit, resistors=tuple(resistors), capacitors=tuple(capacitors))


class MidBandNetwork:
    """A circuit compiled for the quasi-static mid-band sweep.

    Parameters
    ----------
    circuit : Circuit
    dc : DcSolution
        Its DC operating point (the held voltages and the starting point).
    treatment : CapacitorTreatment
        Which capacitors are held (see :func:`mid_band_capacitors`).
    options : SolveOptions
        Tolerances of every solve.

    Attributes
    ----------
    circuit : Circuit
        The circuit solved: ``source_circuit`` with the stand-ins split
        (:func:`mid_band_circuit`).
    source_circuit : Circuit
        The circuit as given.
    system : chain.dc.NetworkSystem
        The compiled network.
    x0 : numpy.ndarray
        Unknown vector at zero input (the DC point with held capacitors).
    solves, iterations : int
        Counters of network solves and Newton iterations so far.
    """

    def __init__(self, circuit: Circuit, dc: DcSolution, treatment: CapacitorTreatment, *,
                 options: SolveOptions = SolveOptions()):
        self.source_circuit = circuit
        circuit = mid_band_circuit(circuit, treatment, dc.node_v)
        self.circuit = circuit
        self.treatment = treatment
        self.options = options
        self.system = compile_network(circuit, held_caps=dict(treatment.held), gmin_s=options.gmin_s)
        self._index = {name: i for i, name in enumerate(self.system.nodes)}
        self.solves = 0
        self.iterations = 0
        guess = self.system.vector_from_voltages(dc.node_v, 0.0)
        self.x0 = self.solve(0.0, guess)
        tri = circuit.triodes
        self.triode_names = tuple(t.name for t in tri)
        self._pins = np.array([[self._col(t.plate), self._col(t.grid), self._col(t.cathode)] for t in tri],
                              dtype=np.intp).reshape(-1, 3)
        self._models = tuple(t.model for t in tri)
        self.quiescent_ip_a = self.triodes(self.x0[None, :])[1][0]

    def _col(self, node: str) -> int:
        return -1 if node == GROUND else self._index[node]

    # ------------------------------------------------------------ solving
    def solve(self, signal_v: float, guess: np.ndarray | None) -> np.ndarray:
        """Unknown vector at one source voltage (V), starting from ``guess``."""
        x, iterations, _ = self.system.solve_vector(float(signal_v), guess, options=self.options)
        self.solves += 1
        self.iterations += iterations
        return x

    def step(self, v_to: float, v_from: float, x_from: np.ndarray,
             v_back: float | None = None, x_back: np.ndarray | None = None) -> np.ndarray:
        """Continue from (``v_from``, ``x_from``) to ``v_to``.

        The guess is the secant through the two previous points when
        ``v_back``/``x_back`` are given.  A failed step is split in halves
        (up to 2**6 pieces) before the error is raised.

        Raises
        ------
        DcConvergenceError
        """
        if v_back is not None and x_back is not None and v_from != v_back:
            guess = x_from + (x_from - x_back) * ((v_to - v_from) / (v_from - v_back))
        else:
            guess = x_from
        try:
            return self.solve(v_to, guess)
        except DcConvergenceError:
            pass
        return self._split(v_from, x_from, v_to, _MAX_SPLITS)

    def _split(self, v_from: float, x_from: np.ndarray, v_to: float, depth: int) -> np.ndarray:
        mid = 0.5 * (v_from + v_to)
        try:
            x_mid = self.solve(mid, x_from)
        except DcConvergenceError:
            if depth <= 0:
                raise
            x_mid = self._split(v_from, x_from, mid, depth - 1)
        try:
            return self.solve(v_to, x_mid)
        except DcConvergenceError:
            if depth <= 0:
                raise
            return self._split(mid, x_mid, v_to, depth - 1)

    def solve_where(self, quantity: Callable[[np.ndarray], float],
                    slope: Callable[[np.ndarray, np.ndarray], np.ndarray], v_guess: float, x_guess: np.ndarray,
                    bracket: tuple[float, float], *, max_iter: int = 12) -> tuple[float, np.ndarray] | None:
        """The source voltage (V) in ``bracket`` where ``quantity`` of the solution is zero, and the state there.

        Newton's method on the network equations bordered by ``quantity = 0``,
        unknowns the state x and the source voltage v: with ``F(x, v) = 0`` the
        network, ``J`` its Jacobian in x, ``t = J⁻¹·∂b/∂v`` the tangent and
        ``dx₀ = −J⁻¹·F`` the plain Newton step, the bordered step is
        ``dv = −(q + ∇q·dx₀)/(∇q·t)``, ``dx = dx₀ + dv·t`` (block elimination
        of the bordered Jacobian ``[[J, −∂b/∂v], [∇qᵀ, 0]]``; H. B. Keller's
        bordering algorithm).  One LU per iteration, quadratic convergence
        from a guess between two swept points; the state is then solved at the
        found v by :meth:`solve` (the same convergence test as every point).

        ``slope(x, ys)`` gives ``∇q(x)·y`` for each column of ``ys``.  Returns
        None when an iterate leaves the bracket, a Jacobian is singular or the
        iteration does not settle within ``max_iter``: the caller then brackets.
        """
        lo, hi = min(bracket), max(bracket)
        x = np.array(x_guess, dtype=float)
        v = float(v_guess)
        n = len(self.system.nodes)
        for _ in range(max_iter):
            try:
                _, dx0, tangent = self.system.newton_and_tangent(x, v)
            except np.linalg.LinAlgError:
                return None
            self.iterations += 1
            q = quantity(x)
            d0, dt = slope(x, np.stack([dx0, tangent], axis=1))
            if not (np.isfinite(q) and np.isfinite(d0) and np.isfinite(dt)) or dt == 0.0:
                return None
            dv = -(q + d0) / dt
            dx = dx0 + dv * tangent
            if not np.all(np.isfinite(dx)):
                return None
            x = x + dx
            v = v + dv
            if not lo <= v <= hi:
                return None
            step = float(np.abs(dx[:n]).max()) if n else 0.0
            if abs(dv) <= 1e-13 * max(abs(v), 1e-30) and step <= self.options.tol_v:
                try:
                    return float(v), self.solve(v, x)
                except DcConvergenceError:
                    return None
        return None

    # ------------------------------------------------------------ reading
    def node_voltages(self, xs: np.ndarray, nodes: Iterable[str]) -> np.ndarray:
        """Node voltages (V) of unknown vectors ``xs`` (shape (P, size)) → (P, len(nodes))."""
        xs = np.atleast_2d(xs)
        padded = np.concatenate([xs[:, :len(self.system.nodes)], np.zeros((xs.shape[0], 1))], axis=1)
        return padded[:, [self._col(n) for n in nodes]]

    def triodes(self, xs: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Per point and triode: Vgk (V), plate current (A), grid current (A).

        Shapes (P, T) each, triodes in :attr:`Circuit.triodes` order.
        """
        from chain.tubes import grid_current, plate_current

        xs = np.atleast_2d(xs)
        count = xs.shape[0]
        padded = np.concatenate([xs[:, :len(self.system.nodes)], np.zeros((count, 1))], axis=1)
        t = len(self.triode_names)
        vgk = np.zeros((count, t))
        ip = np.zeros((count, t))
        ig = np.zeros((count, t))
        for i, model in enumerate(self._models):
            vp, vg, vk = (padded[:, self._pins[i, j]] for j in range(3))
            vgk[:, i] = vg - vk
            ip[:, i] = plate_current(model, vp - vk, vg - vk)
            ig[:, i] = grid_current(model, vg - vk)
        return vgk, ip, ig

    def triode_state(self, x: np.ndarray, index: int) -> tuple[float, float]:
        """Vgk (V) and plate current (A) of one triode at one unknown vector,
        evaluated exactly as :meth:`triodes` evaluates it (the same arithmetic on
        one-point arrays), without evaluating the others."""
        from chain.tubes import plate_current

        cols = self._pins[index]
        vp, vg, vk = (np.zeros(1) if c < 0 else np.array([x[c]], dtype=float) for c in cols)
        return float((vg - vk)[0]), float(plate_current(self._models[index], vp - vk, vg - vk)[0])

    def triode_pins(self, ys: np.ndarray, index: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Rows of one triode's plate, grid and cathode in ``ys`` (shape (size, k)), 0 for ground."""
        zero = np.zeros(ys.shape[1:])
        p, g, k = (zero if c < 0 else ys[c] for c in self._pins[index])
        return p, g, k

    def triode_slopes(self, x: np.ndarray, index: int) -> tuple[float, float]:
        """dIp/dVgk and dIp/dVpk (S) of one triode at one unknown vector."""
        from chain.tubes import plate_current_and_derivatives

        vp, vg, vk = (0.0 if c < 0 else float(x[c]) for c in self._pins[index])
        _, gm, gp = plate_current_and_derivatives(self._models[index], np.array([vp - vk]), np.array([vg - vk]))
        return float(np.asarray(gm)[0]), float(np.asarray(gp)[0])

    def triode_point(self, x: np.ndarray, index: int) -> tuple[float, float]:
        """Vgk (V) and plate current (A) of one triode at one unknown vector."""
        from chain.tubes import plate_current

        cols = self._pins[index]
        vp, vg, vk = (0.0 if c < 0 else float(x[c]) for c in cols)
        return vg - vk, float(plate_current(self._models[index], vp - vk, vg - vk))

    def triode_index(self, name: str) -> int:
        return self.triode_names.index(name)
