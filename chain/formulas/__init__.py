"""Closed-form small-signal formulas per stage, and a flat reference solve.

The only room of `chain` that uses lcapy and sympy, and only inside the
functions that need them: importing this package loads neither.

* :mod:`chain.formulas.kinds` — one module per stage kind: its quantities
  (gains to each output, balance, input and output impedances, …), its
  parts record and its small-signal model as lcapy netlist text (pure
  string building), with the published closed forms in its docstring;
* :func:`stage_parts` — one stage's parts record from a Circuit and its DC
  solution (found by owner and role);
* :func:`stage_netlist` — a single-triode stage's netlist text;
* :func:`stage_formulas` — every quantity of the stage's kind solved from
  that netlist text by the exact nodal solver of :mod:`chain.formulas.nodal`
  (the same rational functions lcapy gives, much faster; lcapy for any
  element it does not read): symbolic mid-band and s-domain forms in the stage's own symbols,
  the full numeric model with interelectrode capacitances, plain text and
  LaTeX;
* :func:`flat_netlist`, :func:`flat_solve`, :func:`flat_transfer` — the
  whole chain as one lcapy netlist, solved as an independent reference for
  :mod:`chain.smallsignal`.

Errors are :class:`~chain.errors.FormulaError`: E520 impossible stage parts
(or a kind without closed forms), E521 a part the kind's model cannot represent, E522 unknown stage or
missing operating point, E530 lcapy/sympy failure (carrying the generated
netlist), E531 unknown node.
"""

from chain.formulas.flat import FlatSolution, flat_solve, flat_transfer
from chain.formulas.kinds import KINDS
from chain.formulas.netlist import SYMBOLS, flat_model, flat_netlist, stage_netlist
from chain.formulas.parts import StageParts, stage_parts
from chain.formulas.stage import QUANTITIES, Formula, StageFormulas, stage_formulas

__all__ = [
    "KINDS",
    "QUANTITIES",
    "SYMBOLS",
    "StageParts",
    "stage_parts",
    "stage_netlist",
    "Formula",
    "StageFormulas",
    "stage_formulas",
    "flat_netlist",
    "flat_model",
    "FlatSolution",
    "flat_solve",
    "flat_transfer",
]
