"""Linearisation: a :class:`~chain.circuit.Circuit` at its DC point → a linear network.

:func:`linearize` turns every part into its small-signal form:

* supply sources (role ``"supply"``) become AC shorts — their nodes merge
  with ground (or with each other); rails fed through dropping resistors
  stay ordinary nodes, so a finite decoupling capacitor is a finite
  admittance, not a perfect ground;
* zero-ohm resistors and zero-henry inductors are shorts as well;
* resistors, capacitors and inductors keep their values (as admittances
  G, jωC and an inductor branch in the nodal solve);
* the signal source (role ``"signal"``) becomes an ideal source of unit EMF;
* each triode becomes its incremental model at its own operating point plus
  its three interelectrode capacitances.

The triode model
----------------
Thevenin form: an EMF ``mu·vgk`` in series with ``rp`` between cathode and
plate, so the plate current (into the plate, out of the cathode) is

    ip = (vpk + mu·vgk) / rp.

Norton form: a current source ``gm·vgk`` (plate → cathode) in parallel with
``rp``:

    ip = gm·vgk + vpk / rp.

The two are the same equation when ``mu = gm·rp`` (the definition of the
amplification factor; standard small-signal valve analysis, from memory of
M. Jones, "Valve Amplifiers").  The nodal solve stamps the Norton form with
``gm = mu / rp`` so that the Thevenin parameters ``mu`` and ``rp`` reported
by the DC solve are the ones used exactly.  The capacitances ``Cgk``,
``Cgp`` and ``Cpk`` of the tube model are added as ordinary capacitors named
``"<triode>.Cgk"``, ``"<triode>.Cgp"``, ``"<triode>.Cpk"``; the Miller
effect and the grid-stopper pole therefore come out of the nodal solve with
no special treatment.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Mapping

from chain.circuit import (
    GROUND,
    Capacitor,
    Circuit,
    Element,
    Inductor,
    Resistor,
    Transconductance,
    VoltageSource,
)
from chain.dc.result import DcSolution
from chain.errors import AnalysisError, error
from chain.graph import components

__all__ = [
    "unknown_pattern",
    "TriodeSmallSignal",
    "SmallSignalCircuit",
    "linearize",
]


@dataclass(frozen=True, slots=True)
class TriodeSmallSignal:
    """One triode's incremental parameters, as used by the nodal solve.

    ``gm_s`` is the transconductance actually stamped (``mu / rp_ohm``);
    nodes are the merged (small-signal) node names.
    """

    name: str
    plate: str
    grid: str
    cathode: str
    gm_s: float
    rp_ohm: float
    mu: float
    cgk_f: float
    cgp_f: float
    cpk_f: float


@dataclass(frozen=True, slots=True)
class SmallSignalCircuit:
    """The linear network the frequency response is computed on.

    Element node names are *solved* node names: a node shorted to ground by
    a supply is ``"gnd"``; nodes shorted together carry the name of the first
    one in :meth:`Circuit.nodes` order.
    """

    #: the circuit this network was made from (stages, couplings, names)
    circuit: Circuit
    #: unknown node voltages of the solve, in a stable order
    nodes: tuple[str, ...]
    #: every circuit node (and ``"gnd"``) → its solved node name or ``"gnd"``
    node_of: Mapping[str, str]
    #: circuit resistors plus each triode's ``"<triode>.rp"``
    resistors: tuple[Resistor, ...]
    #: circuit capacitors plus each triode's ``Cgk``, ``Cgp``, ``Cpk``
    capacitors: tuple[Capacitor, ...]
    inductors: tuple[Inductor, ...]
    #: each triode's ``"<triode>.gm"``
    transconductances: tuple[Transconductance, ...]
    #: the signal source, unit EMF between its (solved) pos and neg nodes
    source: VoltageSource
    triodes: tuple[TriodeSmallSignal, ...]
    #: names of the parts replaced by shorts (supplies, zero-ohm parts)
    shorted: tuple[str, ...] = ()

    @property
    def elements(self) -> tuple[Element, ...]:
        """Every linear element in stamping order: resistors, capacitors,
        inductors, transconductances, then the signal source."""
        return (*self.resistors, *self.capacitors, *self.inductors, *self.transconductances, self.source)

    @property
    def input_node(self) -> str:
        return self.circuit.input_node

    @property
    def output_node(self) -> str:
        return self.circuit.output_node

    def triode(self, name: str) -> TriodeSmallSignal:
        for t in self.triodes:
            if t.name == name:
                return t
        raise KeyError(name)


def linearize(circuit: Circuit, dc: DcSolution) -> SmallSignalCircuit:
    """Linearise ``circuit`` about the DC solution ``dc``.

    Parameters
    ----------
    circuit
        The component-level circuit.
    dc
        Its DC solution; ``dc.points[triode.name]`` gives each triode's
        ``rp_ohm`` (ohm) and ``mu`` (V/V).

    Returns
    -------
    SmallSignalCircuit
        Supplies shorted, triodes replaced by ``gm = mu/rp`` in parallel with
        ``rp`` (equivalent to ``mu·vgk`` in series with ``rp``; see the module
        docstring) plus ``Cgk``, ``Cgp``, ``Cpk`` (F) from the tube model.

    Raises
    ------
    AnalysisError
        E501 when there is not exactly one signal source, E502 when a triode
        has no (or an unusable) operating point, E503 for an impossible part
        value, E504 when a node has no path to ground through any part, E505
        when the input, output or a stage node is not in the circuit.
    """
    _check_values(circuit)
    signal = _the_signal_source(circuit)
    node_of, shorted = _merge_shorts(circuit)
    _check_named_nodes(circuit, node_of)

    def m(node: str) -> str:
        return node_of[node]

    resistors: list[Resistor] = []
    for r in circuit.resistors:
        if r.ohms == 0.0 or math.isinf(r.ohms) or m(r.a) == m(r.b):
            continue
        resistors.append(replace(r, a=m(r.a), b=m(r.b)))
    capacitors: list[Capacitor] = []
    for c in circuit.capacitors:
        if c.farads == 0.0 or m(c.a) == m(c.b):
            continue
        capacitors.append(replace(c, a=m(c.a), b=m(c.b)))
    inductors: list[Inductor] = []
    for ind in circuit.inductors:
        if ind.henries == 0.0 or m(ind.a) == m(ind.b):
            continue
        inductors.append(replace(ind, a=m(ind.a), b=m(ind.b)))

    triodes: list[TriodeSmallSignal] = []
    gms: list[Transconductance] = []
    for t in circuit.triodes:
        ts = _triode_small_signal(t, dc, m)
        triodes.append(ts)
        for el in t.small_signal_elements(gm_s=ts.gm_s, rp_ohm=ts.rp_ohm, node=m):
            if isinstance(el, Resistor):
                resistors.append(el)
            elif isinstance(el, Capacitor):
                capacitors.append(el)
            elif isinstance(el, Transconductance):
                gms.append(el)

    source = replace(signal, pos=m(signal.pos), neg=m(signal.neg), volts=1.0)
    if source.pos == source.neg:
        raise AnalysisError(error(
            "E501", f"signal source {signal.name!r} is shorted by a supply or a zero-ohm part",
            subject=signal.name))

    nodes = tuple(dict.fromkeys(node_of[n] for n in circuit.nodes() if node_of[n] != GROUND))
    ss = SmallSignalCircuit(
        circuit=circuit,
        nodes=nodes,
        node_of=dict(node_of),
        resistors=tuple(resistors),
        capacitors=tuple(capacitors),
        inductors=tuple(inductors),
        transconductances=tuple(gms),
        source=source,
        triodes=tuple(triodes),
        shorted=tuple(shorted),
    )
    _check_grounded(ss)
    return ss


# -- helpers -----------------------------------------------------------------


def _the_signal_source(circuit: Circuit) -> VoltageSource:
    signals = [s for s in circuit.sources if s.role == "signal"]
    if len(signals) != 1:
        raise AnalysisError(error(
            "E501", f"the small-signal solve needs exactly one signal source, found {len(signals)}",
            hint="give the circuit one source with role 'signal'"))
    for s in circuit.sources:
        if s.role not in ("signal", "supply"):
            raise AnalysisError(error(
                "E501", f"source {s.name!r} has unknown role {s.role!r}", subject=s.name))
    return signals[0]


def _check_values(circuit: Circuit) -> None:
    bad = []
    for r in circuit.resistors:
        if not (r.ohms >= 0.0) or math.isnan(r.ohms):
            bad.append(error("E503", f"resistor {r.name!r} has value {r.ohms!r} ohm", subject=r.name))
    for c in circuit.capacitors:
        if not (0.0 <= c.farads < math.inf):
            bad.append(error("E503", f"capacitor {c.name!r} has value {c.farads!r} F", subject=c.name))
    for ind in circuit.inductors:
        if not (0.0 <= ind.henries < math.inf):
            bad.append(error("E503", f"inductor {ind.name!r} has value {ind.henries!r} H",
                             subject=ind.name))
    if bad:
        raise AnalysisError(bad)


def unknown_pattern(circuit: Circuit):
    """The non-zero pattern (N, N) of ``G + s·C`` that :func:`linearize` and
    :func:`chain.smallsignal.mna.assemble` will make of ``circuit``, from its
    structure alone (no DC solve): the nodes merged as :func:`linearize` merges
    them, each part joining its two nodes, each triode its three pins (``rp``,
    ``gm`` and the interelectrode capacitances), each inductor and the signal
    source a branch current.  A part whose value makes it vanish is left out
    as :func:`linearize` leaves it out."""
    import numpy as np

    node_of, _ = _merge_shorts(circuit)
    index: dict[str, int] = {}
    for n in circuit.nodes():
        rep = node_of.get(n, n)
        if rep != GROUND and rep not in index:
            index[rep] = len(index)
    inductors = [ind for ind in circuit.inductors
                 if ind.henries != 0.0 and node_of.get(ind.a, ind.a) != node_of.get(ind.b, ind.b)]
    size = len(index) + len(inductors) + 1
    pattern = np.zeros((size, size), dtype=bool)

    def at(node: str) -> int:
        return index.get(node_of.get(node, node), -1)

    def join(*ix: int) -> None:
        inside = [i for i in ix if i >= 0]
        pattern[np.ix_(inside, inside)] = True

    for r in circuit.resistors:
        if r.ohms != 0.0 and not math.isinf(r.ohms):
            join(at(r.a), at(r.b))
    for c in circuit.capacitors:
        if c.farads != 0.0:
            join(at(c.a), at(c.b))
    for t in circuit.triodes:
        join(at(t.plate), at(t.grid), at(t.cathode))
    branches = [(ind.a, ind.b) for ind in inductors]
    branches += [(s.pos, s.neg) for s in circuit.sources if s.role == "signal"][:1]
    for k, (a, b) in enumerate(branches):
        br = len(index) + k
        for node in (at(a), at(b)):
            if node >= 0:
                pattern[node, br] = pattern[br, node] = True
        if k < len(inductors):
            pattern[br, br] = True  # −L on an inductor branch's diagonal
    return pattern


def _merge_shorts(circuit: Circuit) -> tuple[dict[str, str], list[str]]:
    """Union the nodes tied together by supplies and zero-value parts.

    Returns the map node → representative (``"gnd"`` when the group holds
    ground, else the group's first node in :meth:`Circuit.nodes` order) and
    the names of the shorting parts.
    """
    order = (GROUND,) + circuit.nodes()
    edges = []
    shorted: list[str] = []
    for s in circuit.sources:
        if s.role == "supply":
            edges.append((s.pos, s.neg))
            shorted.append(s.name)
    for r in circuit.resistors:
        if r.ohms == 0.0:
            edges.append((r.a, r.b))
            shorted.append(r.name)
    for ind in circuit.inductors:
        if ind.henries == 0.0:
            edges.append((ind.a, ind.b))
            shorted.append(ind.name)
    rank = {n: i for i, n in enumerate(order)}
    node_of: dict[str, str] = {}
    for group in components(order, edges):
        rep = min(group, key=rank.__getitem__)
        for n in group:
            node_of[n] = rep
    return node_of, shorted


def _check_named_nodes(circuit: Circuit, node_of: Mapping[str, str]) -> None:
    wanted = [("input node", circuit.input_node), ("output node", circuit.output_node)]
    for st in circuit.stages:
        wanted += [(f"stage {st.name} input", st.input), (f"stage {st.name} output", st.output)]
    for frm, to in circuit.couplings.values():
        wanted += [("coupling node", frm), ("coupling node", to)]
    missing = [error("E505", f"{what} {node!r} is not a node of the circuit", subject=node)
               for what, node in wanted if node not in node_of]
    if missing:
        raise AnalysisError(missing)


def _triode_small_signal(t, dc: DcSolution, m) -> TriodeSmallSignal:
    try:
        op = dc.points[t.name]
    except KeyError:
        raise AnalysisError(error(
            "E502", f"no DC operating point for triode {t.name!r}", subject=t.name)) from None
    rp, mu = float(op.rp_ohm), float(op.mu)
    if not (rp > 0.0) or math.isnan(mu) or math.isinf(mu) or mu < 0.0:
        raise AnalysisError(error(
            "E502", f"triode {t.name!r} has unusable small-signal parameters "
                    f"(rp = {rp!r} ohm, mu = {mu!r})", subject=t.name))
    gm = mu / rp if math.isfinite(rp) else float(op.gm_s)
    model = t.model
    return TriodeSmallSignal(
        name=t.name, plate=m(t.plate), grid=m(t.grid), cathode=m(t.cathode),
        gm_s=gm, rp_ohm=rp, mu=mu,
        cgk_f=float(model.cgk_f), cgp_f=float(model.cgp_f), cpk_f=float(model.cpk_f),
    )


def _check_grounded(ss: SmallSignalCircuit) -> None:
    """Every node needs a path to ground through some part (at some frequency)."""
    parts: tuple[Resistor | Capacitor | Inductor, ...] = (*ss.resistors, *ss.capacitors, *ss.inductors)
    edges = [(part.a, part.b) for part in parts]
    edges.append((ss.source.pos, ss.source.neg))
    grounded = next(set(c) for c in components((GROUND,) + ss.nodes, edges) if GROUND in c)
    floating = sorted(set(ss.nodes) - grounded)
    if floating:
        raise AnalysisError(error(
            "E504", "no path to ground from node(s) " + ", ".join(repr(n) for n in floating),
            hint="every node needs a resistor, capacitor or inductor path to ground",
            subject=floating[0]))
