"""How much supply ripple (hum) reaches the output, and where it builds up.

A capacitor-input supply rectifying the mains full-wave leaves ripple at twice
the mains frequency, 100 Hz or 120 Hz (common practice).  For each supply of
the circuit, its voltage is made the only small-signal source — the input
source zeroed (its impedance kept), every other supply an AC short — and the
linearised chain is solved at both ripple frequencies:

    H_ripple(f) = V_out(f) / V_ripple(f)

the transfer from ripple on that supply to the chain's output and to each
stage's output, through every rail's dropping resistor and decoupling
capacitor, every plate load and every tube's plate resistance (the plate is a
divider of the plate load and rp + (mu + 1)·Zk: standard small-signal valve
analysis).  Superposition makes ``|H|`` the output hum per volt of ripple;
the result is independent of how much ripple the supply really has.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from types import MappingProxyType
from typing import Mapping

from chain.circuit import Circuit, Role, VoltageSource
from chain.errors import ChainError
from chain.smallsignal import linearize, response
from chain.studies import Context, Study

__all__ = ["RIPPLE_HZ", "SupplyRipple", "RippleResult", "supply_ripple", "STEP"]

#: ripple frequencies of full-wave rectified 50 Hz and 60 Hz mains, Hz (common practice)
RIPPLE_HZ = (100.0, 120.0)


@dataclass(frozen=True, slots=True)
class SupplyRipple:
    """Ripple on one supply, carried to the output and to every stage output."""

    supply: str
    #: transfer from the supply's ripple to the chain's output, V/V, one per frequency
    output: tuple[complex, ...]
    #: stage name → transfer to its (main) output, V/V, one per frequency
    stages: Mapping[str, tuple[complex, ...]]


@dataclass(frozen=True, slots=True)
class RippleResult:
    """:func:`supply_ripple` of one circuit."""

    f_hz: tuple[float, ...]
    supplies: tuple[SupplyRipple, ...]


def _driven_by(circuit: Circuit, supply: VoltageSource) -> Circuit:
    """``circuit`` with ``supply`` as the signal source and the input source
    as a supply (an AC short: the input zeroed, its impedance kept)."""
    swapped = []
    for s in circuit.sources:
        if s is supply:
            s = replace(s, role=Role.SIGNAL)
        elif s.role == Role.SIGNAL:
            s = replace(s, role=Role.SUPPLY)
        swapped.append(s)
    return replace(circuit, sources=tuple(swapped))


def supply_ripple(ctx: Context, f_hz: tuple[float, ...] = RIPPLE_HZ) -> RippleResult | None:
    """The ripple transfer of every supply (see the module docstring); None
    when the circuit has no supply that can carry ripple to the output."""
    circuit = ctx.circuit
    out = []
    for supply in circuit.sources:
        if supply.role != Role.SUPPLY or supply.owner.kind != "supply":
            continue
        try:
            ss = linearize(_driven_by(circuit, supply), ctx.dc)
        except ChainError:  # the supply is shorted out of the small-signal circuit: no ripple path
            continue
        r = response(ss, list(f_hz), output_impedances=False, stage_impedances=False)
        stages = {st.name: tuple(complex(x) for x in r.h[st.output]) for st in circuit.stages}
        out.append(SupplyRipple(supply.owner.name, tuple(complex(x) for x in r.output),
                                MappingProxyType(stages)))
    if not out:
        return None
    return RippleResult(tuple(float(f) for f in f_hz), tuple(out))


STEP = Study("ripple", "supply ripple (hum) reaching the output, per volt of ripple", supply_ripple)
