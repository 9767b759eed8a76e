"""The single-triode stages: common cathode, cathode follower, common grid.

One triode named after the stage; plate load ``<stage>.RL`` from the rail
(none: the plate sits on the rail), cathode resistor ``.Rk`` with its bypass
``.Ck`` (and ``.Rkc`` in series with it for a split bypass), grid leak
``.Rg`` and stopper ``.Rs`` (none for a grounded grid).  The signal enters at
the grid leak's top (``in``), or at the cathode for a common-grid stage; it
leaves at the plate, or at the cathode for a cathode follower (port ``out``).
"""

from __future__ import annotations

from chain.circuit import GROUND, Capacitor, Owner, Resistor, Role, StageRecord, Triode
from chain.kinds import Expander, Expansion
from chain.language.design import Stage

__all__ = ["KINDS", "expand"]

KINDS = ("common-cathode", "cathode-follower", "common-grid")


def expand(x: Expander, s: Stage) -> Expansion:
    """The parts of a single-triode stage (see the module docstring)."""
    n, sp, own = s.name, s.spans, Owner("stage", s.name)
    plate = f"{n}.plate" if s.plate_load_ohm is not None else s.rail
    if s.plate_load_ohm is not None:
        x.add(Resistor(f"{n}.RL", s.rail, plate, s.plate_load_ohm, own, Role.PLATE_LOAD), sp.get("plate", s.span))
    cathode = GROUND
    if s.cathode is not None:
        cathode = f"{n}.cathode"
        cs = sp.get("cathode", s.span)
        x.add(Resistor(f"{n}.Rk", cathode, GROUND, s.cathode.r_ohm, own, Role.CATHODE_RESISTOR), cs)
        if s.cathode.bypass_f is not None:
            top = cathode
            if s.cathode.bypass_series_ohm is not None:
                top = f"{n}.kb"
                x.add(Resistor(f"{n}.Rkc", cathode, top, s.cathode.bypass_series_ohm, own, Role.BYPASS_SERIES), cs)
            x.add(Capacitor(f"{n}.Ck", top, GROUND, s.cathode.bypass_f, s.cathode.bypass_rated_v, own, Role.BYPASS),
                  cs)
    if s.grid_ground:
        grid = inp = GROUND
    else:
        inp = f"{n}.in"
        grid = f"{n}.grid" if s.grid_stopper_ohm is not None else inp
        if s.grid_stopper_ohm is not None:
            x.add(Resistor(f"{n}.Rs", inp, grid, s.grid_stopper_ohm, own, Role.GRID_STOPPER),
                  sp.get("grid_stopper", s.span))
        if s.grid_leak_ohm is not None:
            x.add(Resistor(f"{n}.Rg", inp, GROUND, s.grid_leak_ohm, own, Role.GRID_LEAK), sp.get("grid_leak", s.span))
    model = x.model(s)
    x.add(Triode(n, plate, grid, cathode, model, x.heater(s), own), s.span)
    signal_in = cathode if s.kind == "common-grid" else inp
    signal_out = cathode if s.kind == "cathode-follower" else plate
    record = StageRecord(n, s.kind, model.name, (n,), {"in": signal_in}, {"out": signal_out}, s.rail)
    return Expansion(record, {"plate": plate, "grid": grid, "cathode": cathode, "in": inp})
