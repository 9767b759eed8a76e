"""Closed forms of the common-cathode stage (single-triode template,
:func:`chain.formulas.netlist.single_model`; parts: :class:`~chain.formulas.parts.StageParts`).

Input: the top of the grid leak; output: the plate.  Standard results the
symbolic mid-band forms reduce to (M. Jones, "Valve Amplifiers", chapter on
the common-cathode stage, from memory), with no stopper capacitance and no
load:

* Rk unbypassed: ``A = −mu·R_L / (R_L + r_p + (mu+1)·R_k)``
* Rk bypassed (mid-band): ``A = −mu·R_L / (R_L + r_p)``
* output impedance at the plate: ``R_L ∥ (r_p + (mu+1)·R_k)``
"""

from __future__ import annotations

from chain.formulas.kinds.base import Quantity
from chain.formulas.netlist import single_model as model
from chain.formulas.parts import single_parts as parts

__all__ = ["KIND", "QUANTITIES", "SYMBOLIC_S", "parts", "model"]

KIND = "common-cathode"
SYMBOLIC_S = True
QUANTITIES = (
    Quantity("gain", "gain", "V/V", "input", ("v", "p")),
    Quantity("zin", "input impedance", "ohm", "input", ("z", "Vin")),
    Quantity("zout", "output impedance", "ohm", "output", ("z", "Vt")),
)
