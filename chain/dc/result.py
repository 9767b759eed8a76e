"""Frozen results of the DC operating-point solve (SI units: V, A, W, ohm, S)."""

from __future__ import annotations

from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Mapping

from chain.errors import Diagnostic


@dataclass(frozen=True, slots=True)
class SolveOptions:
    """Numeric settings of the DC solve, echoed in reports."""

    #: convergence: largest node-current residual, A
    tol_a: float = 1e-12
    #: convergence: largest Newton voltage step, V
    tol_v: float = 1e-9
    max_iter: int = 200
    #: plate-dissipation derating for the warning (fraction of the rating)
    derating: float = 0.8
    #: conductance from every node to ground, S (keeps capacitor-only nodes solvable)
    gmin_s: float = 1e-12
    #: largest node-voltage change of one Newton step, V
    max_step_v: float = 50.0
    #: plate current below which a stage is reported as cut off, A
    cutoff_a: float = 1e-6
    #: grid current above which a stage is reported as grid-conducting, A
    grid_current_a: float = 1e-6


@dataclass(frozen=True, slots=True)
class OperatingPoint:
    """One triode at its DC operating point."""

    name: str
    vp_v: float
    vg_v: float
    vk_v: float
    #: plate current, A
    ip_a: float
    #: grid current, A (positive into the grid)
    ig_a: float
    #: plate dissipation Vpk·Ip, W
    pd_w: float
    #: transconductance ∂Ip/∂Vgk, S
    gm_s: float
    #: plate resistance 1/(∂Ip/∂Vpk), ohm
    rp_ohm: float
    #: amplification factor gm·rp
    mu: float

    @property
    def vpk_v(self) -> float:
        return self.vp_v - self.vk_v

    @property
    def vgk_v(self) -> float:
        return self.vg_v - self.vk_v

    @property
    def ik_a(self) -> float:
        """Cathode current Ip + Ig, A."""
        return self.ip_a + self.ig_a


@dataclass(frozen=True, slots=True)
class RailPoint:
    """A supply or rail node: its voltage and the current drawn from it."""

    name: str
    v: float
    #: current delivered by this rail into everything hanging from it, A
    i_a: float


@dataclass(frozen=True, slots=True)
class CapacitorPoint:
    name: str
    #: DC voltage across the capacitor (node a minus node b), V
    v: float
    rated_v: float | None


@dataclass(frozen=True, slots=True)
class DcSolution:
    """The whole chain at DC."""

    #: per triode name (same names as Circuit.triodes)
    points: Mapping[str, OperatingPoint]
    rails: Mapping[str, RailPoint]
    capacitors: Mapping[str, CapacitorPoint]
    #: every node voltage, V
    node_v: Mapping[str, float]
    iterations: int
    max_residual_a: float
    options: SolveOptions = field(default_factory=SolveOptions)
    diagnostics: tuple[Diagnostic, ...] = ()

    def __post_init__(self):
        # frozen all the way down: the per-name tables are read-only views
        for name in ("points", "rails", "capacitors", "node_v"):
            value = getattr(self, name)
            if not isinstance(value, MappingProxyType):
                object.__setattr__(self, name, MappingProxyType(dict(value)))
        object.__setattr__(self, "diagnostics", tuple(self.diagnostics))
