"""The Markdown report: the text report's content as headings and tables.

Same facts, same number formatting and same order as
:mod:`chain.report.text`; one table row per object, so a diff of two
Markdown reports is as clean as one of text reports.
"""

from __future__ import annotations

from typing import Any, Mapping

import chain.report.fmt as fmt
from chain.report.fmt import markdown_escape as _esc
from chain.report.fmt import markdown_table as _table
from chain.report.dynamics import unstable_banner
from chain.report.sections import Section
from chain.report.base import (Renderer, corner_reference, past_clip, pd_rating, port_past_clip, shape_lines,
                               spot_response)

__all__ = ["MarkdownRenderer"]





def _corner(value: float | None, edge: float, below: bool) -> str:
    if value is not None:
        return fmt.si(value, "Hz")
    return f"below the band (under {fmt.si(edge, 'Hz')})" if below else f"above the band (over {fmt.si(edge, 'Hz')})"


class MarkdownRenderer(Renderer):
    """GitHub-flavoured Markdown (pipe tables)."""

    separator = "\n\n"

    def header(self, data: dict[str, Any]) -> list[str]:
        n = data["netlist"]
        title = f"{self.heading}: {n['title']}" if n["title"] else self.heading
        return [f"# {_esc(title)}", ""] + _table(["", ""], [
            ["netlist", f"`{n['path']}`"],
            ["netlist sha256", f"`{n['sha256']}`"],
            ["chain version", data["tool"]["version"]],
            ["report format", data["schema"]],
        ]) + [f"\n**{x}**" for x in unstable_banner(data)]

    def safety(self, data: dict[str, Any]) -> list[str]:
        return [f"> **{data['safety']}**"]

    def settings(self, data: dict[str, Any]) -> list[str]:
        s, o = data["settings"], data["solve_options"]
        rows = [
            ["reference frequency", fmt.si(s["reference_hz"], "Hz")],
            ["band", f"{fmt.si(s['band_low_hz'], 'Hz')} to {fmt.si(s['band_high_hz'], 'Hz')}"],
            ["sweep points", f"{s['points']}, log-spaced, plus the reference frequency"],
            ["input level", f"{fmt.volts(s['level_v'])} peak"],
            ["heater potential", fmt.volts(s["heater_v"])],
        ]
        units = {"tol_a": "A", "tol_v": "V", "max_step_v": "V", "gmin_s": "S", "cutoff_a": "A",
                 "grid_current_a": "A"}
        for key, value in o.items():
            if key == "derating":
                text = f"{fmt.pct(value)} of the rating"
            elif key in units:
                text = fmt.si(value, units[key])
            else:
                text = str(value)
            rows.append([f"dc solve `{key}`", text])
        rows.append(["dc solve iterations", str(data["dc_solve"]["iterations"])])
        return ["## Analysis settings and solver", ""] + _table(["setting", "value"], rows)

    def stages(self, data: dict[str, Any]) -> list[str]:
        s = data["settings"]
        out = [f"## Stages at {fmt.si(s['reference_hz'], 'Hz')}, {fmt.volts(s['level_v'])} peak input", ""]
        points = {p["triode"]: p for p in data["operating_points"]}
        op_rows = []
        for r in data["stages"]:
            op_rows.append([r["stage"], r["kind"], r["tube"], fmt.volts(r["vp_v"]), fmt.volts(r["vk_v"]),
                            fmt.amps(r["ip_a"]), fmt.siemens(r["gm_s"]), fmt.si(r["rp_ohm"], "Ω"),
                            fmt.plain(r["mu"])])
            for t in r.get("triodes", [])[1:]:
                p = points[t]
                op_rows.append([f"{r['stage']}: {t}", "", "", fmt.volts(p["vp_v"]), fmt.volts(p["vk_v"]),
                                fmt.amps(p["ip_a"]), fmt.siemens(p["gm_s"]), fmt.si(p["rp_ohm"], "Ω"),
                                fmt.plain(p["mu"])])
        out += _table(["stage", "configuration", "tube", "Vp", "Vk", "Ip", "gm", "rp", "mu"], op_rows,
                      set(range(3, 9)))
        out.append("")
        past = past_clip(data)

        def level(r, i):
            clip = past.get(r["stage"], (None, None))[i]
            return fmt.volts(r["level_in_v" if i == 0 else "level_out_v"]) if clip is None else \
                f"past clip {fmt.volts(clip)}"

        def port_level(r, o):
            clip = port_past_clip(data, r, o)
            return fmt.volts(o["level_out_v"]) if clip is None else f"past clip {fmt.volts(clip)}"

        gain_rows = []
        for r in data["stages"]:
            ports = r.get("outputs", [])
            label = r["stage"] if len(ports) <= 1 else f"{r['stage']}.{ports[0]['port']}"
            gain_rows.append([
                label, fmt.plain(fmt.mag(r["gain"])), fmt.db(r["gain_db"]), fmt.deg(r["phase_deg"]),
                fmt.polar(r["zin_ohm"], "Ω"), fmt.polar(r["zout_ohm"], "Ω"), r["coupling"] or "—",
                "—" if r["coupling_db"] is None else fmt.db(r["coupling_db"]), fmt.db(r["cumulative_db"]),
                level(r, 0), level(r, 1)])
            for o in ports[1:]:
                gain_rows.append([
                    f"{r['stage']}.{o['port']}", fmt.plain(fmt.mag(o["gain"])), fmt.db(o["gain_db"]),
                    fmt.deg(o["phase_deg"]), "—", fmt.polar(o["zout_ohm"], "Ω"), "—", "—",
                    fmt.db(o["cumulative_db"]), "—", port_level(r, o)])
        out += _table(["stage", "gain V/V", "gain", "phase", "Zin", "Zout", "fed through", "coupling loss",
                       "cumulative", "in (peak)", "out (peak)"], gain_rows, {1, 2, 3, 7, 8, 9, 10})
        for r in data["stages"]:
            if r.get("balance") is not None:
                first, second = r["outputs"][0]["port"], r["outputs"][1]["port"]
                b = r["balance"]
                out += ["", f"Balance of {r['stage']}, {second} against {first}: {fmt.db(b['db'])}, "
                        f"phase {fmt.deg(b['phase_deg'])} (ideal 0 dB and 180°)."]
        if past:
            out += ["", "Past clip X: at the stated input level this stage or one before it clips; the "
                    "small-signal level would be meaningless, X is the peak the signal reaches there as clipping "
                    "begins (see Headroom)."]
        couplings = data.get("couplings") or []
        if couplings:
            out += ["", "### Couplings", ""]
            out += _table(["coupling", "from", "to", "transfer", "phase"], [
                [c["name"], c["from_node"], c["to_node"], fmt.db(c["loss_db"]), fmt.deg(c["phase_deg"])]
                for c in couplings], {3, 4})
        return out

    def stage_details(self, data: dict[str, Any]) -> list[str]:
        points = {p["triode"]: p for p in data["operating_points"]}
        rows = []
        for r in data["stages"]:
            for i, t in enumerate(r.get("triodes") or [r["triode"]]):
                p = points.get(t, {})
                pd, rating = p.get("pd_w"), pd_rating(data, t)
                use = "—" if pd is None or not rating else fmt.pct(pd / rating)
                rows.append([r["stage"] if i == 0 else f"{r['stage']}: {t}", fmt.volts(p.get("vg_v")),
                             fmt.amps(p.get("ig_a")), fmt.si(pd, "W"), "—" if not rating else fmt.si(rating, "W"),
                             use])
        return ["### Grid and dissipation", ""] + _table(
            ["stage", "Vg", "Ig", "Pd", "Pd rating", "use of rating"], rows, {1, 2, 3, 4, 5})

    def overall(self, data: dict[str, Any]) -> list[str]:
        o, s = data["overall"], data["settings"]
        rows = [
            [f"gain at {fmt.si(o['f_ref_hz'], 'Hz')}", fmt.gain(o["gain"], o["gain_db"])],
            ["low band edge (−3 dB)", _corner(o["f_low_hz"], s["band_low_hz"], True)],
            ["high band edge (−3 dB)", _corner(o["f_high_hz"], s["band_high_hz"], False)],
            ["band edges relative to", corner_reference(data)],
            *([label, value] for label, value in shape_lines(data)),
            ["input impedance (source load)", fmt.polar(o["zin_ohm"], "Ω")],
            ["output impedance", fmt.polar(o["zout_ohm"], "Ω")],
        ]
        for x in (o.get("outputs") or [])[1:]:
            rows += [[f"gain to output `{x['label']}`", fmt.gain(x["gain"], x["gain_db"])],
                     [f"output impedance at `{x['label']}`", fmt.polar(x["zout_ohm"], "Ω")]]
        b = o.get("balance")
        if b is not None:
            first, second = o["outputs"][0]["label"], o["outputs"][1]["label"]
            rows.append([f"balance, `{second}` against `{first}`",
                         f"{fmt.db(b['db'])}, phase {fmt.deg(b['phase_deg'])} (ideal 0 dB and 180°)"])
        return [f"## Overall: source EMF to the output (node `{o['output_node']}`)", ""] + _table(
            ["quantity", "value"], rows)

    def response(self, data: dict[str, Any]) -> list[str]:
        spots = spot_response(data)
        if not spots:
            return []
        return ["### Response read from the sweep", ""] + _table(
            ["frequency", "gain", "phase"], [[fmt.si(f, "Hz"), fmt.db(m), fmt.deg(p)] for f, m, p in spots],
            {0, 1, 2})

    def rails(self, data: dict[str, Any]) -> list[str]:
        return ["## Supply and rails", ""] + _table(
            ["rail", "voltage", "current"],
            [[r["name"], fmt.volts(r["v"]), fmt.amps(r["i_a"])] for r in data["rails"]], {1, 2})

    def capacitors(self, data: dict[str, Any]) -> list[str]:
        rows = []
        for c in data["capacitors"]:
            rated = "none" if c["rated_v"] is None else fmt.volts(c["rated_v"])
            use = "—" if c["fraction_of_rating"] is None else fmt.pct(c["fraction_of_rating"])
            rows.append([f"`{c['name']}`", fmt.volts(c["v"]), rated, use])
        return ["## Capacitors: DC voltage against rating", ""] + _table(
            ["capacitor", "DC voltage", "rating", "use of rating"], rows, {1, 2, 3})

    def headroom(self, data: dict[str, Any]) -> list[str]:
        from chain.report.headroom import markdown_lines

        if data["headroom"] is None:
            return []
        return ["## Headroom", ""] + markdown_lines(data["headroom"])

    def stability(self, data: dict[str, Any]) -> list[str]:
        from chain.report.dynamics import stability_markdown

        return stability_markdown(data)

    def sensitivity(self, data: dict[str, Any]) -> list[str]:
        from chain.report.dynamics import sensitivity_markdown

        return sensitivity_markdown(data)

    def noise(self, data: dict[str, Any]) -> list[str]:
        from chain.report.noise import markdown_lines

        if data.get("noise") is None:
            return []
        return ["## Noise at the output", ""] + markdown_lines(data["noise"])

    def study(self, section: Section, part: Mapping[str, Any]) -> list[str]:
        lines = [f"## {section.title}", ""] + [f"- {label}: {value}" for label, value in section.facts(part)]
        for t in section.tables(part):
            lines += [""] + _table(list(t.head), [list(r) for r in t.rows], set(t.right))
        return lines

    def diagnostics(self, data: dict[str, Any]) -> list[str]:
        if not data["diagnostics"]:
            return ["## Diagnostics", "", "none"]
        rows = []
        for d in data["diagnostics"]:
            loc = d["location"]
            where = "" if loc is None else f"{loc['path']}:{loc['line']}:{loc['column']}"
            message = d["message"] + (f" (hint: {d['hint']})" if d["hint"] else "")
            rows.append([d["severity"], d["code"], d["subject"], where, message])
        return ["## Diagnostics", ""] + _table(["severity", "code", "subject", "where", "message"], rows)

    def parts(self, data: dict[str, Any]) -> list[str]:
        rows = []
        for p in data["parts"]:
            if p["kind"] == "triode":
                value = p["tube"]["type"]
            else:
                value = fmt.si(p["value"], {"ohm": "Ω"}.get(p["unit"], p["unit"] or ""))
            rated = "" if p["rated_v"] is None else fmt.volts(p["rated_v"])
            rows.append([f"`{p['name']}`", p["kind"], value, rated, fmt.node_list(p["nodes"])])
        return ["## Parts as analysed", ""] + _table(["part", "kind", "value", "rated", "nodes"], rows)
