"""Pieces several stage kinds share: a grid with its leak and stopper, and
the cathode resistors of a two-triode stage."""

from __future__ import annotations

from chain.circuit import GROUND, Owner, Resistor, Role
from chain.errors import Span
from chain.kinds import Expander
from chain.language.design import Stage

__all__ = ["grid", "tail"]


def grid(x: Expander, n: str, leak: float | None, stopper: float | None, ret: str, *, suffix: str,
         spans: tuple[Span, Span]) -> tuple[str, str]:
    """A grid leak from the input port to ``ret`` and a stopper into the grid: (input, grid)."""
    own = Owner("stage", n)
    inp = f"{n}.in{suffix}"
    g = f"{n}.grid{suffix}" if stopper is not None else inp
    if stopper is not None:
        x.add(Resistor(f"{n}.Rs{suffix}", inp, g, stopper, own, Role.GRID_STOPPER), spans[1])
    if leak is not None:
        x.add(Resistor(f"{n}.Rg{suffix}", inp, ret, leak, own, Role.GRID_LEAK), spans[0])
    return inp, g


def tail(x: Expander, s: Stage, cathode: str, *, alone: Role) -> str:
    """The cathode resistors of a two-triode stage; returns where the grid leaks return.

    ``cathode R tail R2``: R from the cathode to the tap (``<stage>.tap``),
    R2 from the tap to ground, the grid leaks to the tap (the bootstrapped
    arrangement).  ``cathode R`` alone: R to ground with role ``alone``
    and the grid leaks to ground.
    """
    n, own = s.name, Owner("stage", s.name)
    cs = s.spans.get("cathode", s.span)
    k = s.cathode
    assert k is not None  # the language requires a cathode line for two-triode stages
    if k.tail_ohm is None:
        x.add(Resistor(f"{n}.{'Rt' if alone == Role.TAIL_RESISTOR else 'Rk'}", cathode, GROUND, k.r_ohm,
                       own, alone), cs)
        return GROUND
    tap = f"{n}.tap"
    x.add(Resistor(f"{n}.Rk", cathode, tap, k.r_ohm, own, Role.CATHODE_RESISTOR), cs)
    x.add(Resistor(f"{n}.Rt", tap, GROUND, k.tail_ohm, own, Role.TAIL_RESISTOR), cs)
    return tap
