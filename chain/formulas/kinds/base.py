"""What every stage kind's closed forms share: the quantities they define and
the lookups that pull a stage's parts out of a built circuit.

A kind module (one per stage kind in this package) offers:

* ``KIND`` — the stage kind it covers;
* ``QUANTITIES`` — the :class:`Quantity` s it solves, in print order;
* ``SYMBOLIC_S`` — whether the symbolic s-domain form is solved (False where
  it is too large to read and slow to get);
* ``parts(circuit, dc, stage, *, rload_ohm=None)`` — the stage's parts, a
  frozen, hashable record with ``name``, ``kind``, ``values()`` (symbol →
  number) and ``known()`` (symbol, number, unit) for printing;
* ``model(parts, *, symbolic, drive, midband, interelectrode)`` — the
  lcapy netlist of one drive (:class:`~chain.formulas.netlist.StageModel`).

Parts are found by their owner (the stage) and role, and placed by the pins
of the stage's triodes and its ports — never by their names.

No heavy imports here.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Literal

from chain.circuit import GROUND, Owner, Resistor, Role
from chain.errors import FormulaError, error

if TYPE_CHECKING:  # pragma: no cover - typing only
    from chain.circuit import Circuit, Element, StageRecord
    from chain.dc.result import DcSolution, OperatingPoint

__all__ = ["Quantity", "READS", "find_stage", "operating_point", "own_parts", "between", "misplaced",
           "load_on", "positive_or_none", "other_end"]

#: how a quantity is read from a solved drive: a node voltage per volt of drive
#: (``("v", node)``), the impedance a unit source sees (``("z", source)``), the
#: ratio of two node voltages, or half their difference or sum
READS = ("v", "z", "ratio", "half_diff", "half_sum")


@dataclass(frozen=True, slots=True)
class Quantity:
    """One closed form of a stage kind.

    ``name`` is the key (``"gain"``, ``"gain_plate"``, ``"zout_cathode"``, …),
    ``label`` the words printed, ``unit`` ``"V/V"`` or ``"ohm"``, ``drive``
    the netlist drive it is solved on, ``read`` how (:data:`READS`) and at
    which nodes or sources.
    """

    name: str
    label: str
    unit: Literal["V/V", "ohm"]
    drive: str
    read: tuple[str, ...]


def find_stage(circuit: "Circuit", stage_name: str) -> "StageRecord":
    try:
        return circuit.stage(stage_name)
    except KeyError:
        known = ", ".join(s.name for s in circuit.stages) or "none"
        raise FormulaError(error("E522", f"no stage named {stage_name!r} (stages: {known})",
                                 subject=stage_name)) from None


def operating_point(dc: "DcSolution", triode: str, stage_name: str) -> "OperatingPoint":
    try:
        return dc.points[triode]
    except KeyError:
        raise FormulaError(error("E522", f"no DC operating point for triode {triode!r}",
                                 subject=stage_name)) from None


def own_parts(circuit: "Circuit", stage_name: str, role: Role) -> tuple["Element", ...]:
    """The stage's parts with ``role``, in build order."""
    return circuit.parts(owner=Owner("stage", stage_name), role=role)


def between(part, n1: str, n2: str) -> bool:
    return {part.a, part.b} == {n1, n2}


def other_end(part, node: str) -> str | None:
    """The far end of a two-terminal part from ``node`` (None when it does not touch it)."""
    if part.a == node:
        return part.b
    if part.b == node:
        return part.a
    return None


def misplaced(stage: str, part, where: str) -> FormulaError:
    return FormulaError(error(
        "E521",
        f"stage {stage}: part {part.name} ({part.a} -- {part.b}) is not {where}; "
        "the per-stage formulas cannot represent it",
        subject=stage))


def load_on(circuit: "Circuit", node: str) -> float | None:
    """The chain's output load (role :attr:`Role.LOAD`) from ``node`` to ground, ohm, or None."""
    for load in circuit.parts(kind="output", role=Role.LOAD):
        if isinstance(load, Resistor) and between(load, node, GROUND):
            return float(load.ohms)
    return None


def positive_or_none(x) -> float | None:
    if x is None:
        return None
    x = float(x)
    return x if x > 0 else None
