"""One :class:`~chain.analysis.Analysis` as plain, JSON-ready data (schema ``chain-report/1``).

:func:`report_data` is the single place where an analysis becomes numbers in
a fixed layout; the text, Markdown and JSON renderers all read its output,
and :mod:`chain.changes` compares two such documents.  The layout is described
in ``docs/report-format.md`` and, formally, in ``chain/report/schema.json``.

Conventions
-----------
* Every number is in SI base units (ohm, F, H, V, A, W, S, Hz); the key says
  the unit where it is ambiguous (``ip_a``, ``f_low_hz``).  Gains are also
  given in dB and phases in degrees, named so (``gain_db``, ``phase_deg``).
* A complex value (a loaded gain, an impedance) is ``{"re": x, "im": y}``.
* Numbers are rounded to :data:`DIGITS` significant digits, far below the
  accuracy of any model here, so that a report written on one machine and
  read back on another compares equal.  ``-0.0`` is written ``0.0``.
* Absent values, and values that are not finite (a gain of zero in dB, an
  infinite impedance), are ``null``.
* Keys appear in a fixed order (the order built here); lists follow the
  circuit's order (parts, triodes, rails, capacitors) or the signal order
  (stages).
"""

from __future__ import annotations

import math
from dataclasses import fields
from typing import Any

import numpy as np

from chain.decibels import db, db_array, phase_deg_array
from chain.report.values import DIGITS, cx, num
from chain.about import SAFETY

__all__ = [
    "SCHEMA",
    "SAFETY",
    "DIGITS",
    "OWNER_KINDS",
    "report_data",
    "num",
    "cx",
    "part_owner",
    "diagnostics_data",
]

#: identifier and version of the document layout; bumped on any incompatible change
SCHEMA = "chain-report/1"

#: the one-line safety reminder printed in every report (same wording as the command line's)

#: what a part can belong to, in the order reports group them
OWNER_KINDS = ("supply", "rail", "input", "stage", "coupling", "network", "stray", "output", "other")


def _db(value: complex | float) -> float | None:
    return num(db(value)) if 0.0 < abs(value) < math.inf else None


def _deg(value: complex) -> float | None:
    z = complex(value)
    if not (math.isfinite(z.real) and math.isfinite(z.imag)) or z == 0:
        return None
    return num(math.degrees(math.atan2(z.imag, z.real)))


# --------------------------------------------------------------------------- parts


def part_owner(part) -> dict[str, str]:
    """What a circuit element belongs to: ``{"kind": k, "name": n}``, from
    its :class:`~chain.circuit.Owner` (``k`` one of :data:`OWNER_KINDS`)."""
    return {"kind": part.owner.kind, "name": part.owner.name}


def _part(name, kind, owner, role, nodes, value, unit, rated_v=None, tube=None) -> dict[str, Any]:
    return {
        "name": name, "kind": kind, "owner": owner, "role": str(role.value), "nodes": list(nodes),
        "value": num(value), "unit": unit, "rated_v": num(rated_v), "tube": tube,
    }


def _tube(triode) -> dict[str, Any]:
    m, r = triode.model, triode.model.ratings
    from chain.tubes import form_parameters

    return {
        "type": m.name,
        "form": m.form,
        "parameters": {k: num(v) for k, v in form_parameters(m)},
        "source": m.source,
        "vct": num(m.vct),
        "mu": num(m.mu), "ex": num(m.ex), "kg1": num(m.kg1), "kp": num(m.kp), "kvb": num(m.kvb),
        "cgk_f": num(m.cgk_f), "cgp_f": num(m.cgp_f), "cpk_f": num(m.cpk_f),
        "grid_perveance_a_v15": num(m.grid_perveance_a_v15), "grid_onset_v": num(m.grid_onset_v),
        "grid_knee_v": num(m.grid_knee_v),
        "vp_max_v": num(r.vp_max_v), "pd_max_w": num(r.pd_max_w), "ik_max_a": num(r.ik_max_a),
        "vhk_max_v": num(r.vhk_max_v), "rg_max_ohm": num(r.rg_max_ohm),
        "heater_v": num(triode.heater_v),
    }


def _parts(analysis) -> list[dict[str, Any]]:
    c = analysis.circuit
    out = []
    for p in c.resistors:
        out.append(_part(p.name, "resistor", part_owner(p), p.role, (p.a, p.b), p.ohms, "ohm"))
    for p in c.capacitors:
        out.append(_part(p.name, "capacitor", part_owner(p), p.role, (p.a, p.b), p.farads, "F", p.rated_v))
    for p in c.inductors:
        out.append(_part(p.name, "inductor", part_owner(p), p.role, (p.a, p.b), p.henries, "H"))
    for p in c.sources:
        kind = "supply" if p.role == "supply" else "signal"
        out.append(_part(p.name, kind, part_owner(p), p.role, (p.pos, p.neg), p.volts, "V"))
    for t in c.triodes:
        out.append(_part(t.name, "triode", part_owner(t), t.role, (t.plate, t.grid, t.cathode), None, None,
                         tube=_tube(t)))
    return out


