"""Closed forms of the long-tailed pair (differential phase inverter).

Two triodes (``1``: the one the signal enters, ``2``) with plate loads
``R_L1``, ``R_L2`` from the rails (AC ground) and joined cathodes over the
tail ``R_t`` to ground — or over a bias resistor ``R_k`` to a tap and the
tail from the tap, the grid leaks ``R_g1``, ``R_g2`` returning to the tap.
Grid 1 is driven at ``in1`` (through the stopper ``R_s1``); grid 2 is at AC
ground — through its capacitor ``C_g2`` when it has one, else the stage
alone is solved with ``in2`` grounded (a second grid fed by a feedback
network sees the rest of the chain only in ``chain report``).  External
loads ``R_load1``, ``R_load2`` when the chain's output load hangs on a plate.
Each triode keeps its own ``mu`` and ``r_p`` (their operating points differ
when the plate loads do).

Published closed forms, equal halves (``mu``, ``r_p``, ``R_L``), tail only,
mid-band (from memory of M. Jones, "Valve Amplifiers", the long-tailed
pair; the differential and common-mode definitions as in Gray, Hurst,
Lewis and Meyer, "Analysis and Design of Analog Integrated Circuits", the
differential pair, from memory):

* one grid driven: ``A_1 = −mu·R_L·(r_p + R_L + (mu+1)·R_t) / D`` and
  ``A_2 = mu·(mu+1)·R_L·R_t / D`` with
  ``D = (r_p + R_L)·(r_p + R_L + 2·(mu+1)·R_t)``;
* balance ``A_2/A_1 = −(mu+1)·R_t / (r_p + R_L + (mu+1)·R_t)``, tending
  to −1 (0 dB, 180°) as the tail grows;
* differential gain ``(v_p1 − v_p2)/(v_g1 − v_g2) = −mu·R_L/(r_p + R_L)``
  (the joined cathodes do not move);
* common-mode gain ``v_p/v_cm = −mu·R_L / (r_p + R_L + 2·(mu+1)·R_t)``;
* output impedance at either plate: ``R_L ∥ (r_p + (mu+1)·Z_k)`` with
  ``Z_k = R_t ∥ (r_p + R_L)/(mu+1)`` the cathode impedance the other
  triode leaves (the common-cathode result with an unbypassed cathode
  impedance; common practice), about ``R_L ∥ (2·r_p + R_L)`` for a long
  tail.

The symbolic s-domain form is not solved (``SYMBOLIC_S``): with two
triodes and ``C_g2`` it is too large to read; the numeric s-domain form is
given instead.  No heavy imports here.
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

__all__ = ["KIND", "QUANTITIES", "SYMBOLIC_S", "SYMBOLS", "PairParts", "parts", "model"]

KIND = "long-tailed-pair"
SYMBOLIC_S = False
QUANTITIES = (
    Quantity("gain_plate1", "gain to plate 1 (grid 1 driven, grid 2 at AC ground)", "V/V", "input", ("v", "p1")),
    Quantity("gain_plate2", "gain to plate 2 (grid 1 driven, grid 2 at AC ground)", "V/V", "input", ("v", "p2")),
    Quantity("balance", "balance, plate 2 against plate 1", "V/V", "input", ("ratio", "p2", "p1")),
    Quantity("gain_diff", "differential gain (v_p1 - v_p2)/(v_g1 - v_g2)", "V/V", "differential",
             ("half_diff", "p1", "p2")),
    Quantity("gain_cm", "common-mode gain (v_p1 + v_p2)/2 per volt on both grids", "V/V", "common",
             ("half_sum", "p1", "p2")),
    Quantity("zin", "input impedance at grid 1", "ohm", "input", ("z", "Vin")),
    Quantity("zout_plate1", "output impedance at plate 1", "ohm", "output:plate1", ("z", "Vt")),
    Quantity("zout_plate2", "output impedance at plate 2", "ohm", "output:plate2", ("z", "Vt")),
)
DRIVES = ("input", "differential", "common", "output:plate1", "output:plate2")

#: PairParts field → (symbol, unit)
SYMBOLS = {
    "mu1": ("mu_1", ""), "rp1_ohm": ("r_p1", "Ω"), "mu2": ("mu_2", ""), "rp2_ohm": ("r_p2", "Ω"),
    "rl1_ohm": ("R_L1", "Ω"), "rl2_ohm": ("R_L2", "Ω"), "rk_ohm": ("R_k", "Ω"), "rt_ohm": ("R_t", "Ω"),
    "rg1_ohm": ("R_g1", "Ω"), "rg2_ohm": ("R_g2", "Ω"), "rs1_ohm": ("R_s1", "Ω"), "rs2_ohm": ("R_s2", "Ω"),
    "cg2_f": ("C_g2", "F"), "rload1_ohm": ("R_load1", "Ω"), "rload2_ohm": ("R_load2", "Ω"),
    "cgk_f": ("C_gk", "F"), "cgp_f": ("C_gp", "F"), "cpk_f": ("C_pk", "F"),
}
_NOT_SHOWN = ("cgk_f", "cgp_f", "cpk_f")


@dataclass(frozen=True, slots=True)
class PairParts:
    """A long-tailed pair's small-signal view, SI units, ``None`` where absent.

    ``rt_ohm``: the tail (cathodes, or the tap, to ground); ``rk_ohm``: the
    bias resistor from the cathodes to the tap; ``rg1_ohm``/``rg2_ohm``: the
    grid leaks (input to the tap, or ground); ``cg2_f``: the capacitor
    holding the second grid at AC ground.
    """

    kind: ClassVar[str] = KIND
    name: str
    mu1: float
    rp1_ohm: float
    mu2: float
    rp2_ohm: float
    rl1_ohm: float
    rl2_ohm: float
    rt_ohm: float
    rk_ohm: float | None = None
    rg1_ohm: float | None = None
    rg2_ohm: float | None = None
    rs1_ohm: float | None = None
    rs2_ohm: float | None = None
    cg2_f: float | None = None
    rload1_ohm: float | None = None
    rload2_ohm: float | None = None
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


_ROLES = {Role.PLATE_LOAD, Role.CATHODE_RESISTOR, Role.TAIL_RESISTOR, Role.GRID_LEAK, Role.GRID_STOPPER,
          Role.GRID_BYPASS, Role.TRIODE}


def _touching(found, node: str, stage: str, what: str):
    """The one part of ``found`` with an end on ``node`` (None if none)."""
    at = [p for p in found if node in (p.a, p.b)]
    if len(at) > 1:
        raise misplaced(stage, at[1], f"the only {what} at {node}")
    return at[0] if at else None


def parts(circuit: "Circuit", dc: "DcSolution", stage_name: str, *,
          rload_ohm: float | None = None) -> PairParts:
    """The long-tailed pair ``stage_name``'s parts, found by owner and role and
    placed by the triodes' pins and the stage's ports ``in``/``in2``;
    ``rload_ohm`` overrides the load on plate 1."""
    st = find_stage(circuit, stage_name)
    if len(st.triodes) != 2:
        raise FormulaError(error("E521", f"stage {stage_name}: a long-tailed pair needs two triodes",
                                 subject=stage_name))
    t1, t2 = (circuit.triode(n) for n in st.triodes)
    op1, op2 = (operating_point(dc, n, stage_name) for n in st.triodes)
    extra = [p for p in circuit.parts(kind="stage", name=stage_name) if p.role not in _ROLES]
    if extra:
        raise misplaced(stage_name, extra[0], "a part of a long-tailed pair's model")
    if t1.cathode != t2.cathode:
        raise FormulaError(error("E521", f"stage {stage_name}: the two cathodes are not joined",
                                 subject=stage_name))
    cathode = t1.cathode
    rails = set(circuit.rail_names())
    loads = own_parts(circuit, stage_name, Role.PLATE_LOAD)
    rl1 = _touching(loads, t1.plate, stage_name, "plate load")
    rl2 = _touching(loads, t2.plate, stage_name, "plate load")
    for rl, plate in ((rl1, t1.plate), (rl2, t2.plate)):
        if rl is None or other_end(rl, plate) not in rails:
            raise FormulaError(error("E521", f"stage {stage_name}: no plate load from {plate} to a rail",
                                     subject=stage_name))
    assert rl1 is not None and rl2 is not None
    rk = _touching(own_parts(circuit, stage_name, Role.CATHODE_RESISTOR), cathode, stage_name, "bias resistor")
    tap = cathode if rk is None else other_end(rk, cathode)
    tails = own_parts(circuit, stage_name, Role.TAIL_RESISTOR)
    if len(tails) != 1 or tap is None or not between(tails[0], tap, GROUND):
        raise FormulaError(error("E521", f"stage {stage_name}: no single tail resistor from {tap} to {GROUND}",
                                 subject=stage_name))
    rt = tails[0]
    ret = GROUND if rk is None else tap
    in1, in2 = st.inputs.get("in"), st.inputs.get("in2")
    if in1 is None or in2 is None:
        raise FormulaError(error("E521", f"stage {stage_name}: a long-tailed pair needs inputs in and in2",
                                 subject=stage_name))
    leaks, stoppers = own_parts(circuit, stage_name, Role.GRID_LEAK), own_parts(circuit, stage_name,
                                                                                Role.GRID_STOPPER)
    found = {}
    for i, (inp, grid) in enumerate(((in1, t1.grid), (in2, t2.grid)), start=1):
        rs = _touching(stoppers, grid, stage_name, "grid stopper")
        if rs is not None and not between(rs, inp, grid):
            raise misplaced(stage_name, rs, f"between {inp} and the grid {grid}")
        if rs is None and inp != grid:
            raise FormulaError(error("E521", f"stage {stage_name}: input {inp} is not the grid {grid} and there "
                                     "is no grid stopper between them", subject=stage_name))
        rg = _touching(leaks, inp, stage_name, "grid leak")
        if rg is not None and not between(rg, inp, ret):
            raise misplaced(stage_name, rg, f"between {inp} and {ret}")
        found[i] = (rs, rg)
    bypass = _touching(own_parts(circuit, stage_name, Role.GRID_BYPASS), in2, stage_name, "grid bypass")
    if bypass is not None and not between(bypass, in2, GROUND):
        raise misplaced(stage_name, bypass, f"between {in2} and {GROUND}")

    def ohms(p) -> float | None:
        return None if p is None else float(p.ohms)

    def value(p) -> float:
        return float(p.ohms)

    m = t1.model
    return PairParts(
        name=stage_name, mu1=float(op1.mu), rp1_ohm=float(op1.rp_ohm), mu2=float(op2.mu),
        rp2_ohm=float(op2.rp_ohm), rl1_ohm=value(rl1), rl2_ohm=value(rl2), rt_ohm=value(rt),
        rk_ohm=ohms(rk), rs1_ohm=ohms(found[1][0]), rg1_ohm=ohms(found[1][1]), rs2_ohm=ohms(found[2][0]),
        rg2_ohm=ohms(found[2][1]), cg2_f=None if bypass is None else float(bypass.farads),
        rload1_ohm=positive_or_none(rload_ohm if rload_ohm is not None else load_on(circuit, t1.plate)),
        rload2_ohm=positive_or_none(load_on(circuit, t2.plate)),
        cgk_f=positive_or_none(m.cgk_f), cgp_f=positive_or_none(m.cgp_f), cpk_f=positive_or_none(m.cpk_f))


def model(parts: PairParts, *, symbolic: bool = True, drive: str = "input", midband: bool = False,
          interelectrode: bool = True) -> StageModel:
    """The pair's small-signal model for one drive.

    Nodes ``in1``, ``g1``, ``in2``, ``g2``, ``k`` (joined cathodes), ``t``
    (tap), ``p1``, ``p2``, ``pi1``, ``pi2`` (inside the triode models),
    ``0``.  Drives: ``"input"`` (unit source ``Vin`` at ``in1``, grid 2 at
    AC ground, both external loads attached); ``"differential"`` and
    ``"common"`` (``Vin`` at ``in1`` and ``Vin2`` at ``in2``, −1 V or +1 V,
    no second-grid capacitor); ``"output:plate1"``/``"output:plate2"``
    (inputs at AC ground, that plate's load removed, unit test source ``Vt``
    there).  Mid-band: ``C_g2`` a short and no interelectrode capacitances.
    """
    if drive not in DRIVES:
        raise ValueError(f"drive must be one of {DRIVES}, got {drive!r}")

    def val(f: str) -> str:
        return SYMBOLS[f][0] if symbolic else number(getattr(parts, f))

    net = Lines()
    for i in ("1", "2"):
        net.add(f"Eu{i}", (f"pi{i}", "k", "k", f"g{i}"), val(f"mu{i}"))
        net.add(f"Rp{i}", (f"p{i}", f"pi{i}"), val(f"rp{i}_ohm"))
        net.add(f"RL{i}", (f"p{i}", "0"), val(f"rl{i}_ohm"))
    if parts.rk_ohm is not None:
        net.add("Rk", ("k", "t"), val("rk_ohm"))
        net.add("Rt", ("t", "0"), val("rt_ohm"))
    else:
        net.add("Rt", ("k", "0"), val("rt_ohm"))
        net.short("t", "0")
    for i in ("1", "2"):
        if getattr(parts, f"rs{i}_ohm") is not None:
            net.add(f"Rs{i}", (f"in{i}", f"g{i}"), val(f"rs{i}_ohm"))
        else:
            net.short(f"in{i}", f"g{i}")
        if getattr(parts, f"rg{i}_ohm") is not None:
            net.add(f"Rg{i}", (f"in{i}", "t"), val(f"rg{i}_ohm"))
    if interelectrode and not midband:
        for i in ("1", "2"):
            for f, name, a, b in (("cgk_f", "Cgk", f"g{i}", "k"), ("cgp_f", "Cgp", f"g{i}", f"p{i}"),
                                  ("cpk_f", "Cpk", f"p{i}", "k")):
                if getattr(parts, f) is not None:
                    net.add(f"{name}{i}", (a, b), val(f))
    both = drive in ("differential", "common")
    if not both:  # grid 2 at AC ground: through its capacitor, else held there
        if parts.cg2_f is not None and not midband:
            net.add("Cg2", ("in2", "0"), val("cg2_f"))
        else:
            net.short("in2", "0")
    measured = {"output:plate1": "p1", "output:plate2": "p2"}.get(drive)
    for f, node, name in (("rload1_ohm", "p1", "Rload1"), ("rload2_ohm", "p2", "Rload2")):
        if getattr(parts, f) is not None and node != measured:
            net.add(name, (node, "0"), val(f))
    if measured is None:
        net.add("Vin", ("in1", "0"), "s 1")
        if drive == "differential":
            net.add("Vin2", ("0", "in2"), "s 1")
        elif drive == "common":
            net.add("Vin2", ("in2", "0"), "s 1")
    else:
        net.short("in1", "0")
        net.add("Vt", (measured, "0"), "s 1")
    head = (f"stage {parts.name} (long-tailed pair) small-signal model; drive {drive}"
            + ("; mid-band" if midband else ""))
    return net.model(head, ("in1", "g1", "in2", "g2", "k", "t", "p1", "p2", "pi1", "pi2"))
