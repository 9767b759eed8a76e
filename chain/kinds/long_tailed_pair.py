"""The long-tailed pair (differential phase inverter).

Two triodes ``<stage>a`` and ``<stage>b`` with joined cathodes over a shared
tail — ``cathode R`` (``.Rt`` to ground) or ``cathode R tail R2`` (``.Rk`` to
the tap, ``.Rt`` to ground, the grid leaks returned to the tap); plate loads
``.RL`` and ``.RL2``, grid leaks ``.Rg``/``.Rg2`` and stoppers
``.Rs``/``.Rs2``; the second grid may be AC-grounded by a capacitor
(``second grid … bypass C``: ``.Cg2``).  Inputs ``in`` and ``in2`` (tops of
the grid leaks); outputs ``plate1`` and ``plate2``.
"""

from __future__ import annotations

from chain.circuit import GROUND, Capacitor, Owner, Resistor, Role, StageRecord, Triode
from chain.kinds import Expander, Expansion
from chain.kinds.parts import grid, tail
from chain.language.design import Stage

__all__ = ["KINDS", "expand"]

KINDS = ("long-tailed-pair",)


def expand(x: Expander, s: Stage) -> Expansion:
    """The parts of a long-tailed pair (see the module docstring)."""
    n, sp, own = s.name, s.spans, Owner("stage", s.name)
    sec = s.second
    assert sec is not None and s.plate_load_ohm is not None and sec.plate_load_ohm is not None  # required
    plate1, plate2, cathode = f"{n}.plate1", f"{n}.plate2", f"{n}.cathode"
    x.add(Resistor(f"{n}.RL", s.rail, plate1, s.plate_load_ohm, own, Role.PLATE_LOAD), sp.get("plate", s.span))
    x.add(Resistor(f"{n}.RL2", sec.rail, plate2, sec.plate_load_ohm, own, Role.PLATE_LOAD),
          sp.get("second_plate", s.span))
    ret = tail(x, s, cathode, alone=Role.TAIL_RESISTOR)
    in1, grid1 = grid(x, n, s.grid_leak_ohm, s.grid_stopper_ohm, ret, suffix="",
                      spans=(sp.get("grid_leak", s.span), sp.get("grid_stopper", s.span)))
    in2, grid2 = grid(x, n, sec.grid_leak_ohm, sec.grid_stopper_ohm, ret, suffix="2",
                      spans=(sp.get("second_grid_leak", s.span), sp.get("second_grid_stopper", s.span)))
    if sec.grid_bypass_f is not None:
        x.add(Capacitor(f"{n}.Cg2", in2, GROUND, sec.grid_bypass_f, sec.grid_bypass_rated_v, own, Role.GRID_BYPASS),
              sp.get("second_grid_bypass", s.span))
    model = x.model(s)
    heater = x.heater(s)
    a, b = f"{n}a", f"{n}b"
    x.add(Triode(a, plate1, grid1, cathode, model, heater, own), s.span)
    x.add(Triode(b, plate2, grid2, cathode, model, heater, own), s.span)
    record = StageRecord(n, s.kind, model.name, (a, b), {"in": in1, "in2": in2}, {"plate1": plate1, "plate2": plate2},
                         s.rail)
    return Expansion(record, {"plate1": plate1, "plate2": plate2, "grid1": grid1, "grid2": grid2,
                              "cathode": cathode, "tap": ret if ret != GROUND else cathode, "in": in1, "in2": in2})
