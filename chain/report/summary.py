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
