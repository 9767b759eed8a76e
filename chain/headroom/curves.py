"""Large-signal transfer curves of every stage and of the whole chain.

The signal source is swept from 0 V outwards in both polarities on a
logarithmic grid (``points_per_decade`` points per decade from ``start_v``),
each point solved by continuation from the previous ones in the quasi-static
mid-band network of :mod:`chain.headroom.network`.  The sweep of a polarity
stops when the first stage of the chain is well into clipping —
``overdrive`` times (default 4×, 12 dB) the input at which its triode reached
grid conduction or cutoff (the definitions of :mod:`chain.headroom.clipping`)
— or at ``max_input_v``.  Past that point the first stage's output barely
moves, so no later stage receives more drive.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Iterable, Mapping

import numpy as np

from chain.circuit import Circuit, StageRecord
from chain.dc import DcSolution, SolveOptions
from chain.errors import DcConvergenceError
from chain.headroom.network import CapacitorTreatment, MidBandNetwork, mid_band_capacitors
from chain.decibels import db

__all__ = ["TransferCurves", "transfer_curves", "build_network", "DEFAULT_CUTOFF_FRACTION"]

#: plate current, as a fraction of its quiescent value, below which a stage counts as cut off
DEFAULT_CUTOFF_FRACTION = 0.01


def _frozen(a: np.ndarray) -> np.ndarray:
    a = np.array(a, dtype=float)
    a.setflags(write=False)
    return a


@dataclass(frozen=True, slots=True, eq=False)
class TransferCurves:
    """Mid-band large-signal transfer curves of a chain (compared by identity).

    Attributes
    ----------
    input_v : numpy.ndarray
        Signal-source voltage (EMF) of each point, V, ascending, containing 0.
    node_dv : Mapping[str, numpy.ndarray]
        Per node — the chain input node, every stage's input and output node,
        the chain output node — its voltage minus its DC voltage, V, per point.
    dc_v : Mapping[str, float]
        DC voltage of those nodes, V.
    vgk_v, ip_a, ig_a : Mapping[str, numpy.ndarray]
        Per triode: grid–cathode voltage (V), plate current (A) and grid
        current (A) per point.
    quiescent_ip_a : Mapping[str, float]
        Per triode, the plate current at zero input, A.
    stages : tuple[StageRecord, ...]
        The stages, in signal order.
    input_node, output_node : str
        Chain input (after the source impedance) and output node.
    treatment : CapacitorTreatment
        Held, stand-in and open capacitors.
    stop : tuple[str, str]
        Why the negative and the positive sweep ended.
    cutoff_fraction : float
        Cutoff criterion used by the stop rule (fraction of quiescent Ip).
    solves, iterations : int
        Network solves and Newton iterations spent.
    elapsed_s : float
        Wall time of the sweep, s.
    states : numpy.ndarray
        Raw solver vectors, shape (points, unknowns), for continuation.
    """

    input_v: np.ndarray
    node_dv: Mapping[str, np.ndarray]
    dc_v: Mapping[str, float]
    vgk_v: Mapping[str, np.ndarray]
    ip_a: Mapping[str, np.ndarray]
    ig_a: Mapping[str, np.ndarray]
    quiescent_ip_a: Mapping[str, float]
    stages: tuple[StageRecord, ...]
    input_node: str
    output_node: str
    treatment: CapacitorTreatment
    stop: tuple[str, str]
    cutoff_fraction: float
    solves: int
    iterations: int
    elapsed_s: float
    states: np.ndarray = field(repr=False)

    def stage(self, name: str) -> StageRecord:
        for s in self.stages:
            if s.name == name:
                return s
        raise KeyError(name)

    def stage_curve(self, name: str) -> tuple[np.ndarray, np.ndarray]:
        """(input-node deviation, output-node deviation) of one stage, V."""
        s = self.stage(name)
        return self.node_dv[s.input], self.node_dv[s.output]

    @property
    def output_dv(self) -> np.ndarray:
        """Chain output deviation per point, V."""
        return self.node_dv[self.output_node]

    @property
    def zero_index(self) -> int:
        """Index of the zero-input point."""
        return int(np.flatnonzero(self.input_v == 0.0)[0])


def watched_nodes(circuit: Circuit) -> tuple[str, ...]:
    """Chain input, each stage's input and outputs, the chain outputs (no repeats)."""
    names = [circuit.input_node]
    for s in circuit.stages:
        names += [s.input, *s.outputs.values()]
    names.append(circuit.output_node)
    names += list(circuit.outputs.values())
    return tuple(dict.fromkeys(names))


