"""Hand-built circuits and invented operating points for the small-signal tests.

Part and node names follow the builder's conventions ("V1.RL", "V1.plate",
"rail.B2.R", "input.R", "output.load", ...).  Operating points are made up:
only ``gm_s``, ``rp_ohm`` and ``mu`` (with ``mu = gm·rp``) matter here.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

from owner_kit import with_owners
from chain.circuit import GROUND, Capacitor, Circuit, Inductor, Resistor, StageRecord, Triode, VoltageSource
from chain.dc.result import DcSolution, OperatingPoint
from chain.tubes import lookup

MU = 100.0
RP = 62.5e3


def model(cgk_f: float = 0.0, cgp_f: float = 0.0, cpk_f: float = 0.0):
    """The 12AX7 of the tube library with chosen interelectrode capacitances (F)."""
    return replace(lookup("12AX7"), cgk_f=cgk_f, cgp_f=cgp_f, cpk_f=cpk_f)


def op(name: str, mu: float = MU, rp_ohm: float = RP) -> OperatingPoint:
    """An invented operating point with ``gm = mu/rp``."""
    return OperatingPoint(name=name, vp_v=180.0, vg_v=0.0, vk_v=1.4, ip_a=1.0e-3, ig_a=0.0,
                          pd_w=0.18, gm_s=mu / rp_ohm, rp_ohm=rp_ohm, mu=mu)


def dc_of(*points: OperatingPoint) -> DcSolution:
    return DcSolution(points={p.name: p for p in points}, rails={}, capacitors={}, node_v={},
                      iterations=0, max_residual_a=0.0)


@dataclass
class Net:
    """Mutable accumulator of parts; :meth:`circuit` freezes it."""

    resistors: list = field(default_factory=list)
    capacitors: list = field(default_factory=list)
    inductors: list = field(default_factory=list)
    sources: list = field(default_factory=list)
    triodes: list = field(default_factory=list)
    stages: list = field(default_factory=list)
    rails: list = field(default_factory=list)
    couplings: dict = field(default_factory=dict)

    def r(self, name, a, b, ohms):
        self.resistors.append(Resistor(name, a, b, ohms))

    def c(self, name, a, b, farads):
        self.capacitors.append(Capacitor(name, a, b, farads))

    def l(self, name, a, b, henries):
        self.inductors.append(Inductor(name, a, b, henries))

    def supply(self, node="HT", volts=300.0):
        self.sources.append(VoltageSource(f"supply.{node}", node, GROUND, volts, "supply"))
        self.rails.append(node)
        return node

    def signal(self, node="src"):
        self.sources.append(VoltageSource("sig", node, GROUND, 0.0, "signal"))
        return node

    def triode(self, name, plate, grid, cathode, tube_model):
        self.triodes.append(Triode(name, plate, grid, cathode, tube_model))

    def stage(self, name, kind, inp, out, rail):
        self.stages.append(StageRecord(name, kind, "12AX7", (name,), {"in": inp}, {"out": out}, rail))

    def circuit(self, input_node, output_node, title="test") -> Circuit:
        return with_owners(Circuit(title=title, resistors=tuple(self.resistors), capacitors=tuple(self.capacitors),
                       inductors=tuple(self.inductors), sources=tuple(self.sources),
                       triodes=tuple(self.triodes), stages=tuple(self.stages),
                       input_node=input_node, output_node=output_node, rails=tuple(self.rails),
                       couplings=dict(self.couplings)))


def common_cathode(net: Net, name: str, *, rail: str, rl: float, rk: float, ck: float | None,
                   tube_model, rg: float = 1e6, rs: float = 0.0) -> tuple[str, str]:
    """Plate load, cathode resistor (optionally bypassed), grid leak, stopper.

    Returns ``(input node, plate node)``.
    """
    top, grid = f"{name}.in", f"{name}.grid"
    plate, cathode = f"{name}.plate", f"{name}.cathode"
    net.r(f"{name}.RL", rail, plate, rl)
    net.r(f"{name}.Rk", cathode, GROUND, rk)
    if ck is not None:
        net.c(f"{name}.Ck", cathode, GROUND, ck)
    net.r(f"{name}.Rg", top, GROUND, rg)
    net.r(f"{name}.Rs", top, grid, rs)
    net.triode(name, plate, grid, cathode, tube_model)
    net.stage(name, "common-cathode", top, plate, rail)
    return top, plate


def rc_ladder(sections: int, r: float, c: float):
    """Series R, shunt C, ``sections`` times from the source ("src") to the
    open far end ("out"), linearised (no triodes)."""
    from chain.smallsignal import linearize

    net = Net()
    net.signal("src")
    prev = "src"
    for i in range(1, sections + 1):
        node = "out" if i == sections else f"n{i}"
        net.r(f"R{i}", prev, node, r)
        net.c(f"C{i}", node, GROUND, c)
        prev = node
    return linearize(net.circuit("src", "out"), dc_of())


def parallel(*rs: float) -> float:
    return 1.0 / sum(1.0 / r for r in rs)


def six_stage_chain(*, tube_model=None):
    """A pickup into five common-cathode stages and a cathode follower, with a
    rail chain, coupling capacitors and an output load (for solver checks)."""
    tube_model = model(1.6e-12, 1.7e-12, 0.46e-12) if tube_model is None else tube_model
    net = Net()
    net.supply("HT", 350.0)
    net.signal("input.emf")
    net.r("input.R", "input.emf", "input.x", 6.8e3)
    net.l("input.L", "input.x", "in", 2.5)
    net.c("input.Cp", "in", GROUND, 100e-12)
    net.c("input.Ccable", "in", GROUND, 500e-12)
    prev, feed = "in", "HT"
    points = []
    for i in range(1, 7):
        name, rail = f"V{i}", f"B{i + 1}"
        net.r(f"rail.{rail}.R", feed, rail, 10e3)
        net.c(f"rail.{rail}.C", rail, GROUND, 22e-6)
        net.rails.append(rail)
        feed = rail
        top = f"{name}.in"
        if i == 1:
            net.r("couple.in-V1.R", prev, top, 68e3)
            net.couplings["in->V1"] = (prev, top)
        else:
            net.c(f"couple.V{i - 1}-{name}.C", prev, top, 22e-9)
            net.couplings[f"V{i - 1}->{name}"] = (prev, top)
        net.r(f"{name}.Rg", top, GROUND, 1e6)
        net.r(f"{name}.Rs", top, f"{name}.grid", 10e3)
        if i == 5:
            net.r(f"{name}.Rk", f"{name}.cathode", GROUND, 100e3)
            net.triode(name, rail, f"{name}.grid", f"{name}.cathode", tube_model)
            net.stage(name, "cathode-follower", top, f"{name}.cathode", rail)
            prev = f"{name}.cathode"
        else:
            net.r(f"{name}.RL", rail, f"{name}.plate", 100e3)
            net.r(f"{name}.Rk", f"{name}.cathode", GROUND, 1.5e3)
            net.c(f"{name}.Ck", f"{name}.cathode", GROUND, 22e-6)
            net.triode(name, f"{name}.plate", f"{name}.grid", f"{name}.cathode", tube_model)
            net.stage(name, "common-cathode", top, f"{name}.plate", rail)
            prev = f"{name}.plate"
        points.append(op(name, 100.0, 62.5e3 * (1 + 0.1 * i)))
    net.c("couple.V6-output.C", prev, "output", 47e-9)
    net.couplings["V6->output"] = (prev, "output")
    net.r("output.load", "output", GROUND, 1e6)
    return net.circuit("in", "output", "six stages"), dc_of(*points)
