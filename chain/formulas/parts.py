"""A stage's small-signal parts, pulled out of a Circuit and its DC solution.

:func:`stage_parts` hands a stage to its kind's module
(:mod:`chain.formulas.kinds`).  :class:`StageParts` is the parts record of
the single-triode kinds (common cathode, cathode follower, common grid),
which share one template: the triode's small-signal constants at its
operating point and the values of the parts the builder placed around it.
Every parts record is frozen and hashable, so solved formulas can be cached
on it.

No heavy imports here: this module is plain Python.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

from chain.circuit import GROUND as _GROUND
from chain.circuit import Owner, Role
from chain.errors import FormulaError, error
from chain.formulas.kinds.base import load_on

if TYPE_CHECKING:  # pragma: no cover - typing only
    from chain.circuit import Circuit
    from chain.dc.result import DcSolution

__all__ = ["SINGLE_KINDS", "SYMBOLS", "StageParts", "stage_parts", "single_parts"]

#: the stage configurations the single-triode template can represent
SINGLE_KINDS = ("common-cathode", "cathode-follower", "common-grid")

#: StageParts field -> the symbol name used in the symbolic netlist and formulas
SYMBOLS = {
    "mu": "mu",
    "rp_ohm": "r_p",
    "rl_ohm": "R_L",
    "rk_ohm": "R_k",
    "ck_f": "C_k",
    "rkc_ohm": "R_kc",
    "rg_ohm": "R_g",
    "rs_ohm": "R_s",
    "rload_ohm": "R_load",
    "cgk_f": "C_gk",
    "cgp_f": "C_gp",
    "cpk_f": "C_pk",
}

#: StageParts field → (symbol, unit) as printed, in print order
_SHOWN = (("mu", "mu", ""), ("rp_ohm", "r_p", "Ω"), ("rl_ohm", "R_L", "Ω"), ("rk_ohm", "R_k", "Ω"),
          ("ck_f", "C_k", "F"), ("rkc_ohm", "R_kc", "Ω"), ("rg_ohm", "R_g", "Ω"), ("rs_ohm", "R_s", "Ω"),
          ("rload_ohm", "R_load", "Ω"))


@dataclass(frozen=True, slots=True)
class StageParts:
    """The small-signal view of one stage, SI units; ``None`` where absent.

    Symbol names used by the formulas are given in brackets.

    Attributes
    ----------
    name : str
        Stage name (for messages only).
    kind : str
        ``"common-cathode"``, ``"cathode-follower"`` or ``"common-grid"``.
    mu : float
        Amplification factor at the operating point [``mu``].
    rp_ohm : float
        Plate resistance at the operating point, ohm [``r_p``].
    rl_ohm : float or None
        Plate load, plate to rail (the rail is AC ground), ohm [``R_L``].
        ``None``: plate straight on the rail.
    rk_ohm : float or None
        Cathode resistor to ground, ohm [``R_k``]; ``None``: cathode grounded.
    ck_f : float or None
        Cathode bypass capacitor, F [``C_k``]: cathode to ground, or, with
        ``rkc_ohm``, in series with it (the split form).
    rkc_ohm : float or None
        Resistor in series with the bypass capacitor, ohm [``R_kc``].
    rg_ohm : float or None
        Grid leak, ground to the input node (for a common-grid stage, to the
        stopper or grid; none there means the grid is tied to ground), ohm
        [``R_g``].
    rs_ohm : float or None
        Grid stopper, grid-leak top to the grid pin, ohm [``R_s``].
    rload_ohm : float or None
        External load on the stage output, ohm [``R_load``].
    cgk_f, cgp_f, cpk_f : float or None
        Interelectrode capacitances grid–cathode, grid–plate, plate–cathode,
        F [``C_gk``, ``C_gp``, ``C_pk``].
    """

    name: str
    kind: str
    mu: float
    rp_ohm: float
    rl_ohm: float | None = None
    rk_ohm: float | None = None
    ck_f: float | None = None
    rkc_ohm: float | None = None
    rg_ohm: float | None = None
    rs_ohm: float | None = None
    rload_ohm: float | None = None
    cgk_f: float | None = None
    cgp_f: float | None = None
    cpk_f: float | None = None

    def __post_init__(self) -> None:
        problems = []
        if self.kind not in SINGLE_KINDS:
            problems.append(f"kind {self.kind!r} is not one of {', '.join(SINGLE_KINDS)}")
        if not self.mu > 0:
            problems.append(f"mu must be positive, got {self.mu!r}")
        if not self.rp_ohm > 0:
            problems.append(f"rp_ohm must be positive, got {self.rp_ohm!r}")
        for field_name in ("rl_ohm", "rk_ohm", "ck_f", "rkc_ohm", "rg_ohm", "rs_ohm",
                           "rload_ohm", "cgk_f", "cgp_f", "cpk_f"):
            value = getattr(self, field_name)
            if value is not None and not value > 0:
                problems.append(f"{field_name} must be positive or None, got {value!r}")
        if self.rkc_ohm is not None and self.ck_f is None:
            problems.append("rkc_ohm (series bypass resistor) given without ck_f")
        if self.kind == "cathode-follower" and self.rk_ohm is None:
            problems.append("a cathode follower needs rk_ohm (its output is the cathode)")
        if self.kind in ("common-cathode", "common-grid") and self.rl_ohm is None:
            problems.append(f"a {self.kind} stage needs rl_ohm (its output is the plate)")
        if problems:
            raise FormulaError(tuple(
                error("E520", f"stage {self.name}: {p}", subject=self.name) for p in problems))

    def values(self) -> dict[str, float]:
        """Symbol name → number (SI), for every part present."""
        return {sym: float(getattr(self, f)) for f, sym in SYMBOLS.items() if getattr(self, f) is not None}

    def known(self) -> tuple[tuple[str, float, str], ...]:
        """(symbol, number, unit) of the stage's own values, as printed beside the formulas."""
        return tuple((sym, float(getattr(self, f)), unit) for f, sym, unit in _SHOWN
                     if getattr(self, f) is not None)


