"""Hand-built test circuits for the DC solver (chain.circuit parts only).

Node and part names follow the builder's conventions: ``"<stage>.plate"``,
``"<stage>.grid"`` (tube pin), ``"<stage>.in"`` (top of the grid leak),
``"<stage>.cathode"``, ``"<stage>.RL"``, ``"<stage>.Rk"``, ``"<stage>.Rg"``,
``"<stage>.Rs"`` (grid stopper), supply ``"supply.HT"`` on node ``"HT"``,
rail ``"B2"`` fed through ``"rail.B2.R"`` and decoupled by ``"rail.B2.C"``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from types import SimpleNamespace

import pytest

from owner_kit import with_owners
from chain.circuit import GROUND, Capacitor, Circuit, Inductor, Resistor, StageRecord, Triode, VoltageSource
from chain.tubes import grid_current, lookup, plate_current


@dataclass
class Parts:
    """Mutable accumulator of parts, frozen into a Circuit by :func:`make_circuit`."""

    resistors: list = field(default_factory=list)
    capacitors: list = field(default_factory=list)
    inductors: list = field(default_factory=list)
    sources: list = field(default_factory=list)
    triodes: list = field(default_factory=list)
    stages: list = field(default_factory=list)
    rails: list = field(default_factory=list)


def supply(parts: Parts, volts: float, node: str = "HT", *, c: float | None = None,
           rated_v: float | None = None) -> str:
    parts.sources.append(VoltageSource(f"supply.{node}", node, GROUND, volts, "supply"))
    parts.rails.append(node)
    if c is not None:
        parts.capacitors.append(Capacitor(f"supply.{node}.C", node, GROUND, c, rated_v))
    return node


def rail(parts: Parts, name: str, feed: str, r: float, *, c: float = 22e-6, rated_v: float | None = None) -> str:
    parts.resistors.append(Resistor(f"rail.{name}.R", feed, name, r))
    parts.capacitors.append(Capacitor(f"rail.{name}.C", name, GROUND, c, rated_v))
    parts.rails.append(name)
    return name


def signal(parts: Parts, name: str = "in", r: float = 1e3) -> str:
    """Signal source "sig" on node "src" behind ``r``; returns the driven node."""
    parts.sources.append(VoltageSource("sig", "src", GROUND, 0.0, "signal"))
    parts.resistors.append(Resistor("src.R", "src", name, r))
    return name


def common_cathode(parts: Parts, name: str, *, rail_node: str, rl: float, rk: float, rg: float | None = 1e6,
                   rs: float = 1e3, tube: str = "12AX7", ck: float | None = None, ck_rated_v: float | None = None,
                   drive: str | None = None, cc: float = 22e-9, cc_rated_v: float | None = None,
                   rg_to: str = GROUND, heater_v: float = 0.0) -> str:
    """A resistance-loaded common-cathode stage; returns its plate node.

    ``drive`` (a node) is capacitively coupled to the top of the grid leak;
    ``rg=None`` leaves the grid leak out (a grid with no DC path);
    ``rg_to`` is where the grid leak returns (ground, or a bias supply).
    """
    plate, grid, top, cathode = f"{name}.plate", f"{name}.grid", f"{name}.in", f"{name}.cathode"
    parts.resistors.append(Resistor(f"{name}.RL", rail_node, plate, rl))
    parts.resistors.append(Resistor(f"{name}.Rk", cathode, GROUND, rk))
    parts.resistors.append(Resistor(f"{name}.Rs", top, grid, rs))
    if rg is not None:
        parts.resistors.append(Resistor(f"{name}.Rg", top, rg_to, rg))
    if ck is not None:
        parts.capacitors.append(Capacitor(f"{name}.Ck", cathode, GROUND, ck, ck_rated_v))
    if drive is not None:
        parts.capacitors.append(Capacitor(f"{name}.Cc", drive, top, cc, cc_rated_v))
    parts.triodes.append(Triode(name, plate, grid, cathode, lookup(tube), heater_v))
    parts.stages.append(StageRecord(name, "common-cathode", tube, (name,), {"in": top}, {"out": plate}, rail_node))
    return plate


def cathode_follower(parts: Parts, name: str, *, rail_node: str, rk: float, grid_from: str, rs: float = 10e3,
                     tube: str = "12AX7", heater_v: float = 0.0) -> str:
    """A cathode follower direct-coupled to ``grid_from``; returns its cathode node."""
    grid, cathode = f"{name}.grid", f"{name}.cathode"
    parts.resistors.append(Resistor(f"{name}.Rs", grid_from, grid, rs))
    parts.resistors.append(Resistor(f"{name}.Rk", cathode, GROUND, rk))
    parts.triodes.append(Triode(name, rail_node, grid, cathode, lookup(tube), heater_v))
    parts.stages.append(StageRecord(name, "cathode-follower", tube, (name,), {"in": grid_from}, {"out": cathode}, rail_node))
    return cathode


def make_circuit(parts: Parts, *, input_node: str = "in", output_node: str | None = None,
                 title: str = "test") -> Circuit:
    if output_node is None:
        output_node = parts.stages[-1].output if parts.stages else input_node
    return with_owners(Circuit(title=title, resistors=tuple(parts.resistors), capacitors=tuple(parts.capacitors),
                   inductors=tuple(parts.inductors), sources=tuple(parts.sources), triodes=tuple(parts.triodes),
                   stages=tuple(parts.stages), input_node=input_node, output_node=output_node,
                   rails=tuple(parts.rails)))


def single_stage(*, rail_v: float = 300.0, rl: float = 100e3, rk: float = 1.5e3, rg: float = 1e6,
                 tube: str = "12AX7", ck: float | None = 22e-6) -> Circuit:
    """One self-biased common-cathode stage on a stiff supply, driven through a coupling cap."""
    p = Parts()
    supply(p, rail_v)
    drive = signal(p)
    common_cathode(p, "V1", rail_node="HT", rl=rl, rk=rk, rg=rg, tube=tube, ck=ck, drive=drive)
    return make_circuit(p)


def kcl_residuals(circuit, state, gmin_s):
    """Net current leaving each node, recomputed from the parts (Kirchhoff's current law)."""
    v = dict(state.node_v)
    v[GROUND] = 0.0
    out = {node: gmin_s * v[node] for node in state.node_v}
    out[GROUND] = 0.0
    for r in circuit.resistors:
        i = (v[r.a] - v[r.b]) / r.ohms
        out[r.a] += i
        out[r.b] -= i
    for s in circuit.sources:
        out[s.pos] -= state.source_i_a[s.name]
        out[s.neg] += state.source_i_a[s.name]
    for part in circuit.inductors:
        out[part.a] += state.branch_i_a[part.name]
        out[part.b] -= state.branch_i_a[part.name]
    for t in circuit.triodes:
        vpk, vgk = v[t.plate] - v[t.cathode], v[t.grid] - v[t.cathode]
        ip, ig = float(plate_current(t.model, vpk, vgk)), float(grid_current(t.model, vgk))
        out[t.plate] += ip
        out[t.grid] += ig
        out[t.cathode] -= ip + ig
    out.pop(GROUND)
    return out


@pytest.fixture(scope="session")
def kit():
    """The circuit-building helpers above, for tests in this folder."""
    return SimpleNamespace(Parts=Parts, supply=supply, rail=rail, signal=signal, common_cathode=common_cathode,
                           cathode_follower=cathode_follower, make_circuit=make_circuit, single_stage=single_stage,
                           kcl_residuals=kcl_residuals,
                           Inductor=Inductor, Resistor=Resistor, Capacitor=Capacitor, VoltageSource=VoltageSource)
