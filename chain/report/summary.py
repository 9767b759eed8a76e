"""The short summary printed by ``chain check``."""

from __future__ import annotations

from chain.circuit import Circuit, Resistor
from chain.language.design import Design
from chain.report import fmt
from chain.units import format_si


def check_summary(design: Design, circuit: Circuit) -> str:
    """Stages in signal order, networks, rails, input and output: one fact a line."""
    lines = [f"{design.path}: ok" + (f" — {design.title}" if design.title else "")]
    order = " -> ".join(f"{s.name} ({s.kind}, {s.tube})" for s in circuit.stages)
    lines.append(f"  stages:   {order}")
    for n in design.networks:
        ports = f" ({n.ports[0]} -> {n.ports[1]})" if n.ports else " (placed as written)"
        lines.append(f"  network:  {n.name}{ports}, {len(n.parts)} parts")
    for s in design.supplies:
        extra = f" behind {format_si(s.impedance_ohm, 'Ω')}" if s.impedance_ohm else ""
        lines.append(f"  supply:   {s.name} {format_si(s.volts, 'V')}{extra}")
    for r in design.rails:
        dec = f", decoupled by {format_si(r.decouple_f, 'F')}" if r.decouple_f else ""
        lines.append(f"  rail:     {r.name} from {r.feed} through {format_si(r.drop_ohm, 'Ω')}{dec}")
    src = design.source
    assert src is not None  # a built design has an input line (validation requires it)
    kind = {"ideal": "ideal source", "resistance": f"source of {format_si(src.r_ohm, 'Ω')}",
            "pickup": "pickup"}[src.kind]
    lines.append(f"  input:    {kind} into {src.into}")
    loads = {p.a: p.ohms for p in circuit.parts(kind="output") if isinstance(p, Resistor)}
    assert design.output is not None  # a built design has an output line (validation requires it)
    for label, node in circuit.outputs.items():
        load = loads.get(node, design.output.load_ohm)
        lines.append(f"  output:   node {node}, load {format_si(load, 'Ω')}")
    pots, halves = _pot_counts(design)
    counts = [(len(circuit.resistors) - halves, "resistor"), (pots, "pot"), (len(circuit.capacitors), "capacitor"),
              (len(circuit.inductors), "inductor"), (len(circuit.triodes), "triode")]
    lines.append("  parts:    " + ", ".join(_count(n, word) for n, word in counts if n or word != "pot"))
    return "\n".join(lines)


def _count(n: int, word: str) -> str:
    """``1 inductor``, ``2 inductors``."""
    return f"{n} {word}" if n == 1 else f"{n} {word}s"


def _pot_counts(design: Design) -> tuple[int, int]:
    """Pots (and rheostats) in the circuit, and how many resistors they expand into.

    A network attached with ``via`` is placed once per coupling; one without
    ports once.  A pot is two resistors (either side of its wiper), a
    rheostat (wiper tied to an end) one.
    """
    from chain.language.design import Pot

    pots = halves = 0
    for n in design.networks:
        copies = sum(1 for c in design.couplings if c.kind == "network" and c.network == n.name) if n.ports else 1
        for p in n.parts:
            if isinstance(p, Pot):
                pots += copies
                halves += copies * (1 if p.wiper in (p.a, p.b) else 2)
    return pots, halves


def _v(value: float) -> str:
    """A voltage to 4 digits; anything below a nanovolt is shown as 0 V."""
    return format_si(0.0 if abs(value) < 1e-9 else value, "V", 4)


