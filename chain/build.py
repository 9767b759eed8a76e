"""Design → Circuit: the one place that expands a design into parts (each
stage by the module of its kind, :mod:`chain.kinds`).

:func:`build` turns a validated :class:`~chain.language.design.Design` into a
flat :class:`~chain.circuit.Circuit` and checks its topology (:mod:`chain.graph`)
(dangling nodes, nodes and grids with no DC path to ground, loops of
couplings, stages off the signal path).  Problems are raised together as one
:class:`~chain.errors.LanguageError`, each located at the netlist line that
made the part.

Part names: a stage's own parts are ``<stage>.RL`` (plate load), ``.Rk``,
``.Ck``, ``.Rkc`` (split bypass), ``.Rg`` (grid leak), ``.Rs`` (grid
stopper); its triode is named after the stage.  Supplies ``supply.<name>``,
rails ``rail.<name>.R`` / ``.C``, couplings ``couple.<src>-<dst>.C``, network
parts ``<instance>.<part>`` (a pot gives ``<instance>.<pot>.a`` and ``.b``),
source parts ``input.*``, the load ``output.load``, strays ``stray.<node>``.
"""

from __future__ import annotations

from dataclasses import fields, replace
from typing import Any

from chain.circuit import (
    GROUND,
    Capacitor,
    Circuit,
    Inductor,
    Owner,
    Resistor,
    Role,
    StageRecord,
    Triode,
    VoltageSource,
)
from chain.errors import Diagnostic, LanguageError, Span, error
from chain.graph import Digraph, components
from chain.kinds import expander
from chain.language.design import Design, Pot, Stage
from chain.tubes import FORM_FIELDS, FORMS, Ratings, TriodeModel, lookup

__all__ = ["build", "load", "load_text", "part_names", "pot_fraction", "tube_model", "with_part", "WIPER_OHM"]

#: smallest resistance either side of a pot's wiper, ohm (contact resistance;
#: keeps a pot turned fully up or down from shorting two nodes together)
WIPER_OHM = 0.1

_RATING_KEYS = {"vp-max": "vp_max_v", "pd-max": "pd_max_w", "ik-max": "ik_max_a",
                "vhk-max": "vhk_max_v", "rg-max": "rg_max_ohm", "vp0-max": "vp_cold_max_v"}
_CAP_KEYS = {"cgk": "cgk_f", "cgp": "cgp_f", "cpk": "cpk_f"}
#: tube-line key → TriodeModel field, per model form
_MODEL_KEYS = {form: {**dict(FORM_FIELDS[form]), **_CAP_KEYS} for form in FORMS}


def pot_fraction(taper: str, taper_mid: float, position: float) -> float:
    """Fraction of a pot's resistance between wiper and the knob-0 end.

    Linear: ``t = x``.  Audio (log) taper with mid-rotation fraction ``p``:
    the exponential law ``t = (b**x - 1) / (b - 1)`` with ``b = (1/p - 1)**2``,
    which passes through t(0) = 0, t(1/2) = p, t(1) = 1 (solve
    ``1/(sqrt(b) + 1) = p``).  A common idealisation of the two-slope
    tapers sold as "audio"; real parts deviate by several percent.

    Parameters
    ----------
    position : float
        fraction of travel 0..1 (knob setting / 10)
    """
    x = min(max(position, 0.0), 1.0)
    if taper == "linear":
        return x
    b = (1.0 / taper_mid - 1.0) ** 2
    return (b**x - 1.0) / (b - 1.0)


