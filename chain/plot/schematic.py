"""A schematic drawn from the netlist, so a designer can check at a glance
that the file says what they meant.

Drawn from the parsed :class:`~chain.language.design.Design` alone (no
analysis), with schemdraw on its matplotlib back end.  The layout is our own:

* **Supply strip** (top left): the supply and every rail in feed order, each
  dropping resistor followed by the rail's decoupling capacitor.  A rail fed
  from anything but the rail drawn just before it starts at a tag naming
  its feed.
* **Signal chain** (left to right): the input source (pickup or
  resistance), then every stage in signal order with its own parts — plate
  load up to a tag naming its rail, cathode resistor and bypass down to
  ground, grid leak and stopper on the left — and between stages the
  coupling: a capacitor, a plain wire (direct) or a box naming the network;
  at the end the output load.  Small grey node names (``V2.plate``) sit at
  the nodes diagnostics talk about.
* **Networks** (below the chain), one panel each, in a "node column" layout:
  every node of the network is a vertical line (ports first, ground last with
  its symbol) and every part is drawn horizontally between the columns of its
  two ends, one row per part; a pot's wiper runs from its arrow to its
  column.  A wire crossing a column without a dot is not connected.  Pots
  carry their value, taper and knob setting (0–10).

schemdraw and matplotlib are imported inside the functions; the figure is a
plain :class:`matplotlib.figure.Figure` (saved with
:func:`chain.plot.files.save_figure`).
"""

from __future__ import annotations

from collections import deque
from dataclasses import dataclass
from typing import Any

from chain.language.design import Design, Network, Pot, Stage
from chain.units import format_rkm, format_si

__all__ = ["Schematic", "schematic"]

#: colours: parts black, node names grey, rail and net tags dark blue
NODE_COLOUR = "#7a7f87"
TAG_COLOUR = "#1d3557"
BOX_COLOUR = "#b5651d"

# layout, in schemdraw units
_TUBE_SCALE = 1.5
_PITCH = 13.0        # stage to stage
_R = 2.6             # length of a vertical resistor or capacitor
_Y_ANODE = -6.0      # the anode pin of every triode
_DX_COL = 4.2        # network panel: column spacing
_DY_ROW = 2.2        # network panel: row spacing


@dataclass(frozen=True, slots=True, eq=False)
class Schematic:
    """The drawn schematic.

    Attributes
    ----------
    figure : matplotlib.figure.Figure
    drawing : schemdraw.Drawing
    labels : tuple[str, ...]
        Every text drawn, in drawing order (part values, names, tags).
    parts : dict[str, Any]
        The schemdraw element drawn for each part, by its netlist name
        (``"V1.Rk"``, ``"tone.treble"``, ``"B2.drop"``).
    """

    figure: Any
    drawing: Any
    labels: tuple[str, ...]
    parts: dict


def _r(ohm: float) -> str:
    return format_rkm(ohm, "R")


def _c(farad: float) -> str:
    return format_rkm(farad, "C")


def _knob(pot: Pot) -> str:
    taper = "audio" if pot.taper == "audio" else "linear"
    return f"{pot.name} {_r(pot.value)} {taper}, at {10 * pot.position:.3g}"


class _Pen:
    """The drawing and the bookkeeping of what was drawn."""

    def __init__(self):
        import schemdraw
        import schemdraw.elements as elm

        self.elm = elm
        self.d = schemdraw.Drawing(show=False)
        self.d.config(fontsize=11, lw=1.3, unit=3.0)
        self.labels: list[str] = []
        self.parts: dict[str, Any] = {}

    def add(self, element, name: str | None = None):
        self.d.add(element)
        if name:
            self.parts[name] = element
        return element

    def text(self, at, text: str, *, colour: str = "black", size: float = 11, halign="center",
             valign="center", rotate: float = 0.0):
        self.labels.append(text)
        return self.d.add(self.elm.Label().at(at).label(text, color=colour, fontsize=size, halign=halign,
                                                         valign=valign, rotate=rotate))

    def node(self, at, name: str, *, ofst=(0.15, 0.25), halign="left", valign="bottom"):
        self.text((at[0] + ofst[0], at[1] + ofst[1]), name, colour=NODE_COLOUR, size=8.5, halign=halign,
                  valign=valign)

    def wire(self, *points):
        for a, b in zip(points, points[1:]):
            if a != b:
                self.d.add(self.elm.Line().endpoints(a, b))

    def dot(self, at):
        self.d.add(self.elm.Dot(radius=0.09).at(at))

    def ground(self, at):
        self.d.add(self.elm.Ground(lead=False).at(at))

    def tag(self, at, name: str, *, up: bool = True):
        """A rail or net tag: a short bar with the name above (or below)."""
        self.labels.append(name)
        el = self.elm.Vdd(lead=False).at(at) if up else self.elm.Vss(lead=False).at(at)
        return self.d.add(el.label(name, color=TAG_COLOUR, fontsize=10))

    def two(self, kind: str, a, b, label: str, name: str | None = None, *, loc: str | None = None, **opts):
        """A two-terminal part between points ``a`` and ``b`` with its value label."""
        cls = {"R": self.elm.Resistor, "C": self.elm.Capacitor, "L": self.elm.Inductor2}[kind]
        el = cls(**opts).endpoints(a, b)
        self.labels.append(label)
        el.label(label, loc=loc, fontsize=10) if loc else el.label(label, fontsize=10)
        return self.add(el, name)


