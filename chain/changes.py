"""What a part change moved: compare two voicings of a preamp.

Both sides are brought to one normalised form first — the report document of
:func:`chain.report.report_data` (schema ``chain-report/1``) — so diffing two
:class:`~chain.analysis.Analysis` objects and diffing the two JSON reports
written from them give the same :class:`DiffResult`.

What is compared
----------------
* **settings** (reference frequency, band, points, level, heater, DC solve
  options) — any difference is reported;
* **stages**, matched by name; a stage present on one side only is
  *renamed* when the other side has an unmatched stage at the same place in
  the signal order with the same configuration, else *added* or *removed*;
* **parts** (every circuit part: value, rating, nodes, tube type or model
  parameters), matched by name (a renamed stage's parts follow it) — any
  difference is reported, grouped by what they belong to;
* **effects**, each with old, new and change, reported only beyond the
  tolerance: per stage the operating point (Vp, Vk, Ip, gm, rp, mu), the
  loaded gain, the coupling loss and the input and output impedance; the
  overall gain, the −3 dB corners, the input and output impedance; the
  rails; the headroom (first-clip level); and the largest change of the
  response over the band.

Size of an effect
-----------------
Effects are sorted by a common *size*, biggest first, chosen so that one
unit means about the same across kinds:

* gains, coupling losses, the overall gain, the response and headroom
  levels: ``|Δ dB|`` (reported when above ``tol_db``);
* corner frequencies: ``6 × |Δ octaves|`` — a corner moving one octave
  shifts a first-order skirt by 6 dB at a fixed frequency (reported when
  ``|Δf/f|`` is above ``tol_pct`` percent);
* impedances, operating points and rails: ``|Δ %| / 10`` — 10 % is about
  0.8 dB as a voltage ratio (reported when above ``tol_pct``).

A value that appears or vanishes counts :data:`APPEAR_SIZE`, except a corner
entering or leaving the band, which counts 6 × its distance to the band edge
in octaves (it moved at least that far).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np

from chain.smallsignal.resample import on_log_grid

from chain.report import SAFETY, SCHEMA, load_report, report_data
from chain.report import fmt as _f
from chain.report.data import OWNER_KINDS, num
from chain.report.headroom import first_clip

__all__ = [
    "Side",
    "Change",
    "DiffResult",
    "CompareRow",
    "CompareResult",
    "diff",
    "compare",
    "render_diff",
    "render_compare",
    "document",
    "load_voicing",
    "DIFF_SCHEMA",
    "COMPARE_SCHEMA",
]

#: identifiers of the JSON forms of a diff and a comparison
DIFF_SCHEMA = "chain-diff/1"
COMPARE_SCHEMA = "chain-compare/1"

#: size given to a value that appears or vanishes (not a corner)
APPEAR_SIZE = 10.0

#: effect kinds, in the order used to break ties of size
EFFECT_KINDS = ("overall", "corner", "response", "headroom", "gain", "coupling", "impedance",
                "operating point", "rail")


# --------------------------------------------------------------------------- results


@dataclass(frozen=True, slots=True)
class Side:
    """One voicing: where it came from."""

    path: str
    title: str
    sha256: str


@dataclass(frozen=True, slots=True)
class Change:
    """One difference between two voicings.

    Attributes
    ----------
    kind : str
        ``"setting"``, ``"stage"``, ``"part"`` or an effect kind
        (:data:`EFFECT_KINDS`).
    subject : str
        What changed: a stage (``"V2"``), a part (``"V2.Ck"``), a rail,
        ``"overall"``, ``"response"``, ``"headroom"`` or a setting name.
    quantity : str
        Which figure of the subject (``"gain"``, ``"Ip"``, ``"value"``, …).
    unit : str
        Unit of ``old``, ``new`` and ``delta``: SI symbol (``"V"``, ``"A"``,
        ``"S"``, ``"ohm"``, ``"F"``, ``"H"``, ``"Hz"``), ``"dB"`` or ``""``.
    old, new : float, str or None
        The values on each side (``None``: absent on that side).
    delta : float or None
        ``new − old`` in ``unit`` (None for text values or an absent side).
    relative : float or None
        The change in ``relative_unit``: ``"%"`` (``100·(new/old − 1)``),
        ``"oct"`` (``log2(new/old)``) or ``"dB"``.
    relative_unit : str
    size : float
        Comparable size used for sorting (module docstring).
    owner : str
        For parts: what the part belongs to (``"stage V2"``,
        ``"network volume"``); else ``""``.
    note : str
        ``"added"``, ``"removed"``, ``"renamed from V2"``, ``"entered the band"`` …
    at_hz : float or None
        For a response change: the frequency of the largest change, Hz.
    """

    kind: str
    subject: str
    quantity: str
    unit: str
    old: float | str | None
    new: float | str | None
    delta: float | None = None
    relative: float | None = None
    relative_unit: str = ""
    size: float = 0.0
    owner: str = ""
    note: str = ""
    at_hz: float | None = None


@dataclass(frozen=True, slots=True)
class DiffResult:
    """Everything that differs between voicing ``a`` and voicing ``b``."""

    a: Side
    b: Side
    #: tolerances used: dB for gains, % for ratios and corner frequencies
    tol_db: float
    tol_pct: float
    settings: tuple[Change, ...]
    #: stages added, removed or renamed
    stages: tuple[Change, ...]
    #: part changes, grouped by owner in signal order
    parts: tuple[Change, ...]
    #: effects beyond the tolerance, biggest first
    effects: tuple[Change, ...]

    @property
    def differs(self) -> bool:
        """True when anything at all is reported."""
        return bool(self.settings or self.stages or self.parts or self.effects)

    @property
    def changes(self) -> tuple[Change, ...]:
        """Every change: settings, stages, parts, then effects."""
        return self.settings + self.stages + self.parts + self.effects


# --------------------------------------------------------------------------- inputs


def document(voicing) -> dict[str, Any]:
    """The normalised form of one voicing: its ``chain-report/1`` document.

    Parameters
    ----------
    voicing : chain.analysis.Analysis or Mapping
        An analysis, or a report document (e.g. ``json.loads`` of a JSON report).
    """
    if isinstance(voicing, Mapping):
        if voicing.get("schema") != SCHEMA:
            raise ValueError(f"not a {SCHEMA} document (schema {voicing.get('schema')!r})")
        return dict(voicing)
    from chain.analysis import Analysis

    if isinstance(voicing, Analysis):
        return report_data(voicing)
    raise TypeError(f"expected an Analysis or a {SCHEMA} document, not {type(voicing).__name__}")


def load_voicing(path: str | Path, *, headroom: bool = True):
    """A voicing from a file: a JSON report (suffix ``.json``) is read back
    (:func:`chain.report.load_report`), anything else is analysed as a netlist.

    Returns the report document or the :class:`~chain.analysis.Analysis`.
    """
    if Path(path).suffix.lower() == ".json":
        return load_report(path)
    from chain.analysis import analyze

    return analyze(path, headroom=headroom)


def _side(doc: dict[str, Any]) -> Side:
    n = doc["netlist"]
    return Side(path=n["path"], title=n["title"], sha256=n["sha256"])


# --------------------------------------------------------------------------- helpers


def _pct(old: float, new: float) -> float | None:
    return None if old == 0 else 100.0 * (new / old - 1.0)


def _ratio_change(kind, subject, quantity, unit, old, new, tol_pct) -> Change | None:
    """A change measured in % (impedances, operating points, rails)."""
    if old is None and new is None:
        return None
    if old is None or new is None:
        return Change(kind, subject, quantity, unit, old, new, size=APPEAR_SIZE,
                      note="appeared" if old is None else "vanished")
    if old == new:
        return None
    rel = _pct(old, new)
    if rel is None:
        return Change(kind, subject, quantity, unit, old, new, num(new - old), size=APPEAR_SIZE)
    if abs(rel) <= tol_pct:
        return None
    return Change(kind, subject, quantity, unit, old, new, num(new - old), num(rel), "%", num(abs(rel) / 10.0))


def _db_change(kind, subject, quantity, old, new, tol_db) -> Change | None:
    """A change of a value in dB."""
    if old is None and new is None:
        return None
    if old is None or new is None:
        return Change(kind, subject, quantity, "dB", old, new, size=APPEAR_SIZE,
                      note="appeared" if old is None else "vanished")
    d = new - old
    if abs(d) <= tol_db:
        return None
    return Change(kind, subject, quantity, "dB", old, new, num(d), num(d), "dB", num(abs(d)))


def _corner_change(quantity, old, new, edge_old, edge_new, tol_pct) -> Change | None:
    """A change of a corner frequency (Hz); octaves × 6 as size."""
    if old is None and new is None:
        return None
    if old is None or new is None:
        # the corner left (or entered) the band: at least as far as the band edge
        there = new if old is None else old
        edge = edge_old if old is None else edge_new
        octaves = abs(math.log2(there / edge)) if edge else 0.0
        note = "entered the band" if old is None else "left the band"
        return Change("corner", "overall", quantity, "Hz", old, new, size=num(6.0 * octaves), note=note)
    if abs(new / old - 1.0) * 100.0 <= tol_pct:
        return None
    octaves = math.log2(new / old)
    return Change("corner", "overall", quantity, "Hz", old, new, num(new - old), num(octaves), "oct",
                  num(6.0 * abs(octaves)))


def _stage_index(doc):
    return {r["stage"]: r for r in doc["stages"]}


def _match_stages(da, db) -> tuple[dict[str, str], list[Change]]:
    """Stage name in A → stage name in B, and the stage changes."""
    ra, rb = da["stages"], db["stages"]
    names_a, names_b = [r["stage"] for r in ra], [r["stage"] for r in rb]
    mapping = {n: n for n in names_a if n in names_b}
    only_a = [(i, r) for i, r in enumerate(ra) if r["stage"] not in mapping]
    only_b = {i: r for i, r in enumerate(rb) if r["stage"] not in names_a}
    changes = []
    for i, r in only_a:
        other = only_b.get(i)
        if other is not None and other["kind"] == r["kind"]:
            mapping[r["stage"]] = other["stage"]
            del only_b[i]
            changes.append(Change("stage", other["stage"], "name", "", r["stage"], other["stage"],
                                  note=f"renamed from {r['stage']}"))
        else:
            changes.append(Change("stage", r["stage"], "stage", "", f"{r['kind']}, {r['tube']}", None,
                                  note="removed"))
    for i, r in sorted(only_b.items()):
        changes.append(Change("stage", r["stage"], "stage", "", None, f"{r['kind']}, {r['tube']}",
                              note="added"))
    return mapping, changes


def _renamer(mapping: dict[str, str]):
    """Translate an A-side part or node name into B's names for renamed stages."""
    renamed = {a: b for a, b in mapping.items() if a != b}

    def rename(name: str) -> str:
        head, dot, rest = name.partition(".")
        if head == "couple" and rest:  # couple.<src>-<dst>.C
            pair, dot2, tail = rest.rpartition(".")
            src, dash, dst = pair.partition("-")
            if dash:
                return f"couple.{renamed.get(src, src)}-{renamed.get(dst, dst)}{dot2}{tail}"
        return renamed[head] + dot + rest if head in renamed else name

    return rename


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
    size = APPEAR_SIZE
    if isinstance(old, (int, float)) and isinstance(new, (int, float)):
        delta = num(new - old)
        r = _pct(old, new)
        if r is not None:
            rel, rel_unit, size = num(r), "%", num(abs(r) / 10.0)
    return Change("part", name, quantity, unit, old, new, delta, rel, rel_unit, size, owner)


