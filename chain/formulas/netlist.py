"""Plain-text lcapy netlists of the small-signal model (string building only).

Nothing here imports lcapy or sympy; the text is what :mod:`chain.formulas.stage`
and :mod:`chain.formulas.flat` hand to lcapy, and what a
:class:`~chain.errors.FormulaError` carries so that a failure can be reproduced.

The triode model
----------------
Each triode is its Thevenin small-signal equivalent between plate and
cathode: a voltage-controlled voltage source ``-mu·vgk`` in series with the
plate resistance ``rp`` (the standard linear triode model, e.g. M. Jones,
"Valve Amplifiers", chapter 2, from memory), plus the interelectrode
capacitances Cgk, Cgp and Cpk.  In lcapy's netlist form::

    Eu pi k k g mu      # V(pi) - V(k) = mu·(V(k) - V(g)) = -mu·vgk
    Rp p pi r_p

DC supplies are AC ground; the signal source is a unit s-domain source
(``V… pos neg s 1``), so every node voltage is the transfer function from
the source EMF to that node.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from types import MappingProxyType
from typing import TYPE_CHECKING, Iterable, Mapping

from chain.formulas.parts import SYMBOLS, StageParts

if TYPE_CHECKING:  # pragma: no cover - typing only
    from chain.circuit import Circuit
    from chain.dc.result import DcSolution

__all__ = ["SYMBOLS", "DRIVES", "StageModel", "Lines", "number", "stage_netlist", "single_model", "flat_netlist",
           "flat_model", "flat_node_names"]

#: ways to drive the stage model: a unit source at the input, or the input
#: shorted and a unit test source at the output (load removed)
DRIVES = ("input", "output")

_GROUND = "0"


def number(x: float) -> str:
    """Shortest text that reads back as the same float."""
    return repr(float(x))


@dataclass(frozen=True, slots=True)
class StageModel:
    """One stage's small-signal model as lcapy netlist text.

    ``nodes`` maps the model's own node names (``"p"``, ``"k"``, ``"in"``, …)
    to the names in :attr:`text` after shorted nodes were merged (``"0"``:
    ground), so that a quantity can be read at a node that a missing part
    merged into another.
    """

    text: str
    nodes: Mapping[str, str]

    def node(self, name: str) -> str:
        return self.nodes.get(name, name)


class Lines:
    """Collects two-terminal netlist lines, merging shorted nodes into one.

    A short (``alias(a, b)``) renames node ``a`` to ``b`` everywhere; a
    two-terminal part whose ends end up on the same node carries no current
    and is dropped.
    """

    def __init__(self) -> None:
        self._alias: dict[str, str] = {}
        self._lines: list[tuple[str, tuple[str, ...], str, str]] = []

    def short(self, a: str, b: str) -> None:
        a, b = self.node(a), self.node(b)
        if a == b:
            return
        if a == _GROUND:  # ground always wins
            a, b = b, a
        self._alias[a] = b

    def node(self, n: str) -> str:
        while n in self._alias:
            n = self._alias[n]
        return n

    def add(self, name: str, nodes: tuple[str, ...], value: str, comment: str = "") -> None:
        self._lines.append((name, nodes, value, comment))

    def model(self, head: str, names: Iterable[str]) -> StageModel:
        """The netlist text under a ``#`` comment ``head``, and where ``names`` ended up."""
        return StageModel("\n".join([f"# {head}", *self.lines()]),
                          MappingProxyType({n: self.node(n) for n in names}))

    def lines(self) -> list[str]:
        out = []
        for name, nodes, value, comment in self._lines:
            resolved = tuple(self.node(n) for n in nodes)
            if len(resolved) == 2 and resolved[0] == resolved[1]:
                continue
            if comment:
                out.append(f"# {comment}")
            out.append(" ".join((name, *resolved, value)))
        return out


def stage_netlist(parts: StageParts, *, symbolic: bool = True, drive: str = "input",
                  midband: bool = False, interelectrode: bool = True) -> str:
    """The lcapy netlist of a single-triode stage's small-signal model (:func:`single_model`'s text)."""
    return single_model(parts, symbolic=symbolic, drive=drive, midband=midband,
                        interelectrode=interelectrode).text