def build_network(circuit: Circuit, dc: DcSolution, *, f_ref_hz: float = 1000.0,
                  held_caps: Iterable[str] | None = None, treatment: CapacitorTreatment | None = None,
                  options: SolveOptions | None = None) -> MidBandNetwork:
    """The compiled mid-band network (capacitor treatment chosen unless given)."""
    opts = dc.options if options is None else options
    if treatment is None:
        treatment = mid_band_capacitors(circuit, dc, f_ref_hz=f_ref_hz, held=held_caps)
    return MidBandNetwork(circuit, dc, treatment, options=opts)


def _limited(net: MidBandNetwork, x: np.ndarray, triode: int, cutoff_fraction: float) -> bool:
    """True when the triode conducts grid current (Vgk >= onset) or is cut off."""
    vgk, ip = net.triode_point(x, triode)
    model = net.circuit.triodes[triode].model
    return bool(vgk >= model.grid_onset_v or ip <= cutoff_fraction * net.quiescent_ip_a[triode])


def _sweep_side(net: MidBandNetwork, sign: float, *, start_v: float, ratio: float, max_input_v: float,
                overdrive: float, cutoff_fraction: float) -> tuple[list[float], list[np.ndarray], str]:
    """March from 0 V to one side; returns (inputs, states, why it stopped)."""
    circuit = net.circuit
    first = tuple(net.triode_index(t) for t in circuit.stages[0].triodes) if circuit.stages else ()
    vs: list[float] = []
    xs: list[np.ndarray] = []
    v_from, x_from = 0.0, net.x0
    v_back: float | None = None
    x_back: np.ndarray | None = None
    limit_at: float | None = None
    magnitude = start_v
    why = f"reached the sweep limit of {max_input_v:g} V"
    while True:
        magnitude = min(magnitude, max_input_v)
        v = sign * magnitude
        try:
            x = net.step(v, v_from, x_from, v_back, x_back)
        except DcConvergenceError:
            why = f"the network could not be solved beyond {v_from:+.4g} V"
            break
        vs.append(v)
        xs.append(x)
        v_back, x_back, v_from, x_from = v_from, x_from, v, x
        if limit_at is None and any(_limited(net, x, t, cutoff_fraction) for t in first):
            limit_at = magnitude
        if limit_at is not None and magnitude >= overdrive * limit_at:
            why = (f"stage {circuit.stages[0].name} driven {db(overdrive):.0f} dB past its "
                   f"clipping point")
            break
        if magnitude >= max_input_v:
            break
        magnitude *= ratio
    return vs, xs, why