def schematic(design: Design, *, title: str | None = None) -> Schematic:
    """Draw ``design`` as a schematic (see the module docstring for the layout).

    Parameters
    ----------
    design : Design
        A parsed netlist (:func:`chain.language.parse_file`).
    title : str, optional
        Heading above the drawing (default: the design's title).

    Returns
    -------
    Schematic
    """
    pen = _Pen()
    heading = title if title is not None else (design.title or "untitled design")
    pen.labels.append(heading)
    supply_right = _supply_strip(pen, design)

    stages = _signal_order(design)
    x_first = 7.5 + _source_width(design)
    ports: dict[str, tuple[tuple[float, float], tuple[float, float]]] = {}
    for i, st in enumerate(stages):
        ports[st.name] = _stage(pen, st, x_first + i * _PITCH)
    _source(pen, design, ports, stages)
    after = _couplings(pen, design, ports, stages)
    bottom = min(_Y_ANODE - 8.0, after)
    # network panels side by side under the chain, wrapping at its width
    right_edge = max(x_first + _PITCH * max(len(stages), 1), 40.0)
    y_row, x, y = bottom - 3.0, 0.0, bottom - 3.0
    for net in design.networks:
        width = _panel_width(net)
        if x > 0.0 and x + width > right_edge:
            x, y_row = 0.0, y - 3.0
        y = min(y, _network_panel(pen, design, net, y_row, x))
        x += width + 3.0
    y -= 2.0
    if design.strays:
        text = "strays to ground: " + ", ".join(f"{s.node} {_c(s.farads)}" for s in design.strays)
        pen.text((0.0, y), text, size=10, halign="left")
    del supply_right
    figure = _render(pen.d, heading)
    return Schematic(figure=figure, drawing=pen.d, labels=tuple(pen.labels), parts=dict(pen.parts))


def _render(drawing, heading: str, *, inches_per_unit: float = 0.42, margin: float = 0.6):
    """Draw onto a bare matplotlib Figure (no pyplot state) sized to the
    drawing, with ``heading`` above it.

    The heading is free text from the netlist, so it is drawn by matplotlib
    directly (schemdraw measures label text as XML, which ``<`` or ``&``
    would break) with ``$`` escaped (no mathtext)."""
    from matplotlib.figure import Figure

    fig = Figure()
    ax = fig.add_axes((0.0, 0.0, 1.0, 1.0))
    drawing.draw(canvas=ax, show=False)
    box = drawing.get_bbox()
    x1, x2 = box.xmin - margin, box.xmax + margin
    y1, y2 = box.ymin - margin, box.ymax + margin + 2.0
    ax.text(x1 + margin, y2 - 0.9, heading.replace("$", r"\$"), fontsize=15, ha="left", va="center")
    ax.set_xlim(x1, x2)
    ax.set_ylim(y1, y2)
    ax.set_aspect("equal")
    ax.set_axis_off()
    fig.set_size_inches(inches_per_unit * (x2 - x1), inches_per_unit * (y2 - y1))
    fig.set_facecolor("white")
    return fig


# --------------------------------------------------------------------------- supply


