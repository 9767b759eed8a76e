"""Diff of two voicings: part changes, then the effects they had, biggest first
(see :mod:`chain.changes` for what is compared and how effects are sized)."""

from __future__ import annotations

import math
from typing import Any, Mapping

import numpy as np

import chain.report.fmt as _f
from chain.changes.studies import study_effects
from chain.changes.common import (
    APPEAR_SIZE,
    EFFECT_KINDS,
    Change,
    DiffResult,
    _corner_change,
    _db_change,
    _deg_change,
    _main,
    _match_stages,
    _pct,
    _ratio_change,
    _part_match,
    _side,
    _stage_index,
    document,
)
from chain.report.data import OWNER_KINDS
from chain.report.values import num
from chain.smallsignal.resample import on_log_grid
from chain.decibels import db

# --------------------------------------------------------------------------- parts


_TUBE_PARAMS = ("mu", "ex", "kg1", "kp", "kvb", "cgk_f", "cgp_f", "cpk_f", "grid_perveance_a_v15",
                "grid_onset_v", "grid_knee_v", "vp_max_v", "pd_max_w", "ik_max_a", "vhk_max_v", "rg_max_ohm")
_TUBE_UNITS = {"cgk_f": "F", "cgp_f": "F", "cpk_f": "F", "grid_onset_v": "V", "grid_knee_v": "V",
               "vp_max_v": "V", "pd_max_w": "W", "ik_max_a": "A", "vhk_max_v": "V", "rg_max_ohm": "ohm",
               "heater_v": "V"}


def _owner_text(owner: Mapping[str, str]) -> str:
    return owner["kind"] if owner["kind"] in ("input", "output") else f"{owner['kind']} {owner['name']}"


def _value_change(name, owner, quantity, unit, old, new) -> Change:
    delta = rel = None
    rel_unit = ""
    size: float | None = APPEAR_SIZE
    if isinstance(old, (int, float)) and isinstance(new, (int, float)):
        delta = num(new - old)
        r = _pct(old, new)
        if r is not None:
            rel, rel_unit, size = num(r), "%", num(abs(r) / 10.0)
    return Change("part", name, quantity, unit, old, new, delta, rel, rel_unit, size, owner)


def _part_changes(pa: dict[str, Any], pb: dict[str, Any], nodes: Mapping[str, str]) -> list[Change]:
    name, owner = pb["name"], _owner_text(pb["owner"])
    out = []
    if pa["kind"] != pb["kind"]:
        return [Change("part", name, "kind", "", pa["kind"], pb["kind"], owner=owner)]
    if pa["value"] != pb["value"]:
        out.append(_value_change(name, owner, "value", pb["unit"] or "", pa["value"], pb["value"]))
    if pa["rated_v"] != pb["rated_v"]:
        out.append(_value_change(name, owner, "rating", "V", pa["rated_v"], pb["rated_v"]))
    nodes_a = [nodes.get(n, n) for n in pa["nodes"]]
    if nodes_a != pb["nodes"]:
        out.append(Change("part", name, "nodes", "", " – ".join(pa["nodes"]), " – ".join(pb["nodes"]),
                          owner=owner))
    ta, tb = pa["tube"], pb["tube"]
    if ta is not None and tb is not None:
        if ta["type"] != tb["type"]:
            out.append(Change("part", name, "tube", "", ta["type"], tb["type"], owner=owner))
        else:
            for key in _TUBE_PARAMS:
                if ta[key] != tb[key]:
                    out.append(_value_change(name, owner, f"tube {key}", _TUBE_UNITS.get(key, ""),
                                             ta[key], tb[key]))
        if ta["heater_v"] != tb["heater_v"]:
            out.append(_value_change(name, owner, "heater", "V", ta["heater_v"], tb["heater_v"]))
    return out