def tube_model(design: Design, name: str) -> TriodeModel:
    """The model for tube ``name``: a netlist definition or a built-in type.

    A definition ``tube NAME like BASE [model FORM] key value …`` inherits
    everything from BASE — model form, the fitted parameters of every form,
    grid-current parameters, capacitances and ratings — and overrides only
    the keys it gives.  ``model FORM`` switches to another form; a built-in
    BASE carries fitted parameters for every form, so ``tube X like 12AX7
    model dempwolf`` is the 12AX7 fitted with the Dempwolf–Zölzer form.
    Without ``like`` the definition starts from the published 12AX7 sets of
    its form with no capacitances and no ratings, and must give the form's
    main parameters (checked in validation).
    """
    defs = {t.name: t for t in design.tubes}
    if name not in defs:
        return lookup(name)
    t = defs[name]
    params = dict(t.params)
    if t.base is not None:
        # "tube 12AX7 like 12AX7 mu 95" changes the built-in type of that name
        base = tube_model(design, t.base) if t.base in defs and t.base != t.name else lookup(t.base)
    else:
        template = lookup("12AX7")
        # every rating unknown (None), the source named: keyword arguments of Ratings by field name
        blank: dict[str, Any] = {f.name: (None if f.name != "source" else "netlist") for f in fields(Ratings)}
        none_ratings = Ratings(**blank)
        base = replace(template, cgk_f=0.0, cgp_f=0.0, cpk_f=0.0, ratings=none_ratings, aliases=(), form="koren")
    form = t.form or base.form
    keys = _MODEL_KEYS[form]
    model_changes = {keys[k]: v for k, v in params.items() if k in keys}
    rating_changes: dict[str, Any] = {_RATING_KEYS[k]: v for k, v in params.items() if k in _RATING_KEYS}
    ratings = replace(base.ratings, **rating_changes) if rating_changes else base.ratings
    given = " ".join(k for k in params) or "nothing"
    src = (f"defined in {design.path} line {t.span.line}, {form} form"
           + (f", starting from {t.base} (inherits every parameter not given; given: {given})" if t.base
              else f" (given: {given}; no capacitances or ratings)"))
    return replace(base, name=t.name, ratings=ratings, source=src, aliases=(), form=form, **model_changes)


class _Nodes:
    """Union-find over node names; ground and rails always stay roots."""

    def __init__(self, fixed: set[str]):
        self.parent: dict[str, str] = {}
        self.fixed = fixed

    def find(self, n: str) -> str:
        while self.parent.get(n, n) != n:
            n = self.parent[n]
        return n

    def join(self, keep: str, other: str) -> None:
        a, b = self.find(keep), self.find(other)
        if a == b:
            return
        if b in self.fixed and a not in self.fixed:
            a, b = b, a
        self.parent[b] = a


