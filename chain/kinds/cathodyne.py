"""The cathodyne (split-load phase inverter).

One triode named after the stage: plate load ``<stage>.RL`` from the rail,
the cathode load to ground — ``cathode R`` (``.Rk``) alone, or ``cathode R
tail R2`` (``.Rk`` to the tap, ``.Rt`` from the tap to ground) with the grid
leak returned to the tap (the bootstrapped arrangement); grid leak ``.Rg``,
stopper ``.Rs``.  Input ``in`` (top of the grid leak); outputs ``plate`` and
``cathode``.
"""

from __future__ import annotations

from chain.circuit import GROUND, Owner, Resistor, Role, StageRecord, Triode
from chain.kinds import Expander, Expansion
from chain.kinds.parts import grid, tail
from chain.language.design import Stage

__all__ = ["KINDS", "expand"]

KINDS = ("cathodyne",)


def expand(x: Expander, s: Stage) -> Expansion:
    """The parts of a cathodyne (see the module docstring)."""
    n, sp, own = s.name, s.spans, Owner("stage", s.name)
    assert s.plate_load_ohm is not None  # required by the language
    plate, cathode = f"{n}.plate", f"{n}.cathode"
    x.add(Resistor(f"{n}.RL", s.rail, plate, s.plate_load_ohm, own, Role.PLATE_LOAD), sp.get("plate", s.span))
    ret = tail(x, s, cathode, alone=Role.CATHODE_RESISTOR)
    inp, g = grid(x, n, s.grid_leak_ohm, s.grid_stopper_ohm, ret, suffix="",
                  spans=(sp.get("grid_leak", s.span), sp.get("grid_stopper", s.span)))
    model = x.model(s)
    x.add(Triode(n, plate, g, cathode, model, x.heater(s), own), s.span)
    record = StageRecord(n, s.kind, model.name, (n,), {"in": inp}, {"plate": plate, "cathode": cathode}, s.rail)
    return Expansion(record, {"plate": plate, "grid": g, "cathode": cathode, "in": inp,
                              "tap": ret if ret != GROUND else cathode})