def _parts(da, db, mapping: Mapping[str, str], stage_order_b: list[str]) -> list[Change]:
    parts_b = {p["name"]: p for p in db["parts"]}
    seen = set()
    keyed: list[tuple[tuple, Change]] = []

    def key(owner: Mapping[str, str], index: int) -> tuple:
        kind = owner["kind"]
        rank = OWNER_KINDS.index(kind) if kind in OWNER_KINDS else len(OWNER_KINDS)
        place = stage_order_b.index(owner["name"]) if kind == "stage" and owner["name"] in stage_order_b else 0
        return (rank, place, owner["name"], index)

    order_b = {p["name"]: i for i, p in enumerate(db["parts"])}
    match, nodes = _part_match(da, db, mapping)
    for i, pa in enumerate(da["parts"]):
        name = match.get(pa["name"], "")
        pb = parts_b.get(name)
        if pb is None:
            c = Change("part", pa["name"], "part", pa["unit"] or "", _part_summary(pa), None,
                       owner=_owner_text(pa["owner"]), note="removed", size=APPEAR_SIZE)
            keyed.append((key(pa["owner"], len(order_b) + i), c))
            continue
        seen.add(name)
        for c in _part_changes(pa, pb, nodes):
            keyed.append((key(pb["owner"], order_b[name]), c))
    for pb in db["parts"]:
        if pb["name"] not in seen:
            c = Change("part", pb["name"], "part", pb["unit"] or "", None, _part_summary(pb),
                       owner=_owner_text(pb["owner"]), note="added", size=APPEAR_SIZE)
            keyed.append((key(pb["owner"], order_b[pb["name"]]), c))
    keyed.sort(key=lambda kc: kc[0])
    return [c for _, c in keyed]


def _part_summary(p: dict[str, Any]) -> str:
    if p["kind"] == "triode":
        value = p["tube"]["type"]
    else:
        value = _f.si(p["value"], {"ohm": "Ω"}.get(p["unit"], p["unit"] or ""))
    return f"{p['kind']} {value} ({' – '.join(p['nodes'])})"


# --------------------------------------------------------------------------- effects


_OP_FIELDS = (("vp_v", "Vp", "V"), ("vk_v", "Vk", "V"), ("ip_a", "Ip", "A"), ("gm_s", "gm", "S"),
              ("rp_ohm", "rp", "ohm"), ("mu", "mu", ""))


def _with_note(c: Change, note: str) -> Change:
    from dataclasses import replace

    return replace(c, note=f"{c.note}; {note}" if c.note else note)


def _feeds(doc: dict[str, Any]) -> dict[str, tuple[str | None, str | None, bool]]:
    """Coupling name → (stage at its near end, stage at its far end, whether it
    is a network), from the report's couplings and parts (ends None in a
    report written before they were recorded)."""
    networks = {p["owner"]["name"] for p in doc["parts"] if p["owner"]["kind"] == "network"}
    return {c["name"]: (c.get("from_stage"), c.get("to_stage"), c["name"] in networks)
            for c in doc.get("couplings", ())}


def _same_feed(la: str | None, lb: str | None, da: dict[str, Any], db: dict[str, Any],
               mapping: Mapping[str, str]) -> bool:
    """Whether a stage fed through coupling ``la`` in A is fed through the same
    coupling, ``lb``, in B: the same network instance, or a capacitor or
    direct link between the same stages (A's stage names mapped to B's)."""
    if la is None or lb is None:
        return la == lb
    ea, eb = _feeds(da).get(la), _feeds(db).get(lb)
    if ea is None or eb is None or ea[0] is None or eb[0] is None:
        return la == lb  # an older report: by name alone
    if ea[2] or eb[2]:
        return la == lb and ea[2] == eb[2]
    return (mapping.get(ea[0] or "", ea[0]), mapping.get(ea[1] or "", ea[1])) == (eb[0], eb[1])


def _stage_effects(a: dict[str, Any], b: dict[str, Any], same_feed, tol_db, tol_pct) -> list[Change]:
    name = b["stage"]
    out = []
    for key, label, unit in _OP_FIELDS:
        out.append(_ratio_change("operating point", name, label, unit, a[key], b[key], tol_pct))
    out.append(_db_change("gain", name, "gain", a["gain_db"], b["gain_db"], tol_db))
    if a["coupling"] is not None or b["coupling"] is not None:
        c = _db_change("coupling", name, "coupling loss", a["coupling_db"], b["coupling_db"], tol_db)
        if not same_feed(a["coupling"], b["coupling"]):
            note = f"fed through {a['coupling'] or 'nothing'} → {b['coupling'] or 'nothing'}"
            c = Change("coupling", name, "coupling loss", "dB", a["coupling_db"], b["coupling_db"],
                       size=APPEAR_SIZE, note=note) if c is None else _with_note(c, note)
        out.append(c)
    out += _port_effects(name, a, b, tol_db)
    out.append(_ratio_change("impedance", name, "Zin", "ohm", _f.mag(a["zin_ohm"]), _f.mag(b["zin_ohm"]), tol_pct))
    out.append(_ratio_change("impedance", name, "Zout", "ohm", _f.mag(a["zout_ohm"]), _f.mag(b["zout_ohm"]),
                             tol_pct))
    return [c for c in out if c is not None]


