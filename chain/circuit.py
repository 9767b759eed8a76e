"""The component-level circuit: what a Design expands into.

A :class:`Circuit` is a flat, immutable list of elements between named nodes:
two-terminal parts (:class:`Resistor`, :class:`Capacitor`, :class:`Inductor`),
:class:`VoltageSource` s and :class:`Triode` s.  Node names are readable
(``"V1.plate"``, ``"B2"``, ``"tone.mid"``, ``"gnd"``) but carry no meaning
for the program: every element knows its :class:`Owner` (the stage, network,
rail, supply, source, coupling, load or stray it was made for) and its
:class:`Role` there (plate load, grid leak, bypass, …), set once by
:func:`chain.build.build`.  No layer after the build finds a part or a node by
parsing its name; it asks the circuit (:meth:`Circuit.parts`,
:meth:`Circuit.stage_of_node`, …).

Elements stamp themselves
-------------------------
Every element has one method, ``stamp(stamper)``, that tells a
:class:`Stamper` what it is in circuit terms: a conductance, a capacitance,
an inductance, a voltage source, a transconductance or a triode.  The
analyses differ only in their stampers:

* the DC solve (:mod:`chain.dc`) stamps conductances, treats an inductance
  as a 0 V branch, a capacitance as open (or as a held voltage), and
  evaluates the triodes, vectorised, with the residual and Jacobian pattern
  :data:`TRIODE_KCL` given here;
* the small-signal solve (:mod:`chain.smallsignal`) puts conductances and
  transconductances into ``G``, capacitances into ``C``, inductances as
  branch rows with ``−L`` in ``C``; a triode there is first replaced by its
  linear elements (:meth:`Triode.small_signal_elements`);
* a time-domain solve replaces each capacitance and inductance by its
  companion model for the step it takes — the same ``stamp`` calls.

One ground convention everywhere: node index ``-1`` is ground, and vectors
of node voltages are padded with a trailing 0 so that ``v[-1]`` reads 0 V.

Stages
------
A :class:`StageRecord` holds a stage's triodes (one or more) and its named
ports: ``inputs`` (where signal enters) and ``outputs`` (where it leaves).

Units: ohm, farad, henry, volt, ampere, siemens — SI base units throughout.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from enum import Enum
from types import MappingProxyType
from typing import Iterable, Literal, Mapping, Protocol, Union

from chain.errors import Span
from chain.language.design import StageKind
from chain.tubes import TriodeModel

GROUND = "gnd"

__all__ = [
    "GROUND",
    "OwnerKind",
    "Owner",
    "NO_OWNER",
    "Role",
    "StageKind",
    "Stamper",
    "TRIODE_KCL",
    "Resistor",
    "Capacitor",
    "Inductor",
    "VoltageSource",
    "Transconductance",
    "Triode",
    "Element",
    "StageRecord",
    "Circuit",
    "Unions",
    "terminals",
]

#: what an element can belong to (the strings appear in the JSON report)
OwnerKind = Literal["supply", "rail", "input", "stage", "coupling", "network", "stray", "output", "other"]
#: how messages name each stage configuration
_KIND_WORDS = {
    "common-cathode": "common-cathode stage",
    "cathode-follower": "cathode follower",
    "common-grid": "common-grid stage",
    "cathodyne": "cathodyne phase inverter",
    "long-tailed-pair": "long-tailed pair",
}


@dataclass(frozen=True, slots=True)
class Owner:
    """What an element was made for: ``kind`` and the netlist name of that thing.

    The supply ``HT`` → ``Owner("supply", "HT")``; a rail → ``("rail", "B1")``;
    a stage's parts and triodes → ``("stage", "V1")``; a network instance's
    parts → ``("network", "tone")``; a coupling capacitor →
    ``("coupling", "V1->V2")``; the source's parts → ``("input", "input")``;
    the output load → ``("output", "output")``; a stray capacitance →
    ``("stray", "<node as written>")``.
    """

    kind: OwnerKind
    name: str


#: owner of elements made outside a design (hand-built test circuits)
NO_OWNER = Owner("other", "")


class Role(str, Enum):
    """What an element does for its owner.  Values are readable words."""

    # stages
    PLATE_LOAD = "plate load"
    CATHODE_RESISTOR = "cathode resistor"
    BYPASS = "cathode bypass"
    BYPASS_SERIES = "bypass series resistor"
    GRID_LEAK = "grid leak"
    GRID_STOPPER = "grid stopper"
    TAIL_RESISTOR = "tail resistor"
    #: a capacitor from a grid (leak top) to ground: the AC-grounded second grid of a long-tailed pair
    GRID_BYPASS = "grid bypass capacitor"
    TRIODE = "triode"
    # a triode's small-signal elements
    PLATE_RESISTANCE = "plate resistance"
    TRANSCONDUCTANCE = "transconductance"
    GRID_CATHODE_CAP = "grid-cathode capacitance"
    GRID_PLATE_CAP = "grid-plate capacitance"
    PLATE_CATHODE_CAP = "plate-cathode capacitance"
    # supply and rails
    SUPPLY = "supply"
    SUPPLY_IMPEDANCE = "supply impedance"
    RAIL_DROP = "rail dropping resistor"
    RAIL_DECOUPLE = "rail decoupling capacitor"
    # signal path
    SIGNAL = "signal"
    SOURCE_RESISTANCE = "source resistance"
    PICKUP_WINDING = "pickup winding resistance"
    PICKUP_INDUCTANCE = "pickup inductance"
    PICKUP_LOSS = "pickup eddy-current loss"
    PICKUP_CAPACITANCE = "pickup capacitance"
    CABLE_CAPACITANCE = "cable capacitance"
    COUPLING = "coupling capacitor"
    NETWORK_PART = "network part"
    POT_UPPER = "pot section, wiper to the knob-10 end"
    POT_LOWER = "pot section, wiper to the knob-0 end"
    LOAD = "output load"
    STRAY = "stray capacitance"
    #: a capacitor replaced by its reactance in a mid-band network
    REACTANCE = "reactance at mid-band"
    OTHER = "other"

    def __str__(self) -> str:  # pragma: no cover - plain value
        return self.value


#: roles of a triode's small-signal elements (they belong to the triode's owner)
TRIODE_ELEMENT_ROLES = (Role.PLATE_RESISTANCE, Role.TRANSCONDUCTANCE, Role.GRID_CATHODE_CAP,
                        Role.GRID_PLATE_CAP, Role.PLATE_CATHODE_CAP)


class Stamper(Protocol):
    """What an analysis offers elements to stamp themselves into.

    Node arguments are node names; ``part`` is the element itself (its name,
    owner and role travel with the stamp).
    """

    def conductance(self, part: "Element", a: str, b: str, g_s: float) -> None: ...

    def capacitance(self, part: "Element", a: str, b: str, c_f: float) -> None: ...

    def inductance(self, part: "Element", a: str, b: str, l_h: float) -> None: ...

    def voltage_source(self, part: "VoltageSource", pos: str, neg: str) -> None: ...

    def transconductance(self, part: "Transconductance", a: str, b: str, ctrl_pos: str, ctrl_neg: str,
                         gm_s: float) -> None: ...

    def triode(self, part: "Triode") -> None: ...


def _coerce_role(obj, name: str = "role") -> None:
    value = getattr(obj, name)
    if not isinstance(value, Role):
        object.__setattr__(obj, name, Role(value))


@dataclass(frozen=True, slots=True)
class Resistor:
    name: str
    a: str
    b: str
    ohms: float
    owner: Owner = NO_OWNER
    role: Role = Role.OTHER

    def __post_init__(self):
        _coerce_role(self)

    def stamp(self, st: Stamper) -> None:
        """A conductance ``1/ohms`` between ``a`` and ``b``."""
        st.conductance(self, self.a, self.b, 1.0 / self.ohms if self.ohms != 0.0 else float("inf"))


@dataclass(frozen=True, slots=True)
class Capacitor:
    name: str
    a: str
    b: str
    farads: float
    #: stated DC voltage rating (V), or None when the netlist gives none
    rated_v: float | None = None
    owner: Owner = NO_OWNER
    role: Role = Role.OTHER

    def __post_init__(self):
        _coerce_role(self)

    def stamp(self, st: Stamper) -> None:
        """A capacitance between ``a`` and ``b`` (open at DC unless held)."""
        st.capacitance(self, self.a, self.b, self.farads)


@dataclass(frozen=True, slots=True)
class Inductor:
    name: str
    a: str
    b: str
    henries: float
    owner: Owner = NO_OWNER
    role: Role = Role.OTHER

    def __post_init__(self):
        _coerce_role(self)

    def stamp(self, st: Stamper) -> None:
        """An inductance from ``a`` to ``b`` (a 0 V branch at DC)."""
        st.inductance(self, self.a, self.b, self.henries)


@dataclass(frozen=True, slots=True)
class VoltageSource:
    """Ideal voltage source, ``pos`` minus ``neg`` = ``volts`` at DC.

    ``role`` is :attr:`Role.SUPPLY` (a DC supply; AC ground in small-signal
    work) or :attr:`Role.SIGNAL` (the input: 0 V at DC, unit amplitude in
    small-signal work, swept in headroom work).  The plain strings
    ``"supply"`` and ``"signal"`` are accepted and compare equal.
    """

    name: str
    pos: str
    neg: str
    volts: float
    role: Role = Role.SUPPLY
    owner: Owner = NO_OWNER

    def __post_init__(self):
        _coerce_role(self)

    def stamp(self, st: Stamper) -> None:
        st.voltage_source(self, self.pos, self.neg)


@dataclass(frozen=True, slots=True)
class Transconductance:
    """Voltage-controlled current source (a linear element of small-signal work).

    A current ``gm_s · (v(ctrl_pos) − v(ctrl_neg))`` (A) flows into the
    element at node ``a`` and leaves it at node ``b`` (for a triode: into the
    plate, out of the cathode, controlled by grid minus cathode).
    """

    name: str
    a: str
    b: str
    ctrl_pos: str
    ctrl_neg: str
    gm_s: float
    owner: Owner = NO_OWNER
    role: Role = Role.TRANSCONDUCTANCE

    def __post_init__(self):
        _coerce_role(self)

    def stamp(self, st: Stamper) -> None:
        st.transconductance(self, self.a, self.b, self.ctrl_pos, self.ctrl_neg, self.gm_s)


#: The triode's Kirchhoff current-law pattern, used by every nonlinear solve.
#: Rows count current *leaving* a node: plate ``+Ip``, grid ``+Ig``,
#: cathode ``−(Ip + Ig)``.  With ``Ip = f(vpk, vgk)``, ``Ig = h(vgk)`` and
#: ``gp = ∂Ip/∂vpk``, ``gm = ∂Ip/∂vgk``, ``gg = ∂Ig/∂vgk``, the derivatives
#: by node voltage follow from ``vpk = vp − vk``, ``vgk = vg − vk``.  Each
#: entry: ``(pin, coefficient of Ip, coefficient of Ig,
#: ((column pin, (coefficient of gp, of gm, of gg)), …))``.
TRIODE_KCL = (
    ("plate", 1.0, 0.0, (("plate", (1, 0, 0)), ("grid", (0, 1, 0)), ("cathode", (-1, -1, 0)))),
    ("grid", 0.0, 1.0, (("grid", (0, 0, 1)), ("cathode", (0, 0, -1)))),
    ("cathode", -1.0, -1.0, (("plate", (-1, 0, 0)), ("grid", (0, -1, -1)), ("cathode", (1, 1, 1)))),
)


@dataclass(frozen=True, slots=True)
class Triode:
    """One triode section between ``plate``, ``grid`` and ``cathode`` nodes."""

    name: str
    plate: str
    grid: str
    cathode: str
    model: TriodeModel
    #: heater potential (V) for the heater–cathode rating check
    heater_v: float = 0.0
    owner: Owner = NO_OWNER
    role: Role = Role.TRIODE

    def __post_init__(self):
        _coerce_role(self)

    def pin(self, name: str) -> str:
        """Node of pin ``"plate"``, ``"grid"`` or ``"cathode"``."""
        return {"plate": self.plate, "grid": self.grid, "cathode": self.cathode}[name]

    def stamp(self, st: Stamper) -> None:
        """A nonlinear element: plate and grid currents per :data:`TRIODE_KCL`."""
        st.triode(self)

    def small_signal_elements(self, *, gm_s: float, rp_ohm: float, node=lambda n: n
                              ) -> tuple["Element", ...]:
        """The linear elements that replace this triode at an operating point.

        Norton form of the incremental model: ``gm·vgk`` from plate to
        cathode in parallel with ``rp``, plus the interelectrode capacitances
        ``Cgk``, ``Cgp``, ``Cpk`` of the model (see
        :mod:`chain.smallsignal.model` for the equations).  ``node`` maps
        circuit nodes to the solved (merged) nodes; elements whose two ends
        merge are left out.
        """
        p, g, k = node(self.plate), node(self.grid), node(self.cathode)
        out: list[Element] = []
        if rp_ohm != float("inf") and p != k:
            out.append(Resistor(f"{self.name}.rp", p, k, rp_ohm, self.owner, Role.PLATE_RESISTANCE))
        if gm_s != 0.0 and p != k and g != k:
            out.append(Transconductance(f"{self.name}.gm", p, k, g, k, gm_s, self.owner))
        for label, role, a, b, f in (("Cgk", Role.GRID_CATHODE_CAP, g, k, self.model.cgk_f),
                                     ("Cgp", Role.GRID_PLATE_CAP, g, p, self.model.cgp_f),
                                     ("Cpk", Role.PLATE_CATHODE_CAP, p, k, self.model.cpk_f)):
            if f > 0.0 and a != b:
                out.append(Capacitor(f"{self.name}.{label}", a, b, float(f), None, self.owner, role))
        return tuple(out)


Element = Union[Resistor, Capacitor, Inductor, VoltageSource, Transconductance, Triode]


def _frozen_map(m: Mapping) -> Mapping:
    return m if isinstance(m, MappingProxyType) else MappingProxyType(dict(m))


@dataclass(frozen=True, slots=True)
class StageRecord:
    """A stage as the analyses see it: its triodes and its named ports.

    ``inputs`` and ``outputs`` map a port name to the circuit node: a
    common-cathode stage has input ``"in"`` (the top of the grid leak) and
    output ``"out"`` (the plate); a cathodyne has outputs ``"plate"`` and
    ``"cathode"``; a long-tailed pair has one output per plate.  The first
    input and the first output are the stage's main signal path
    (:attr:`input`, :attr:`output`).
    """

    name: str
    kind: StageKind
    tube: str
    #: the stage's triodes' names in :attr:`Circuit.triodes`, first the one the signal enters
    triodes: tuple[str, ...]
    inputs: Mapping[str, str]
    outputs: Mapping[str, str]
    #: the node the plate load (or the plate itself) hangs from
    rail: str

    def __post_init__(self):
        object.__setattr__(self, "triodes", tuple(self.triodes))
        object.__setattr__(self, "inputs", _frozen_map(self.inputs))
        object.__setattr__(self, "outputs", _frozen_map(self.outputs))
        if not self.triodes or not self.inputs or not self.outputs:
            raise ValueError(f"stage {self.name!r} needs at least one triode, one input and one output")

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, StageRecord):
            return NotImplemented
        return (self.name, self.kind, self.tube, self.triodes, dict(self.inputs), dict(self.outputs),
                self.rail) == (other.name, other.kind, other.tube, other.triodes, dict(other.inputs),
                               dict(other.outputs), other.rail)

    def __hash__(self) -> int:
        return hash((self.name, self.kind, self.triodes))

    @property
    def input(self) -> str:
        """Node of the main input port."""
        return next(iter(self.inputs.values()))

    @property
    def output(self) -> str:
        """Node of the main output port."""
        return next(iter(self.outputs.values()))

    @property
    def triode(self) -> str:
        """The triode the signal enters (the only one of a single-triode stage)."""
        return self.triodes[0]


@dataclass(frozen=True, slots=True)
class Circuit:
    """A whole preamp as elements between named nodes.

    ``stages`` are in signal order.  ``input_node`` is the node the source
    drives after its own impedance (what the first stage sees), ``output_node``
    the node the output load hangs on.
    """

    title: str
    resistors: tuple[Resistor, ...]
    capacitors: tuple[Capacitor, ...]
    inductors: tuple[Inductor, ...]
    sources: tuple[VoltageSource, ...]
    triodes: tuple[Triode, ...]
    stages: tuple[StageRecord, ...]
    input_node: str
    output_node: str
    #: names of supply and rail nodes, supply first
    rails: tuple[str, ...] = ()
    #: the user-facing couplings: label -> (from_node, to_node)
    couplings: Mapping[str, tuple[str, str]] = field(default_factory=dict)
    #: the chain's output ports: label as written (``"PI.cathode"``, or ``"output"``) -> node;
    #: the first is :attr:`output_node`.  Empty for hand-built circuits (then only ``output_node``).
    outputs: Mapping[str, str] = field(default_factory=dict)
    #: where each element came from in the netlist (element name → Span)
    origins: Mapping[str, Span] = field(default_factory=dict, compare=False, repr=False)

    def __post_init__(self):
        object.__setattr__(self, "couplings", _frozen_map(self.couplings))
        object.__setattr__(self, "origins", _frozen_map(self.origins))
        object.__setattr__(self, "outputs", _frozen_map(self.outputs or {"output": self.output_node}))

    # -- elements --------------------------------------------------------------
    @property
    def elements(self) -> tuple[Element, ...]:
        """Every element, in stamping order: resistors, capacitors, inductors, sources, triodes."""
        return (*self.resistors, *self.capacitors, *self.inductors, *self.sources, *self.triodes)

    def parts(self, *, owner: Owner | None = None, kind: OwnerKind | None = None, name: str | None = None,
              role: Role | None = None) -> tuple[Element, ...]:
        """Elements matching every given filter (owner, owner kind, owner name, role)."""
        out = []
        for el in self.elements:
            if owner is not None and el.owner != owner:
                continue
            if kind is not None and el.owner.kind != kind:
                continue
            if name is not None and el.owner.name != name:
                continue
            if role is not None and el.role != role:
                continue
            out.append(el)
        return tuple(out)

    def part(self, owner: Owner, role: Role) -> Element | None:
        """The one element of ``owner`` with ``role``, or None."""
        found = self.parts(owner=owner, role=role)
        return found[0] if found else None

    def nodes(self) -> tuple[str, ...]:
        """Every node except ground, in a stable order (first appearance)."""
        seen: dict[str, None] = {}
        for el in self.elements:
            for n in terminals(el):
                seen.setdefault(n)
        seen.pop(GROUND, None)
        return tuple(seen)

    @property
    def signal_source(self) -> VoltageSource:
        for s in self.sources:
            if s.role == Role.SIGNAL:
                return s
        raise LookupError("circuit has no signal source")

    # -- stages ------------------------------------------------------------------
    def stage(self, name: str) -> StageRecord:
        for s in self.stages:
            if s.name == name:
                return s
        raise KeyError(name)

    def triode(self, name: str) -> Triode:
        for t in self.triodes:
            if t.name == name:
                return t
        raise KeyError(name)

    def stage_of_triode(self, triode: str) -> str:
        """Name of the stage holding ``triode`` (the triode's own name if none)."""
        for st in self.stages:
            if triode in st.triodes:
                return st.name
        return triode

    def stage_of_node(self, node: str) -> str:
        """The stage a node belongs to (else the triode, else the rail); "" if none.

        A node belongs to a stage when it is one of its ports or a pin of one
        of its triodes, else when only elements owned by that stage touch it
        (``V1.kb`` between a split bypass's resistor and capacitor).
        """
        triodes = {t.name: t for t in self.triodes}
        for st in self.stages:
            pins = set(st.inputs.values()) | set(st.outputs.values())
            for name in st.triodes:
                t = triodes.get(name)
                if t is not None:
                    pins |= {t.plate, t.grid, t.cathode}
            if node in pins:
                return st.name
        owners = {el.owner for el in self.elements if node in terminals(el)}
        stage_owners = sorted(o.name for o in owners if o.kind == "stage")
        if len(stage_owners) >= 1 and len(owners) == len(stage_owners):
            return stage_owners[0]
        for t in self.triodes:
            if node in (t.plate, t.grid, t.cathode):
                return t.name
        if node in self.rails:
            return node
        return ""

    def stage_label(self, subject: str) -> str:
        """Readable name of a stage for messages: ``"V2 (cathode follower)"``."""
        for stage in self.stages:
            if stage.name == subject:
                return f"{subject} ({_KIND_WORDS.get(stage.kind, stage.kind)})"
        return subject

    # -- rails -------------------------------------------------------------------
    def rail_names(self) -> tuple[str, ...]:
        """Rail nodes: :attr:`rails`, else the ``pos`` node of every supply."""
        if self.rails:
            return tuple(self.rails)
        return tuple(dict.fromkeys(s.pos for s in self.sources if s.role == Role.SUPPLY and s.pos != GROUND))

    def rail_feeds(self, rail: str) -> tuple[str, ...]:
        """Names of the elements that feed a rail node from the level before it.

        A rail's feed is every voltage source attached to it (the supply), the
        supply's internal impedance and the rail's dropping resistor (by role,
        owned by that supply or rail), and any resistor or inductor that joins
        it to a rail listed before it.  The rail's current is what flows out
        of the node through every *other* element.
        """
        return self.rails_feeds((rail,))[rail]

    def rails_feeds(self, rails: Iterable[str]) -> dict[str, tuple[str, ...]]:
        """:meth:`rail_feeds` of every rail in ``rails``, in one pass over the parts."""
        names = self.rail_names()
        place: dict[str, int] = {}
        for i, name in enumerate(names):
            place.setdefault(name, i)  # each rail's first place in the list
        wanted = {rail: place.get(rail, -1) for rail in rails}
        feeds: dict[str, list[str]] = {rail: [s.name for s in self.sources if rail in (s.pos, s.neg)]
                                       for rail in wanted}
        parts: tuple[Resistor | Inductor, ...] = (*self.resistors, *self.inductors)
        for part in parts:
            for rail in dict.fromkeys((part.a, part.b)):
                if rail not in wanted:
                    continue
                other = part.b if part.a == rail else part.a
                own = (part.role == Role.RAIL_DROP and part.owner == Owner("rail", rail)) or \
                    (part.role == Role.SUPPLY_IMPEDANCE and part.owner == Owner("supply", rail))
                # "other" is a rail listed before this one (none is before a rail not listed)
                if own or 0 <= place.get(other, -1) < wanted[rail]:
                    feeds[rail].append(part.name)
        return {rail: tuple(names_) for rail, names_ in feeds.items()}

    def dc_floating_nodes(self, held_caps: Mapping[str, float] | None = None) -> tuple[str, ...]:
        """Nodes with no DC path to ground through resistors, inductors or sources.

        Such nodes are reached only through capacitors (or triodes) and are
        held by gmin alone in a DC solve.  Triodes do not count as DC paths:
        a grid reached only through a capacitor has no bias however the tube
        conducts.  ``held_caps`` names capacitors that count as DC paths.
        """
        nodes = self.nodes()
        index = {name: i for i, name in enumerate(nodes)}
        index[GROUND] = len(nodes)
        unions = Unions(len(nodes) + 1)
        held = held_caps or {}
        for r in self.resistors:
            unions.union(index[r.a], index[r.b])
        for ind in self.inductors:
            unions.union(index[ind.a], index[ind.b])
        for s in self.sources:
            unions.union(index[s.pos], index[s.neg])
        for c in self.capacitors:
            if c.name in held:
                unions.union(index[c.a], index[c.b])
        root = unions.find(index[GROUND])
        return tuple(name for name in nodes if unions.find(index[name]) != root)


def terminals(el: Element) -> tuple[str, ...]:
    """The nodes an element touches."""
    if isinstance(el, Triode):
        return (el.plate, el.grid, el.cathode)
    if isinstance(el, VoltageSource):
        return (el.pos, el.neg)
    if isinstance(el, Transconductance):
        return (el.a, el.b, el.ctrl_pos, el.ctrl_neg)
    return (el.a, el.b)


class Unions:
    """Union–find over integer indices (path halving)."""

    def __init__(self, size: int):
        self.parent = list(range(size))

    def find(self, i: int) -> int:
        while self.parent[i] != i:
            self.parent[i] = self.parent[self.parent[i]]
            i = self.parent[i]
        return i

    def union(self, i: int, j: int) -> bool:
        """Join the sets of ``i`` and ``j``; False when they were joined already."""
        ri, rj = self.find(i), self.find(j)
        if ri == rj:
            return False
        self.parent[ri] = rj
        return True
