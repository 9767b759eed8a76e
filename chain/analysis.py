"""Run the analysis steps in order and return one frozen :class:`Analysis`.

    netlist → Design → Circuit → DC solve (+ diagnostics) → linearise →
    response over the band → stage table and overall figures → noise → headroom
    → every study of :mod:`chain.studies`

Nothing here formats or prints; :meth:`Analysis.table` and
:meth:`Analysis.plot` are thin delegates to the report and plot layers.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field, replace
from pathlib import Path
from types import MappingProxyType
from typing import Any, Mapping

import numpy as np

from chain.about import __version__
from chain.circuit import Circuit
from chain.dc import DcSolution, SolveOptions, solve
from chain.errors import ChainError, Diagnostic
from chain.headroom import Headroom
from chain.smallsignal.sensitivity import Ranking
from chain.smallsignal.stability import Stability
from chain.language.design import Design
from chain.smallsignal import (
    CouplingRow,
    OverallResult,
    Response,
    StageRow,
    coupling_table,
    linearize,
    overall,
    reference_response,
    response,
    stage_table,
)
from chain.smallsignal.mna import check_size
from chain.smallsignal.noise import NoiseResult
from chain.smallsignal.noise import noise as run_noise
from chain.smallsignal.table import no_signal_warnings
from chain.studies import Context
from chain.studies import studies as all_studies

__all__ = ["Analysis", "analyze", "analyze_design", "sweep_frequencies", "ac_loads"]


@dataclass(frozen=True, slots=True, eq=False)
class Analysis:
    """Everything `chain` knows about one preamp, in SI units."""

    design: Design
    circuit: Circuit
    dc: DcSolution
    #: the frequency response over the design's band
    freq: Response
    #: per-stage figures at the reference frequency, in signal order
    stages: tuple[StageRow, ...]
    #: every coupling's transfer at the reference frequency, in netlist order
    couplings: tuple[CouplingRow, ...]
    overall: OverallResult
    #: large-signal results, or None when skipped
    headroom: Headroom | None
    #: language warnings and operating-point diagnostics
    diagnostics: tuple[Diagnostic, ...]
    #: per stage, the AC load its first triode works into at the reference frequency, ohm
    #: (complex; see :func:`ac_loads`): the slope of the AC load line
    ac_load_ohm: Mapping[str, complex]
    #: SHA-256 of the netlist text (hex)
    netlist_sha256: str
    options: SolveOptions
    version: str = __version__
    #: poles, zeros, unstable poles and feedback loop gains, or None when not computed
    stability: Stability | None = None
    #: sensitivity rankings of the overall gain, the corners and each stage's plate current
    sensitivity: tuple[Ranking, ...] = ()
    #: output noise (:class:`chain.smallsignal.noise.NoiseResult`), or None when skipped
    noise: NoiseResult | None = None
    #: study key → its result (:mod:`chain.studies`; a study with nothing to say gives None)
    studies: Mapping[str, Any] = field(default_factory=lambda: MappingProxyType({}))

    @property
    def unstable(self) -> bool:
        """True when the linearised chain has a pole in the right half-plane."""
        return self.stability is not None and not self.stability.stable

    def response(self) -> Response:
        """The frequency response (see :class:`chain.smallsignal.Response`)."""
        return self.freq

    def unstable_note(self) -> str:
        """One plain sentence for a plot of an unstable circuit ("" when stable)."""
        if not self.unstable or self.stability is None:
            return ""
        from chain.units import format_si

        freqs = ", ".join(format_si(p.oscillation_hz, "Hz") if p.oscillation_hz else "0 Hz (runs away)"
                          for p in self.stability.unstable)
        return (f"UNSTABLE: oscillates at about {freqs}.\n"
                "This small-signal response is not what the circuit will do.")


def sweep_frequencies(design: Design) -> np.ndarray:
    """The log-spaced analysis frequencies of ``design``'s settings, Hz,
    with the reference frequency included exactly."""
    s = design.settings
    f = np.sort(np.append(np.geomspace(s.band_low_hz, s.band_high_hz, s.points), s.reference_hz))
    # np.unique would do, but its first call imports numpy.ma (12 ms of start-up)
    return f[np.r_[True, f[1:] != f[:-1]]]


def ac_loads(ss, f_hz: float) -> dict[str, complex]:
    """The AC load each stage's (first) triode works into at ``f_hz``, ohm.

    With the source EMF zeroed and the triode's own small-signal elements
    (``rp``, ``gm``, interelectrode capacitances) taken out, a unit current
    is drawn out of the plate node and returned into the cathode node — the
    path of the tube's own signal current — and::

        Z_ac = −Δv_pk / Δi_p = v(cathode) − v(plate)

    For a common-cathode stage with a bypassed cathode this is the plate
    load in parallel with what follows (coupling capacitor, next grid leak,
    tone network, Miller capacitance …); an unbypassed cathode resistor adds
    in series, and for a cathode follower it is the cathode load in
    parallel with what follows.  The AC load line through the operating
    point has the slope ``−1/Re(Z_ac)`` in the (Vpk, Ip) plane (load-line
    construction: e.g. Langford-Smith, *Radiotron Designer's Handbook*,
    4th ed., ch. 12 — from memory of that source).

    The systems of all stages differ from the whole circuit's only in the
    removed elements, so they are solved together
    (:func:`chain.smallsignal.mna.solve_each_without`: one banded
    factorisation for all of them when the circuit reorders to a narrow band).
    """
    import numpy as np

    from chain.circuit import GROUND, TRIODE_ELEMENT_ROLES
    from chain.smallsignal.mna import assemble, solve_each_without

    circuit = ss.circuit
    mna = assemble(ss)
    out: dict[str, complex] = {}
    removals, rhs, ends = [], [], []
    by_owner: dict = {}
    for e in mna.stamps:
        if e.role in TRIODE_ELEMENT_ROLES:
            by_owner.setdefault(e.owner, []).append(e)
    for st in circuit.stages:
        triode = circuit.triode(st.triode)
        # this triode's own small-signal elements: its stage's, touching only its pins
        pins = {mna.index.get(ss.node_of.get(n, GROUND), -1) for n in (triode.plate, triode.grid, triode.cathode)}
        own = [e for e in by_owner.get(triode.owner, ())
               if {e.a, e.b} <= pins and (e.kind != "G" or {e.cp, e.cn} <= pins)]
        p = mna.index.get(ss.node_of.get(triode.plate, GROUND), -1)
        k = mna.index.get(ss.node_of.get(triode.cathode, GROUND), -1)
        out[st.name] = 0j
        if p == k:
            continue
        b = np.zeros(mna.size)
        if p >= 0:
            b[p] = -1.0
        if k >= 0:
            b[k] = 1.0
        removals.append(own)
        rhs.append(b)
        ends.append((st.name, p, k))
    if removals:
        x = solve_each_without(mna, 2j * np.pi * f_hz, removals, np.array(rhs))
        for row, (name, p, k) in zip(x, ends):
            vp = row[p] if p >= 0 else 0.0
            vk = row[k] if k >= 0 else 0.0
            out[name] = complex(vk - vp)
    return out


def analyze_design(design: Design, circuit: Circuit, warnings: tuple[Diagnostic, ...] = (), *,
                   headroom: bool = True, options: SolveOptions = SolveOptions(),
                   level_v: float | None = None, noise: bool = True, studies: bool = True) -> Analysis:
    """Analyse an already built design (see :func:`analyze`)."""
    if level_v is not None:
        design = replace(design, settings=replace(design.settings, level_v=level_v))
    try:
        return _analyze_steps(design, circuit, warnings, headroom=headroom, options=options, noise=noise,
                              studies=studies)
    except ChainError as exc:
        # give every message about a stage or part the netlist line it came from
        exc.diagnostics = locate(exc.diagnostics, circuit, design)
        raise


def locate(diagnostics, circuit: Circuit, design: Design) -> tuple[Diagnostic, ...]:
    """Diagnostics about a stage or part (``subject``) without a place get the
    span of the netlist line that made it (from ``circuit.origins``); a supply
    or rail named as subject gets its own line."""
    out = []
    for d in diagnostics:
        span = None
        if d.subject and d.span is None:
            span = next((circuit.origins[k] for k in (d.subject, f"supply.{d.subject}", f"rail.{d.subject}.R")
                         if k in circuit.origins), None)
        if span is not None and span.line > 0:
            if not span.text and span.line <= len(design.lines):
                span = replace(span, text=design.lines[span.line - 1])
            d = replace(d, span=span)
        out.append(d)
    return tuple(out)


def _analyze_steps(design: Design, circuit: Circuit, warnings, *, headroom: bool,
                   options: SolveOptions, noise: bool = True, studies: bool = True) -> Analysis:
    check_size(circuit, len(sweep_frequencies(design)))
    dc = solve(circuit, options)
    ss = linearize(circuit, dc)
    # per-stage impedances are tabulated at the reference frequency only
    freq = response(ss, sweep_frequencies(design), stage_impedances=False)
    s = design.settings
    at = reference_response(freq, s.reference_hz)
    rows = stage_table(circuit, dc, freq, s.reference_hz, s.level_v, at=at)
    links = coupling_table(circuit, freq, s.reference_hz, at=at)
    total = overall(freq, s.reference_hz, at=at)
    from chain.smallsignal.stability import stability as check_stability

    dynamics = check_stability(ss, ref_hz=s.reference_hz, band_hz=(s.band_low_hz, s.band_high_hz))
    from chain.smallsignal.sensitivity import rankings

    ranks = rankings(ss, dc, ref_hz=s.reference_hz, f_low_hz=total.f_low_hz, f_high_hz=total.f_high_hz)
    hiss = None
    if noise:
        hiss = run_noise(ss, reference_hz=s.reference_hz, level_v=s.level_v)
    large = None
    if headroom:
        from chain.headroom import headroom as run_headroom

        large = run_headroom(circuit, dc, level_v=s.level_v)
    found = run_studies(Context(design, circuit, dc, ss, freq, rows, total)) if studies else {}
    if design.lines:
        text = "\n".join(design.lines)
    else:  # made or changed in Python: hash its canonical text
        from chain.language.writer import format_design

        text = format_design(design)
    return Analysis(
        design=design, circuit=circuit, dc=dc, freq=freq, stages=rows, couplings=links, overall=total,
        headroom=large,
        diagnostics=tuple(warnings) + locate(dc.diagnostics, circuit, design)
        + locate(no_signal_warnings(rows, s.reference_hz, s.level_v), circuit, design)
        + locate(dynamics.diagnostics, circuit, design),
        ac_load_ohm=MappingProxyType(ac_loads(ss, s.reference_hz)),
        netlist_sha256=hashlib.sha256(text.encode("utf-8")).hexdigest(),
        options=options,
        stability=dynamics, noise=hiss,
        sensitivity=ranks,
        studies=MappingProxyType(found),
    )


def run_studies(ctx: Context) -> dict[str, Any]:
    """Every study of :mod:`chain.studies` on the core results, by key."""
    return {study.key: study.run(ctx) for study in all_studies()}


def analyze(source: str | Path | Design, *, headroom: bool = True,
            options: SolveOptions = SolveOptions(), level_v: float | None = None,
            noise: bool = True, studies: bool = True) -> Analysis:
    """Analyse a netlist.

    Parameters
    ----------
    source
        A path to a netlist file, or a :class:`~chain.language.design.Design`.
    headroom
        Also run the large-signal headroom analysis (slower).
    options
        Numeric settings of the DC solve.
    level_v
        Input level, volts peak, in place of the netlist's ``set level``.
    noise
        Also compute the output noise (one more frequency sweep; see
        :mod:`chain.smallsignal.noise`).
    studies
        Also run every study of :mod:`chain.studies` (supply ripple, …).

    Raises
    ------
    chain.errors.LanguageError
        bad netlist (located diagnostics).
    chain.errors.AnalysisError
        the DC solve did not converge.
    """
    from chain.build import build, load
    from chain.language.validate import check

    if isinstance(source, Design):
        design, warnings = source, check(source)
        circuit = build(design)
    else:
        design, circuit, warnings = load(source)
    return analyze_design(design, circuit, warnings, headroom=headroom, options=options, level_v=level_v,
                          noise=noise, studies=studies)