class _Expander:
    def __init__(self, design: Design):
        self.d = design
        self.problems: list[Diagnostic] = []
        self.res: list[Resistor] = []
        self.caps: list[Capacitor] = []
        self.inds: list[Inductor] = []
        self.srcs: list[VoltageSource] = []
        self.tris: list[Triode] = []
        self.origins: dict[str, Span] = {}
        rails = {s.name for s in design.supplies} | {r.name for r in design.rails}
        self.nodes = _Nodes(rails | {GROUND})
        #: stage → terminal → node
        self.terminals: dict[str, dict[str, str]] = {}
        #: network instance → port → the node it is attached to
        self.instance_ports: dict[str, dict[str, str]] = {}

    def span(self, span: Span) -> Span:
        if span.line > 0 and not span.text and span.line <= len(self.d.lines):
            return replace(span, text=self.d.lines[span.line - 1])
        return span

    def err(self, code: str, message: str, span: Span | None, hint: str = "", subject: str = ""):
        self.problems.append(error(code, message, self.span(span) if span else None, hint, subject))

    def add(self, part, span: Span):
        buckets: dict[type, list[Any]] = {Resistor: self.res, Capacitor: self.caps, Inductor: self.inds,
                                          VoltageSource: self.srcs, Triode: self.tris}
        buckets[type(part)].append(part)
        self.origins[part.name] = span

    # -- supplies ---------------------------------------------------------------
    def supplies(self):
        for s in self.d.supplies:
            own = Owner("supply", s.name)
            if s.impedance_ohm > 0:
                raw = f"{s.name}.raw"
                self.add(VoltageSource(f"supply.{s.name}", raw, GROUND, s.volts, Role.SUPPLY, own), s.span)
                self.add(Resistor(f"supply.{s.name}.R", raw, s.name, s.impedance_ohm, own, Role.SUPPLY_IMPEDANCE),
                         s.span)
            else:
                self.add(VoltageSource(f"supply.{s.name}", s.name, GROUND, s.volts, Role.SUPPLY, own), s.span)
        for r in self.d.rails:
            own = Owner("rail", r.name)
            self.add(Resistor(f"rail.{r.name}.R", r.feed, r.name, r.drop_ohm, own, Role.RAIL_DROP), r.span)
            if r.decouple_f is not None:
                self.add(Capacitor(f"rail.{r.name}.C", r.name, GROUND, r.decouple_f, r.decouple_rated_v, own,
                                   Role.RAIL_DECOUPLE), r.span)

    # -- stages -----------------------------------------------------------------
    def stage(self, s: Stage) -> StageRecord:
        """Expand stage ``s`` by the module of its kind (:mod:`chain.kinds`)."""
        done = expander(s.kind)(self, s)
        self.terminals[s.name] = dict(done.terminals)
        return done.record

    def model(self, s: Stage) -> TriodeModel:
        """The triode model of stage ``s``; an unknown type is a located error (E206)."""
        try:
            return tube_model(self.d, s.tube)
        except KeyError:
            self.err("E206", f"unknown tube type '{s.tube}'", s.span)
            return lookup("12AX7")

    def heater(self, s: Stage) -> float:
        """Stage ``s``'s heater potential, V: its own, else the design's setting."""
        return s.heater_v if s.heater_v is not None else self.d.settings.heater_v

    # -- networks ---------------------------------------------------------------
    def resolve(self, name: str, instance: str | None, ports: dict[str, str], span: Span) -> str:
        if name in ports:
            return ports[name]
        if name == GROUND or name in self.nodes.fixed:
            return name
        if "." in name:
            head, tail = name.split(".", 1)
            if head in self.terminals:
                return self.terminals[head][tail]
            if tail in self.instance_ports.get(head, {}):
                return self.instance_ports[head][tail]  # "vol.out": where that port is attached
            return name
        if instance is None:
            self.err("E211", f"unknown node '{name}'", span)
            return name
        return f"{instance}.{name}"

    def network(self, net, instance: str, ports: dict[str, str]):
        self.instance_ports[instance] = dict(ports)
        own = Owner("network", instance)
        for p in net.parts:
            if isinstance(p, Pot):
                a = self.resolve(p.a, instance, ports, p.span)
                w = self.resolve(p.wiper, instance, ports, p.span)
                b = self.resolve(p.b, instance, ports, p.span)
                t = pot_fraction(p.taper, p.taper_mid, p.position)
                # a pot wired as a variable resistor (wiper tied to one end)
                # has no part across the tied section
                if a != w:
                    self.add(Resistor(f"{instance}.{p.name}.a", a, w, max(p.value * (1.0 - t), WIPER_OHM), own,
                                      Role.POT_UPPER), p.span)
                if w != b:
                    self.add(Resistor(f"{instance}.{p.name}.b", w, b, max(p.value * t, WIPER_OHM), own, Role.POT_LOWER), p.span)
                continue
            a = self.resolve(p.a, instance, ports, p.span)
            b = self.resolve(p.b, instance, ports, p.span)
            name = f"{instance}.{p.name}"
            if p.kind == "resistor":
                self.add(Resistor(name, a, b, p.value, own, Role.NETWORK_PART), p.span)
            elif p.kind == "capacitor":
                self.add(Capacitor(name, a, b, p.value, p.rated_v, own, Role.NETWORK_PART), p.span)
            else:
                self.add(Inductor(name, a, b, p.value, own, Role.NETWORK_PART), p.span)


