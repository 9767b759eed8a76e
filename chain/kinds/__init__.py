"""Stage kinds: how each kind of stage expands into parts, one module per kind.

Every module of this package that defines ``KINDS`` (the stage kinds it
expands, as the language spells them) and ``expand(x, stage)`` is one;
:func:`expander` finds the module for a kind by looking in the package.
``expand`` adds the stage's parts through ``x`` (an :class:`Expander`, the
builder of :mod:`chain.build`), each with ``Owner("stage", name)`` and its
:class:`~chain.circuit.Role`, and returns an :class:`Expansion`: the
:class:`~chain.circuit.StageRecord` (triodes, input and output ports) and the
stage's terminal names for netlist references (``V1.plate``, ``PI.in2``).

The closed forms of each kind live in :mod:`chain.formulas.kinds` (lcapy and
sympy may be imported only there); the DC solve, the response, the stage
table, headroom and the reports iterate over a stage's triodes and ports and
need no per-kind code.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Mapping, Protocol

from chain.circuit import Element, StageRecord
from chain.discover import modules_defining
from chain.errors import Span
from chain.language.design import Stage
from chain.tubes import TriodeModel

__all__ = ["Expander", "Expansion", "expander", "kinds"]


class Expander(Protocol):
    """What a kind module may ask of the builder."""

    def add(self, part: Element, span: Span) -> None:
        """Add one element, made by the netlist line at ``span``."""

    def model(self, s: Stage) -> TriodeModel:
        """The triode model of stage ``s`` (a located error when its type is unknown)."""

    def heater(self, s: Stage) -> float:
        """The heater-to-cathode reference potential of stage ``s``, V."""


@dataclass(frozen=True, slots=True)
class Expansion:
    """A stage as expanded: its record and its terminals (name → node)."""

    record: StageRecord
    terminals: Mapping[str, str]


def _modules() -> dict[str, Callable[[Expander, Stage], Expansion]]:
    found: dict[str, Callable[[Expander, Stage], Expansion]] = {}
    for module in modules_defining(__name__, __path__, "KINDS", "expand"):
        for kind in module.KINDS:
            found[kind] = module.expand
    return found


def kinds() -> tuple[str, ...]:
    """Every stage kind some module of this package expands."""
    return tuple(_modules())


def expander(kind: str) -> Callable[[Expander, Stage], Expansion]:
    """The ``expand`` function of the module for stage kind ``kind``.

    Raises
    ------
    KeyError
        no module of this package expands ``kind``.
    """
    return _modules()[kind]