def single_model(parts: StageParts, *, symbolic: bool = True, drive: str = "input",
                 midband: bool = False, interelectrode: bool = True) -> StageModel:
    """The small-signal model of a single-triode stage, the template of
    :mod:`chain.formulas.kinds.common_cathode`, ``cathode_follower`` and
    ``common_grid``.

    Nodes: ``in`` (top of the grid leak, the input of a grid-driven stage),
    ``g`` (grid pin), ``k`` (cathode), ``kb`` (bypass node of the
    split cathode form), ``p`` (plate), ``pi`` (inside the triode model,
    between the controlled source and rp) and ``0`` (ground; the rail is AC
    ground).  The stage input is ``in`` (``k`` for a common-grid stage, whose
    grid returns to ground through ``R_s`` and ``R_g`` when present), the
    output ``p`` (common cathode, common grid) or ``k`` (cathode follower).
    Shorted nodes are merged, so a missing stopper makes ``in`` and ``g``
    one node (named ``g``).

    Parameters
    ----------
    parts : StageParts
        The stage.
    symbolic : bool
        Values as symbols (``mu``, ``r_p``, ``R_L``, … see :data:`SYMBOLS`)
        or as numbers (SI units).
    drive : {"input", "output"}
        ``"input"``: unit s-domain source ``Vin`` at the input, load
        attached (gain = V(out), input impedance = −1/I(Vin)).
        ``"output"``: input shorted to ground, load removed, unit source
        ``Vt`` at the output (output impedance = −1/I(Vt)).
    midband : bool
        Mid-band model: the bypass capacitor is a short.
    interelectrode : bool
        Include Cgk, Cgp, Cpk (ignored with ``midband``: mid-band means they
        are open).

    Returns
    -------
    StageModel
        One part per line, no trailing newline, under a ``#`` comment.
    """
    if drive not in DRIVES:
        raise ValueError(f"drive must be one of {DRIVES}, got {drive!r}")

    def val(field_name: str) -> str:
        return SYMBOLS[field_name] if symbolic else number(getattr(parts, field_name))

    net = Lines()
    grid_driven = parts.kind != "common-grid"
    inp = "in" if grid_driven else "k"
    out = "k" if parts.kind == "cathode-follower" else "p"

    # the triode: -mu·vgk behind rp, plate to cathode
    net.add("Eu", ("pi", "k", "k", "g"), val("mu"))
    net.add("Rp", ("p", "pi"), val("rp_ohm"))

    # plate load to the rail (AC ground); none: plate on the rail
    if parts.rl_ohm is not None:
        net.add("RL", ("p", _GROUND), val("rl_ohm"))
    else:
        net.short("p", _GROUND)

    # cathode network
    if parts.rk_ohm is not None:
        net.add("Rk", ("k", _GROUND), val("rk_ohm"))
    if parts.ck_f is not None:
        bottom = "kb" if parts.rkc_ohm is not None else "k"
        if parts.rkc_ohm is not None:
            net.add("Rkc", ("k", "kb"), val("rkc_ohm"))
        if midband:
            net.short(bottom, _GROUND)
        else:
            net.add("Ck", (bottom, _GROUND), val("ck_f"))
    if parts.rk_ohm is None and parts.ck_f is None and grid_driven:
        net.short("k", _GROUND)

    # grid side: stopper from the grid-leak top "in" to the grid pin, leak to
    # ground; a common-grid stage's grid returns to ground the same way (a
    # missing leak there is a grid tied to ground)
    if parts.rs_ohm is not None:
        net.add("Rs", ("in", "g"), val("rs_ohm"))
    else:
        net.short("in", "g")
    if parts.rg_ohm is not None:
        net.add("Rg", ("in", _GROUND), val("rg_ohm"))
    elif not grid_driven:
        net.short("in", _GROUND)

    if interelectrode and not midband:
        for field_name, name, a, b in (("cgk_f", "Cgk", "g", "k"), ("cgp_f", "Cgp", "g", "p"),
                                       ("cpk_f", "Cpk", "p", "k")):
            if getattr(parts, field_name) is not None:
                net.add(name, (a, b), val(field_name))

    if drive == "input":
        if parts.rload_ohm is not None:
            net.add("Rload", (out, _GROUND), val("rload_ohm"))
        net.add("Vin", (inp, _GROUND), "s 1")
    else:
        net.short(inp, _GROUND)
        net.add("Vt", (out, _GROUND), "s 1")

    head = (f"stage {parts.name} ({parts.kind}) small-signal model; "
            f"input {net.node(inp)}, output {net.node(out)}, drive {drive}"
            + ("; mid-band" if midband else ""))
    return net.model(head, ("in", "g", "k", "kb", "p", "pi"))


# ---------------------------------------------------------------------------
# the whole chain as one netlist