def build(design: Design) -> Circuit:
    """Expand ``design`` into a Circuit and check its topology.

    Raises
    ------
    LanguageError
        with every topology problem found (codes E3xx), located at the
        netlist lines that made the parts involved.
    """
    x = _Expander(design)
    x.supplies()
    stage_nodes = {s.name: x.stage(s) for s in design.stages}
    order = _signal_order(design, x)
    nets = {n.name: n for n in design.networks}

    output_node: str | None = None
    couplings: dict[str, tuple[str, str]] = {}
    for c in design.couplings:
        source = stage_nodes[c.src_stage]
        near = source.outputs[c.src_port] if c.src_port else source.output
        if c.dst == "output":
            dst = "output"
        else:
            target = stage_nodes[c.dst_stage]
            dst = target.inputs[c.dst_port] if c.dst_port else target.input
        if c.kind == "cap":
            assert c.cap_f is not None  # the parser gives every cap coupling its value
            name = f"couple.{c.src}-{c.dst}.C"
            x.add(Capacitor(name, near, dst, c.cap_f, c.rated_v, Owner("coupling", c.label), Role.COUPLING), c.span)
            couplings[c.label] = (near, dst)
        elif c.kind == "direct":
            x.nodes.join(near, dst)
            dst = near
        else:
            assert c.network is not None  # the parser gives every network coupling its network
            x.network(nets[c.network], c.label, {nets[c.network].ports[0]: near, nets[c.network].ports[1]: dst})
            couplings[c.label] = (near, dst)
        if c.dst == "output":
            output_node = dst
    for net in design.networks:
        if not net.ports:
            x.network(net, net.name, {})

    src = design.source
    assert src is not None  # validation requires an input line
    first_in = stage_nodes[src.into].input
    own = Owner("input", "input")
    # the node the source network ends on: the stage input, or the near end of
    # the input coupling capacitor
    src_out = first_in if src.cap_f is None else "input.out"
    if src.cap_f is not None:
        label = f"input->{src.into}"
        x.add(Capacitor("input.Cc", src_out, first_in, src.cap_f, src.cap_rated_v, Owner("coupling", label),
                        Role.COUPLING), src.span)
        couplings[label] = (src_out, first_in)
    emf = src_out if src.kind == "ideal" or (src.kind == "resistance" and src.r_ohm == 0) else "input.emf"
    first_in = src_out
    x.add(VoltageSource("input", emf, GROUND, 0.0, Role.SIGNAL, own), src.span)
    if src.kind == "resistance" and src.r_ohm > 0:
        x.add(Resistor("input.R", emf, first_in, src.r_ohm, own, Role.SOURCE_RESISTANCE), src.span)
    elif src.kind == "pickup":
        x.add(Resistor("input.Rw", emf, "input.w", src.r_ohm, own, Role.PICKUP_WINDING), src.span)
        x.add(Inductor("input.L", "input.w", first_in, src.l_h, own, Role.PICKUP_INDUCTANCE), src.span)
        if src.loss_ohm is not None:
            x.add(Resistor("input.Rloss", "input.w", first_in, src.loss_ohm, own, Role.PICKUP_LOSS), src.span)
        if src.c_f > 0:
            x.add(Capacitor("input.C", first_in, GROUND, src.c_f, None, own, Role.PICKUP_CAPACITANCE), src.span)
        if src.cable_f > 0:
            x.add(Capacitor("input.Ccable", first_in, GROUND, src.cable_f, None, own, Role.CABLE_CAPACITANCE),
                  src.span)

    out = design.output
    assert out is not None  # validation requires an output line
    # the chain's output ports: (label, node, load); a stage named alone gives all its output ports
    ports: list[tuple[str, str, float, Span]] = []
    for o in (out, *out.more):
        if o.node is None:
            assert output_node is not None  # validation: an output without a node is fed by a coupling
            ports.append(("output", output_node, o.load_ohm, o.span))
        elif o.node in stage_nodes:
            rec = stage_nodes[o.node]
            if len(rec.outputs) == 1:
                ports.append((o.node, rec.output, o.load_ohm, o.span))
            else:
                ports += [(f"{o.node}.{p}", node, o.load_ohm, o.span) for p, node in rec.outputs.items()]
        else:
            ports.append((o.node, x.resolve(o.node, None, {}, o.span), o.load_ohm, o.span))
    output_node = ports[0][1]
    for i, (label, node, load, span) in enumerate(ports):
        x.add(Resistor("output.load" if i == 0 else f"output.load.{label}", node, GROUND, load,
                       Owner("output", "output"), Role.LOAD), span)
    output_ports = {label: node for label, node, _, _ in ports}
    for st in design.strays:
        if st.node in stage_nodes:
            node = stage_nodes[st.node].output
        elif st.node == "output":
            node = output_ports[next(iter(output_ports))]
        else:
            node = x.resolve(st.node, None, {}, st.span)
        if st.farads > 0:
            x.add(Capacitor(f"stray.{st.node}", node, GROUND, st.farads, None, Owner("stray", st.node), Role.STRAY),
                  st.span)

    if x.problems:
        raise LanguageError(x.problems)
    circuit = _renamed(design, x, [stage_nodes[n] for n in order], first_in, output_node, couplings,
                       output_ports)
    problems = check_topology(circuit, design)
    if problems:
        raise LanguageError(problems)
    return circuit


