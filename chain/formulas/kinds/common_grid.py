"""Closed forms of the common-grid stage (single-triode template,
:func:`chain.formulas.netlist.single_model`; parts: :class:`~chain.formulas.parts.StageParts`).

Input: the cathode; output: the plate; the grid returns to ground through
its stopper and leak (or is tied to ground).  Standard results (M. Jones,
"Valve Amplifiers", the grounded-grid stage, from memory), no load:
``A = (mu+1)·R_L / (R_L + r_p)``, ``Zin = R_k ∥ (R_L + r_p)/(mu+1)``.
"""

from __future__ import annotations

from chain.formulas.kinds.base import Quantity
from chain.formulas.netlist import single_model as model
from chain.formulas.parts import single_parts as parts

__all__ = ["KIND", "QUANTITIES", "SYMBOLIC_S", "parts", "model"]

KIND = "common-grid"
SYMBOLIC_S = True
QUANTITIES = (
    Quantity("gain", "gain", "V/V", "input", ("v", "p")),
    Quantity("zin", "input impedance", "ohm", "input", ("z", "Vin")),
    Quantity("zout", "output impedance", "ohm", "output", ("z", "Vt")),
)
