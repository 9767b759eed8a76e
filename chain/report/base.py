"""The method set every report renderer shares, and readings common to them.

A renderer turns a report document (:func:`chain.report.data.report_data`)
into text.  It has one method per section, named as in :data:`SECTIONS`;
:meth:`Renderer.render` calls them in that order (or the chosen subset) and
joins their output.  Renderers read the document only: no physics here.
"""

from __future__ import annotations

import math
from typing import Any, Mapping, Sequence

import numpy as np

from chain.report.sections import Section, sections
from chain.smallsignal.resample import on_log_grid

__all__ = ["SECTIONS", "Renderer", "check_sections", "report_order", "study_sections", "clipped_stages", "spot_frequencies", "spot_response",
           "pd_rating", "triode_tubes", "corner_reference", "past_clip", "shape_lines"]

#: every section, in report order: what a technician reads first (the stage
#: table, the whole chain, the response, headroom, noise, diagnostics), then the
#: details, then the analysis settings and the parts list
SECTIONS = ("header", "safety", "stages", "overall", "response", "stability", "sensitivity", "headroom", "noise",
            "diagnostics", "stage_details", "rails", "capacitors", "settings", "parts")


def study_sections() -> dict[str, Section]:
    """Key → report section of every study (:mod:`chain.report.sections`)."""
    return {s.key: s for s in sections()}


def report_order() -> tuple[str, ...]:
    """Every section name in report order: :data:`SECTIONS` with each study's
    section placed after the built-in section it names (``Section.after``)."""
    extra = study_sections()
    out: list[str] = []
    for name in SECTIONS:
        out.append(name)
        out += [k for k, s in extra.items() if s.after == name]
    out += [k for k, s in extra.items() if s.after not in SECTIONS]
    return tuple(out)


def check_sections(sections: Sequence[str] | None) -> tuple[str, ...]:
    """The sections to render, in report order (:func:`report_order`); ``None`` means all.

    Raises
    ------
    ValueError
        an unknown section name (the message lists the known ones).
    """
    order = report_order()
    if sections is None:
        return order
    if isinstance(sections, str):
        raise TypeError("sections must be a sequence of names, e.g. ('stages',), not a string")
    unknown = [s for s in sections if s not in order]
    if unknown:
        raise ValueError(f"unknown report section(s) {unknown}; known: {', '.join(order)}")
    return tuple(s for s in order if s in sections)


class Renderer:
    """Base of the text and Markdown renderers: one method per section,
    each returning a list of lines (an empty list renders nothing)."""

    #: text between two sections
    separator = "\n"

    def __init__(self, *, heading: str = "chain report"):
        #: the first words of the title line ("chain report", "chain headroom")
        self.heading = heading

    def render(self, data: dict[str, Any], sections: Sequence[str] | None = None) -> str:
        """The chosen ``sections`` of the report document ``data``, ending in a newline."""
        blocks = []
        extra = study_sections()
        for name in check_sections(sections):
            if name in extra:
                part = data.get(name)
                lines = [] if part is None else self.study(extra[name], part)
            else:
                lines = getattr(self, name)(data)
            if lines:
                blocks.append("\n".join(lines))
        return self.separator.join(blocks) + "\n"

    def study(self, section: Section, part: Mapping[str, Any]) -> list[str]:
        """A study's section (:mod:`chain.report.sections`): its title, facts
        and tables in this renderer's style."""
        raise NotImplementedError

    # the section methods, overridden by each renderer
    def header(self, data: dict[str, Any]) -> list[str]:
        raise NotImplementedError

    def safety(self, data: dict[str, Any]) -> list[str]:
        raise NotImplementedError

    def settings(self, data: dict[str, Any]) -> list[str]:
        raise NotImplementedError

    def stages(self, data: dict[str, Any]) -> list[str]:
        raise NotImplementedError

    def stage_details(self, data: dict[str, Any]) -> list[str]:
        raise NotImplementedError

    def overall(self, data: dict[str, Any]) -> list[str]:
        raise NotImplementedError

    def response(self, data: dict[str, Any]) -> list[str]:
        raise NotImplementedError

    def noise(self, data: dict[str, Any]) -> list[str]:
        raise NotImplementedError

    def rails(self, data: dict[str, Any]) -> list[str]:
        raise NotImplementedError

    def capacitors(self, data: dict[str, Any]) -> list[str]:
        raise NotImplementedError

    def headroom(self, data: dict[str, Any]) -> list[str]:
        raise NotImplementedError

    def stability(self, data: dict[str, Any]) -> list[str]:
        return []

    def sensitivity(self, data: dict[str, Any]) -> list[str]:
        return []

    def diagnostics(self, data: dict[str, Any]) -> list[str]:
        raise NotImplementedError

    def parts(self, data: dict[str, Any]) -> list[str]:
        raise NotImplementedError