def _supply_strip(pen: _Pen, design: Design) -> float:
    """Supply and rails along y = 1.5; returns the right end."""
    y = 1.5
    x = 0.0
    previous = None
    for sup in design.supplies:
        z = f", {_r(sup.impedance_ohm)} source" if sup.impedance_ohm else ""
        pen.add(pen.elm.Dot(open=True).at((x + 0.8, y)))
        pen.text((x + 0.8, y + 0.45), f"{sup.name} {format_si(sup.volts, 'V')}{z}", colour=TAG_COLOUR, size=10,
                 halign="left", valign="bottom")
        if any(r.feed == sup.name for r in design.rails):
            pen.wire((x + 0.8, y), (x + 6.0, y))
        x += 6.0
        previous = sup.name
    order = _rail_order(design)
    for rail in order:
        if rail.feed != previous:
            x += 1.5
            pen.tag((x, y), rail.feed)
        start = (x, y)
        end = (x + 4.0, y)
        pen.two("R", start, end, _r(rail.drop_ohm), f"{rail.name}.drop")
        pen.dot(end)
        if rail.decouple_f:
            pen.two("C", end, (end[0], y - _R), _c(rail.decouple_f), f"{rail.name}.decouple", loc="bot")
            pen.ground((end[0], y - _R))
        pen.wire(end, (end[0], y + 0.8))
        pen.tag((end[0], y + 0.8), rail.name)
        x = end[0]
        previous = rail.name
    return x


def _rail_order(design: Design):
    """Rails in feed order: depth first from each supply, then any left over."""
    children: dict[str, list] = {}
    for r in design.rails:
        children.setdefault(r.feed, []).append(r)
    out, seen = [], set()

    def visit(name):
        for r in children.get(name, []):
            if r.name not in seen:
                seen.add(r.name)
                out.append(r)
                visit(r.name)

    for s in design.supplies:
        visit(s.name)
    out.extend(r for r in design.rails if r.name not in seen)
    return out


# --------------------------------------------------------------------------- stages


def _signal_order(design: Design) -> list[Stage]:
    """Stages from the input along the couplings; unreached stages after them."""
    nxt = {c.src: c.dst for c in design.couplings}
    order, seen = [], set()
    name = design.source.into if design.source else (design.stages[0].name if design.stages else None)
    while name is not None and name not in seen and any(s.name == name for s in design.stages):
        seen.add(name)
        order.append(design.stage(name))
        name = nxt.get(name)
    order.extend(s for s in design.stages if s.name not in seen)
    return order


def _stage(pen: _Pen, st: Stage, x: float):
    """Draw one stage with its triode's anode at (x, _Y_ANODE).

    Returns ``(input point, output point)``: where the coupling arrives and
    leaves."""
    elm = pen.elm
    tube = pen.add(elm.Triode().scale(_TUBE_SCALE).anchor("anode").at((x, _Y_ANODE)), f"{st.name}.tube")
    a = tube.absanchors
    anode, grid, cathode = a["anode"], a["grid"], a["cathode"]
    bottom = a["S"][1]
    # name and tube type above the tube, left of the plate lead
    pen.text((x - 0.5, anode[1] + 1.55), st.name, size=12.5, halign="right")
    pen.text((x - 0.5, anode[1] + 0.75), st.tube, size=9.5, halign="right", colour=NODE_COLOUR)
    # plate: a short lead, the plate node, the load (or a wire) up to the rail tag
    plate = (x, anode[1] + 0.9)
    pen.wire((x, anode[1]), plate)
    top = (x, plate[1] + _R)
    if st.plate_load_ohm:
        pen.two("R", plate, top, _r(st.plate_load_ohm), f"{st.name}.Rp", loc="bot")
    else:
        pen.wire(plate, top)
    pen.tag(top, st.rail)
    # cathode: down from the pin to below the envelope
    k = (cathode[0], bottom - 0.6)
    pen.wire(cathode, k)
    cath = st.cathode
    if cath is not None:
        pen.two("R", k, (k[0], k[1] - _R), _r(cath.r_ohm), f"{st.name}.Rk", loc="bot")
        pen.ground((k[0], k[1] - _R))
        if cath.bypass_f:
            right = (k[0] + 1.8, k[1])
            pen.wire(k, right)
            pen.dot(k)
            low = right
            if cath.bypass_series_ohm:
                mid = (right[0], right[1] - _R * 0.8)
                pen.two("R", right, mid, _r(cath.bypass_series_ohm), f"{st.name}.Rkc", loc="bot")
                low = mid
            end = (low[0], low[1] - _R)
            pen.two("C", low, end, _c(cath.bypass_f), f"{st.name}.Ck", loc="bot")
            pen.ground(end)
    else:
        pen.ground(k)
    pen.node(k, f"{st.name}.cathode", ofst=(-0.2, 0.15), halign="right")
    _second_section_note(pen, st, (x + 2.6, bottom - 0.4))
    # grid
    g_out = (a["W"][0] - 0.6, grid[1])
    pen.wire(grid, g_out)
    if st.kind == "common-grid":
        if st.grid_stopper_ohm:
            low = (g_out[0], g_out[1] - _R)
            pen.two("R", g_out, low, _r(st.grid_stopper_ohm), f"{st.name}.Rs", loc="bot")
            pen.ground(low)
        else:
            pen.wire(g_out, (g_out[0], g_out[1] - 0.9))
            pen.ground((g_out[0], g_out[1] - 0.9))
        pen.dot(plate)
        pen.node(plate, f"{st.name}.plate", ofst=(0.2, 0.15))
        # the signal enters at the cathode
        entry = (x - 5.5, k[1])
        pen.wire(entry, k)
        pen.dot(k)
        pen.node(entry, f"{st.name}.in", ofst=(0.1, 0.2))
        return entry, (plate if st.kind != "cathode-follower" else k)
    inp = (g_out[0] - 1.2, g_out[1])
    pen.wire(g_out, inp)
    if st.grid_stopper_ohm:
        inp = (g_out[0] - 3.0, g_out[1])
        pen.two("R", g_out, inp, _r(st.grid_stopper_ohm), f"{st.name}.Rs")
    entry = (min(inp[0], g_out[0]) - 0.8, grid[1])
    pen.wire(entry, inp)
    if st.grid_leak_ohm:
        pen.dot(inp)
        low = (inp[0], inp[1] - _R)
        pen.two("R", inp, low, _r(st.grid_leak_ohm), f"{st.name}.Rg", loc="bot")
        pen.ground(low)
    if st.grid_ground:
        pen.ground(inp)
    pen.node(inp, f"{st.name}.in", ofst=(-0.1, 0.25), halign="right")
    if st.kind == "cathode-follower":
        out = k
    else:
        pen.dot(plate)
        pen.node(plate, f"{st.name}.plate", ofst=(0.2, 0.15))
        out = plate
    return entry, out


