"""Closed forms of the cathodyne (split-load phase inverter).

One triode with its plate load ``R_L`` from the rail (AC ground) and its
cathode load to ground: ``R_k`` alone, or ``R_k`` from the cathode to a tap
and the tail ``R_t`` from the tap to ground, the grid leak ``R_g``
returning to the tap (the bootstrapped arrangement).  Outputs: the plate
(``p``) and the cathode (``k``); input: the top of the grid leak (``in``),
through the stopper ``R_s`` to the grid.  External loads ``R_loadp`` and
``R_loadk`` when the chain's output load hangs on an output.

Published closed forms (from memory of M. Jones, "Valve Amplifiers", the
cathodyne section; the algebra of the common-cathode stage with an
unbypassed cathode resistor), mid-band, ``R_K = R_k + R_t`` the whole
cathode load, each load in parallel with its external load (``'``):

* ``A_p = −mu·R_L' / (r_p + R_L' + (mu+1)·R_K')`` (gain to the plate)
* ``A_k = mu·R_K' / (r_p + R_L' + (mu+1)·R_K')`` (gain to the cathode):
  both just under one, equal for ``R_L' = R_K'`` and in antiphase;
* ``Z_p = R_L ∥ (r_p + (mu+1)·R_K')`` (high), ``Z_k = R_K ∥ (r_p + R_L')/(mu+1)``
  (low): the two outputs' impedances are very unequal;
* input impedance with the leak returned to the tap: the leak is
  bootstrapped, ``Z_in ≈ R_g / (1 − A_k·R_t/(R_k + R_t))`` (Miller's
  theorem; common practice).

The forms solved here are exact for the model (the leak's own current into
the tap included).  No heavy imports here.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, ClassVar

from chain.circuit import GROUND, Role
from chain.errors import FormulaError, error
from chain.formulas.kinds.base import (
    Quantity,
    between,
    find_stage,
    load_on,
    misplaced,
    operating_point,
    other_end,
    own_parts,
    positive_or_none,
)
from chain.formulas.netlist import Lines, StageModel, number

if TYPE_CHECKING:  # pragma: no cover - typing only
    from chain.circuit import Circuit
    from chain.dc.result import DcSolution

__all__ = ["KIND", "QUANTITIES", "SYMBOLIC_S", "SYMBOLS", "CathodyneParts", "parts", "model"]

KIND = "cathodyne"
SYMBOLIC_S = True
QUANTITIES = (
    Quantity("gain_plate", "gain to the plate", "V/V", "input", ("v", "p")),
    Quantity("gain_cathode", "gain to the cathode", "V/V", "input", ("v", "k")),
    Quantity("balance", "balance, cathode against plate", "V/V", "input", ("ratio", "k", "p")),
    Quantity("zin", "input impedance", "ohm", "input", ("z", "Vin")),
    Quantity("zout_plate", "output impedance at the plate", "ohm", "output:plate", ("z", "Vt")),
    Quantity("zout_cathode", "output impedance at the cathode", "ohm", "output:cathode", ("z", "Vt")),
)
DRIVES = ("input", "output:plate", "output:cathode")

#: CathodyneParts field → (symbol, unit)
SYMBOLS = {
    "mu": ("mu", ""), "rp_ohm": ("r_p", "Ω"), "rl_ohm": ("R_L", "Ω"), "rk_ohm": ("R_k", "Ω"),
    "rt_ohm": ("R_t", "Ω"), "rg_ohm": ("R_g", "Ω"), "rs_ohm": ("R_s", "Ω"),
    "rload_p_ohm": ("R_loadp", "Ω"), "rload_k_ohm": ("R_loadk", "Ω"),
    "cgk_f": ("C_gk", "F"), "cgp_f": ("C_gp", "F"), "cpk_f": ("C_pk", "F"),
}
_NOT_SHOWN = ("cgk_f", "cgp_f", "cpk_f")


@dataclass(frozen=True, slots=True)
class CathodyneParts:
    """A cathodyne's small-signal view, SI units, ``None`` where absent.

    ``rk_ohm``: cathode to the tap (or to ground when there is no tail);
    ``rt_ohm``: the tail, tap to ground; ``rg_ohm``: the grid leak, input to
    the tap (or ground), None when the grid is fed directly (DC-coupled);
    ``rload_p_ohm``/``rload_k_ohm``: external loads on the plate and cathode.
    """

    kind: ClassVar[str] = KIND
    name: str
    mu: float
    rp_ohm: float
    rl_ohm: float
    rk_ohm: float
    rt_ohm: float | None = None
    rg_ohm: float | None = None
    rs_ohm: float | None = None
    rload_p_ohm: float | None = None
    rload_k_ohm: float | None = None
    cgk_f: float | None = None
    cgp_f: float | None = None
    cpk_f: float | None = None

    def __post_init__(self) -> None:
        bad = [f for f in SYMBOLS if getattr(self, f) is not None and not getattr(self, f) > 0]
        if bad:
            raise FormulaError(tuple(error("E520", f"stage {self.name}: {f} must be positive, got "
                                                   f"{getattr(self, f)!r}", subject=self.name) for f in bad))

    def values(self) -> dict[str, float]:
        return {sym: float(getattr(self, f)) for f, (sym, _) in SYMBOLS.items() if getattr(self, f) is not None}

    def known(self) -> tuple[tuple[str, float, str], ...]:
        return tuple((sym, float(getattr(self, f)), unit) for f, (sym, unit) in SYMBOLS.items()
                     if f not in _NOT_SHOWN and getattr(self, f) is not None)


_ROLES = {Role.PLATE_LOAD, Role.CATHODE_RESISTOR, Role.TAIL_RESISTOR, Role.GRID_LEAK, Role.GRID_STOPPER, Role.TRIODE}


def _one(circuit, stage: str, role: Role):
    found = own_parts(circuit, stage, role)
    if len(found) > 1:
        raise misplaced(stage, found[1], f"the only {role.value} of a cathodyne")
    return found[0] if found else None


def parts(circuit: "Circuit", dc: "DcSolution", stage_name: str, *,
          rload_ohm: float | None = None) -> CathodyneParts:
    """The cathodyne ``stage_name``'s parts, found by owner and role and placed
    by the triode's pins; ``rload_ohm`` overrides the load on the plate."""
    st = find_stage(circuit, stage_name)
    tri = circuit.triode(st.triode)
    op = operating_point(dc, st.triode, stage_name)
    plate, grid, cathode = tri.plate, tri.grid, tri.cathode
    extra = [p for p in circuit.parts(kind="stage", name=stage_name) if p.role not in _ROLES]
    if extra:
        raise misplaced(stage_name, extra[0], "a part of a cathodyne's model")
    rl = _one(circuit, stage_name, Role.PLATE_LOAD)
    if rl is None or not between(rl, plate, st.rail):
        raise FormulaError(error("E521", f"stage {stage_name}: no plate load from {plate} to {st.rail}",
                                 subject=stage_name))
    rk = _one(circuit, stage_name, Role.CATHODE_RESISTOR)
    tap = None if rk is None else other_end(rk, cathode)
    if rk is None or tap is None:
        raise FormulaError(error("E521", f"stage {stage_name}: no cathode resistor at {cathode}",
                                 subject=stage_name))
    rt = _one(circuit, stage_name, Role.TAIL_RESISTOR)
    if rt is not None and not between(rt, tap, GROUND):
        raise misplaced(stage_name, rt, f"between the tap {tap} and {GROUND}")
    if rt is None and tap != GROUND:
        raise misplaced(stage_name, rk, f"between {cathode} and {GROUND}")
    rs = _one(circuit, stage_name, Role.GRID_STOPPER)
    if rs is not None and not between(rs, st.input, grid):
        raise misplaced(stage_name, rs, f"between {st.input} and the grid {grid}")
    if rs is None and st.input != grid:
        raise FormulaError(error("E521", f"stage {stage_name}: input {st.input} is not the grid {grid} and "
                                 "there is no grid stopper between them", subject=stage_name))
    rg = _one(circuit, stage_name, Role.GRID_LEAK)
    if rg is not None and not between(rg, st.input, tap):
        raise misplaced(stage_name, rg, f"between {st.input} and {tap}")
    model_ = tri.model
    return CathodyneParts(
        name=stage_name, mu=float(op.mu), rp_ohm=float(op.rp_ohm), rl_ohm=float(rl.ohms), rk_ohm=float(rk.ohms),
        rt_ohm=None if rt is None else float(rt.ohms), rg_ohm=None if rg is None else float(rg.ohms),
        rs_ohm=None if rs is None else float(rs.ohms),
        rload_p_ohm=positive_or_none(rload_ohm if rload_ohm is not None else load_on(circuit, plate)),
        rload_k_ohm=positive_or_none(load_on(circuit, cathode)),
        cgk_f=positive_or_none(model_.cgk_f), cgp_f=positive_or_none(model_.cgp_f),
        cpk_f=positive_or_none(model_.cpk_f))


