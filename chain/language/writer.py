"""Design → netlist text, the inverse of the parser.

``parse_syntax(format_design(d)) == d`` for every Design the parser makes
(values are written with the shortest exact digits, so nothing is rounded).
"""

from __future__ import annotations

from chain.language.design import Design, Part, Pot, Settings
from chain.units import format_rkm

__all__ = ["format_design"]


def _r(value: float) -> str:
    return format_rkm(value, "R")


def _c(value: float) -> str:
    return format_rkm(value, "C")


def _l(value: float) -> str:
    return format_rkm(value, "L") + ("H" if value >= 1 else "")


def _n(value: float) -> str:
    """Shortest exact decimal: 330 rather than 330.0."""
    return str(int(value)) if value == int(value) and abs(value) < 1e15 else repr(value)


def _v(value: float, unit: str) -> str:
    return f"{_n(value)}{unit}"


def _rated(value: float | None) -> str:
    return f" rated {_v(value, 'V')}" if value is not None else ""


def _tube_value(key: str, value: float) -> str:
    if key in ("cgk", "cgp", "cpk"):
        return _c(value)
    if key == "rg-max":
        return _r(value)
    unit = {"vp-max": "V", "vp0-max": "V", "pd-max": "W", "ik-max": "A", "vhk-max": "V", "vct": "V",
            "ig-onset": "V", "ig-knee": "V", "ig0": "A"}.get(key, "")
    return f"{_n(value)}{unit}"