def _balance_effects(kind: str, subject: str, ba, bb, tol_db) -> list[Change | None]:
    """The balance between two outputs: its size (dB) and its phase (degrees)."""
    return [_db_change(kind, subject, "balance", ba and ba["db"], bb and bb["db"], tol_db),
            _deg_change(kind, subject, "balance phase", ba and ba["phase_deg"], bb and bb["phase_deg"], tol_db)]


def _port_effects(name: str, a: dict[str, Any], b: dict[str, Any], tol_db) -> list[Change | None]:
    """A stage's output ports beyond the main one (whose gain is the stage's
    gain), matched by port name, and the balance between the first two."""
    ports_a = {p["port"]: p for p in (a.get("outputs") or [])[1:]}
    ports_b = {p["port"]: p for p in (b.get("outputs") or [])[1:]}
    out: list[Change | None] = []
    for port in [*ports_a, *(p for p in ports_b if p not in ports_a)]:
        pa, pb = ports_a.get(port), ports_b.get(port)
        out.append(_db_change("gain", name, f"gain to {port}", pa and pa["gain_db"], pb and pb["gain_db"], tol_db))
    return out + _balance_effects("gain", name, a.get("balance"), b.get("balance"), tol_db)


def _chain_output_effects(oa, ob, tol_db) -> list[Change | None]:
    """The chain's outputs beyond the main one (whose gain is the overall
    gain), matched by label, and the balance between the first two."""
    outs_a = {x["label"]: x for x in (oa.get("outputs") or [])[1:]}
    outs_b = {x["label"]: x for x in (ob.get("outputs") or [])[1:]}
    out: list[Change | None] = []
    for label in [*outs_a, *(x for x in outs_b if x not in outs_a)]:
        xa, xb = outs_a.get(label), outs_b.get(label)
        out.append(_db_change("overall", "overall", f"gain to output {label}", xa and xa["gain_db"],
                              xb and xb["gain_db"], tol_db))
    return out + _balance_effects("overall", "overall", oa.get("balance"), ob.get("balance"), tol_db)


def _overall_effects(da, db, tol_db, tol_pct) -> list[Change]:
    oa, ob = da["overall"], db["overall"]
    sa, sb = da["settings"], db["settings"]
    out = [
        _db_change("overall", "overall", "gain", oa["gain_db"], ob["gain_db"], tol_db),
        *_chain_output_effects(oa, ob, tol_db),
        _corner_change("low band edge", oa["f_low_hz"], ob["f_low_hz"], sa["band_low_hz"], sb["band_low_hz"],
                       tol_pct),
        _corner_change("high band edge", oa["f_high_hz"], ob["f_high_hz"], sa["band_high_hz"], sb["band_high_hz"],
                       tol_pct),
        *_shape_effects(oa, ob, tol_db, tol_pct),
        _ratio_change("overall", "overall", "Zin", "ohm", _f.mag(oa["zin_ohm"]), _f.mag(ob["zin_ohm"]), tol_pct),
        _ratio_change("overall", "overall", "Zout", "ohm", _f.mag(oa["zout_ohm"]), _f.mag(ob["zout_ohm"]), tol_pct),
    ]
    return [c for c in out if c is not None]


