"""Frequency response of a linearised chain: node transfers and impedances.

Definitions (every quantity per volt of signal-source EMF, frequency in Hz):

``h[node]``
    Node voltage (V) for a 1 V source EMF, for every circuit node (nodes
    shorted to ground by a supply read 0).
``zin_ohm``
    The impedance the source network sees at ``circuit.input_node``:
    ``v(input) / i`` where ``i`` is the current flowing into the input node
    from the source side — the signal source itself and the parts the
    source owns (owner kind ``"input"``) — taken from the full solution.  Because the rest of the
    network holds no independent source this is exactly the load impedance
    (the pickup's load).
``zout_ohm``
    The driving-point impedance at ``circuit.output_node`` with the source
    EMF zeroed (the source is a short, its own impedance stays) and the
    output load removed (every element with role :attr:`Role.LOAD`).
``stage_zin_ohm[stage]``
    ``v(stage.input) / i`` with everything connected, ``i`` being the
    current flowing into the stage input node through the parts that are
    *not* the stage's own (own parts: owned by the stage — its load,
    cathode and grid parts, its triodes and their ``rp``, ``gm``, ``Cgk``,
    ``Cgp``, ``Cpk``).  It therefore includes the stage's grid leak, grid stopper,
    the Miller-multiplied ``Cgp`` and, for a common-grid stage, the cathode
    resistor, and it sees the real load of the stage.
``stage_zout_ohm[stage]``
    The driving-point impedance at ``stage.output`` with the source EMF
    zeroed and every part touching the output node removed unless it is the
    stage's own or a rail's (owner kind ``"rail"``): coupling capacitors, the next
    stage's grid leak or interelectrode capacitances, the output load.  A
    part of another triode touching the node (its ``rp``, its ``gm`` current)
    is removed with it.  What remains upstream (the earlier stages, the
    source impedance, any feedback network named for the stage) stays.
``port_zout_ohm[stage][port]``
    The same at every output port of a stage (a cathodyne's ``plate`` and
    ``cathode``, a long-tailed pair's ``plate1`` and ``plate2``): the parts
    touching that port's node are removed as above, everything on the other
    port stays connected.  ``stage_zout_ohm[stage]`` is the main port's.
``output_zout_ohm[label]``
    The driving-point impedance at each output port of the chain
    (``circuit.outputs``), source zeroed and the loads on that port's node
    removed; ``zout_ohm`` is the first one's.
"""

from __future__ import annotations

from dataclasses import dataclass, field, fields
from typing import Callable, Mapping, Sequence

import numpy as np
from numpy.typing import ArrayLike

from chain.circuit import GROUND, Owner, Role
from chain.errors import AnalysisError, error
from chain.smallsignal.mna import (
    DIRECT_BELOW,
    Mna,
    Stamp,
    assemble,
    current_into,
    solve,
    solve_each_without,
    solve_entry,
)
from chain.smallsignal.model import SmallSignalCircuit

__all__ = [
    "Response",
    "response",
    "transfer_function",
    "gain_at",
]


@dataclass(frozen=True, slots=True, eq=False)
class Response:
    """Frequency response of a small-signal circuit (see the module docstring).

    Arrays are read-only, all of shape ``f_hz.shape``.  Equality is exact
    (every array equal element by element).
    """

    #: analysis frequencies, Hz
    f_hz: np.ndarray
    #: node name → complex node voltage per volt of source EMF
    h: Mapping[str, np.ndarray]
    #: impedance loading the source at the input node, ohm (complex)
    zin_ohm: np.ndarray
    #: impedance at the output node, source zeroed, output load removed, ohm
    #: (None when not computed)
    zout_ohm: np.ndarray | None
    #: stage name → stage input impedance, ohm (complex)
    stage_zin_ohm: Mapping[str, np.ndarray]
    #: stage name → stage output impedance, ohm (complex); empty when not computed
    stage_zout_ohm: Mapping[str, np.ndarray]
    #: the network the response belongs to (for exact re-evaluation)
    ss: SmallSignalCircuit
    #: "modal", "direct", "direct (banded)" or "direct (sparse)": how the node transfers were solved
    method: str = "modal"
    #: stage name → output port → that port's output impedance, ohm; empty when not computed
    port_zout_ohm: Mapping[str, Mapping[str, np.ndarray]] = field(default_factory=dict)
    #: chain output label → output impedance there, ohm; empty when not computed
    output_zout_ohm: Mapping[str, np.ndarray] = field(default_factory=dict)

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, Response):
            return NotImplemented
        for f in fields(self):
            a, b = getattr(self, f.name), getattr(other, f.name)
            if (a is None) != (b is None):
                return False
            if isinstance(a, np.ndarray):
                if not np.array_equal(a, b):
                    return False
            elif isinstance(a, Mapping):
                if not _maps_equal(a, b):
                    return False
            elif a != b:
                return False
        return True

    __hash__ = None  # type: ignore[assignment]

    @property
    def output(self) -> np.ndarray:
        """Transfer from source EMF to the output node (V/V)."""
        return self.h[self.ss.circuit.output_node]