def _part_changes(pa: dict[str, Any], pb: dict[str, Any], rename) -> list[Change]:
    name, owner = pb["name"], _owner_text(pb["owner"])
    out = []
    if pa["kind"] != pb["kind"]:
        return [Change("part", name, "kind", "", pa["kind"], pb["kind"], owner=owner)]
    if pa["value"] != pb["value"]:
        out.append(_value_change(name, owner, "value", pb["unit"] or "", pa["value"], pb["value"]))
    if pa["rated_v"] != pb["rated_v"]:
        out.append(_value_change(name, owner, "rating", "V", pa["rated_v"], pb["rated_v"]))
    nodes_a = [rename(n) for n in pa["nodes"]]
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


def _parts(da, db, rename, stage_order_b: list[str]) -> list[Change]:
    parts_b = {p["name"]: p for p in db["parts"]}
    seen = set()
    keyed: list[tuple[tuple, Change]] = []

    def key(owner: Mapping[str, str], index: int) -> tuple:
        kind = owner["kind"]
        rank = OWNER_KINDS.index(kind) if kind in OWNER_KINDS else len(OWNER_KINDS)
        place = stage_order_b.index(owner["name"]) if kind == "stage" and owner["name"] in stage_order_b else 0
        return (rank, place, owner["name"], index)

    order_b = {p["name"]: i for i, p in enumerate(db["parts"])}
    for i, pa in enumerate(da["parts"]):
        name = rename(pa["name"])
        pb = parts_b.get(name)
        if pb is None:
            c = Change("part", pa["name"], "part", pa["unit"] or "", _part_summary(pa), None,
                       owner=_owner_text(pa["owner"]), note="removed", size=APPEAR_SIZE)
            keyed.append((key(pa["owner"], len(order_b) + i), c))
            continue
        seen.add(name)
        for c in _part_changes(pa, pb, rename):
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