def _shape_effects(oa, ob, tol_db, tol_pct) -> list[Change | None]:
    """Shelf levels (dB), and the frequency (as a corner: octaves) and level (dB)
    of the most prominent peak and dip of the overall response."""
    out: list[Change | None] = []
    for key, name in (("low_shelf", "low shelf"), ("high_shelf", "high shelf")):
        a, b = oa.get(key), ob.get(key)
        if a is not None or b is not None:
            out.append(_db_change("overall", "overall", name, a and a["gain_db"], b and b["gain_db"], tol_db))
    for key, name in (("peaks", "main peak"), ("dips", "main dip")):
        a, b = _main(oa, key), _main(ob, key)
        if a is None and b is None:
            continue
        if a is None or b is None:
            there = a or b
            assert there is not None  # one side has it: both absent was skipped above
            out.append(Change("overall", "overall", f"{name} level", "dB", None if a is None else a["gain_db"],
                              None if b is None else b["gain_db"],
                              size=APPEAR_SIZE, note=f"{'appeared' if a is None else 'vanished'} at "
                                                     f"{_f.si(there['f_hz'], 'Hz')}"))
            continue
        out.append(_corner_change(f"{name} frequency", a["f_hz"], b["f_hz"], None, None, tol_pct))
        out.append(_db_change("overall", "overall", f"{name} level", a["gain_db"], b["gain_db"], tol_db))
    return out


def _output_coupling_effects(da, db, tol_db) -> list[Change]:
    """Couplings that feed no stage (a tone network into the output): the stage
    rows do not show them, so their transfer is compared here by name."""
    def unfed(doc):
        feeding = {r["coupling"] for r in doc["stages"]}
        return {c["name"]: c for c in doc.get("couplings", ()) if c["name"] not in feeding}

    ca, cb = unfed(da), unfed(db)
    out = [_db_change("coupling", name, "transfer", ca[name]["loss_db"], cb[name]["loss_db"], tol_db)
           for name in ca if name in cb]
    return [c for c in out if c is not None]


def _rail_effects(da, db, tol_pct) -> list[Change]:
    rb = {r["name"]: r for r in db["rails"]}
    out = []
    for r in da["rails"]:
        other = rb.get(r["name"])
        if other is None:
            continue
        out.append(_ratio_change("rail", r["name"], "voltage", "V", r["v"], other["v"], tol_pct))
        out.append(_ratio_change("rail", r["name"], "current", "A", r["i_a"], other["i_a"], tol_pct))
    return [c for c in out if c is not None]


def _curve(doc) -> tuple[np.ndarray, np.ndarray]:
    r = doc["response"]
    f = np.asarray(r["f_hz"], dtype=float)
    m = np.asarray([np.nan if v is None else v for v in r["magnitude_db"]], dtype=float)
    return f, m


def _response_effect(da, db, tol_db) -> Change | None:
    """The largest change of |H(output)| in dB over the band both sweeps cover.

    On identical grids the points are compared directly; otherwise B is read
    on A's grid by linear interpolation against log frequency, inside the
    overlap of the two bands.
    """
    fa, ma = _curve(da)
    fb, mb = _curve(db)
    mb_on_a = on_log_grid(fb, mb, fa)
    d = mb_on_a - ma
    valid = np.isfinite(d)
    if not valid.any():
        return None
    i = int(np.argmax(np.where(valid, np.abs(d), -1.0)))
    if abs(d[i]) <= tol_db:
        return None
    return Change("response", "response", "largest change", "dB", num(ma[i]), num(mb_on_a[i]), num(d[i]),
                  num(d[i]), "dB", num(abs(d[i])), at_hz=num(fa[i]))


def _level_change(subject, quantity, va, vb, tol_db) -> Change | None:
    """A change of a clip level (V), measured in dB."""
    if va is None and vb is None:
        return None
    if va is None or vb is None or va <= 0 or vb <= 0:
        if va == vb:
            return None
        return Change("headroom", subject, quantity, "V", va, vb, size=APPEAR_SIZE,
                      note="appeared" if va is None else "vanished")
    d = db(vb / va)
    if abs(d) <= tol_db:
        return None
    return Change("headroom", subject, quantity, "V", va, vb, num(vb - va), num(d), "dB", num(abs(d)))