def model(parts: CathodyneParts, *, symbolic: bool = True, drive: str = "input", midband: bool = False,
          interelectrode: bool = True) -> StageModel:
    """The cathodyne's small-signal model for one drive.

    Nodes ``in``, ``g``, ``k`` (cathode output), ``t`` (tap), ``p`` (plate
    output), ``pi`` (inside the triode model), ``0``.  Drives: ``"input"``
    (unit source ``Vin`` at ``in``, both external loads attached),
    ``"output:plate"`` and ``"output:cathode"`` (input shorted, that
    output's load removed, unit test source ``Vt`` there; the other output's
    load stays).  No capacitor but the interelectrode ones, so ``midband``
    only leaves those out.
    """
    if drive not in DRIVES:
        raise ValueError(f"drive must be one of {DRIVES}, got {drive!r}")

    def val(f: str) -> str:
        return SYMBOLS[f][0] if symbolic else number(getattr(parts, f))

    net = Lines()
    net.add("Eu", ("pi", "k", "k", "g"), val("mu"))
    net.add("Rp", ("p", "pi"), val("rp_ohm"))
    net.add("RL", ("p", "0"), val("rl_ohm"))
    if parts.rt_ohm is not None:
        net.add("Rk", ("k", "t"), val("rk_ohm"))
        net.add("Rt", ("t", "0"), val("rt_ohm"))
    else:
        net.add("Rk", ("k", "0"), val("rk_ohm"))
        net.short("t", "0")
    if parts.rs_ohm is not None:
        net.add("Rs", ("in", "g"), val("rs_ohm"))
    else:
        net.short("in", "g")
    if parts.rg_ohm is not None:
        net.add("Rg", ("in", "t"), val("rg_ohm"))
    if interelectrode and not midband:
        for f, name, a, b in (("cgk_f", "Cgk", "g", "k"), ("cgp_f", "Cgp", "g", "p"), ("cpk_f", "Cpk", "p", "k")):
            if getattr(parts, f) is not None:
                net.add(name, (a, b), val(f))
    measured = {"input": None, "output:plate": "p", "output:cathode": "k"}[drive]
    for f, node, name in (("rload_p_ohm", "p", "Rloadp"), ("rload_k_ohm", "k", "Rloadk")):
        if getattr(parts, f) is not None and node != measured:
            net.add(name, (node, "0"), val(f))
    if measured is None:
        net.add("Vin", ("in", "0"), "s 1")
    else:
        net.short("in", "0")
        net.add("Vt", (measured, "0"), "s 1")
    head = f"stage {parts.name} (cathodyne) small-signal model; drive {drive}" + ("; mid-band" if midband else "")
    return net.model(head, ("in", "g", "k", "t", "p", "pi"))
