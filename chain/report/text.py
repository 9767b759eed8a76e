"""The plain-text report: fixed width, one fact per line, made to be diffed.

Layout rules (so that ``git diff`` of two reports shows only what changed):

* every section starts with a title line underlined with ``-``;
* facts are ``label  value`` lines with the label padded to a fixed width;
  a per-stage fact starts with the stage name (``V2 loaded gain …``) so a
  changed line says which stage it belongs to without its context;
* tables (the stage overview, rails, capacitors, parts) have fixed column
  widths, one row per object, rows in circuit or signal order;
* numbers have four significant digits and an SI prefix, dB two decimals,
  angles one decimal; nothing depends on the date, the machine or the
  working directory.
"""

from __future__ import annotations

from typing import AbstractSet, Any, Mapping

import chain.report.fmt as fmt
from chain.report.dynamics import unstable_banner
from chain.report.sections import Section
from chain.report.base import (Renderer, corner_reference, past_clip, pd_rating, port_past_clip, shape_lines,
                               spot_response)

__all__ = ["TextRenderer"]

#: width of the label column of fact lines
LABEL = 32


def _kv(label: str, value: str) -> str:
    return f"{label:<{LABEL}} {value}".rstrip()


def _title(text: str) -> list[str]:
    return [text, "-" * len(text)]


def _row(cells: list[str], widths: list[int], right: AbstractSet[int] = frozenset()) -> str:
    out = []
    for i, (c, w) in enumerate(zip(cells, widths)):
        out.append(f"{c:>{w}}" if i in right else f"{c:<{w}}")
    return "  ".join(out).rstrip()


def _corner(value: float | None, edge: float, below: bool) -> str:
    if value is not None:
        return fmt.si(value, "Hz")
    return f"below the band (under {fmt.si(edge, 'Hz')})" if below else f"above the band (over {fmt.si(edge, 'Hz')})"


def _level(small_signal_v: float | None, clip_v: float | None) -> str:
    """A stage-table level: the small-signal peak, or ``past clip X``."""
    return fmt.volts(small_signal_v) if clip_v is None else f"past clip {fmt.volts(clip_v)}"


def _signal(small_signal_v: float | None, clip_v: float | None, by: str) -> str:
    """A stage-detail level, saying when it lies past clipping (``by``: the stage that clips)."""
    if clip_v is None:
        return f"{fmt.volts(small_signal_v)} peak"
    return f"past clipping ({by} clips): about {fmt.volts(clip_v)} peak at most"


def _pair_lines(data: dict[str, Any], r: dict[str, Any], points: dict[str, Any]) -> list[str]:
    """The facts a stage with several triodes or outputs adds: each further
    triode's operating point, each output port, and the balance."""
    n = r["stage"]
    out: list[str] = []
    for t in r.get("triodes", [])[1:]:
        p = points[t]
        out += [
            _kv(f"{t} plate voltage Vp", fmt.volts(p["vp_v"])),
            _kv(f"{t} grid voltage Vg", fmt.volts(p["vg_v"])),
            _kv(f"{t} cathode voltage Vk", fmt.volts(p["vk_v"])),
            _kv(f"{t} plate current Ip", fmt.amps(p["ip_a"])),
            _kv(f"{t} grid current Ig", fmt.amps(p["ig_a"])),
            _kv(f"{t} plate dissipation Pd", fmt.si(p["pd_w"], "W")),
            _kv(f"{t} transconductance gm", fmt.siemens(p["gm_s"])),
            _kv(f"{t} plate resistance rp", fmt.si(p["rp_ohm"], "Ω")),
            _kv(f"{t} amplification mu", fmt.plain(p["mu"])),
        ]
    ports = r.get("outputs", [])
    if len(ports) > 1:
        for o in ports:
            out += [
                _kv(f"{n} {o['port']} output gain", fmt.gain(o["gain"], o["gain_db"])),
                _kv(f"{n} {o['port']} output impedance", fmt.polar(o["zout_ohm"], "Ω")),
                _kv(f"{n} {o['port']} signal at output",
                    _signal(o["level_out_v"], port_past_clip(data, r, o), n)),
            ]
        b = r["balance"]
        out.append(_kv(f"{n} balance {ports[1]['port']}/{ports[0]['port']}",
                       f"{fmt.db(b['db'])}, phase {fmt.deg(b['phase_deg'])} (ideal 0 dB, 180°)"))
    return out