def _headroom_effects(da, db, mapping, tol_db) -> list[Change]:
    ha, hb = da.get("headroom"), db.get("headroom")
    if ha is None or hb is None:
        return []
    out = [_level_change("headroom", "first-clip input level", ha["first_clip_input_v"],
                         hb["first_clip_input_v"], tol_db)]
    first_a = mapping.get(ha["first_stage"], ha["first_stage"])
    if first_a != hb["first_stage"]:
        out.append(Change("headroom", "headroom", "first stage to clip", "", ha["first_stage"], hb["first_stage"],
                          size=APPEAR_SIZE))
    rows_b = {s["stage"]: s for s in hb["stages"]}
    for s in ha["stages"]:
        other = rows_b.get(mapping.get(s["stage"], ""))
        if other is not None:
            out.append(_level_change(other["stage"], "clip input level", s["clip_input_v"], other["clip_input_v"],
                                     tol_db))
    return [c for c in out if c is not None]


def _noise_effects(da, db, tol_db) -> list[Change]:
    """Output noise (unweighted and A-weighted, V rms, measured in dB) and the
    largest contributor (by owner name and role)."""
    na, nb = da.get("noise"), db.get("noise")
    if na is None or nb is None:
        return []
    out = []
    for key, quantity in (("output_rms_v", "output noise"), ("output_rms_a_v", "output noise, A-weighted")):
        va, vb = na[key], nb[key]
        if va is None or vb is None or va <= 0 or vb <= 0:
            continue
        d = 20.0 * math.log10(vb / va)
        if abs(d) > tol_db:
            out.append(Change("noise", "noise", quantity, "V", va, vb, num(vb - va), num(d), "dB", num(abs(d))))
    top_a = na["contributors"][0]["label"] if na["contributors"] else None
    top_b = nb["contributors"][0]["label"] if nb["contributors"] else None
    if top_a != top_b:
        out.append(Change("noise", "noise", "largest contributor", "", top_a, top_b, size=APPEAR_SIZE))
    return out


_KEY_UNITS = (("_hz", "Hz"), ("_v", "V"), ("_a", "A"), ("_s", "S"), ("_ohm", "ohm"), ("_w", "W"), ("_f", "F"))


def _unit_of_key(key: str) -> str:
    """The SI unit a document key names by its suffix (``level_v`` → V), or ``""``."""
    for suffix, unit in _KEY_UNITS:
        if key.endswith(suffix):
            return unit
    return ""


def _settings(da, db) -> list[Change]:
    out = []
    for group in ("settings", "solve_options"):
        a, b = da[group], db[group]
        for key in list(a) + [k for k in b if k not in a]:
            va, vb = a.get(key), b.get(key)
            if va != vb:
                out.append(Change("setting", key, group.replace("_", " "), _unit_of_key(key), va, vb,
                                  num(vb - va) if isinstance(va, (int, float)) and isinstance(vb, (int, float))
                                  else None))
    return out


def _sort_effects(effects: list[Change]) -> tuple[Change, ...]:
    rank = {k: i for i, k in enumerate(EFFECT_KINDS)}
    return tuple(sorted(effects, key=lambda c: (-(c.size or 0.0), rank.get(c.kind, 99), c.subject, c.quantity)))


# --------------------------------------------------------------------------- diff


def diff(a, b, *, tol_db: float = 0.05, tol_pct: float = 0.5) -> DiffResult:
    """Compare voicing ``a`` (before) with voicing ``b`` (after).

    Parameters
    ----------
    a, b : chain.analysis.Analysis or Mapping
        Analyses or ``chain-report/1`` documents (JSON reports read back); a
        mix works too.
    tol_db : float
        Smallest change reported for gains, coupling losses, the response
        and the headroom level, dB.
    tol_pct : float
        Smallest change reported for impedances, operating points, rails and
        corner frequencies, percent.

    Returns
    -------
    DiffResult
        Settings, stage and part changes, and the effects beyond the
        tolerances sorted by size (see the module docstring).
    """
    if tol_db < 0 or tol_pct < 0:
        raise ValueError("tolerances must be >= 0")
    da, db = document(a), document(b)
    mapping, stage_changes = _match_stages(da, db)
    order_b = [r["stage"] for r in db["stages"]]
    parts = _parts(da, db, mapping, order_b)

    effects: list[Change] = []
    rows_b = _stage_index(db)
    for r in da["stages"]:
        if r["stage"] in mapping:
            effects += _stage_effects(r, rows_b[mapping[r["stage"]]],
                                      lambda la, lb: _same_feed(la, lb, da, db, mapping), tol_db, tol_pct)
    effects += _overall_effects(da, db, tol_db, tol_pct)
    effects += _output_coupling_effects(da, db, tol_db)
    effects += _rail_effects(da, db, tol_pct)
    effects += _headroom_effects(da, db, mapping, tol_db)
    effects += _noise_effects(da, db, tol_db)
    effects += study_effects(da, db, tol_db, tol_pct)
    resp = _response_effect(da, db, tol_db)
    if resp is not None:
        effects.append(resp)
    stab = _stability_effect(da, db)
    if stab is not None:
        effects.append(stab)
    effects = _explained(effects, parts, da)
    return DiffResult(
        a=_side(da), b=_side(db), tol_db=float(tol_db), tol_pct=float(tol_pct),
        settings=tuple(_settings(da, db)), stages=tuple(stage_changes), parts=tuple(parts),
        effects=_sort_effects(effects),
    )


