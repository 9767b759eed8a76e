"""The component-level circuit: what a Design expands into.

A :class:`Circuit` is a flat, immutable list of two-terminal parts, voltage
sources and triodes between named nodes.  Node names are readable:
``"V1.plate"``, ``"V1.grid"`` (the tube's grid pin), ``"V1.in"`` (the top of
the grid leak, before the grid stopper), ``"V1.cathode"``, ``"B2"`` (a rail),
``"tone.mid"`` (a network node), and ``"gnd"``.

Only :func:`build` (in :mod:`chain.build`) knows how a stage expands into parts;
solvers read a Circuit and know nothing of stages beyond the
:class:`StageNodes` map that tells them where each stage's signal enters and
leaves.

Units: ohm, farad, henry, volt, ampere — SI base units throughout.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Mapping

from chain.tubes import TriodeModel

GROUND = "gnd"

__all__ = [
    "GROUND",
    "Resistor",
    "Capacitor",
    "Inductor",
    "VoltageSource",
    "Triode",
    "StageNodes",
    "Circuit",
]


@dataclass(frozen=True, slots=True)
class Resistor:
    name: str
    a: str
    b: str
    ohms: float


@dataclass(frozen=True, slots=True)
class Capacitor:
    name: str
    a: str
    b: str
    farads: float
    #: stated DC voltage rating (V), or None when the netlist gives none
    rated_v: float | None = None


@dataclass(frozen=True, slots=True)
class Inductor:
    name: str
    a: str
    b: str
    henries: float


@dataclass(frozen=True, slots=True)
class VoltageSource:
    """Ideal voltage source, ``pos`` minus ``neg`` = ``volts`` at DC.

    ``role`` is ``"supply"`` (a DC supply; AC ground in small-signal work)
    or ``"signal"`` (the input: 0 V at DC, unit amplitude in small-signal
    work, swept in headroom work).
    """

    name: str
    pos: str
    neg: str
    volts: float
    role: str = "supply"


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


@dataclass(frozen=True, slots=True)
class StageNodes:
    """Where a stage's signal enters and leaves, in circuit node names."""

    name: str
    #: "common-cathode" | "cathode-follower" | "common-grid"
    kind: str
    tube: str
    #: node the signal is applied to: the top of the grid leak ("V1.in") for
    #: grid-driven stages, the cathode for a common-grid stage
    input: str
    #: node the signal leaves from: plate (common cathode/grid) or cathode (follower)
    output: str
    #: the triode's name in :attr:`Circuit.triodes`
    triode: str
    #: the node the plate load (or the plate itself) hangs from
    rail: str


@dataclass(frozen=True, slots=True)
class Circuit:
    """A whole preamp as parts between named nodes.

    ``stages`` are in signal order.  ``source`` is the name of the signal
    source (role ``"signal"``), ``input_node`` the node it drives after its
    own impedance (what the first stage sees), ``output_node`` the node the
    output load hangs on.
    """

    title: str
    resistors: tuple[Resistor, ...]
    capacitors: tuple[Capacitor, ...]
    inductors: tuple[Inductor, ...]
    sources: tuple[VoltageSource, ...]
    triodes: tuple[Triode, ...]
    stages: tuple[StageNodes, ...]
    input_node: str
    output_node: str
    #: names of supply and rail nodes, supply first
    rails: tuple[str, ...] = ()
    #: extra: the user-facing coupling networks, name -> (from_node, to_node)
    couplings: Mapping[str, tuple[str, str]] = field(default_factory=dict)
    #: where each part came from in the netlist (part or triode name → Span)
    origins: Mapping[str, object] = field(default_factory=dict, compare=False, repr=False)

    def nodes(self) -> tuple[str, ...]:
        """Every node except ground, in a stable order (first appearance)."""
        seen: dict[str, None] = {}
        for r in self.resistors:
            seen.setdefault(r.a); seen.setdefault(r.b)
        for c in self.capacitors:
            seen.setdefault(c.a); seen.setdefault(c.b)
        for l in self.inductors:
            seen.setdefault(l.a); seen.setdefault(l.b)
        for s in self.sources:
            seen.setdefault(s.pos); seen.setdefault(s.neg)
        for t in self.triodes:
            seen.setdefault(t.plate); seen.setdefault(t.grid); seen.setdefault(t.cathode)
        seen.pop(GROUND, None)
        return tuple(seen)

    @property
    def signal_source(self) -> VoltageSource:
        for s in self.sources:
            if s.role == "signal":
                return s
        raise LookupError("circuit has no signal source")

    def stage(self, name: str) -> StageNodes:
        for s in self.stages:
            if s.name == name:
                return s
        raise KeyError(name)

    def triode(self, name: str) -> Triode:
        for t in self.triodes:
            if t.name == name:
                return t
        raise KeyError(name)