# --------------------------------------------------------------------------- sections


def _settings(design) -> dict[str, Any]:
    s = design.settings
    return {
        "reference_hz": num(s.reference_hz), "band_low_hz": num(s.band_low_hz),
        "band_high_hz": num(s.band_high_hz), "points": int(s.points), "level_v": num(s.level_v),
        "heater_v": num(s.heater_v),
    }


def _solve_options(options) -> dict[str, Any]:
    out = {}
    for f in fields(options):
        v = getattr(options, f.name)
        out[f.name] = int(v) if isinstance(v, int) and not isinstance(v, bool) else num(v)
    return out


def _operating_points(analysis) -> list[dict[str, Any]]:
    by_triode = {t: s.name for s in analysis.circuit.stages for t in s.triodes}
    out = []
    for t in analysis.circuit.triodes:
        p = analysis.dc.points[t.name]
        out.append({
            "triode": t.name, "stage": by_triode.get(t.name),
            "vp_v": num(p.vp_v), "vg_v": num(p.vg_v), "vk_v": num(p.vk_v), "ip_a": num(p.ip_a),
            "ig_a": num(p.ig_a), "pd_w": num(p.pd_w), "gm_s": num(p.gm_s), "rp_ohm": num(p.rp_ohm),
            "mu": num(p.mu),
        })
    return out


def _rails(dc) -> list[dict[str, Any]]:
    return [{"name": r.name, "v": num(r.v), "i_a": num(r.i_a)} for r in dc.rails.values()]


def _capacitors(dc) -> list[dict[str, Any]]:
    out = []
    for c in dc.capacitors.values():
        frac = abs(c.v) / c.rated_v if c.rated_v else None
        out.append({"name": c.name, "v": num(c.v), "rated_v": num(c.rated_v), "fraction_of_rating": num(frac)})
    return out


def _stages(analysis) -> list[dict[str, Any]]:
    by_stage = {s.name: s.triode for s in analysis.circuit.stages}
    out = []
    for r in analysis.stages:
        out.append({
            "stage": r.stage, "kind": r.kind, "tube": r.tube, "triode": by_stage.get(r.stage, r.stage),
            "vp_v": num(r.vp_v), "vk_v": num(r.vk_v), "ip_a": num(r.ip_a), "gm_s": num(r.gm_s),
            "rp_ohm": num(r.rp_ohm), "mu": num(r.mu),
            "gain": cx(r.gain), "gain_db": num(r.gain_db), "phase_deg": _deg(r.gain),
            "zin_ohm": cx(r.zin_ohm), "zout_ohm": cx(r.zout_ohm),
            "coupling": r.coupling, "coupling_ratio": cx(r.coupling_ratio), "coupling_db": num(r.coupling_db),
            "cumulative_gain": cx(r.cumulative_gain), "cumulative_db": num(r.cumulative_db),
            "level_in_v": num(r.level_in_v), "level_out_v": num(r.level_out_v),
            "triodes": list(r.triodes) or [by_stage.get(r.stage, r.stage)],
            "outputs": [{
                "port": o.port, "node": o.node, "gain": cx(o.gain), "gain_db": num(o.gain_db),
                "phase_deg": _deg(o.gain), "zout_ohm": cx(o.zout_ohm), "cumulative_gain": cx(o.cumulative_gain),
                "cumulative_db": num(o.cumulative_db), "level_out_v": num(o.level_out_v),
            } for o in r.outputs],
            "balance": None if r.balance is None else {
                "ratio": cx(r.balance), "db": num(r.balance_db), "phase_deg": _deg(r.balance)},
        })
    return out


def _couplings(analysis) -> list[dict[str, Any]]:
    stage_of = analysis.circuit.stage_of_node
    return [{"name": c.name, "from_node": c.from_node, "to_node": c.to_node,
             "from_stage": stage_of(c.from_node) or None, "to_stage": stage_of(c.to_node) or None,
             "ratio": cx(c.ratio), "loss_db": num(c.loss_db), "phase_deg": _deg(c.ratio)}
            for c in analysis.couplings]


def _response_arrays(analysis) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    f = np.asarray(analysis.freq.f_hz, dtype=float)
    h = np.asarray(analysis.freq.output)
    return f, db_array(h), phase_deg_array(h, unwrap=False)


def _overall(analysis) -> dict[str, Any]:
    o = analysis.overall
    # the corners are the half-power points relative to |H(f_ref)| (chain.smallsignal.overall)
    ref = {"basis": "reference", "f_hz": num(o.f_ref_hz), "gain_db": num(o.gain_db)}
    return {
        "output_node": analysis.circuit.output_node,
        "f_ref_hz": num(o.f_ref_hz), "gain": cx(o.gain), "gain_db": num(o.gain_db), "phase_deg": _deg(o.gain),
        "f_low_hz": num(o.f_low_hz), "f_high_hz": num(o.f_high_hz), "corner_reference": ref,
        **_shape(o.shape),
        "zin_ohm": cx(o.zin_ohm), "zout_ohm": cx(o.zout_ohm),
        "outputs": [{"label": x.label, "node": x.node, "gain": cx(x.gain), "gain_db": num(x.gain_db),
                     "phase_deg": _deg(x.gain), "zout_ohm": cx(x.zout_ohm)} for x in o.outputs],
        "balance": None if o.balance is None else {
            "ratio": cx(o.balance), "db": num(o.balance_db), "phase_deg": _deg(o.balance)},
    }