def format_design(d: Design) -> str:
    """The netlist text of ``d``, one statement a line, blocks indented."""
    out: list[str] = []
    if d.title:
        out.append(f'title "{d.title}"')
    s, default = d.settings, Settings()
    if s.reference_hz != default.reference_hz:
        out.append(f"set reference {_n(s.reference_hz)}Hz")
    if (s.band_low_hz, s.band_high_hz) != (default.band_low_hz, default.band_high_hz):
        out.append(f"set band {_n(s.band_low_hz)}Hz {_n(s.band_high_hz)}Hz")
    if s.level_v != default.level_v:
        out.append(f"set level {_n(s.level_v)}V")
    if s.points != default.points:
        out.append(f"set points {s.points}")
    if s.heater_v != default.heater_v:
        out.append(f"set heater {_n(s.heater_v)}V")
    for sup in d.supplies:
        imp = f" impedance {_r(sup.impedance_ohm)}" if sup.impedance_ohm else ""
        out.append(f"supply {sup.name} {_n(sup.volts)}V{imp}")
    for r in d.rails:
        dec = f" decouple {_c(r.decouple_f)}{_rated(r.decouple_rated_v)}" if r.decouple_f is not None else ""
        out.append(f"rail {r.name} from {r.feed} drop {_r(r.drop_ohm)}{dec}")
    for t in d.tubes:
        like = f" like {t.base}" if t.base else ""
        like += f" model {t.form}" if t.form else ""
        params = "".join(f" {k} {_tube_value(k, v)}" for k, v in t.params)
        out.append(f"tube {t.name}{like}{params}")
    if d.source is not None:
        src = d.source
        if src.kind == "ideal":
            how = "ideal"
        elif src.kind == "resistance":
            how = f"resistance {_r(src.r_ohm)}"
        else:
            cable = f" cable {_c(src.cable_f)}" if src.cable_f else ""
            loss = " loss off" if src.loss_ohm is None else f" loss {_r(src.loss_ohm)}"
            how = (f"pickup winding {_r(src.r_ohm)} inductance {_l(src.l_h)} "
                   f"capacitance {_c(src.c_f)}{cable}{loss}")
        if src.cap_f is not None:
            how += f" cap {_c(src.cap_f)}{_rated(src.cap_rated_v)}"
        out.append(f"input into {src.into} {how}")
    for st in d.stages:
        out.append("")
        out.append(f"stage {st.name} {st.kind} {st.tube}")
        if st.rail:
            out.append(f"  plate {_r(st.plate_load_ohm)} from {st.rail}" if st.plate_load_ohm is not None
                       else f"  plate on {st.rail}")
        if st.cathode is not None:
            k = st.cathode
            by = ""
            if k.tail_ohm is not None:
                by = f" tail {_r(k.tail_ohm)}"
            elif k.bypass_f is not None:
                series = f" series {_r(k.bypass_series_ohm)}" if k.bypass_series_ohm is not None else ""
                by = f" bypass {_c(k.bypass_f)}{series}{_rated(k.bypass_rated_v)}"
            out.append(f"  cathode {_r(k.r_ohm)}{by}")
        if st.grid_leak_ohm is not None:
            out.append(f"  grid leak {_r(st.grid_leak_ohm)}")
        if st.grid_stopper_ohm is not None:
            out.append(f"  grid stopper {_r(st.grid_stopper_ohm)}")
        if st.grid_ground:
            out.append("  grid ground")
        if st.second is not None:
            sec = st.second
            if sec.rail:
                out.append(f"  second plate {_r(sec.plate_load_ohm)} from {sec.rail}"
                           if sec.plate_load_ohm is not None else f"  second plate on {sec.rail}")
            items = []
            if sec.grid_leak_ohm is not None:
                items.append(f"leak {_r(sec.grid_leak_ohm)}")
            if sec.grid_stopper_ohm is not None:
                items.append(f"stopper {_r(sec.grid_stopper_ohm)}")
            if sec.grid_bypass_f is not None:
                items.append(f"bypass {_c(sec.grid_bypass_f)}{_rated(sec.grid_bypass_rated_v)}")
            if items:
                out.append("  second grid " + " ".join(items))
        if st.heater_v is not None:
            out.append(f"  heater {_v(st.heater_v, 'V')}")
    for n in d.networks:
        out.append("")
        ports = f": {n.ports[0]} -> {n.ports[1]}" if n.ports else ""
        out.append(f"network {n.name}{ports}")
        for p in n.parts:
            out.append("  " + _part_line(p))
    if d.couplings:
        out.append("")
    for c in d.couplings:
        if c.kind == "cap":
            assert c.cap_f is not None  # the parser gives every cap coupling its value
            how = f"cap {_c(c.cap_f)}{_rated(c.rated_v)}"
        elif c.kind == "direct":
            how = "direct"
        else:
            how = f"via {c.network}" + (f" as {c.instance}" if c.instance else "")
        out.append(f"couple {c.src} -> {c.dst} {how}")
    if d.output is not None:
        node = f" {d.output.node}" if d.output.node else ""
        more = "".join(f" and {m.node} load {_r(m.load_ohm)}" for m in d.output.more)
        out.append(f"output{node} load {_r(d.output.load_ohm)}{more}")
    for stray in d.strays:
        out.append(f"stray {stray.node} {_c(stray.farads)}")
    for tol in d.tolerances:
        lo, hi = round(100 * tol.low, 9), round(100 * tol.high, 9)
        band = f"{_n(hi)}%" if lo == -hi else f"{_n(lo)}%+{_n(hi)}%"
        out.append(f"tolerance {'tube ' if tol.tube_type else ''}{tol.target} {band}")
    return "\n".join(out) + "\n"


def _part_line(p: Part | Pot) -> str:
    if isinstance(p, Pot):
        pct = p.taper_mid * 100
        mid = f"{_n(pct)}%" if float(_n(pct)) / 100.0 == p.taper_mid else _n(p.taper_mid)
        taper = "linear" if p.taper == "linear" else f"audio {mid}"
        tail = f"{_r(p.value)} {taper} travel {_n(p.position)}"
        if p.wiper == p.a and p.a != p.b:
            return f"rheostat {p.name} {p.a} -- {p.b} {tail}"
        return f"pot {p.name} cw {p.a} wiper {p.wiper} ccw {p.b} {tail}"
    value = {"resistor": _r, "capacitor": _c, "inductor": _l}[p.kind](p.value)
    return f"{p.kind} {p.name} {p.a} -- {p.b} {value}{_rated(p.rated_v)}"
