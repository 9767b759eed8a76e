"""Closed forms of the cathode follower (single-triode template,
:func:`chain.formulas.netlist.single_model`; parts: :class:`~chain.formulas.parts.StageParts`).

Input: the top of the grid leak; output: the cathode.  Standard results
(M. Jones, "Valve Amplifiers", chapter on the cathode follower, from
memory), no load: ``A = mu·R_k / (r_p + (mu+1)·R_k)``,
``Zout = r_p/(mu+1) ∥ R_k``.
"""

from __future__ import annotations

from chain.formulas.kinds.base import Quantity
from chain.formulas.netlist import single_model as model
from chain.formulas.parts import single_parts as parts

__all__ = ["KIND", "QUANTITIES", "SYMBOLIC_S", "parts", "model"]

KIND = "cathode-follower"
SYMBOLIC_S = True
QUANTITIES = (
    Quantity("gain", "gain", "V/V", "input", ("v", "k")),
    Quantity("zin", "input impedance", "ohm", "input", ("z", "Vin")),
    Quantity("zout", "output impedance", "ohm", "output", ("z", "Vt")),
)