def _second_section_note(pen: _Pen, st: Stage, at) -> None:
    """A two-triode stage (cathodyne, long-tailed pair): the first section is
    drawn, the tail and the second section are listed beside it in words."""
    items = []
    tail = getattr(st.cathode, "tail_ohm", None) if st.cathode is not None else None
    if tail:
        items.append(f"tail {_r(tail)}")
    sec = getattr(st, "second", None)
    if sec is not None:
        if sec.plate_load_ohm:
            items.append(f"second plate {_r(sec.plate_load_ohm)} from {sec.rail}")
        if sec.grid_leak_ohm:
            items.append(f"second grid leak {_r(sec.grid_leak_ohm)}")
        if sec.grid_stopper_ohm:
            items.append(f"second grid stopper {_r(sec.grid_stopper_ohm)}")
        if sec.grid_bypass_f:
            items.append(f"second grid bypass {_c(sec.grid_bypass_f)}")
    if st.kind in ("cathodyne", "long-tailed-pair"):
        items.insert(0, f"{st.kind}: first section drawn")
    if items:
        pen.text(at, "\n".join(items), size=8.5, halign="left", valign="top", colour=NODE_COLOUR)


# --------------------------------------------------------------------------- source, couplings, output


def _source(pen: _Pen, design: Design, ports, stages) -> None:
    src = design.source
    if src is None or src.into not in ports:
        return
    entry = ports[src.into][0]
    y = entry[1]
    x0 = entry[0] - _source_width(design)
    gen = pen.add(pen.elm.SourceSin().at((x0, y - 3.0)).up().length(3.0), "source")
    pen.ground((x0, y - 3.0))
    pen.text((x0 - 0.9, y - 1.5), "input", size=10, halign="right")
    top = gen.end
    if src.kind == "pickup":
        pen.labels.append("pickup")
        mid = (top[0] + 3.2, y)
        pen.two("R", top, mid, _r(src.r_ohm), "source.winding")
        node = (mid[0] + 3.2, y)
        pen.two("L", mid, node, format_si(src.l_h, "H"), "source.inductance")
        caps = [(src.c_f, "source.capacitance", ""), (src.cable_f, "source.cable", "cable ")]
        cx = node[0]
        for farads, name, prefix in caps:
            if farads:
                pen.dot((cx, y))
                pen.two("C", (cx, y), (cx, y - _R), prefix + _c(farads), name, loc="bot")
                pen.ground((cx, y - _R))
                cx += 2.6
        pen.wire(node, entry)
    elif src.kind == "resistance":
        node = (top[0] + 4.0, y)
        pen.two("R", top, node, _r(src.r_ohm), "source.r")
        pen.wire(node, entry)
    else:
        pen.wire(top, entry)