class TextRenderer(Renderer):
    """Fixed-width plain text (see the module docstring)."""

    separator = "\n\n"

    def header(self, data: dict[str, Any]) -> list[str]:
        n = data["netlist"]
        title = f"{self.heading}: {n['title']}" if n["title"] else self.heading
        return [
            title,
            "=" * len(title),
            _kv("netlist", n["path"]),
            _kv("netlist sha256", n["sha256"]),
            _kv("chain version", data["tool"]["version"]),
            _kv("report format", data["schema"]),
        ] + unstable_banner(data)

    def safety(self, data: dict[str, Any]) -> list[str]:
        return [data["safety"]]

    def settings(self, data: dict[str, Any]) -> list[str]:
        s, o = data["settings"], data["solve_options"]
        lines = _title("Analysis settings and solver")
        lines += [
            _kv("reference frequency", fmt.si(s["reference_hz"], "Hz")),
            _kv("band", f"{fmt.si(s['band_low_hz'], 'Hz')} to {fmt.si(s['band_high_hz'], 'Hz')}"),
            _kv("sweep points", f"{s['points']}, log-spaced, plus the reference frequency"),
            _kv("input level", f"{fmt.volts(s['level_v'])} peak"),
            _kv("heater potential", fmt.volts(s["heater_v"])),
        ]
        known = {
            "tol_a": ("dc solve current tolerance", "A"),
            "tol_v": ("dc solve voltage tolerance", "V"),
            "max_iter": ("dc solve iteration limit", None),
            "max_step_v": ("dc solve largest step", "V"),
            "gmin_s": ("dc solve gmin to ground", "S"),
            "derating": ("dissipation derating", "%"),
            "cutoff_a": ("cutoff threshold (plate)", "A"),
            "grid_current_a": ("grid-current threshold", "A"),
        }
        for key, value in o.items():
            label, unit = known.get(key, (f"dc solve {key}", ""))
            if unit is None:
                text = str(value)
            elif unit == "%":
                text = f"{fmt.pct(value)} of the rating"
            else:
                text = fmt.si(value, unit)
            lines.append(_kv(label, text))
        lines.append(_kv("dc solve iterations", str(data["dc_solve"]["iterations"])))
        return lines

    # -- stages -----------------------------------------------------------------
    def stages(self, data: dict[str, Any]) -> list[str]:
        s = data["settings"]
        lines = _title(f"Stages at {fmt.si(s['reference_hz'], 'Hz')}, "
                       f"{fmt.volts(s['level_v'])} peak input, in signal order")
        points = {p["triode"]: p for p in data["operating_points"]}
        w1 = [6, 17, 12, 9, 9, 9, 9, 9, 6]
        lines.append(_row(["stage", "configuration", "tube", "Vp", "Vk", "Ip", "gm", "rp", "mu"], w1,
                          set(range(3, 9))))
        for r in data["stages"]:
            lines.append(_row([r["stage"], r["kind"], r["tube"], fmt.volts(r["vp_v"]), fmt.volts(r["vk_v"]),
                               fmt.amps(r["ip_a"]), fmt.siemens(r["gm_s"]), fmt.si(r["rp_ohm"], "Ω"),
                               fmt.plain(r["mu"])], w1, set(range(3, 9))))
            for t in r.get("triodes", [])[1:]:
                p = points[t]
                lines.append(_row([f"  {t}", "", "", fmt.volts(p["vp_v"]), fmt.volts(p["vk_v"]),
                                   fmt.amps(p["ip_a"]), fmt.siemens(p["gm_s"]), fmt.si(p["rp_ohm"], "Ω"),
                                   fmt.plain(p["mu"])], w1, set(range(3, 9))))
        lines.append("")
        several = [r for r in data["stages"] if len(r.get("outputs", [])) > 1]
        label_w = max([6] + [len(f"{r['stage']}.{o['port']}") for r in several for o in r["outputs"]])
        w2 = [label_w, 8, 9, 7, 10, 10, 10, 9, 16, 16]
        lines.append(_row(["stage", "gain V/V", "gain", "phase", "|Zin|", "|Zout|", "coupling", "total",
                           "in pk", "out pk"], w2, set(range(1, 10))))
        past = past_clip(data)
        for r in data["stages"]:
            v_in, v_out, _, _ = past.get(r["stage"], (None, None, "", ""))
            ports = r.get("outputs", [])
            label = r["stage"] if len(ports) <= 1 else f"{r['stage']}.{ports[0]['port']}"
            lines.append(_row([
                label, fmt.plain(fmt.mag(r["gain"])), fmt.db(r["gain_db"]), fmt.deg(r["phase_deg"]),
                fmt.si(fmt.mag(r["zin_ohm"]), "Ω"), fmt.si(fmt.mag(r["zout_ohm"]), "Ω"),
                "—" if r["coupling_db"] is None else fmt.db(r["coupling_db"]),
                fmt.db(r["cumulative_db"]), _level(r["level_in_v"], v_in), _level(r["level_out_v"], v_out),
            ], w2, set(range(1, 10))))
            for o in ports[1:]:
                lines.append(_row([
                    f"{r['stage']}.{o['port']}", fmt.plain(fmt.mag(o["gain"])), fmt.db(o["gain_db"]),
                    fmt.deg(o["phase_deg"]), "", fmt.si(fmt.mag(o["zout_ohm"]), "Ω"), "",
                    fmt.db(o["cumulative_db"]), "", _level(o["level_out_v"], port_past_clip(data, r, o)),
                ], w2, set(range(1, 10))))
        lines.append("(coupling: the loss of the network feeding the stage; total: gain from the source "
                     "EMF to the stage output)")
        for r in several:
            first, second = r["outputs"][0]["port"], r["outputs"][1]["port"]
            b = r["balance"]
            lines.append(f"({r['stage']} balance, {second} against {first}: {fmt.db(b['db'])}, "
                         f"phase {fmt.deg(b['phase_deg'])}; ideal 0 dB and 180°)")
        if past:
            lines.append("(past clip X: at the stated input level this stage or one before it clips; the "
                         "small-signal level would be meaningless, X is the peak the signal reaches there as "
                         "clipping begins; see Headroom)")
        couplings = data.get("couplings") or []
        if couplings:
            lines.append("")
            w3 = [16, 16, 16, 10, 8]
            lines.append(_row(["coupling", "from", "to", "transfer", "phase"], w3, {3, 4}))
            for c in couplings:
                lines.append(_row([c["name"], c["from_node"], c["to_node"], fmt.db(c["loss_db"]),
                                   fmt.deg(c["phase_deg"])], w3, {3, 4}))
            lines.append("(transfer: voltage at the far end over the near end, everything connected)")
        return lines

    def stage_details(self, data: dict[str, Any]) -> list[str]:
        points = {p["triode"]: p for p in data["operating_points"]}
        count = len(data["stages"])
        past = past_clip(data)
        out: list[str] = []
        for i, r in enumerate(data["stages"], start=1):
            if out:
                out.append("")
            n = r["stage"]
            p = points.get(r["triode"], {})
            clip = past.get(n, (None, None, "", ""))
            out += _title(f"Stage {n}: {r['kind']}, {r['tube']} ({i} of {count})")
            pd, rating = p.get("pd_w"), pd_rating(data, r["triode"])
            pd_text = fmt.si(pd, "W")
            if pd is not None and rating:
                pd_text += f" ({fmt.pct(pd / rating)} of {fmt.si(rating, 'W')})"
            if r["coupling"] is None:
                feed = "none (fed by the source or directly)"
            else:
                ratio = r["coupling_ratio"]
                feed = (f"{r['coupling']}: {fmt.db(r['coupling_db'])} "
                        f"({fmt.plain(fmt.mag(ratio))} V/V, phase {fmt.deg(fmt.angle(ratio))})")
            out += [
                _kv(f"{n} plate voltage Vp", fmt.volts(r["vp_v"])),
                _kv(f"{n} grid voltage Vg", fmt.volts(p.get("vg_v"))),
                _kv(f"{n} cathode voltage Vk", fmt.volts(r["vk_v"])),
                _kv(f"{n} plate current Ip", fmt.amps(r["ip_a"])),
                _kv(f"{n} grid current Ig", fmt.amps(p.get("ig_a"))),
                _kv(f"{n} plate dissipation Pd", pd_text),
                _kv(f"{n} transconductance gm", fmt.siemens(r["gm_s"])),
                _kv(f"{n} plate resistance rp", fmt.si(r["rp_ohm"], "Ω")),
                _kv(f"{n} amplification mu", fmt.plain(r["mu"])),
                _kv(f"{n} loaded gain", fmt.gain(r["gain"], r["gain_db"])),
                _kv(f"{n} input impedance", fmt.polar(r["zin_ohm"], "Ω")),
                _kv(f"{n} output impedance", fmt.polar(r["zout_ohm"], "Ω")),
                _kv(f"{n} fed through", feed),
                _kv(f"{n} cumulative gain", fmt.gain(r["cumulative_gain"], r["cumulative_db"])),
                _kv(f"{n} signal at input", _signal(r["level_in_v"], clip[0], clip[2])),
                _kv(f"{n} signal at output", _signal(r["level_out_v"], clip[1], clip[3])),
            ]
            out += _pair_lines(data, r, points)
        return out

    # -- whole chain ------------------------------------------------------------
    def overall(self, data: dict[str, Any]) -> list[str]:
        o, s = data["overall"], data["settings"]
        lines = _title(f"Overall: source EMF to the output (node {o['output_node']})")
        lines += [
            _kv(f"gain at {fmt.si(o['f_ref_hz'], 'Hz')}", fmt.gain(o["gain"], o["gain_db"])),
            _kv("low band edge (-3 dB)", _corner(o["f_low_hz"], s["band_low_hz"], True)),
            _kv("high band edge (-3 dB)", _corner(o["f_high_hz"], s["band_high_hz"], False)),
            _kv("band edges relative to", corner_reference(data)),
            *(_kv(label, value) for label, value in shape_lines(data)),
            _kv("input impedance (source load)", fmt.polar(o["zin_ohm"], "Ω")),
            _kv("output impedance", fmt.polar(o["zout_ohm"], "Ω")),
        ]
        for x in (o.get("outputs") or [])[1:]:
            lines += [
                _kv(f"gain to output {x['label']}", fmt.gain(x["gain"], x["gain_db"])),
                _kv(f"output impedance at {x['label']}", fmt.polar(x["zout_ohm"], "Ω")),
            ]
        b = o.get("balance")
        if b is not None:
            first, second = o["outputs"][0]["label"], o["outputs"][1]["label"]
            lines.append(_kv(f"balance, {second} against {first}",
                             f"{fmt.db(b['db'])}, phase {fmt.deg(b['phase_deg'])} (ideal 0 dB and 180°)"))
        return lines

    def response(self, data: dict[str, Any]) -> list[str]:
        spots = spot_response(data)
        if not spots:
            return []
        lines = _title("Response: source EMF to the output, read from the sweep")
        for f, m, p in spots:
            lines.append(_kv(f"response at {fmt.si(f, 'Hz')}", f"{fmt.db(m)}, phase {fmt.deg(p)}"))
        return lines

    def rails(self, data: dict[str, Any]) -> list[str]:
        lines = _title("Supply and rails")
        w = [12, 10, 10]
        lines.append(_row(["rail", "voltage", "current"], w, {1, 2}))
        for r in data["rails"]:
            lines.append(_row([r["name"], fmt.volts(r["v"]), fmt.amps(r["i_a"])], w, {1, 2}))
        return lines

    def capacitors(self, data: dict[str, Any]) -> list[str]:
        lines = _title("Capacitors: DC voltage against rating")
        w = [24, 10, 9, 9]
        lines.append(_row(["capacitor", "DC voltage", "rating", "use"], w, {1, 2, 3}))
        for c in data["capacitors"]:
            rated = "none" if c["rated_v"] is None else fmt.volts(c["rated_v"])
            use = "—" if c["fraction_of_rating"] is None else fmt.pct(c["fraction_of_rating"])
            lines.append(_row([c["name"], fmt.volts(c["v"]), rated, use], w, {1, 2, 3}))
        return lines

    def headroom(self, data: dict[str, Any]) -> list[str]:
        from chain.report.headroom import text_lines

        h = data["headroom"]
        if h is None:
            return []
        return _title("Headroom") + text_lines(h, _kv)

    def stability(self, data: dict[str, Any]) -> list[str]:
        from chain.report.dynamics import stability_text

        return stability_text(data)

    def sensitivity(self, data: dict[str, Any]) -> list[str]:
        from chain.report.dynamics import sensitivity_text

        return sensitivity_text(data)

    def noise(self, data: dict[str, Any]) -> list[str]:
        from chain.report.noise import text_lines

        n = data.get("noise")
        if n is None:
            return []
        return _title("Noise at the output") + text_lines(n, _kv)

    def study(self, section: Section, part: Mapping[str, Any]) -> list[str]:
        lines = _title(section.title) + [_kv(label, value) for label, value in section.facts(part)]
        for t in section.tables(part):
            widths = [max(len(c) for c in col) for col in zip(t.head, *t.rows)]
            lines += ["", _row(list(t.head), widths, set(t.right))]
            lines += [_row(list(r), widths, set(t.right)) for r in t.rows]
        return lines

    def diagnostics(self, data: dict[str, Any]) -> list[str]:
        lines = _title("Diagnostics")
        if not data["diagnostics"]:
            return lines + ["none"]
        for d in data["diagnostics"]:
            where = ""
            if d["location"] is not None:
                loc = d["location"]
                where = f" at {loc['path']}:{loc['line']}:{loc['column']}"
            subject = f" ({d['subject']})" if d["subject"] else ""
            lines.append(f"{d['severity']} {d['code']}{subject}{where}: {d['message']}")
            if d["hint"]:
                lines.append(f"    hint: {d['hint']}")
        return lines

    def parts(self, data: dict[str, Any]) -> list[str]:
        lines = _title("Parts as analysed")
        w = [24, 10, 12, 0]
        lines.append(_row(["part", "kind", "value", "nodes"], w))
        for p in data["parts"]:
            if p["kind"] == "triode":
                value = p["tube"]["type"]
            else:
                value = fmt.si(p["value"], {"ohm": "Ω"}.get(p["unit"], p["unit"] or ""))
            nodes = fmt.node_list(p["nodes"])
            if p["rated_v"] is not None:
                nodes += f"  (rated {fmt.volts(p['rated_v'])})"
            lines.append(_row([p["name"], p["kind"], value, nodes], w))
        return lines