def _signal_order(design: Design, x: _Expander) -> list[str]:
    """Stages in signal order from the input along the couplings."""
    g = Digraph(s.name for s in design.stages)
    spans: dict[tuple[str, str], Span] = {}
    for c in design.couplings:
        g.add_edge(c.src_stage, c.dst_stage)
        spans.setdefault((c.src_stage, c.dst_stage), c.span)
    direct = Digraph(edges=[(c.src_stage, c.dst_stage) for c in design.couplings if c.kind == "direct"])
    for cycle in direct.cycles():
        # report at the loop's first line in the file, starting the loop there
        members = [c for c in design.couplings if c.kind == "direct" and c.src_stage in cycle]
        first = min(members, key=lambda c: c.span.line)
        k = cycle.index(first.src_stage)
        cycle = cycle[k:] + cycle[:k]
        x.err("E315", "loop of direct couplings: " + " -> ".join(cycle + [cycle[0]]), first.span,
              "a direct coupling passes DC; a loop of them has no defined operating point")
    loop = g.find_cycle()
    if loop and not x.problems:
        at = min((spans[u, v] for u, v in loop), key=lambda sp: sp.line)
        x.err("E317", "the couplings form a loop: " + " -> ".join(e[0] for e in loop) + f" -> {loop[0][0]}",
              at, "write feedback as a network naming stage terminals, not as a coupling")
    assert design.source is not None  # validation requires an input line
    start = design.source.into
    reached = g.descendants(start) | {start} if start in g else set()
    for s in design.stages:
        if s.name not in reached:
            x.err("E316", f"stage '{s.name}' is not on the signal path from the input", s.span,
                  f"couple it: 'couple <stage> -> {s.name} cap 22n'", s.name)
    if loop:
        return [s.name for s in design.stages]
    return [n for n in g.topological_order(reached) if n != "output"]


def _renamed(design, x: _Expander, stages, input_node, output_node, couplings, output_ports) -> Circuit:
    f = x.nodes.find
    res = tuple(replace(r, a=f(r.a), b=f(r.b)) for r in x.res)
    caps = tuple(replace(c, a=f(c.a), b=f(c.b)) for c in x.caps)
    inds = tuple(replace(i, a=f(i.a), b=f(i.b)) for i in x.inds)
    srcs = tuple(replace(s, pos=f(s.pos), neg=f(s.neg)) for s in x.srcs)
    tris = tuple(replace(t, plate=f(t.plate), grid=f(t.grid), cathode=f(t.cathode)) for t in x.tris)
    stage_nodes = tuple(replace(s, inputs={k: f(v) for k, v in s.inputs.items()},
                                outputs={k: f(v) for k, v in s.outputs.items()}, rail=f(s.rail)) for s in stages)
    rails = tuple(s.name for s in design.supplies) + tuple(r.name for r in design.rails)
    return Circuit(
        title=design.title,
        resistors=res, capacitors=caps, inductors=inds, sources=srcs, triodes=tris,
        stages=stage_nodes,
        input_node=f(input_node),
        output_node=f(output_node),
        rails=rails,
        couplings={k: (f(a), f(b)) for k, (a, b) in couplings.items()},
        outputs={k: f(v) for k, v in output_ports.items()},
        origins=dict(x.origins),
    )


