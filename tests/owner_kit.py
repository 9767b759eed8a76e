"""Owners and roles for hand-built test circuits.

The builder (:func:`chain.build.build`) gives every element its owner and
role; circuits written by hand in the tests follow the builder's naming
(``V1.RL``, ``rail.B2.R``, ``input.R``, ``output.load``) and get theirs here,
so that the analyses see them exactly as they see a built circuit.
"""

from dataclasses import replace

from chain.circuit import NO_OWNER, Circuit, Owner, Role

_STAGE_ROLES = {"RL": Role.PLATE_LOAD, "Rk": Role.CATHODE_RESISTOR, "Ck": Role.BYPASS, "Rkc": Role.BYPASS_SERIES,
                "Rg": Role.GRID_LEAK, "Rs": Role.GRID_STOPPER}


def _owner_role(el, stages: set[str]):
    name = el.name
    head, _, tail = name.partition(".")
    if name == "output.load":
        return Owner("output", "output"), Role.LOAD
    if head == "input" or name in ("sig",):
        return Owner("input", "input"), el.role
    if head == "rail" and tail:
        rail, _, what = tail.rpartition(".")
        return Owner("rail", rail), Role.RAIL_DROP if what == "R" else Role.RAIL_DECOUPLE
    if head == "supply" and tail:
        return Owner("supply", tail.split(".")[0]), Role.SUPPLY_IMPEDANCE if tail.endswith(".R") else el.role
    if head in stages:
        return Owner("stage", head), _STAGE_ROLES.get(tail, el.role)
    return NO_OWNER, el.role


def with_owners(circuit: Circuit) -> Circuit:
    """``circuit`` with owners and roles assigned from the builder's names."""
    stages = {s.name for s in circuit.stages}

    def own(el):
        if el.owner != NO_OWNER:
            return el
        owner, role = _owner_role(el, stages)
        return replace(el, owner=owner, role=role)

    return replace(circuit,
                   resistors=tuple(own(e) for e in circuit.resistors),
                   capacitors=tuple(own(e) for e in circuit.capacitors),
                   inductors=tuple(own(e) for e in circuit.inductors),
                   sources=tuple(own(e) for e in circuit.sources),
                   triodes=tuple(own(e) for e in circuit.triodes))