# --------------------------------------------------------------------------- shared readings


def spot_frequencies(low_hz: float, high_hz: float) -> list[float]:
    """The 1-2-5 series frequencies (Hz) inside ``[low_hz, high_hz]``."""
    out = []
    for decade in range(math.floor(math.log10(low_hz)) - 1, math.ceil(math.log10(high_hz)) + 1):
        for m in (1, 2, 5):
            f = float(f"{m}e{decade}")
            if low_hz * (1 - 1e-12) <= f <= high_hz * (1 + 1e-12):
                out.append(f)
    return out


def spot_response(data: dict[str, Any]) -> list[tuple[float, float | None, float | None]]:
    """``(f_hz, magnitude_db, phase_deg)`` of the output at the 1-2-5 frequencies of the sweep.

    Read from the sweep grid by linear interpolation against log frequency
    (the phase unwrapped first); on a log grid of a few hundred points per
    band this is within a few thousandths of a dB of the exact response.
    """
    r = data["response"]
    f = np.asarray(r["f_hz"], dtype=float)
    m = np.asarray([np.nan if v is None else v for v in r["magnitude_db"]], dtype=float)
    p = np.asarray([np.nan if v is None else v for v in r["phase_deg"]], dtype=float)
    ok = np.isfinite(m) & np.isfinite(p)
    if f.size < 2 or ok.sum() < 2:
        return []
    spots = spot_frequencies(float(f[0]), float(f[-1]))
    unwrapped = np.degrees(np.unwrap(np.radians(p[ok])))
    mags = on_log_grid(f[ok], m[ok], spots)
    phases = on_log_grid(f[ok], unwrapped, spots)
    out: list[tuple[float, float | None, float | None]] = []
    for fs, mdb, ph in zip(spots, mags, phases):
        mdb, ph = float(mdb), float(ph)
        ph = (ph + 180.0) % 360.0 - 180.0
        if ph == -180.0:
            ph = 180.0
        out.append((fs, mdb, ph))
    return out


def triode_tubes(data: dict[str, Any]) -> dict[str, dict[str, Any]]:
    """Triode name → its ``tube`` record from the parts list."""
    return {p["name"]: p["tube"] for p in data["parts"] if p["kind"] == "triode"}


def pd_rating(data: dict[str, Any], triode: str) -> float | None:
    """The plate-dissipation rating of ``triode`` (W), or None."""
    tube = triode_tubes(data).get(triode)
    return None if tube is None else tube["pd_max_w"]


def corner_reference(data: dict[str, Any]) -> str:
    """What the −3 dB corners are relative to, in words."""
    import chain.report.fmt as fmt

    ref = data["overall"]["corner_reference"]
    level = f"{fmt.db(ref['gain_db'])} at {fmt.si(ref['f_hz'], 'Hz')}"
    if ref["basis"] == "reference":
        return (f"the gain at the reference frequency, {level}; the outermost points 3.01 dB (half power) "
                f"below it")
    return f"the largest gain on the sweep, {level}; the outermost points 3.01 dB (half power) below it"


def clipped_stages(data: dict[str, Any]) -> set[str]:
    """Stages whose headroom margin at the stated level is negative (none without headroom)."""
    h = data.get("headroom")
    if not h:
        return set()
    return {row["stage"] for row in h.get("stages", ()) if row.get("margin_db") is not None and row["margin_db"] < 0}


