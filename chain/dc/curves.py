"""Numbers for drawing a stage's bias: plate characteristics, load and bias lines.

Pure arrays in frozen dataclasses; drawing lives in :mod:`chain.plot.bias`.
Everything is in the plate–cathode plane (Vpk in V, Ip in A).

The construction is the textbook one (e.g. M. Jones, "Valve Amplifiers",
from memory): the DC load line joins ``(Vb, 0)`` and ``(0, Vb/(RL + Rk))`` —
every point where the rail voltage ``Vb`` is shared between the plate load,
the cathode resistor and the tube, ``Vpk = Vb − Ip·(RL + Rk)``; the cathode
bias line is the set of tube states with ``Vgk = Vg − Ip·Rk``; the operating
point is where both meet.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from chain.circuit import Circuit
from chain.dc.result import DcSolution
from chain.dc.engine import compile_network
from chain.tubes import TriodeModel, plate_current_and_derivatives

__all__ = [
    "PlateFamily",
    "LoadLine",
    "BiasLine",
    "plate_family",
    "load_line",
    "bias_line",
    "stage_lines",
]


@dataclass(frozen=True, slots=True)
class PlateFamily:
    """Plate characteristics Ip(Vpk) at several grid–cathode voltages."""

    model_name: str
    #: plate–cathode voltages, V, shape (n,)
    vpk_v: np.ndarray
    #: grid–cathode voltage of each curve, V, shape (k,)
    vgk_v: np.ndarray
    #: plate current, A, shape (k, n): row i is the curve at vgk_v[i]
    ip_a: np.ndarray


@dataclass(frozen=True, slots=True)
class LoadLine:
    """DC load line ``Vpk = vpk0_v − Ip·r_dc_ohm`` from Ip = 0 to Vpk = 0."""

    #: plate–cathode voltage along the line, V, shape (n,)
    vpk_v: np.ndarray
    #: plate current along the line, A, shape (n,)
    ip_a: np.ndarray
    #: plate–cathode voltage at zero current (the rail voltage for a simple stage), V
    vpk0_v: float
    #: DC resistance in the plate–cathode circuit (RL + Rk for a simple stage), ohm
    r_dc_ohm: float


@dataclass(frozen=True, slots=True)
class BiasLine:
    """Cathode bias line ``Vgk = vgk0_v − Ip·rk_ohm`` mapped onto the plate plane."""

    #: plate current along the line, A, shape (n,)
    ip_a: np.ndarray
    #: grid–cathode voltage at each current, V, shape (n,)
    vgk_v: np.ndarray
    #: plate–cathode voltage at which the tube draws ip_a at vgk_v, V
    #: (NaN where it would need more than the plotted range)
    vpk_v: np.ndarray
    #: grid–cathode voltage at zero current (the grid's DC voltage), V
    vgk0_v: float
    #: cathode resistance (Rk for a simple stage), ohm
    rk_ohm: float


def plate_family(model: TriodeModel, vgk_values_v, vpk_max_v: float, n: int = 200) -> PlateFamily:
    """Plate characteristics of a triode model.

    Parameters
    ----------
    model : TriodeModel
    vgk_values_v : sequence of float
        Grid–cathode voltage of each curve, V.
    vpk_max_v : float
        Right end of the plate-voltage axis, V (> 0).
    n : int
        Points per curve (>= 2).

    Returns
    -------
    PlateFamily
    """
    if not vpk_max_v > 0.0:
        raise ValueError(f"vpk_max_v must be positive, got {vpk_max_v}")
    if n < 2:
        raise ValueError(f"n must be at least 2, got {n}")
    vgk = np.asarray(list(vgk_values_v), dtype=float)
    vpk = np.linspace(0.0, float(vpk_max_v), n)
    ip, _, _ = plate_current_and_derivatives(model, vpk[np.newaxis, :], vgk[:, np.newaxis])
    ip = np.broadcast_to(np.asarray(ip, dtype=float), (vgk.size, n)).copy()
    return PlateFamily(model_name=model.name, vpk_v=vpk, vgk_v=vgk, ip_a=ip)


def load_line(*, rail_v: float, rl_ohm: float, rk_ohm: float = 0.0, n: int = 200) -> LoadLine:
    """DC load line of a resistance-loaded stage.

    ``Vpk = Vb − Ip·(RL + Rk)`` (Kirchhoff's voltage law around rail, plate
    load, tube and cathode resistor), drawn from ``(Vb, 0)`` to
    ``(0, Vb/(RL + Rk))``.

    Parameters
    ----------
    rail_v : float
        Rail voltage the plate load hangs from, V.
    rl_ohm, rk_ohm : float
        Plate-load and (unbypassed or bypassed — DC sees both) cathode
        resistance, ohm.
    n : int
        Points (>= 2).
    """
    r_dc = float(rl_ohm) + float(rk_ohm)
    if not r_dc > 0.0:
        raise ValueError(f"rl_ohm + rk_ohm must be positive, got {r_dc}")
    return _line(float(rail_v), r_dc, n)


def _line(vpk0_v: float, r_dc_ohm: float, n: int) -> LoadLine:
    ip = np.linspace(0.0, max(vpk0_v, 0.0) / r_dc_ohm, n)
    return LoadLine(vpk_v=vpk0_v - ip * r_dc_ohm, ip_a=ip, vpk0_v=vpk0_v, r_dc_ohm=r_dc_ohm)


def bias_line(model: TriodeModel, *, rk_ohm: float, ip_max_a: float, vpk_max_v: float, vg_v: float = 0.0,
              n: int = 200) -> BiasLine:
    """Cathode bias line ``Vgk = Vg − Ip·Rk`` drawn on the plate characteristics.

    For each current on the line the plate voltage where the tube conducts
    exactly that current at that grid voltage is found by bisection
    (Ip rises monotonically with Vpk at fixed Vgk).

    Parameters
    ----------
    model : TriodeModel
    rk_ohm : float
        Cathode resistance, ohm (> 0).
    ip_max_a : float
        Largest current drawn, A.
    vpk_max_v : float
        Largest plate voltage searched, V.
    vg_v : float
        Grid–cathode voltage at zero current (the grid's DC potential
        relative to the bottom of Rk), V.
    n : int
        Points (>= 2).
    """
    if not rk_ohm > 0.0:
        raise ValueError(f"rk_ohm must be positive, got {rk_ohm}")
    ip = np.linspace(0.0, float(ip_max_a), n)[1:]
    vgk = float(vg_v) - ip * float(rk_ohm)
    vpk = _plate_voltage_for(model, ip, vgk, float(vpk_max_v))
    return BiasLine(ip_a=ip, vgk_v=vgk, vpk_v=vpk, vgk0_v=float(vg_v), rk_ohm=float(rk_ohm))


def _plate_voltage_for(model: TriodeModel, ip_a: np.ndarray, vgk_v: np.ndarray, vpk_max_v: float) -> np.ndarray:
    """Vpk with Ip(Vpk, Vgk) = ip_a, vectorised bisection on [0, vpk_max_v]; NaN if out of range."""
    lo = np.zeros_like(ip_a)
    hi = np.full_like(ip_a, vpk_max_v)
    top = plate_current_and_derivatives(model, hi, vgk_v)[0]
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        below = plate_current_and_derivatives(model, mid, vgk_v)[0] < ip_a
        lo = np.where(below, mid, lo)
        hi = np.where(below, hi, mid)
    return np.where(np.asarray(top) >= ip_a, 0.5 * (lo + hi), np.nan)


def stage_lines(circuit: Circuit, solution: DcSolution, stage: str, *, n: int = 200,
                vpk_max_v: float | None = None) -> tuple[LoadLine, BiasLine]:
    """A stage's exact DC load line and bias line in the solved circuit.

    Every other triode (and this one's grid current) is held at its solved
    current; the linear network then makes Vpk and Vgk affine in this
    triode's plate current (see
    :meth:`chain.dc.solve.NetworkSystem.load_line`).  For a lone stage this
    is ``Vpk = Vb − Ip·(RL + Rk)`` and ``Vgk = Vg − Ip·Rk``; with a dropping
    resistor, a shared cathode or a direct-coupled grid the slopes include
    them.

    Parameters
    ----------
    circuit : Circuit
    solution : DcSolution
        The solved circuit (``solution.node_v`` is used).
    stage : str
        Stage name (or triode name).
    n : int
        Points per line.
    vpk_max_v : float, optional
        Plate-voltage range searched for the bias line, V (default: the load
        line's zero-current voltage).
    """
    triode = next((s.triode for s in circuit.stages if s.name == stage), stage)
    system = compile_network(circuit, gmin_s=solution.options.gmin_s)
    x = system.vector_from_voltages(solution.node_v)
    coeff = system.load_line(x, triode)
    r_dc = -coeff.dvpk_dip_ohm
    if not r_dc > 0.0:
        raise ValueError(f"stage {stage} has no DC resistance in its plate–cathode circuit; no load line")
    line = _line(coeff.vpk0_v, r_dc, n)
    model = circuit.triode(triode).model
    rk = -coeff.dvgk_dip_ohm
    top = coeff.vpk0_v if vpk_max_v is None else float(vpk_max_v)
    if rk > 0.0:
        bias = bias_line(model, rk_ohm=rk, ip_max_a=float(line.ip_a[-1]), vpk_max_v=top, vg_v=coeff.vgk0_v, n=n)
    else:
        # fixed bias: Vgk does not move with Ip — the bias "line" is the curve at vgk0
        ip = line.ip_a[1:]
        vgk = np.full_like(ip, coeff.vgk0_v)
        bias = BiasLine(ip_a=ip, vgk_v=vgk, vpk_v=_plate_voltage_for(model, ip, vgk, top),
                        vgk0_v=coeff.vgk0_v, rk_ohm=max(rk, 0.0))
    return line, bias