def response(ss: SmallSignalCircuit, f_hz: ArrayLike, *, method: str = "auto",
             output_impedances: bool = True, stage_impedances: bool = True) -> Response:
    """Solve ``ss`` at every frequency of ``f_hz``.

    Parameters
    ----------
    ss
        The linearised circuit (:func:`chain.smallsignal.linearize`).
    f_hz
        Frequencies, Hz: positive and finite, scalar or 1-D.
    method
        ``"auto"`` (modal decomposition for many frequencies, checked and
        replaced by the direct solve when inaccurate), ``"modal"`` or
        ``"direct"``; the numbers agree to rounding.
    output_impedances
        Also compute ``zout_ohm`` and ``stage_zout_ohm`` (one extra solve per
        stage plus one for the output: several times the cost of the
        transfers alone).  When False they are ``None`` and ``{}``.

    Returns
    -------
    Response
        Node transfers (V/V), input, output and per-stage impedances (ohm);
        definitions in the module docstring.
    """
    f = _frequencies(f_hz)
    s = 2j * np.pi * f
    mna = assemble(ss)
    x, used = solve(mna, s, mna.source_rhs(), method)
    circuit = ss.circuit

    zero = np.zeros(f.shape, dtype=complex)
    h = {name: _frozen(zero if rep == GROUND else x[:, mna.index[rep]])
         for name, rep in ss.node_of.items()}

    source_side = [st for st in mna.stamps if st.kind == "V" or st.owner.kind == "input"]
    zin = _loaded_impedance(mna, ss.node_of[circuit.input_node], source_side, x, s)
    stage_zin = {}
    for st in circuit.stages if stage_impedances else ():
        me = Owner("stage", st.name)
        feeders = [e for e in mna.stamps if e.owner != me]
        stage_zin[st.name] = _frozen(_loaded_impedance(mna, ss.node_of[st.input], feeders, x, s))

    zout = None
    stage_zout = {}
    port_zout: dict[str, dict[str, np.ndarray]] = {}
    output_zout: dict[str, np.ndarray] = {}
    if output_impedances:
        # (label, stage or None, node, parts taken out) of every port
        jobs: list[tuple[str, str | None, int, list[Stamp]]] = []
        for label, out_node in circuit.outputs.items():
            node = mna.index[ss.node_of[out_node]]
            load = [st for st in mna.stamps if st.kind != "V" and st.role == Role.LOAD and st.touches(node)]
            jobs.append((label, None, node, load))
        touching: dict[int, list[Stamp]] = {}
        for e in mna.stamps:
            if e.kind != "V" and e.owner.kind != "rail":
                for end in {e.a, e.b}:
                    touching.setdefault(end, []).append(e)
        for st in circuit.stages if stage_impedances else ():
            me = Owner("stage", st.name)
            for port, port_node in st.outputs.items():
                node = mna.index[ss.node_of[port_node]]
                jobs.append((port, st.name, node, [e for e in touching.get(node, ()) if e.owner != me]))
        for (label, stage, _, _), z in zip(jobs, _port_impedances(mna, jobs, s, method)):
            if stage is None:
                output_zout[label] = _frozen(z)
            else:
                port_zout.setdefault(stage, {})[label] = _frozen(z)
        zout = next(iter(output_zout.values()))  # the first output is circuit.output_node
        stage_zout = {name: next(iter(ports.values())) for name, ports in port_zout.items()}
    return Response(
        f_hz=_frozen(f), h=h, zin_ohm=_frozen(zin), zout_ohm=zout,
        stage_zin_ohm=stage_zin, stage_zout_ohm=stage_zout, ss=ss, method=used,
        port_zout_ohm=port_zout, output_zout_ohm=output_zout,
    )