def _shape(shape) -> dict[str, Any]:
    """Peaks, dips and shelves of the overall response (chain.smallsignal.shape)."""
    from chain.smallsignal.shape import HIGH_SHELF_HZ, LOW_SHELF_HZ

    if shape is None:
        return {"peaks": [], "dips": [], "low_shelf": None, "high_shelf": None}

    def ext(e):
        return {"f_hz": num(e.f_hz), "gain_db": num(e.gain_db), "relative_db": num(e.relative_db),
                "prominence_db": num(e.prominence_db)}

    def shelf(level, relative, region):
        if level is None:
            return None
        return {"f_low_hz": num(region[0]), "f_high_hz": num(region[1]), "gain_db": num(level),
                "relative_db": num(relative)}

    return {"peaks": [ext(e) for e in shape.peaks], "dips": [ext(e) for e in shape.dips],
            "low_shelf": shelf(shape.low_shelf_db, shape.low_shelf_relative_db, LOW_SHELF_HZ),
            "high_shelf": shelf(shape.high_shelf_db, shape.high_shelf_relative_db, HIGH_SHELF_HZ)}


def _response(analysis, f, mag_db, phase) -> dict[str, Any]:
    zin = analysis.freq.zin_ohm
    zout = analysis.freq.zout_ohm
    return {
        "node": analysis.circuit.output_node,
        "f_hz": [num(x) for x in f],
        "magnitude_db": [num(x) for x in mag_db],
        "phase_deg": [num(x) for x in phase],
        "zin_ohm_mag": [num(abs(z)) for z in zin],
        "zout_ohm_mag": None if zout is None else [num(abs(z)) for z in zout],
    }


def diagnostics_data(diagnostics) -> list[dict[str, Any]]:
    """Diagnostics as report-document entries (code, severity, subject, message, hint, location)."""
    out = []
    for d in diagnostics:
        loc = None
        if d.span is not None and d.span.line > 0:
            loc = {"path": d.span.path, "line": int(d.span.line), "column": int(d.span.column)}
        out.append({"code": d.code, "severity": d.severity, "subject": d.subject, "message": d.message,
                    "hint": d.hint, "location": loc})
    return out


def report_data(analysis) -> dict[str, Any]:
    """The whole analysis as a JSON-ready ``dict`` (schema :data:`SCHEMA`).

    Parameters
    ----------
    analysis : chain.analysis.Analysis

    Returns
    -------
    dict
        Keys, in order: ``schema``, ``tool``, ``netlist``, ``settings``,
        ``solve_options``, ``dc_solve``, ``safety``, ``parts``,
        ``operating_points``, ``rails``, ``capacitors``, ``stages``,
        ``couplings``, ``overall``, ``response``, ``headroom``, ``noise``, ``diagnostics``, ``stability``,
        ``sensitivity``, then one key per study (:mod:`chain.report.sections`); see
        ``docs/report-format.md``.  Only plain ``dict``, ``list``, ``str``,
        ``int``, ``float``, ``bool`` and ``None`` values.
    """
    from chain.report.dynamics import sensitivity_data, stability_data
    from chain.report.headroom import headroom_data
    from chain.report.noise import noise_data
    from chain.report.sections import sections

    design = analysis.design
    f, mag_db, phase = _response_arrays(analysis)
    return {
        "schema": SCHEMA,
        "tool": {"name": "chain", "version": analysis.version},
        "netlist": {"path": design.path, "sha256": analysis.netlist_sha256, "title": design.title},
        "settings": _settings(design),
        "solve_options": _solve_options(analysis.options),
        "dc_solve": {"iterations": int(analysis.dc.iterations), "max_residual_a": num(analysis.dc.max_residual_a)},
        "safety": SAFETY,
        "parts": _parts(analysis),
        "operating_points": _operating_points(analysis),
        "rails": _rails(analysis.dc),
        "capacitors": _capacitors(analysis.dc),
        "stages": _stages(analysis),
        "couplings": _couplings(analysis),
        "overall": _overall(analysis),
        "response": _response(analysis, f, mag_db, phase),
        "headroom": headroom_data(analysis.headroom),
        "noise": noise_data(getattr(analysis, "noise", None)),
        "diagnostics": diagnostics_data(analysis.diagnostics),
        "stability": stability_data(analysis.stability),
        "sensitivity": sensitivity_data(analysis.sensitivity),
        **{sec.key: sec.data(analysis.studies.get(sec.key)) for sec in sections()},
    }
