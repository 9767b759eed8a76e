"""The short summary printed by ``chain check``."""

from __future__ import annotations

from chain.circuit import Circuit
from chain.language.design import Design
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
    kind = {"ideal": "ideal source", "resistance": f"source of {format_si(src.r_ohm, 'Ω')}",
            "pickup": "pickup"}[src.kind]
    lines.append(f"  input:    {kind} into {src.into}")
    lines.append(f"  output:   node {circuit.output_node}, load {format_si(design.output.load_ohm, 'Ω')}")
    lines.append(f"  parts:    {len(circuit.resistors)} resistors, {len(circuit.capacitors)} capacitors, "
                 f"{len(circuit.inductors)} inductors, {len(circuit.triodes)} triodes")
    return "\n".join(lines)


def _v(value: float) -> str:
    """A voltage to 4 digits; anything below a nanovolt is shown as 0 V."""
    return format_si(0.0 if abs(value) < 1e-9 else value, "V", 4)


def bias_table(design: Design, circuit: Circuit, dc) -> str:
    """The operating-point table printed by ``chain bias``: one block per
    stage, then rails, capacitors and diagnostics; fixed formats."""
    from chain import SAFETY

    lines = [f"{design.title or design.path} — DC operating point", SAFETY, ""]
    head = f"{'stage':<8}{'kind':<18}{'tube':<12}{'Vp':>10}{'Vg':>10}{'Vk':>10}{'Ip':>10}{'Pd':>10}{'gm':>11}{'rp':>10}{'mu':>7}"
    lines.append(head)
    lines.append("-" * len(head))
    for st in circuit.stages:
        p = dc.points[st.triode]
        lines.append(f"{st.name:<8}{st.kind:<18}{st.tube:<12}{_v(p.vp_v):>10}"
                     f"{_v(p.vg_v):>10}{_v(p.vk_v):>10}"
                     f"{format_si(p.ip_a, 'A', 4):>10}{format_si(p.pd_w, 'W', 3):>10}"
                     f"{format_si(p.gm_s, 'A/V', 3):>11}{format_si(p.rp_ohm, 'Ω', 3):>10}{p.mu:>7.1f}")
    lines.append("")
    lines.append("rails")
    for name, r in dc.rails.items():
        lines.append(f"  {name:<8}{format_si(r.v, 'V', 4):>10}  draws {format_si(r.i_a, 'A', 4)}")
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