def bias_table(design: Design, circuit: Circuit, dc) -> str:
    """The operating-point table printed by ``chain bias``: one block per
    stage, then rails, capacitors and diagnostics; fixed formats."""
    from chain.about import SAFETY

    lines = [f"{design.title or design.path} — DC operating point", SAFETY, ""]
    head = f"{'stage':<8}{'kind':<18}{'tube':<12}{'Vp':>10}{'Vg':>10}{'Vk':>10}{'Ip':>10}{'Pd':>10}{'gm':>11}{'rp':>10}{'mu':>7}"
    lines.append(head)
    lines.append("-" * len(head))
    rows = [(st, i, t) for st in circuit.stages for i, t in enumerate(st.triodes)]
    for st, i, t in rows:
        p = dc.points[t]
        # a stage's further triodes (a long-tailed pair's second) on indented rows of their own
        name, kind, tube = (st.name, st.kind, st.tube) if i == 0 else (f"  {t}", "", "")
        lines.append(f"{name:<8}{kind:<18}{tube:<12}{_v(p.vp_v):>10}"
                     f"{_v(p.vg_v):>10}{_v(p.vk_v):>10}"
                     f"{format_si(p.ip_a, 'A', 4):>10}{format_si(p.pd_w, 'W', 3):>10}"
                     f"{fmt.siemens(p.gm_s):>11}{format_si(p.rp_ohm, 'Ω', 3):>10}{p.mu:>7.1f}")
    lines.append("")
    lines.append("rails")
    for name, r in dc.rails.items():
        lines.append(f"  {name:<8}{format_si(r.v, 'V', 4):>10}  draws {format_si(r.i_a, 'A', 4)}")
    lines.append("")
    lines.append("tube models")
    lines.extend(tube_model_lines(circuit))
    rated = [c for c in dc.capacitors.values() if c.rated_v is not None]
    if rated:
        lines.append("")
        lines.append("capacitors (DC voltage / rating)")
        for c in rated:
            lines.append(f"  {c.name:<22}{format_si(abs(c.v), 'V', 4):>10} / {format_si(c.rated_v, 'V')}")
    lines.append("")
    lines.append(f"solved in {dc.iterations} Newton iterations, largest node residual "
                 f"{format_si(dc.max_residual_a, 'A', 2)}")
    if dc.diagnostics:
        lines.append("")
        lines.append("diagnostics")
        for d in dc.diagnostics:
            lines.append(f"  {d.severity} {d.code}: {d.message}")
    return "\n".join(lines)


def tube_model_lines(circuit: Circuit) -> list[str]:
    """One entry per tube model in use: its form, parameters and where they come from."""
    from chain.tubes import form_parameters

    seen: dict[str, list[str]] = {}
    models = {}
    for t in circuit.triodes:
        seen.setdefault(t.model.name, []).append(t.name)
        models[t.model.name] = t.model
    out = []
    for name, users in seen.items():
        m = models[name]
        params = " ".join(f"{k} {v:.4g}" for k, v in form_parameters(m))
        out.append(f"  {name} ({', '.join(users)}): {m.form} form — {params}")
        out.append(f"    {m.source}")
    return out


def formulas_text(design: Design, results, *, latex: bool = False) -> str:
    """The closed forms printed by ``chain formulas``.

    ``results`` is a sequence of :class:`chain.formulas.StageFormulas` in
    signal order.  Each quantity of the stage's kind: its mid-band formula
    in the stage's own symbols, its s-domain form (symbolic without
    interelectrode capacitances, or numeric where the kind gives none), the
    mid-band number, and the full model's value at the reference frequency;
    a balance also in dB and degrees.
    """
    lines = [f"{design.title or design.path} — stage formulas (small-signal, at each stage's operating point)",
             "each stage alone: what follows it is left out unless it is the output load "
             "(`chain report` gives the gains with everything connected)", ""]
    for res in results:
        p = res.parts
        lines.append(f"stage {p.name} ({p.kind})")
        known = [(sym, f"{value:.4g}" if not unit else format_si(value, unit, 4)) for sym, value, unit in p.known()]
        lines.append("  with  " + ", ".join(f"{k} = {v}" for k, v in known))
        for q in res.quantities:
            f = res.formula(q.name)
            unit = "Ω" if q.unit == "ohm" else "V/V"
            mid = f.latex if latex else f.text
            sform = f.s_latex if latex else f.s_text
            lines.append(f"  {q.label}")
            lines.append(f"    mid-band:  {mid}")
            lines.append(f"    s-domain:  {sform}")
            if f.midband_value == float("inf"):
                mid_v = "open"
            elif unit == "V/V":
                mid_v = f"{f.midband_value:.4g} V/V"
            else:
                mid_v = format_si(f.midband_value, "Ω", 4)
            lines.append(f"    value:     {mid_v} mid-band; {_complex(f.value, unit)} at {format_si(f.f_hz, 'Hz')}"
                         " (full model, interelectrode capacitances included)")
            if q.name == "balance":
                lines.append(f"    balance:   {_balance(f.value)} at {format_si(f.f_hz, 'Hz')}; ideal 0 dB and 180°")
        lines.append("")
    return "\n".join(lines).rstrip() + "\n"


def _balance(z: complex) -> str:
    import cmath
    import math

    from chain.decibels import db

    if not cmath.isfinite(z) or z == 0:
        return "undefined"
    return f"{db(abs(z)):+.3g} dB, {math.degrees(cmath.phase(z)):.1f}°"


def _complex(z: complex, unit: str) -> str:
    import cmath
    import math

    if not cmath.isfinite(z):
        return "open"
    mag, ph = abs(z), math.degrees(cmath.phase(z))
    shown = f"{mag:.4g} V/V" if unit == "V/V" else format_si(mag, unit, 4)
    return f"{shown} ∠ {ph:.1f}°"