def _stability_text(doc: dict[str, Any]) -> str | None:
    st = doc.get("stability")
    if not st:
        return None
    if st["stable"]:
        return "stable"
    freqs = ", ".join(_f.si(u["oscillation_hz"], "Hz") if u["oscillation_hz"] else "runs away"
                      for u in st["unstable"])
    return f"UNSTABLE (oscillates at {freqs})"


def _stability_effect(da: dict[str, Any], db: dict[str, Any]) -> Change | None:
    """Stable on one side and not on the other (or oscillating elsewhere): the biggest effect of all."""
    a, b = _stability_text(da), _stability_text(db)
    if a is None or b is None or a == b:
        return None
    return Change("overall", "overall", "stability", "", a, b, size=100.0 * APPEAR_SIZE)


def _sensitivity_key(c: Change) -> str | None:
    """The ``sensitivity`` quantity of the report document that an effect is."""
    if c.kind == "overall" and c.quantity == "gain":
        return "overall gain"
    if c.kind == "corner":
        return {"low band edge": "low corner", "high band edge": "high corner"}.get(c.quantity)
    if c.kind == "operating point" and c.quantity == "Ip":
        return f"{c.subject} plate current"
    return None


def _log_change(c: Change) -> float | None:
    """``Δln y`` of an effect (dB turned into a log ratio), None if not numeric."""
    if not (isinstance(c.old, (int, float)) and isinstance(c.new, (int, float))):
        return None
    if c.unit == "dB":
        return (c.new - c.old) / 20.0 * math.log(10.0)
    if c.old > 0 and c.new > 0:
        return math.log(c.new / c.old)
    return None


def _explained(effects: list[Change], parts: list[Change], da: dict[str, Any]) -> list[Change]:
    """Note on each gain, corner and plate-current effect which changed part
    explains most of it: the largest ``|S·Δln x|`` over the changed parts,
    with ``S`` the normalised sensitivity of side A's report (first order:
    ``Δln y ≈ Σ S·Δln x``; a part added or removed has no ``Δln x`` and is
    left out).  The note is given only when that first-order estimate has
    the sign of the change seen and at least half its size — otherwise the
    value changes do not explain it (a removed part, or a change too large
    for first order)."""
    ranks = {r["quantity"]: {p["part"]: p["s"] for p in r["parts"]} for r in (da.get("sensitivity") or [])}
    steps = {}
    for p in parts:
        if p.quantity == "value" and isinstance(p.old, (int, float)) and isinstance(p.new, (int, float)) \
                and p.old > 0 and p.new > 0:
            steps[p.subject] = math.log(p.new / p.old)
    if not ranks or not steps:
        return effects
    out = []
    for c in effects:
        key = _sensitivity_key(c)
        sens = ranks.get(key) if key else None
        if sens:
            shares = {name: (sens.get(name) or 0.0) * d for name, d in steps.items()}
            total = sum(abs(v) for v in shares.values())
            best = max(shares, key=lambda k: abs(shares[k]))
            seen = _log_change(c)
            predicted = sum(shares.values())
            if seen is not None and total > 0.0 and predicted * seen > 0.0 and abs(predicted) >= 0.5 * abs(seen):
                if len(steps) == 1:
                    c = _with_note(c, f"explained by {best}")
                else:
                    c = _with_note(c, f"mostly {best} ({100.0 * abs(shares[best]) / total:.0f} % by sensitivity)")
        out.append(c)
    return out