def _find(circuit, owner, role):
    """The one element of ``owner`` with ``role`` (None when there is none)."""
    return circuit.part(owner, role)


def _between(part, n1: str, n2: str) -> bool:
    return {part.a, part.b} == {n1, n2}


def _misplaced(stage: str, part, where: str) -> FormulaError:
    return FormulaError(error(
        "E521",
        f"stage {stage}: part {part.name} ({part.a} -- {part.b}) is not {where}; "
        "the per-stage formulas cannot represent it",
        subject=stage))


def _positive_or_none(x) -> float | None:
    if x is None:
        return None
    x = float(x)
    return x if x > 0 else None


def stage_parts(circuit: "Circuit", dc: "DcSolution", stage_name: str, *, rload_ohm: float | None = None):
    """One stage's parts record, by its kind's module (:mod:`chain.formulas.kinds`).

    A single-triode stage gives a :class:`StageParts`, a cathodyne a
    :class:`~chain.formulas.kinds.cathodyne.CathodyneParts`, a long-tailed
    pair a :class:`~chain.formulas.kinds.long_tailed_pair.PairParts`.
    ``rload_ohm`` overrides the load on the (main) output.

    Raises
    ------
    FormulaError
        E522 unknown stage or missing operating point; E520 a kind without
        closed forms; E521 a part where the kind's model cannot represent it.
    """
    from chain.formulas.kinds import kind_module
    from chain.formulas.kinds.base import find_stage

    st = find_stage(circuit, stage_name)
    return kind_module(st.kind, stage_name).parts(circuit, dc, stage_name, rload_ohm=rload_ohm)