def check_topology(circuit: Circuit, design: Design) -> list[Diagnostic]:
    """Dangling nodes and nodes (grids above all) with no DC path to ground.

    The DC graph joins nodes through resistors, inductors and voltage
    sources (a supply is a DC path to ground); capacitors are open and a
    triode passes no DC from its grid.
    """
    def located(part_name: str) -> Span | None:
        sp = circuit.origins.get(part_name)
        if sp is None or sp.line <= 0:
            return None
        return replace(sp, text=design.lines[sp.line - 1]) if not sp.text and sp.line <= len(design.lines) else sp

    problems: list[Diagnostic] = []
    touches: dict[str, list[str]] = {}
    dc_parts: tuple[Resistor | Inductor, ...] = (*circuit.resistors, *circuit.inductors)
    dc_edges = [(part.a, part.b) for part in dc_parts]
    dc_nodes = [GROUND] + [n for e in dc_edges for n in e]  # in the order they are met
    for c in circuit.capacitors:
        dc_nodes += [c.a, c.b]
    dc_edges += [(s.pos, s.neg) for s in circuit.sources]
    dc_nodes += [n for s in circuit.sources for n in (s.pos, s.neg)]
    for t in circuit.triodes:
        dc_nodes += [t.plate, t.grid, t.cathode]
    two_terminal: tuple[Resistor | Inductor | Capacitor, ...] = (*dc_parts, *circuit.capacitors)
    for part in two_terminal:
        touches.setdefault(part.a, []).append(part.name)
        touches.setdefault(part.b, []).append(part.name)
    for s in circuit.sources:
        touches.setdefault(s.pos, []).append(s.name)
        touches.setdefault(s.neg, []).append(s.name)
    for t in circuit.triodes:
        for node in (t.plate, t.grid, t.cathode):
            touches.setdefault(node, []).append(t.name)

    for node, parts in touches.items():
        if node != GROUND and len(parts) == 1:
            problems.append(error("E312", f"node '{node}' is connected to '{parts[0]}' only (dangling)",
                                  located(parts[0]), "connect the other end, or remove the part"))
    grids = {t.grid: t.name for t in circuit.triodes}
    for component in components(dict.fromkeys(dc_nodes), dc_edges):
        if GROUND in component:
            continue
        grid_nodes = sorted(n for n in component if n in grids)
        if grid_nodes:
            stage = grids[grid_nodes[0]]
            problems.append(error("E314", f"the grid of stage '{stage}' has no DC path to ground",
                                  located(stage), f"add a grid leak: 'grid leak 1M' under stage {stage}", stage))
            continue
        node = sorted(component)[0]
        if all(len(touches.get(n, [])) <= 1 for n in component):
            continue  # already reported as dangling
        problems.append(error("E313", f"node '{node}' has no DC path to ground (it connects only through capacitors)",
                              located(touches[node][0]), "add a resistor to ground or to a rail"))
    return problems


def load(path) -> tuple[Design, Circuit, tuple[Diagnostic, ...]]:
    """Parse, validate and build the netlist file at ``path``.

    Returns the Design, its Circuit and the language warnings.
    """
    from chain.language import parse_file

    return _loaded(parse_file(path))


def load_text(text: str, source: str = "<string>") -> tuple[Design, Circuit, tuple[Diagnostic, ...]]:
    """As :func:`load`, from netlist text."""
    from chain.language import parse_text

    return _loaded(parse_text(text, source))


def _loaded(design: Design):
    """The parsed design (validated once, by the parser), its circuit and warnings."""
    return design, build(design), tuple(design.warnings)


#: stage part suffix → (Stage field, Cathode field or None)
_STAGE_PARTS = {"RL": ("plate_load_ohm", None), "Rg": ("grid_leak_ohm", None), "Rs": ("grid_stopper_ohm", None),
                "Rk": ("cathode", "r_ohm"), "Ck": ("cathode", "bypass_f"), "Rkc": ("cathode", "bypass_series_ohm"),
                "Rt": ("cathode", "tail_ohm")}
#: a long-tailed pair's second-triode part suffix → Section field
_SECOND_PARTS = {"RL2": "plate_load_ohm", "Rg2": "grid_leak_ohm", "Rs2": "grid_stopper_ohm",
                 "Cg2": "grid_bypass_f"}


def _stage_part(s: Stage, suffix: str) -> tuple[str, str | None] | None:
    """Where a stage's part ``suffix`` lives in the design: (Stage or ``"second"`` field, sub-field)."""
    if s.kind == "long-tailed-pair" and s.cathode is not None and s.cathode.tail_ohm is None:
        # a pair's lone cathode resistor is its tail (part Rt)
        if suffix == "Rt":
            return ("cathode", "r_ohm")
        if suffix == "Rk":
            return None
    if suffix in _SECOND_PARTS:
        return ("second", _SECOND_PARTS[suffix]) if s.second is not None else None
    return _STAGE_PARTS.get(suffix)


