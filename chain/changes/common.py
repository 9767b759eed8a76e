"""What both ways of comparing voicings share: the result records, reading
a voicing into its report document, and the small change builders."""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping

from chain.report import SCHEMA, load_report, report_data
from chain.report.values import num

#: identifiers of the JSON forms of a diff and a comparison
DIFF_SCHEMA = "chain-diff/1"
COMPARE_SCHEMA = "chain-compare/1"

#: size given to a value that appears or vanishes (not a corner)
APPEAR_SIZE = 10.0

#: effect kinds, in the order used to break ties of size
EFFECT_KINDS = ("overall", "corner", "response", "headroom", "noise", "study", "gain", "coupling", "impedance",
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
        ``"S"``, ``"ohm"``, ``"F"``, ``"H"``, ``"Hz"``), ``"dB"``, ``"deg"``
        (a phase) or ``""``.
    old, new : float, str or None
        The values on each side (``None``: absent on that side).
    delta : float or None
        ``new − old`` in ``unit`` (None for text values or an absent side).
    relative : float or None
        The change in ``relative_unit``: ``"%"`` (``100·(new/old − 1)``),
        ``"oct"`` (``log2(new/old)``) or ``"dB"``.
    relative_unit : str
    size : float or None
        Comparable size used for sorting (module docstring); None only when
        it is not finite (sorted as 0).
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
    size: float | None = 0.0
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


def tol_deg(tol_db: float) -> float:
    """The phase tolerance that matches ``tol_db``: the log of a complex ratio
    is ``ln|r| + j·arg r``, so a phase step of θ rad is as large as a level
    step of θ nepers (``20/ln 10`` dB)."""
    return math.degrees(tol_db * math.log(10.0) / 20.0)


def _deg_change(kind, subject, quantity, old, new, tol_db) -> Change | None:
    """A change of a phase in degrees (the step wrapped to (−180°, 180°]);
    reported beyond :func:`tol_deg`, sized as the dB step of the same size."""
    if old is None and new is None:
        return None
    if old is None or new is None:
        return Change(kind, subject, quantity, "deg", old, new, size=APPEAR_SIZE,
                      note="appeared" if old is None else "vanished")
    d = -((old - new + 180.0) % 360.0 - 180.0)
    if abs(d) <= tol_deg(tol_db):
        return None
    return Change(kind, subject, quantity, "deg", old, new, num(d), size=num(abs(math.radians(d)) * 20.0
                                                                             / math.log(10.0)))


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


def _slot(part: Mapping[str, Any], owner_name: str) -> tuple:
    """Where a part sits, names aside: owner kind and name, role, part kind."""
    return (part["owner"]["kind"], owner_name, part.get("role"), part["kind"])


def _node_map(da, db, match: Mapping[str, str]) -> dict[str, str]:
    """A-side node → B-side node, read from the parts matched on both sides.

    Each matched pair of parts votes, terminal by terminal, for its A node
    being its B node; a node goes where most of its parts' terminals went
    (ties: to the node of the same name, else the first voted).  A part
    moved to another node is outvoted by the parts that stayed, so it shows
    as moved.
    """
    nodes_b = {p["name"]: p["nodes"] for p in db["parts"]}
    votes: dict[str, dict[str, int]] = {}
    for pa in da["parts"]:
        name_b = match.get(pa["name"])
        if name_b is None:
            continue
        for na, nb in zip(pa["nodes"], nodes_b[name_b]):
            tally = votes.setdefault(na, {})
            tally[nb] = tally.get(nb, 0) + 1
    out = {}
    for na, tally in votes.items():
        top = max(tally.values())
        out[na] = na if tally.get(na) == top else next(nb for nb, v in tally.items() if v == top)
    return out


def _part_match(da, db, mapping: Mapping[str, str]) -> tuple[dict[str, str], dict[str, str]]:
    """A part name → B part name, and A node → B node (:func:`_node_map`).

    A part of a stage renamed from A to B is matched by its place in the
    stage (owner, role, part kind, and the order among parts of the same
    role); other parts by name; a part still unmatched (a coupling capacitor
    between renamed stages) by owner kind, role, part kind and its nodes
    carried over to B.  Names are never taken apart.
    """
    renamed = {a: b for a, b in mapping.items() if a != b}
    names_b = {p["name"] for p in db["parts"]}
    slots_b: dict[tuple, list[str]] = {}
    for p in db["parts"]:
        slots_b.setdefault(_slot(p, p["owner"]["name"]), []).append(p["name"])
    match: dict[str, str] = {}
    count: dict[tuple, int] = {}
    left = []
    for p in da["parts"]:
        owner = p["owner"]
        if owner["kind"] == "stage" and owner["name"] in renamed:
            key = _slot(p, renamed[owner["name"]])
            i = count[key] = count.get(key, -1) + 1
            candidates = slots_b.get(key, [])
            if i < len(candidates):
                match[p["name"]] = candidates[i]
        elif p["name"] in names_b:
            match[p["name"]] = p["name"]
        else:
            left.append(p)
    nodes = _node_map(da, db, match)
    taken = set(match.values())
    placed = {((p["owner"]["kind"], p.get("role"), p["kind"]), tuple(p["nodes"])): p["name"]
              for p in db["parts"] if p["name"] not in taken}
    for p in left:
        there = placed.get(((p["owner"]["kind"], p.get("role"), p["kind"]),
                            tuple(nodes.get(n, n) for n in p["nodes"])))
        if there is not None and there not in taken:
            match[p["name"]] = there
            taken.add(there)
    return match, nodes


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


def _main(overall: dict, key: str) -> dict | None:
    """The most prominent peak or dip of a report's overall response, or None
    (also for a report of an older version, which has none listed)."""
    found = overall.get(key) or []
    return max(found, key=lambda e: e["prominence_db"]) if found else None