def _source_width(design: Design) -> float:
    """Room the input source takes left of the first stage's entry."""
    src = design.source
    if src is None:
        return 1.0
    if src.kind == "pickup":
        return 6.4 + 2.6 * sum(1 for c in (src.c_f, src.cable_f) if c) + 0.6
    return 4.6 if src.kind == "resistance" else 2.0


def _couplings(pen: _Pen, design: Design, ports, stages) -> float:
    """Draw every coupling; returns the lowest y used."""
    low = 0.0
    for c in design.couplings:
        if c.src not in ports:
            continue
        start = ports[c.src][1]
        if c.dst == "output":
            end = (start[0] + 11.0, _Y_ANODE - 2.5)
        elif c.dst in ports:
            end = ports[c.dst][0]
        else:
            continue
        # out of the source stage: right, then over at the level of the destination
        turn = start[0] + 1.6
        pen.wire(start, (turn, start[1]), (turn, end[1]))
        a = (turn, end[1])
        if c.kind == "cap":
            assert c.cap_f is not None  # the parser gives every cap coupling its value
            b = (a[0] + 3.2, a[1])
            pen.two("C", a, b, _c(c.cap_f), f"{c.src}->{c.dst}.C")
        elif c.kind == "network":
            b = (a[0] + 5.0, a[1])
            _box(pen, a, b, c.label)
        else:
            b = (a[0] + 1.0, a[1])
            pen.wire(a, b)
            pen.labels.append("direct")
        pen.wire(b, end)
        if c.dst == "output":
            _output(pen, design, end)
            low = min(low, end[1] - _R - 1.0)
    if design.output is not None and design.output.node and not any(c.dst == "output" for c in design.couplings):
        outs = [design.output, *getattr(design.output, "more", ())]
        pen.text((0.0, _Y_ANODE - 14.0), "; ".join(
            f"output taken at {o.node}" + (f", load {_r(o.load_ohm)}" if o.load_ohm else "") for o in outs),
            size=10, halign="left")
    return low


def _box(pen: _Pen, a, b, name: str) -> None:
    """A network drawn as a box between its ports (detailed below the chain)."""
    elm = pen.elm
    w = b[0] - a[0]
    lo, hi = (a[0] + 0.6, a[1] - 1.1), (b[0] - 0.6, a[1] + 1.1)
    corners = [lo, (hi[0], lo[1]), hi, (lo[0], hi[1]), lo]
    box = [pen.d.add(elm.Line().endpoints(p, q).color(BOX_COLOUR)) for p, q in zip(corners, corners[1:])]
    pen.parts[f"{name}.box"] = box[0]
    pen.wire(a, (lo[0], a[1]))
    pen.wire((hi[0], a[1]), b)
    pen.text((a[0] + w / 2, a[1] + 0.25), name, size=11, colour=BOX_COLOUR)
    pen.text((a[0] + w / 2, a[1] - 0.5), "network", size=8, colour=BOX_COLOUR)


def _output(pen: _Pen, design: Design, at) -> None:
    out = design.output
    pen.dot(at)
    if out is not None and out.load_ohm:
        pen.two("R", at, (at[0], at[1] - _R), _r(out.load_ohm), "output.load", loc="bot")
        pen.ground((at[0], at[1] - _R))
    term = (at[0] + 2.0, at[1])
    pen.wire(at, term)
    pen.add(pen.elm.Dot(open=True).at(term))
    pen.text((term[0] + 0.4, term[1]), "output", size=11, halign="left")


# --------------------------------------------------------------------------- networks