def _coupling_label(label: str | None, mapping: dict[str, str]) -> str | None:
    """A coupling label of A in B's stage names (``V1->V2`` → ``V1->V9`` for a renamed V2)."""
    if label is None or "->" not in label:
        return label
    src, dst = label.split("->", 1)
    return f"{mapping.get(src, src)}->{mapping.get(dst, dst)}"


def _stage_effects(a: dict[str, Any], b: dict[str, Any], mapping: dict[str, str], tol_db,
                   tol_pct) -> list[Change]:
    name = b["stage"]
    out = []
    for key, label, unit in _OP_FIELDS:
        out.append(_ratio_change("operating point", name, label, unit, a[key], b[key], tol_pct))
    out.append(_db_change("gain", name, "gain", a["gain_db"], b["gain_db"], tol_db))
    if a["coupling"] is not None or b["coupling"] is not None:
        c = _db_change("coupling", name, "coupling loss", a["coupling_db"], b["coupling_db"], tol_db)
        if _coupling_label(a["coupling"], mapping) != b["coupling"]:
            note = f"fed through {a['coupling'] or 'nothing'} → {b['coupling'] or 'nothing'}"
            c = Change("coupling", name, "coupling loss", "dB", a["coupling_db"], b["coupling_db"],
                       size=APPEAR_SIZE, note=note) if c is None else _with_note(c, note)
        out.append(c)
    out.append(_ratio_change("impedance", name, "Zin", "ohm", _f.mag(a["zin_ohm"]), _f.mag(b["zin_ohm"]), tol_pct))
    out.append(_ratio_change("impedance", name, "Zout", "ohm", _f.mag(a["zout_ohm"]), _f.mag(b["zout_ohm"]),
                             tol_pct))
    return [c for c in out if c is not None]