def past_clip(data: dict[str, Any]) -> dict[str, tuple[float | None, float | None, str, str]]:
    """Stage → ``(input clip level, output clip level, stage clipping before the
    input, stage clipping before the output)`` for the
    stages whose small-signal levels at the stated input level lie past
    clipping (levels scale linearly with the source, clipping does not).

    A stage's output is past clipping when the stated level exceeds its own
    clip input level, or when its input is.  Its input is past clipping when
    the output of the stage before it is.  The clip level of an output is the
    larger of the stage's output swings where its two half-waves begin to
    clip (from the headroom sweep), or — when the stage itself does not clip
    but its input does — its input's clip level times its gain; that of an
    input is the previous output's clip level times the coupling's transfer.
    None where that node is not past clipping.  Empty without headroom.
    """
    h = data.get("headroom")
    if not h:
        return {}
    level = h["level_v"]
    rows = {row["stage"]: row for row in h.get("stages", ())}
    out: dict[str, tuple[float | None, float | None, str, str]] = {}
    prev: tuple[float, str] | None = None  # clip level at the previous stage's output, and whose clipping
    for r in data["stages"]:
        row = rows.get(r["stage"], {})
        x_in, by_in = None, ""
        if prev is not None:
            by_in = prev[1]
            ratio = r.get("coupling_ratio")
            x_in = prev[0] * (1.0 if ratio is None else math.hypot(ratio["re"], ratio["im"]))
        clip = row.get("clip_input_v")
        if clip is not None and level > clip:
            swings = [abs(v) for v in (row.get("swing_pos_v"), row.get("swing_neg_v")) if v is not None]
            prev = (max(swings), r["stage"]) if swings else None
        elif x_in is not None and prev is not None:
            prev = (x_in * math.hypot(r["gain"]["re"], r["gain"]["im"]), prev[1])
        else:
            prev = None
        if prev is not None:
            out[r["stage"]] = (x_in, prev[0], by_in, prev[1])
    return out


def shape_lines(data: dict[str, Any]) -> list[tuple[str, str]]:
    """``(label, value)`` facts on the shape of the overall response: every
    peak and dip, then the shelves (see :mod:`chain.smallsignal.shape`).
    Missing keys (a report of an older version read back) give nothing."""
    import chain.report.fmt as fmt

    o = data["overall"]
    ref = fmt.si(o["f_ref_hz"], "Hz")
    out = []
    marks = [(e["f_hz"], "peak", e) for e in o.get("peaks") or []] + [(e["f_hz"], "dip", e) for e in o.get("dips") or []]
    for _, kind, e in sorted(marks, key=lambda m: m[0]):
        out.append((f"{kind} at {fmt.si(e['f_hz'], 'Hz')}",
                    f"{fmt.db(e['gain_db'])} ({_signed_db(e['relative_db'])} re {ref}, stands out "
                    f"{fmt.db(e['prominence_db'])})"))
    for key, name in (("low_shelf", "low shelf"), ("high_shelf", "high shelf")):
        shelf = o.get(key)
        if shelf is not None:
            region = f"{fmt.si(shelf['f_low_hz'], 'Hz')}–{fmt.si(shelf['f_high_hz'], 'Hz')}"
            out.append((f"{name} ({region})", f"{fmt.db(shelf['gain_db'])} ({_signed_db(shelf['relative_db'])} "
                                              f"re {ref})"))
    return out


def _signed_db(x: float | None) -> str:
    import chain.report.fmt as fmt

    text = fmt.db(x)
    return text if text[:1] in ("-", "—") or x is None else "+" + text


def port_past_clip(data: dict[str, Any], r: dict[str, Any], port: dict[str, Any]) -> float | None:
    """The clip level of a further output port of stage row ``r`` (a phase
    inverter's second output), or None when it is not past clipping; as
    :func:`past_clip` for the main output: the port's own swing where the
    stage clips when the stage itself clips, else the clip level at the
    stage input times the port's gain."""
    past = past_clip(data).get(r["stage"])
    if past is None:
        return None
    x_in = past[0]
    h = data.get("headroom") or {}
    row: dict[str, Any] = next((x for x in h.get("stages", ()) if x["stage"] == r["stage"]), {})
    clip = row.get("clip_input_v")
    if clip is not None and h["level_v"] > clip:
        ports = {o["port"]: o for o in row.get("outputs", ())}
        o = ports.get(port["port"])
        if o is not None:
            swings = [abs(v) for v in (o["swing_pos_v"], o["swing_neg_v"]) if v is not None]
            return max(swings) if swings else None
    if x_in is None:
        return None
    return x_in * math.hypot(port["gain"]["re"], port["gain"]["im"])