def sweep(net: MidBandNetwork, *, start_v: float = 1e-4, points_per_decade: int = 40,
          max_input_v: float = 20.0, overdrive: float = 4.0,
          cutoff_fraction: float = DEFAULT_CUTOFF_FRACTION) -> TransferCurves:
    """Sweep a compiled network in both polarities (see :func:`transfer_curves`)."""
    if not (start_v > 0.0 and max_input_v > start_v):
        raise ValueError("need 0 < start_v < max_input_v")
    if points_per_decade < 4:
        raise ValueError("points_per_decade must be at least 4")
    if overdrive < 1.0:
        raise ValueError("overdrive must be at least 1")
    t0 = time.perf_counter()
    solves0, iters0 = net.solves, net.iterations
    ratio = 10.0 ** (1.0 / points_per_decade)
    kw = dict(start_v=start_v, ratio=ratio, max_input_v=max_input_v, overdrive=overdrive,
              cutoff_fraction=cutoff_fraction)
    v_neg, x_neg, why_neg = _sweep_side(net, -1.0, **kw)
    v_pos, x_pos, why_pos = _sweep_side(net, +1.0, **kw)
    input_v = np.array(v_neg[::-1] + [0.0] + v_pos)
    states = np.array(x_neg[::-1] + [net.x0] + x_pos)
    circuit = net.circuit
    nodes = watched_nodes(circuit)
    volts = net.node_voltages(states, nodes)
    zero = len(v_neg)
    vgk, ip, ig = net.triodes(states)
    names = net.triode_names
    return TransferCurves(
        input_v=_frozen(input_v),
        node_dv=MappingProxyType({n: _frozen(volts[:, i] - volts[zero, i]) for i, n in enumerate(nodes)}),
        dc_v=MappingProxyType({n: float(volts[zero, i]) for i, n in enumerate(nodes)}),
        vgk_v=MappingProxyType({n: _frozen(vgk[:, i]) for i, n in enumerate(names)}),
        ip_a=MappingProxyType({n: _frozen(ip[:, i]) for i, n in enumerate(names)}),
        ig_a=MappingProxyType({n: _frozen(ig[:, i]) for i, n in enumerate(names)}),
        quiescent_ip_a=MappingProxyType({n: float(ip[zero, i]) for i, n in enumerate(names)}),
        stages=tuple(circuit.stages), input_node=circuit.input_node, output_node=circuit.output_node,
        treatment=net.treatment, stop=(why_neg, why_pos), cutoff_fraction=float(cutoff_fraction),
        solves=net.solves - solves0, iterations=net.iterations - iters0,
        elapsed_s=time.perf_counter() - t0, states=_frozen(states))


def transfer_curves(circuit: Circuit, dc: DcSolution, *, f_ref_hz: float = 1000.0,
                    held_caps: Iterable[str] | None = None, start_v: float = 1e-4,
                    points_per_decade: int = 40, max_input_v: float = 20.0, overdrive: float = 4.0,
                    cutoff_fraction: float = DEFAULT_CUTOFF_FRACTION,
                    options: SolveOptions | None = None) -> TransferCurves:
    """Mid-band large-signal transfer curves of every stage and the chain.

    Quasi-static: coupling, bypass and rail-decoupling capacitors are held at
    their DC voltages, the small capacitors are open, those in between stand
    in as resistors of their reactance, inductors are shorted (see
    :mod:`chain.headroom.network`); triodes follow their full model including
    grid current.  The source is swept as described in the module docstring.

    Parameters
    ----------
    circuit : Circuit
    dc : DcSolution
        Its DC operating point.
    f_ref_hz : float
        Mid-band reference frequency that decides which capacitors are held, Hz.
    held_caps : Iterable[str], optional
        Short exactly these capacitors (all others open, no stand-ins)
        instead of the automatic choice.
    start_v : float
        Smallest non-zero source magnitude, V.
    points_per_decade : int
        Logarithmic density of the sweep.
    max_input_v : float
        Largest source magnitude, V.
    overdrive : float
        Stop a polarity this many times past the first stage's clipping input.
    cutoff_fraction : float
        Cutoff criterion of the stop rule (fraction of quiescent plate current).
    options : SolveOptions, optional
        Solver settings (default: those of ``dc``).

    Returns
    -------
    TransferCurves
    """
    net = build_network(circuit, dc, f_ref_hz=f_ref_hz, held_caps=held_caps, options=options)
    return sweep(net, start_v=start_v, points_per_decade=points_per_decade, max_input_v=max_input_v,
                 overdrive=overdrive, cutoff_fraction=cutoff_fraction)