def _overall_effects(da, db, tol_db, tol_pct) -> list[Change]:
    oa, ob = da["overall"], db["overall"]
    sa, sb = da["settings"], db["settings"]
    out = [
        _db_change("overall", "overall", "gain", oa["gain_db"], ob["gain_db"], tol_db),
        _corner_change("low band edge", oa["f_low_hz"], ob["f_low_hz"], sa["band_low_hz"], sb["band_low_hz"],
                       tol_pct),
        _corner_change("high band edge", oa["f_high_hz"], ob["f_high_hz"], sa["band_high_hz"], sb["band_high_hz"],
                       tol_pct),
        *_shape_effects(oa, ob, tol_db, tol_pct),
        _ratio_change("overall", "overall", "Zin", "ohm", _f.mag(oa["zin_ohm"]), _f.mag(ob["zin_ohm"]), tol_pct),
        _ratio_change("overall", "overall", "Zout", "ohm", _f.mag(oa["zout_ohm"]), _f.mag(ob["zout_ohm"]), tol_pct),
    ]
    return [c for c in out if c is not None]


def _main(overall: dict, key: str) -> dict | None:
    """The most prominent peak or dip of a report's overall response, or None
    (also for a report of an older version, which has none listed)."""
    found = overall.get(key) or []
    return max(found, key=lambda e: e["prominence_db"]) if found else None


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
            out.append(Change("overall", "overall", f"{name} level", "dB", a and a["gain_db"], b and b["gain_db"],
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
    d = 20.0 * math.log10(vb / va)
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
    rename = _renamer(mapping)
    order_b = [r["stage"] for r in db["stages"]]
    parts = _parts(da, db, rename, order_b)

    effects: list[Change] = []
    rows_b = _stage_index(db)
    for r in da["stages"]:
        if r["stage"] in mapping:
            effects += _stage_effects(r, rows_b[mapping[r["stage"]]], mapping, tol_db, tol_pct)
    effects += _overall_effects(da, db, tol_db, tol_pct)
    effects += _output_coupling_effects(da, db, tol_db)
    effects += _rail_effects(da, db, tol_pct)
    effects += _headroom_effects(da, db, mapping, tol_db)
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


# --------------------------------------------------------------------------- rendering


_UNIT_SYMBOL = {"ohm": "Ω"}


def _value(v, unit: str, absent: str = "none") -> str:
    if v is None:
        return absent
    if isinstance(v, str):
        return v
    if unit == "dB":
        return _f.db(v)
    if unit == "":
        return _f.plain(v)
    if unit == "V":
        return _f.volts(v)
    if unit == "A":
        return _f.amps(v)
    return _f.si(v, _UNIT_SYMBOL.get(unit, unit))


def _signed(text: str) -> str:
    return text if text.startswith(("-", "+")) else "+" + text


def _change_text(c: Change) -> str:
    if c.kind == "setting":
        return f"{_value(c.old, c.unit)} → {_value(c.new, c.unit)}"
    parts = [f"{_value(c.old, c.unit)} → {_value(c.new, c.unit)}"]
    extra = []
    if c.delta is not None and c.unit not in ("dB", ""):
        extra.append(_signed(_value(c.delta, c.unit)))
    if c.relative is not None:
        if c.relative_unit == "%":
            extra.append(f"{c.relative:+.2f} %")
        elif c.relative_unit == "oct":
            extra.append(f"{c.relative:+.3f} octaves")
        elif c.relative_unit == "dB":
            extra.append(f"{c.relative:+.2f} dB")
    if c.note:
        extra.append(c.note)
    if extra:
        parts.append("(" + ", ".join(extra) + ")")
    return " ".join(parts)


def _label(c: Change) -> str:
    if c.kind == "part":
        q = "" if c.quantity in ("value", "part") else f" {c.quantity}"
        return f"{c.owner}: {c.subject}{q}"
    if c.kind in ("overall", "corner"):
        return f"overall {c.quantity}"
    if c.kind == "response":
        return f"response at {_f.si(c.at_hz, 'Hz')} (largest change)"
    if c.kind == "headroom":
        return f"headroom {c.quantity}" if c.subject == "headroom" else f"{c.subject} {c.quantity}"
    if c.kind == "rail":
        return f"rail {c.subject} {c.quantity}"
    return f"{c.subject} {c.quantity}"


def _change_dict(c: Change) -> dict[str, Any]:
    out = {}
    for f in fields(Change):
        v = getattr(c, f.name)
        out[f.name] = num(v) if isinstance(v, float) else v
    return out


def render_diff(result: DiffResult, *, fmt: str = "text") -> str:
    """The diff as text (one change a line) or JSON (``chain-diff/1``)."""
    if fmt == "json":
        from chain.report.jsonfmt import dumps

        return dumps({
            "schema": DIFF_SCHEMA,
            "a": {"path": result.a.path, "title": result.a.title, "sha256": result.a.sha256},
            "b": {"path": result.b.path, "title": result.b.title, "sha256": result.b.sha256},
            "tolerances": {"db": num(result.tol_db), "pct": num(result.tol_pct)},
            "differs": result.differs,
            "settings": [_change_dict(c) for c in result.settings],
            "stages": [_change_dict(c) for c in result.stages],
            "parts": [_change_dict(c) for c in result.parts],
            "effects": [_change_dict(c) for c in result.effects],
        })
    if fmt != "text":
        raise ValueError(f"unknown diff format {fmt!r}; expected 'text' or 'json'")
    lines = ["chain diff", "==========",
             f"A  {result.a.path}  (sha256 {result.a.sha256[:16]})",
             f"B  {result.b.path}  (sha256 {result.b.sha256[:16]})",
             f"tolerances  {_f.db(result.tol_db)}; {result.tol_pct:g} % for impedances, "
             "operating points, rails and corners",
             SAFETY]

    def block(title: str, changes: Sequence[Change], label=_label) -> None:
        if not changes:
            return
        lines.extend(["", title, "-" * len(title)])
        width = max(32, *(len(label(c)) for c in changes))
        for c in changes:
            lines.append(f"{label(c):<{width}}  {_change_text(c)}".rstrip())

    block("Settings changed", result.settings, lambda c: f"{c.quantity}: {c.subject}")
    block("Stages", result.stages, lambda c: f"stage {c.subject}")
    block("Parts changed (A → B)", result.parts)
    block("Effects, largest first", result.effects)
    lines.append("")
    if result.differs:
        lines.append(f"differs: yes ({len(result.parts)} part change(s), {len(result.effects)} effect(s) "
                     "beyond the tolerance)")
    else:
        lines.append("differs: no (nothing beyond the tolerance)")
    return "\n".join(lines) + "\n"


# --------------------------------------------------------------------------- compare


@dataclass(frozen=True, slots=True)
class CompareRow:
    """One key number across the voicings."""

    subject: str
    quantity: str
    #: unit of the values: "dB", "Hz", "ohm", "A", "V"
    unit: str
    values: tuple[float | None, ...]
    #: the spread is beyond the tolerance (or a value is absent on some side only)
    differs: bool


@dataclass(frozen=True, slots=True)
class CompareResult:
    """Key numbers of several voicings side by side."""

    labels: tuple[str, ...]
    sides: tuple[Side, ...]
    rows: tuple[CompareRow, ...]
    tol_db: float
    tol_pct: float

    @property
    def differs(self) -> bool:
        return any(r.differs for r in self.rows)


def _spread_differs(values: Sequence[float | None], unit: str, tol_db: float, tol_pct: float) -> bool:
    present = [v for v in values if v is not None]
    if not present:
        return False
    if len(present) != len(values):
        return True
    if unit == "dB":
        return max(present) - min(present) > tol_db
    lo, hi = min(present), max(present)
    if lo == hi:
        return False
    if lo <= 0:
        return True
    return 100.0 * (hi / lo - 1.0) > tol_pct


def _labels(docs, labels) -> tuple[str, ...]:
    if labels is not None:
        if len(labels) != len(docs):
            raise ValueError(f"{len(labels)} labels for {len(docs)} voicings")
        return tuple(str(x) for x in labels)
    stems = [Path(d["netlist"]["path"]).stem for d in docs]
    if len(set(stems)) == len(stems):
        return tuple(stems)
    return tuple(d["netlist"]["path"] for d in docs)


def compare(voicings: Sequence, *, labels: Sequence[str] | None = None, tol_db: float = 0.05,
            tol_pct: float = 0.5) -> CompareResult:
    """Tabulate the key numbers of several voicings side by side.

    Rows: overall gain (dB), low and high corner (Hz), input and output
    impedance magnitude (ohm), the first-clip input level (V, when headroom
    was analysed), then per stage (matched by name, in order of first
    appearance) its loaded gain (dB) and plate current (A); per coupling its
    transfer at the reference frequency (dB).  A row *differs*
    when its spread exceeds ``tol_db`` (dB rows) or ``tol_pct`` percent
    (the others), or a value is missing on some voicings only.

    Parameters
    ----------
    voicings : sequence of Analysis or report documents
    labels : sequence of str, optional
        Column names; default: the netlist file names without suffix.
    """
    docs = [document(v) for v in voicings]
    if not docs:
        raise ValueError("compare needs at least one voicing")
    names = _labels(docs, labels)
    rows: list[CompareRow] = []

    def add(subject: str, quantity: str, unit: str, values: list[float | None]) -> None:
        rows.append(CompareRow(subject, quantity, unit, tuple(values),
                               _spread_differs(values, unit, tol_db, tol_pct)))

    ov = [d["overall"] for d in docs]
    add("overall", "gain", "dB", [o["gain_db"] for o in ov])
    add("overall", "low band edge", "Hz", [o["f_low_hz"] for o in ov])
    add("overall", "high band edge", "Hz", [o["f_high_hz"] for o in ov])
    for key, name in (("low_shelf", "low shelf"), ("high_shelf", "high shelf")):
        if any(o.get(key) for o in ov):
            add("overall", name, "dB", [o[key]["gain_db"] if o.get(key) else None for o in ov])
    for key, name in (("peaks", "main peak"), ("dips", "main dip")):
        mains = [_main(o, key) for o in ov]
        if any(mains):
            add("overall", f"{name} frequency", "Hz", [m and m["f_hz"] for m in mains])
            add("overall", f"{name} level", "dB", [m and m["gain_db"] for m in mains])
    add("overall", "Zin", "ohm", [num(_f.mag(o["zin_ohm"])) for o in ov])
    add("overall", "Zout", "ohm", [num(_f.mag(o["zout_ohm"])) for o in ov])
    clips = [first_clip(d.get("headroom")) for d in docs]
    if any(c is not None for c in clips):
        add("headroom", "first-clip input level", "V", [None if c is None else c[1] for c in clips])
    stage_names: list[str] = []
    for d in docs:
        for r in d["stages"]:
            if r["stage"] not in stage_names:
                stage_names.append(r["stage"])
    index = [_stage_index(d) for d in docs]
    for s in stage_names:
        add(s, "gain", "dB", [ix[s]["gain_db"] if s in ix else None for ix in index])
        add(s, "Ip", "A", [ix[s]["ip_a"] if s in ix else None for ix in index])
    coupling_names: list[str] = []
    for d in docs:
        for c in d.get("couplings", ()):
            if c["name"] not in coupling_names:
                coupling_names.append(c["name"])
    by_name = [{c["name"]: c for c in d.get("couplings", ())} for d in docs]
    for name in coupling_names:
        add(name, "transfer", "dB", [ix[name]["loss_db"] if name in ix else None for ix in by_name])
    return CompareResult(labels=names, sides=tuple(_side(d) for d in docs), rows=tuple(rows),
                         tol_db=float(tol_db), tol_pct=float(tol_pct))


def render_compare(result: CompareResult, *, fmt: str = "text") -> str:
    """The comparison as a fixed-width text table, a Markdown table or JSON (``chain-compare/1``)."""
    if fmt == "json":
        from chain.report.jsonfmt import dumps

        return dumps({
            "schema": COMPARE_SCHEMA,
            "voicings": [{"label": lab, "path": s.path, "title": s.title, "sha256": s.sha256}
                         for lab, s in zip(result.labels, result.sides)],
            "tolerances": {"db": num(result.tol_db), "pct": num(result.tol_pct)},
            "differs": result.differs,
            "rows": [{"subject": r.subject, "quantity": r.quantity, "unit": r.unit,
                      "values": [num(v) for v in r.values], "differs": r.differs} for r in result.rows],
        })
    head = ["", *result.labels, ""]
    body = [[f"{r.subject} {r.quantity}",
             *(_value(v, r.unit, "out of band" if "band edge" in r.quantity else "none") for v in r.values),
             "*" if r.differs else ""] for r in result.rows]
    if fmt == "markdown":
        out = ["| quantity | " + " | ".join(result.labels) + " | differs |",
               "| --- | " + " | ".join("---:" for _ in result.labels) + " | --- |"]
        out += ["| " + " | ".join(row[:-1] + ["yes" if row[-1] else ""]) + " |" for row in body]
        return "\n".join(out) + "\n"
    if fmt != "text":
        raise ValueError(f"unknown compare format {fmt!r}; expected 'text', 'markdown' or 'json'")
    widths = [max(len(row[i]) for row in [head, *body]) for i in range(len(head))]
    widths[0] = max(widths[0], 24)

    def line(row):
        cells = [f"{row[0]:<{widths[0]}}"] + [f"{c:>{w}}" for c, w in zip(row[1:-1], widths[1:-1])] + [row[-1]]
        return "  ".join(cells).rstrip()

    lines = ["chain compare", "=============", SAFETY, ""]
    lines += [f"{lab}: {s.path} (sha256 {s.sha256[:16]})" for lab, s in zip(result.labels, result.sides)]
    lines += ["", line(head)]
    lines += [line(row) for row in body]
    lines += ["", f"* differs by more than {_f.db(result.tol_db)} or {result.tol_pct:g} %",
              "differs: " + ("yes" if result.differs else "no")]
    return "\n".join(lines) + "\n"