def transfer_function(ss: SmallSignalCircuit, node: str) -> Callable[[ArrayLike], np.ndarray]:
    """Exact ``H(f) = v(node) / EMF`` as a function of frequency (Hz).

    The matrices are assembled once; each call solves ``Y(j2πf)`` directly,
    so the function is suited to root finding at a few frequencies.
    """
    if node not in ss.node_of:
        raise AnalysisError(error("E505", f"{node!r} is not a node of the circuit", subject=node))
    rep = ss.node_of[node]
    mna = assemble(ss)
    i = mna.index[rep]
    b = mna.source_rhs()

    def h(f_hz: ArrayLike) -> np.ndarray:
        f = np.asarray(f_hz, dtype=float)
        if rep == GROUND:
            return np.zeros(f.shape, dtype=complex)
        x, _ = solve(mna, 2j * np.pi * f.reshape(-1), b, "direct")
        return x[:, i].reshape(f.shape)

    return h


def gain_at(resp: Response, node: str, f_hz: ArrayLike) -> complex | np.ndarray:
    """``v(node) / EMF`` at ``f_hz`` (Hz), solved exactly (not interpolated).

    Returns a complex scalar for a scalar frequency, else an array.
    """
    f = np.asarray(f_hz, dtype=float)
    _frequencies(f)
    value = transfer_function(resp.ss, node)(f)
    return complex(value) if value.ndim == 0 else value


# -- helpers ------------------------------------------------------------------


def _maps_equal(a: Mapping, b: Mapping) -> bool:
    """Mappings of arrays (or of mappings of arrays) equal element by element."""
    if a.keys() != b.keys():
        return False
    return all(_maps_equal(a[k], b[k]) if isinstance(a[k], Mapping) else np.array_equal(a[k], b[k]) for k in a)


def _frequencies(f_hz: ArrayLike) -> np.ndarray:
    f = np.atleast_1d(np.asarray(f_hz, dtype=float))
    if f.ndim != 1 or f.size == 0 or not np.all(np.isfinite(f)) or not np.all(f > 0.0):
        raise AnalysisError(error(
            "E507", "frequencies must be a non-empty 1-D set of positive, finite values (Hz)"))
    return f


def _frozen(a: np.ndarray) -> np.ndarray:
    a = np.array(a, copy=True)
    a.flags.writeable = False
    return a


def _port_impedances(mna: Mna, jobs: Sequence[tuple[str, str | None, int, list[Stamp]]], s: np.ndarray,
                     method: str) -> list[np.ndarray]:
    """:func:`_port_impedance` of every ``(label, stage, node, removed)`` job.

    At a few frequencies (where :func:`solve_entry` solves directly anyway)
    every port at every frequency is one system of
    :func:`chain.smallsignal.mna.solve_each_without`, all solved together."""
    if method == "modal" or s.size > DIRECT_BELOW:
        return [_port_impedance(mna, node, removed, s, method) for _, _, node, removed in jobs]
    live = [k for k, job in enumerate(jobs) if job[2] >= 0]
    out = [np.zeros(s.shape, dtype=complex) for _ in jobs]
    if not live:
        return out
    removals, rhs, freq = [], [], []
    for k in live:
        b = np.zeros(mna.size)
        b[jobs[k][2]] = 1.0
        for i in range(s.size):
            removals.append(jobs[k][3])
            rhs.append(b)
            freq.append(s[i])
    x = solve_each_without(mna, np.array(freq), removals, np.array(rhs))
    for j, k in enumerate(live):
        out[k] = x[j * s.size:(j + 1) * s.size, jobs[k][2]]
    return out


def _port_impedance(mna: Mna, node: int, removed: Sequence[Stamp], s: np.ndarray,
                    method: str) -> np.ndarray:
    """Voltage at ``node`` for 1 A injected there, ``removed`` parts taken out (ohm)."""
    if node < 0:
        return np.zeros(s.shape, dtype=complex)
    b = np.zeros(mna.size)
    b[node] = 1.0
    return solve_entry(mna.without(removed), s, b, node, method)


def _loaded_impedance(mna: Mna, node_name: str, feeders: Sequence[Stamp], x: np.ndarray,
                      s: np.ndarray) -> np.ndarray:
    """``v(node) / i``, ``i`` the current from ``feeders`` into the node (ohm)."""
    node = mna.index[node_name]
    if node < 0:
        return np.zeros(x.shape[0], dtype=complex)
    i = np.zeros(x.shape[0], dtype=complex)
    for st in feeders:
        if st.touches(node):
            i = i + current_into(st, node, x, s)
    with np.errstate(divide="ignore", invalid="ignore"):
        return x[:, node] / i
