"""Which parts of a circuit vary between two builds, and by how much.

A :class:`Tolerance` is a band of relative deviations ``[low, high]`` (``-0.05,
+0.05`` for a 5 % resistor, ``-0.2, +0.5`` for an electrolytic).  Draws are
uniform over the band (a rectangular distribution: the worst case is as
likely as the nominal value, which is what a tolerance printed on a part
promises; GUM, JCGM 100:2008, 4.3.7, standard uncertainty ``(high − low)/√12``).

Defaults by kind (common practice for the parts a tube preamp is built from):

=====================  ===========  =========================================
kind                   tolerance    which parts
=====================  ===========  =========================================
``resistors``          ±5 %         carbon or metal film
``pots``               ±20 %        carbon track; both sections of one pot
                                    move together (the knob sets the ratio)
``capacitors``         ±10 %        film and ceramic
``electrolytics``      −20/+50 %    cathode bypass and rail decoupling
                                    capacitors, and any capacitor of 1 µF
                                    or more
``inductors``          ±10 %
``tubes``              ±20 %        plate current at a fixed operating point
=====================  ===========  =========================================

Left at their nominal values: the signal source and the parts the source owns
(the pickup is the player's, not the build's), the output load (the next
amplifier), strays, the supply voltage and zero-ohm links.

A tube's spread is a spread of its plate current at any fixed electrode
voltages: in the Koren equation ``Ip = 2·E1^ex/kg1`` the current is inversely
proportional to ``kg1``, so a draw ``δ`` sets ``kg1 → kg1/(1 + δ)`` and
scales Ip, gm and 1/rp by ``1 + δ`` while mu stays (a weak or hot tube of the
same type; gain factor spread is not modelled).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping

from chain.circuit import Capacitor, Circuit, Inductor, Resistor, Role, Triode

__all__ = ["Tolerance", "DEFAULTS", "KINDS", "Varied", "varied_parts", "part_kind"]


@dataclass(frozen=True, slots=True)
class Tolerance:
    """A band of relative deviations, ``low <= 0 <= high`` (fractions)."""

    low: float
    high: float

    @classmethod
    def symmetric(cls, fraction: float) -> "Tolerance":
        return cls(-abs(fraction), abs(fraction))

    def __str__(self) -> str:
        if -self.low == self.high:
            return f"±{100 * self.high:g} %"
        return f"{100 * self.low:+g}/{100 * self.high:+g} %"


#: the kinds a tolerance can be given for, with their defaults (module docstring)
DEFAULTS: Mapping[str, Tolerance] = {
    "resistors": Tolerance.symmetric(0.05),
    "pots": Tolerance.symmetric(0.20),
    "capacitors": Tolerance.symmetric(0.10),
    "electrolytics": Tolerance(-0.20, 0.50),
    "inductors": Tolerance.symmetric(0.10),
    "tubes": Tolerance.symmetric(0.20),
}
KINDS = tuple(DEFAULTS)

_FIXED_OWNERS = ("input", "output", "stray")
_ELECTROLYTIC_ROLES = (Role.BYPASS, Role.RAIL_DECOUPLE)
_POT_ROLES = (Role.POT_UPPER, Role.POT_LOWER)
#: capacitors of this size and more are taken for electrolytics, F (common practice)
ELECTROLYTIC_FROM_F = 1e-6


@dataclass(frozen=True, slots=True)
class Varied:
    """A group of elements that move together with one draw (one part, or the
    two sections of a pot), with its tolerance."""

    #: names of the circuit elements (one, or a pot's two sections)
    names: tuple[str, ...]
    #: "resistors", "pots", "capacitors", "electrolytics", "inductors" or "tubes"
    kind: str
    tolerance: Tolerance
    #: readable: "V1 plate load", "drive pot", "V2 tube"
    label: str


def part_kind(el) -> str | None:
    """The tolerance kind of a circuit element, or None when it stays nominal."""
    if el.owner.kind in _FIXED_OWNERS:
        return None
    if isinstance(el, Triode):
        return "tubes"
    if isinstance(el, Resistor):
        if el.ohms == 0.0:
            return None
        return "pots" if el.role in _POT_ROLES else "resistors"
    if isinstance(el, Capacitor):
        if el.role == Role.STRAY:
            return None
        if el.role in _ELECTROLYTIC_ROLES or el.farads >= ELECTROLYTIC_FROM_F:
            return "electrolytics"
        return "capacitors"
    if isinstance(el, Inductor):
        return "inductors" if el.henries > 0.0 else None
    return None


def _label(el) -> str:
    who = el.owner.name
    if isinstance(el, Triode):
        return f"{who} tube ({el.name})" if el.name != who else f"{who} tube"
    return f"{who} {el.role.value} ({el.name})"


def varied_parts(circuit: Circuit, *, by_kind: Mapping[str, Tolerance] | None = None,
                 by_part: Mapping[str, Tolerance] | None = None) -> tuple[Varied, ...]:
    """Every group of elements that varies, with its tolerance.

    ``by_kind`` overrides :data:`DEFAULTS`; ``by_part`` overrides a single
    element (by its circuit name, as listed in the report's parts section;
    a pot section's override moves the whole pot; a triode's name or its
    stage's name for a tube).
    """
    kinds = dict(DEFAULTS)
    kinds.update(by_kind or {})
    by_part = dict(by_part or {})
    groups: list[Varied] = []
    pots: dict[tuple, list] = {}
    for el in circuit.elements:
        kind = part_kind(el)
        if kind is None:
            continue
        if kind == "pots":
            # the two sections of one pot come from the same netlist line
            origin = circuit.origins.get(el.name)
            key = (el.owner, getattr(origin, "line", el.name))
            pots.setdefault(key, []).append(el)
            continue
        tol = by_part.get(el.name) or (by_part.get(el.owner.name) if kind == "tubes" else None) or kinds[kind]
        groups.append(Varied((el.name,), kind, tol, _label(el)))
    for (owner, _), els in pots.items():
        names = tuple(e.name for e in els)
        tol = next((by_part[n] for n in names if n in by_part), kinds["pots"])
        label = f"{owner.name} pot ({', '.join(names)})"
        groups.append(Varied(names, "pots", tol, label))
    return tuple(groups)


def from_design(design, circuit: Circuit) -> tuple[dict[str, Tolerance], dict[str, Tolerance]]:
    """The ``tolerance`` lines of ``design`` as ``(by_kind, by_part)`` for
    :func:`varied_parts`.  A part's or a stage's own line beats its tube
    type's line, which beats its kind's.

    Raises
    ------
    LanguageError
        E951 for a line naming neither a kind, a tube type used in the
        circuit, a stage nor a part (located at the name).
    """
    from chain.errors import LanguageError, error

    by_kind: dict[str, Tolerance] = {}
    by_type: dict[str, Tolerance] = {}
    by_part: dict[str, Tolerance] = {}
    names = {el.name for el in circuit.elements}
    stages = {st.name: st for st in circuit.stages}
    types = {t.model.name.upper(): t.model.name for t in circuit.triodes}
    problems = []
    for t in design.tolerances:
        tol = Tolerance(t.low, t.high)
        if t.tube_type:
            if t.target.upper() in types:
                by_type[t.target.upper()] = tol
            else:
                problems.append(error("E951", f"no tube of type {t.target} in this circuit", t.span,
                                      "types used here: " + ", ".join(sorted(types.values()))))
        elif t.target in DEFAULTS:
            by_kind[t.target] = tol
        elif t.target in stages:
            for tri_name in stages[t.target].triodes:
                by_part[tri_name] = tol
        elif t.target in names:
            by_part[t.target] = tol
        else:
            problems.append(error("E951", f"'{t.target}' is neither a kind of part, a stage nor a part", t.span,
                                  "kinds: " + ", ".join(KINDS) + "; parts are named as in the report's "
                                  "parts list (V1.RL, drive.block); 'tolerance tube 12AX7 25%' for a type"))
    if problems:
        raise LanguageError(problems)
    for tri in circuit.triodes:
        if tri.name not in by_part and tri.model.name.upper() in by_type:
            by_part[tri.name] = by_type[tri.model.name.upper()]
    return by_kind, by_part