def _columns(net: Network) -> list[str]:
    """Node order: ports first (in, then by breadth from it), out last but ground."""
    adj: dict[str, list[str]] = {}
    for p in net.parts:
        ends = (p.a, p.wiper, p.b) if isinstance(p, Pot) else (p.a, p.b)
        for u in ends:
            for v in ends:
                if u != v:
                    adj.setdefault(u, []).append(v)
    nodes = list(dict.fromkeys(n for p in net.parts
                               for n in ((p.a, p.wiper, p.b) if isinstance(p, Pot) else (p.a, p.b))))
    start = net.ports[0] if net.ports else nodes[0]
    order, seen, queue = [], {start}, deque([start])
    while queue:
        n = queue.popleft()
        order.append(n)
        for m in adj.get(n, []):
            if m not in seen:
                seen.add(m)
                queue.append(m)
    order += [n for n in nodes if n not in seen]
    last = [p for p in net.ports[1:] if p in order] + (["gnd"] if "gnd" in order else [])
    return [n for n in order if n not in last] + last


def _panel_width(net: Network) -> float:
    return 2.0 + (len(_columns(net)) - 1) * _DX_COL + 9.0


def _network_panel(pen: _Pen, design: Design, net: Network, y_top: float, x_left: float) -> float:
    """One network in the node-column layout; returns the lowest y used."""
    cols = _columns(net)
    x0 = x_left + 2.0
    xs = {n: x0 + i * _DX_COL for i, n in enumerate(cols)}
    where = ", ".join(f"{c.src} → {c.dst}" for c in design.couplings
                      if c.kind == "network" and c.network == net.name)
    head = f"network {net.name}" + (f" ({' → '.join(net.ports)})" if net.ports else "")
    head += f", couples {where}" if where else ""
    if not net.ports:
        joined = [n for n in cols if "." in n]
        if joined:
            head += f"; joins {', '.join(joined)}"
    pen.text((x_left, y_top), head, size=12, halign="left", colour=BOX_COLOUR)
    y_names = y_top - 1.3
    for n in cols:
        if n != "gnd":
            pen.text((xs[n], y_names), n, size=10, colour=TAG_COLOUR)
    parts = sorted(net.parts, key=lambda p: _span_key(p, xs))
    used: dict[str, list[float]] = {n: [] for n in cols}
    y = y_names - 1.2
    body = 0.62 * _DX_COL
    for p in parts:
        left, right = sorted((p.a, p.b), key=lambda n: xs[n])
        if isinstance(p, Pot):
            y -= 0.9  # room for the wiper run above the pot
        a, b = (xs[left], y), (xs[right], y)
        if left == right:  # both ends on one node: out to the next gap and back
            b = (a[0] + _DX_COL, y)
        # the body sits in the gap right of its left column, never over a column
        c0 = (a[0] + (_DX_COL - body) / 2, y)
        c1 = (c0[0] + body, y)
        if isinstance(p, Pot):
            el = pen.add(pen.elm.Potentiometer().endpoints(c0, c1), f"{net.name}.{p.name}")
            text = _knob(p)
            tap = el.absanchors["tap"]
            run = y + 1.0
            pen.wire(tap, (tap[0], run), (xs[p.wiper], run))
            used[p.wiper].append(run)
            # the end the wiper reaches at knob 10 (the clockwise end)
            cw = c0 if xs[p.a] <= xs[p.b] else c1
            pen.text((cw[0] + (0.1 if cw is c0 else -0.1), y - 0.45), "cw", size=7.5, colour=NODE_COLOUR,
                     halign="left" if cw is c0 else "right", valign="top")
            pen.text(((c0[0] + c1[0]) / 2 + 0.9, y + 0.3), text, size=9.5, halign="left", valign="bottom")
        else:
            kind = {"resistor": "R", "capacitor": "C", "inductor": "L"}[p.kind]
            value = {"R": _r, "C": _c, "L": lambda v: format_si(v, "H")}[kind](p.value)
            pen.two(kind, c0, c1, f"{p.name} {value}", f"{net.name}.{p.name}")
        pen.wire(a, c0)
        pen.wire(c1, b)
        if left == right:
            pen.wire(b, (b[0], y + 0.5), (a[0], y + 0.5))
        used[left].append(y)
        used[right].append(y)
        y -= _DY_ROW
    bottom = y + _DY_ROW - 0.6
    for n in cols:
        ys = used[n]
        if not ys:
            continue
        top = max(ys)
        low = bottom if n == "gnd" else min(ys)
        if top != low:
            pen.wire((xs[n], top), (xs[n], low))
        for yy in ys:
            pen.dot((xs[n], yy))
        if n == "gnd":
            pen.ground((xs[n], low))
    return bottom - 1.5


def _span_key(p, xs):
    ends = [xs[p.a], xs[p.b]] + ([xs[p.wiper]] if isinstance(p, Pot) else [])
    return (min(ends), max(ends), isinstance(p, Pot))
