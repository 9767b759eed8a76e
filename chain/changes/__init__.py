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
  parameters), matched by name (a renamed stage's parts follow it by owner
  and role, nodes through the parts on both sides) — any
  difference is reported, grouped by what they belong to;
* **effects**, each with old, new and change, reported only beyond the
  tolerance: per stage the operating point (Vp, Vk, Ip, gm, rp, mu), the
  loaded gain, the coupling loss and the input and output impedance, and
  for a stage with two outputs the gain to the second and the balance
  between them (dB and degrees); the overall gain, the gain to each further
  output of the chain and the balance between the first two (dB and
  degrees), the −3 dB corners, the input and output impedance; the
  rails; the headroom (first-clip level); the output noise (unweighted and
  A-weighted, in dB) and its largest contributor; and the largest change of
  the response over the band.

Size of an effect
-----------------
Effects are sorted by a common *size*, biggest first, chosen so that one
unit means about the same across kinds:

* gains, coupling losses, the overall gain, the response, headroom
  levels and output noise: ``|Δ dB|`` (reported when above ``tol_db``);
* corner frequencies: ``6 × |Δ octaves|`` — a corner moving one octave
  shifts a first-order skirt by 6 dB at a fixed frequency (reported when
  ``|Δf/f|`` is above ``tol_pct`` percent);
* impedances, operating points and rails: ``|Δ %| / 10`` — 10 % is about
  0.8 dB as a voltage ratio (reported when above ``tol_pct``);
* the phase of a balance: ``|Δ rad| · 20/ln 10`` — a phase step of θ rad
  is as large as a level step of θ nepers (reported when above the phase
  of that size, :func:`chain.changes.common.tol_deg`).

A value that appears or vanishes counts :data:`APPEAR_SIZE`, except a corner
entering or leaving the band, which counts 6 × its distance to the band edge
in octaves (it moved at least that far).

Rooms
-----
``common`` (result records, reading a voicing, change builders),
``voicing_diff`` (:func:`diff`), ``voicing_compare`` (:func:`compare`) and
``render`` (text, Markdown and JSON of either; computes nothing).
"""

from __future__ import annotations

from chain.changes.common import (
    COMPARE_SCHEMA,
    DIFF_SCHEMA,
    Change,
    CompareResult,
    CompareRow,
    DiffResult,
    Side,
    document,
    load_voicing,
)
from chain.changes.render import render_compare, render_diff
from chain.changes.voicing_compare import compare
from chain.changes.voicing_diff import diff

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