def single_parts(circuit: "Circuit", dc: "DcSolution", stage_name: str, *,
                 rload_ohm: float | None = None) -> StageParts:
    """Extract a single-triode stage's :class:`StageParts` from a built circuit.

    Parts are found by their owner (the stage) and role (plate load,
    cathode resistor, bypass series resistor, bypass, grid leak, grid
    stopper); mu and rp come from the DC
    operating point of the stage's triode; interelectrode capacitances from
    the triode model.  Each part's terminals are checked against the
    template the formulas assume (plate load to the stage rail, cathode
    resistor to ground, grid leak to ground, …).

    Parameters
    ----------
    circuit : Circuit
        The built circuit.
    dc : DcSolution
        Its DC solution (gives ``mu`` and ``rp_ohm``).
    stage_name : str
        The stage.
    rload_ohm : float, optional
        External load on the stage output, ohm.  By default the circuit's
        ``"output.load"`` resistor when it hangs on this stage's output node
        (to ground), otherwise none.

    Returns
    -------
    StageParts

    Raises
    ------
    FormulaError
        Unknown stage, missing operating point, or a part placed where the
        per-stage template cannot represent it.
    """
    try:
        st = circuit.stage(stage_name)
    except KeyError:
        known = ", ".join(s.name for s in circuit.stages) or "none"
        raise FormulaError(error("E522", f"no stage named {stage_name!r} (stages: {known})",
                                 subject=stage_name)) from None
    tri = circuit.triode(st.triode)
    try:
        op = dc.points[st.triode]
    except KeyError:
        raise FormulaError(error("E522", f"no DC operating point for triode {st.triode!r}",
                                 subject=stage_name)) from None

    plate, grid, cathode = tri.plate, tri.grid, tri.cathode
    own = Owner("stage", stage_name)

    rl = _find(circuit, own, Role.PLATE_LOAD)
    if rl is not None and not _between(rl, plate, st.rail):
        raise _misplaced(stage_name, rl, f"between {plate} and its rail {st.rail}")
    rk = _find(circuit, own, Role.CATHODE_RESISTOR)
    if rk is not None and not _between(rk, cathode, _GROUND):
        raise _misplaced(stage_name, rk, f"between {cathode} and {_GROUND}")
    rkc = _find(circuit, own, Role.BYPASS_SERIES)
    ck = _find(circuit, own, Role.BYPASS)
    if rkc is not None:
        kb = rkc.b if rkc.a == cathode else rkc.a
        if cathode not in (rkc.a, rkc.b) or kb == _GROUND:
            raise _misplaced(stage_name, rkc, f"between {cathode} and the bypass node")
        if ck is None or not _between(ck, kb, _GROUND):
            raise FormulaError(error(
                "E521", f"stage {stage_name}: {rkc.name} has no bypass capacitor from "
                f"{kb} to {_GROUND}", subject=stage_name))
    elif ck is not None and not _between(ck, cathode, _GROUND):
        raise _misplaced(stage_name, ck, f"between {cathode} and {_GROUND}")

    rs = _find(circuit, own, Role.GRID_STOPPER)
    rg = _find(circuit, own, Role.GRID_LEAK)
    # the grid-leak top: the stage input, or for a common-grid stage the far
    # end of the stopper (or the grid itself)
    if st.kind == "common-grid":
        top = grid if rs is None else (rs.b if rs.a == grid else rs.a)
    else:
        top = st.input
    if rs is not None and not _between(rs, top, grid):
        raise _misplaced(stage_name, rs, f"between {top} and the grid {grid}")
    if rg is not None and not _between(rg, top, _GROUND):
        raise _misplaced(stage_name, rg, f"between {top} and {_GROUND}")
    if st.kind != "common-grid" and rs is None and grid != st.input:
        raise FormulaError(error(
            "E521", f"stage {stage_name}: input {st.input} is not the grid {grid} and there "
            "is no grid stopper between them", subject=stage_name))

    if rload_ohm is None:
        rload_ohm = load_on(circuit, st.output)

    model = tri.model
    return StageParts(
        name=stage_name,
        kind=st.kind,
        mu=float(op.mu),
        rp_ohm=float(op.rp_ohm),
        rl_ohm=None if rl is None else float(rl.ohms),
        rk_ohm=None if rk is None else float(rk.ohms),
        ck_f=None if ck is None else float(ck.farads),
        rkc_ohm=None if rkc is None else float(rkc.ohms),
        rg_ohm=None if rg is None else float(rg.ohms),
        rs_ohm=None if rs is None else float(rs.ohms),
        rload_ohm=_positive_or_none(rload_ohm),
        cgk_f=_positive_or_none(model.cgk_f),
        cgp_f=_positive_or_none(model.cgp_f),
        cpk_f=_positive_or_none(model.cpk_f),
    )