_UNSAFE = re.compile(r"[^A-Za-z0-9_]")


def flat_node_names(names: Iterable[str]) -> dict[str, str]:
    """Map circuit node names to lcapy-safe node names.

    ``"gnd"`` becomes ``"0"``; other names have every character outside
    ``[A-Za-z0-9_]`` replaced by ``_`` and get a ``n_`` prefix when they would
    start with a digit; clashes get a numeric suffix.
    """
    mapping: dict[str, str] = {}
    used = {_GROUND}
    for n in names:
        if n in mapping:
            continue
        if n == "gnd":
            mapping[n] = _GROUND
            continue
        base = _UNSAFE.sub("_", n)
        if not base or base[0].isdigit():
            base = "n_" + base
        cand, k = base, 2
        while cand in used:
            cand, k = f"{base}_{k}", k + 1
        used.add(cand)
        mapping[n] = cand
    return mapping


def flat_netlist(circuit: "Circuit", dc: "DcSolution") -> str:
    """The whole chain's small-signal model as one lcapy netlist (numbers).

    Every resistor, capacitor and inductor of the circuit is kept (zero-ohm
    resistors and zero-henry inductors as shorts, zero-farad capacitors
    left out); each
    triode becomes ``E`` (−mu·vgk) in series with rp plus its interelectrode
    capacitances (mu and rp from ``dc``); every supply source is a short
    (its nodes merged, so rails are AC ground only through their own
    decoupling), and the signal source is a unit s-domain source, so the
    voltage of each node is its transfer function from the source EMF.

    Component names are the part-kind letter plus a serial number (lcapy reads
    some name prefixes, such as ``RV``, as other part kinds); a ``#`` comment
    above each part gives the circuit's own name.  Node names come from
    :func:`flat_node_names`.

    Parameters
    ----------
    circuit : Circuit
    dc : DcSolution
        Gives ``mu`` and ``rp_ohm`` of each triode.

    Returns
    -------
    str
    """
    return flat_model(circuit, dc)[0]


def flat_model(circuit: "Circuit", dc: "DcSolution") -> tuple[str, dict[str, str]]:
    """:func:`flat_netlist` and the map circuit node → lcapy node (``"0"`` for
    ground and for every node a supply shorts to ground)."""
    mapping = flat_node_names(["gnd", *circuit.nodes(),
                               *(f"{t.name}.internal" for t in circuit.triodes)])
    parts = Lines()
    serial = iter(range(1, 1 << 30))

    def add(letter: str, label: str, nodes: tuple[str, ...], value: str) -> None:
        parts.add(f"{letter}{next(serial)}", tuple(mapping[n] for n in nodes), value, label)

    # zero-ohm resistors and zero-henry inductors are shorts, zero farads open
    for r in circuit.resistors:
        if r.ohms == 0:
            parts.short(mapping[r.a], mapping[r.b])
        else:
            add("R", r.name, (r.a, r.b), number(r.ohms))
    for c in circuit.capacitors:
        if c.farads > 0:
            add("C", c.name, (c.a, c.b), number(c.farads))
    for ind in circuit.inductors:
        if ind.henries == 0:
            parts.short(mapping[ind.a], mapping[ind.b])
        else:
            add("L", ind.name, (ind.a, ind.b), number(ind.henries))
    for src in circuit.sources:
        if src.role == "signal":
            add("V", f"{src.name} (signal, unit EMF)", (src.pos, src.neg), "s 1")
        else:
            parts.short(mapping[src.pos], mapping[src.neg])
    for t in circuit.triodes:
        op = dc.points[t.name]
        internal = f"{t.name}.internal"
        add("E", f"{t.name}: -mu*vgk", (internal, t.cathode, t.cathode, t.grid), number(op.mu))
        add("R", f"{t.name}: rp", (t.plate, internal), number(op.rp_ohm))
        for attr, label, a, b in (("cgk_f", "Cgk", t.grid, t.cathode),
                                  ("cgp_f", "Cgp", t.grid, t.plate),
                                  ("cpk_f", "Cpk", t.plate, t.cathode)):
            value = getattr(t.model, attr)
            if value > 0:
                add("C", f"{t.name}: {label}", (a, b), number(value))

    head = f"# {circuit.title or 'chain'}: flat small-signal model (supplies shorted)"
    nodes = {n: parts.node(lcapy_name) for n, lcapy_name in mapping.items()}
    return "\n".join([head, *parts.lines()]), nodes