def _stage_part_value(s: Stage, where: tuple[str, str | None] | None) -> float | None:
    if where is None:
        return None
    field, sub = where
    holder = getattr(s, field) if sub else s
    return None if holder is None else getattr(holder, sub or field)


def part_names(design: Design) -> tuple[str, ...]:
    """Every part name :func:`with_part` accepts, in a stable order."""
    names = [f"supply.{s.name}" for s in design.supplies]
    for r in design.rails:
        names.append(f"rail.{r.name}.R")
        if r.decouple_f is not None:
            names.append(f"rail.{r.name}.C")
    for s in design.stages:
        for suffix in (*_STAGE_PARTS, *_SECOND_PARTS):
            if _stage_part_value(s, _stage_part(s, suffix)) is not None:
                names.append(f"{s.name}.{suffix}")
    names += [f"couple.{c.src}-{c.dst}.C" for c in design.couplings if c.kind == "cap"]
    names += [f"{n.name}.{p.name}" for n in design.networks for p in n.parts]
    if design.output is not None:
        names.append("output.load")
    return tuple(names)


def with_part(design: Design, part: str, value: float) -> Design:
    """A new Design with one part's value changed (SI units).

    ``part`` is named as in the circuit and the reports: ``V1.Ck``,
    ``V2.RL``, ``rail.B2.R``, ``rail.B2.C``, ``supply.HT`` (volts),
    ``couple.V1-V2.C``, ``tone.slope`` (a network part: every attached copy
    of the network changes), ``output.load``.  For a pot (``tone.treble``)
    the value is the knob setting 0–10.

    Raises
    ------
    KeyError
        for a name the design has no part of; the message lists the closest.
    """
    import difflib


    head, _, tail = part.partition(".")
    stage_names = {s.name for s in design.stages}
    if head in stage_names and _stage_part_value(design.stage(head), _stage_part(design.stage(head), tail)) is not None:
        stage = design.stage(head)
        where = _stage_part(stage, tail)
        assert where is not None  # its value was found just above
        field, sub = where
        if sub is None:
            return design.with_stage(head, **{field: value})
        return design.with_stage(head, **{field: replace(getattr(stage, field), **{sub: value})})
    elif head == "supply" and any(s.name == tail for s in design.supplies):
        return _edited(design, supplies=tuple(replace(s, volts=value) if s.name == tail else s
                                              for s in design.supplies))
    elif head == "rail" and tail[-2:] in (".R", ".C") and any(r.name == tail[:-2] for r in design.rails):
        # the Rail field by name: a keyword argument of replace()
        change: dict[str, Any] = {"drop_ohm" if tail.endswith(".R") else "decouple_f": value}
        return _edited(design, rails=tuple(replace(r, **change) if r.name == tail[:-2] else r
                                           for r in design.rails))
    elif head == "couple":
        couplings = tuple(replace(c, cap_f=value) if c.kind == "cap" and f"{c.src}-{c.dst}.C" == tail else c
                          for c in design.couplings)
        if couplings != design.couplings:
            return _edited(design, couplings=couplings)
    elif part == "output.load" and design.output is not None:
        return _edited(design, output=replace(design.output, load_ohm=value))
    elif any(n.name == head for n in design.networks):
        net = design.network(head)
        if any(p.name == tail for p in net.parts):
            parts = tuple((replace(p, position=value / 10.0) if isinstance(p, Pot) else replace(p, value=value))
                          if p.name == tail else p for p in net.parts)
            return _edited(design, networks=tuple(replace(n, parts=parts) if n.name == head else n
                                                  for n in design.networks))
    close = difflib.get_close_matches(part, part_names(design), n=3, cutoff=0.5)
    raise KeyError(f"no part '{part}' in the design" + (f"; did you mean {', '.join(close)}?" if close else ""))


def _edited(design: Design, **changes) -> Design:
    """The design with ``changes``; its text no longer matches, so it is dropped."""
    return replace(design, lines=(), warnings=(), path=f"{design.path} (modified)", **changes)
