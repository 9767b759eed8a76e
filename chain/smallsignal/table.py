"""Per-stage and overall figures at one reference frequency (SI units, no printing)."""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from chain.decibels import db
from chain.circuit import Circuit, StageRecord
from chain.dc.result import DcSolution
from chain.errors import Diagnostic, warning
from chain.units import format_si
from chain.smallsignal.corners import response_corners
from chain.smallsignal.shape import ResponseShape, response_shape
from chain.smallsignal.response import Response, response

__all__ = ["StageRow", "PortRow", "ChainOutput", "OverallResult", "CouplingRow", "stage_table", "coupling_table",
           "overall", "db", "output_balance", "reference_response", "NO_SIGNAL_DB", "no_signal_warnings"]

#: a stage input this far (dB) below the largest signal before it receives no signal: what
#: reaches it is numerical leakage (a volume control at 0), and the ratio of its output to
#: that leakage is no gain.  No working coupling loses 100 dB at the reference frequency
#: (common practice: a volume control's range is some 60 dB).
NO_SIGNAL_DB = -100.0


@dataclass(frozen=True, slots=True)
class PortRow:
    """One output port of a stage at the reference frequency, everything connected."""

    #: the port's name (``"out"``; ``"plate"``/``"cathode"``; ``"plate1"``/``"plate2"``) and node
    port: str
    node: str
    #: H(port)/H(stage input), V/V (complex) and dB
    gain: complex
    gain_db: float
    #: output impedance at the port (see chain.smallsignal.response), ohm
    zout_ohm: complex
    #: gain from the source EMF to the port, V/V and dB
    cumulative_gain: complex
    cumulative_db: float
    #: peak signal at the port for the given source level, V
    level_out_v: float

    @property
    def phase_deg(self) -> float:
        return math.degrees(np.angle(self.gain))


@dataclass(frozen=True, slots=True)
class StageRow:
    """One stage at the reference frequency, everything connected."""

    stage: str
    #: "common-cathode" | "cathode-follower" | "common-grid"
    kind: str
    tube: str
    #: plate, cathode voltage to ground, V
    vp_v: float
    vk_v: float
    #: plate current, A
    ip_a: float
    gm_s: float
    rp_ohm: float
    mu: float
    #: loaded gain H(output)/H(input), V/V (complex) and dB
    gain: complex
    gain_db: float
    #: stage input / output impedance at f_ref, ohm (complex; see chain.smallsignal.response)
    zin_ohm: complex
    zout_ohm: complex
    #: the coupling network feeding the stage (name in Circuit.couplings), or None
    coupling: str | None
    #: H(to_node)/H(from_node) of that coupling, V/V, and its dB (negative = loss)
    coupling_ratio: complex | None
    coupling_db: float | None
    #: gain from source EMF to the stage output, V/V and dB
    cumulative_gain: complex
    cumulative_db: float
    #: peak signal at the stage input and output for the given source level, V
    level_in_v: float
    level_out_v: float
    #: every output port, the main one first (one entry for a single-output stage)
    outputs: tuple[PortRow, ...] = ()
    #: the stage's triodes (names in Circuit.triodes), the one the signal enters first
    triodes: tuple[str, ...] = ()
    #: two-output stages: H(second output)/H(first output) (see :func:`output_balance`), else None
    balance: complex | None = None

    @property
    def phase_deg(self) -> float:
        """Phase of the loaded gain, degrees in (−180, 180]."""
        return math.degrees(np.angle(self.gain))

    @property
    def balance_db(self) -> float | None:
        """``20·log10|H2/H1|``: how much larger the second output is, dB (None for one output)."""
        return None if self.balance is None else db(self.balance)

    @property
    def balance_deg(self) -> float | None:
        """Phase of the second output against the first, degrees in (−180, 180]; 180 for ideal
        antiphase (None for one output)."""
        return None if self.balance is None else math.degrees(np.angle(self.balance))


@dataclass(frozen=True, slots=True)
class ChainOutput:
    """One output port of the chain (``circuit.outputs``) at the reference frequency."""

    label: str
    node: str
    #: source EMF to this output, V/V (complex) and dB
    gain: complex
    gain_db: float
    #: output impedance there, source zeroed and this port's load removed, ohm
    zout_ohm: complex

    @property
    def phase_deg(self) -> float:
        return math.degrees(np.angle(self.gain))


@dataclass(frozen=True, slots=True)
class OverallResult:
    """The whole chain: source EMF to output node."""

    f_ref_hz: float
    #: gain at f_ref, V/V (complex) and dB
    gain: complex
    gain_db: float
    #: outermost half-power band edges of the output relative to its level at f_ref, Hz
    f_low_hz: float | None
    f_high_hz: float | None
    #: load on the source and output impedance at f_ref, ohm (complex)
    zin_ohm: complex
    zout_ohm: complex
    #: band edges, peaks, dips and shelves (None when f_ref is outside the band)
    shape: ResponseShape | None = None
    #: every output of the chain, the main one (``gain``, ``zout_ohm``) first
    outputs: tuple[ChainOutput, ...] = ()
    #: a chain with two or more outputs: the second output's gain over the first's
    #: (for a phase inverter ideally −1: 0 dB and 180°), else None
    balance: complex | None = None

    @property
    def phase_deg(self) -> float:
        return math.degrees(np.angle(self.gain))

    @property
    def balance_db(self) -> float | None:
        """``|balance|`` in dB (0 dB: the outputs are equal in size)."""
        return None if self.balance is None else db(self.balance)


@dataclass(frozen=True, slots=True)
class CouplingRow:
    """One coupling network (or coupling capacitor) at the reference frequency."""

    #: the coupling's name in ``Circuit.couplings`` (a network instance, or "V1->V2")
    name: str
    from_node: str
    to_node: str
    #: H(to_node)/H(from_node) with everything connected, V/V (complex), and its dB
    ratio: complex
    loss_db: float

    @property
    def phase_deg(self) -> float:
        return math.degrees(np.angle(self.ratio))


def reference_response(resp: Response, f_ref_hz: float) -> Response:
    """The network of ``resp`` solved exactly at ``f_ref_hz`` alone, with every
    impedance (input, output, per stage): the one solve the stage table, the
    coupling table and the overall figures share."""
    return response(resp.ss, [f_ref_hz])


def coupling_table(circuit: Circuit, resp: Response, f_ref_hz: float, *,
                   at: Response | None = None) -> tuple[CouplingRow, ...]:
    """Every coupling's transfer at ``f_ref_hz``, in the order of the netlist.

    The ratio of the voltage at the coupling's far end to the voltage at its
    near end, with the whole chain connected (so the load of what follows and
    the source impedance of what drives it are included).  Includes the
    network into the output, which no stage row shows.  ``at`` is
    :func:`reference_response` when the caller has it already.
    """
    if at is None:
        at = response(resp.ss, [f_ref_hz], output_impedances=False, stage_impedances=False)
    rows = []
    for name, (frm, to) in circuit.couplings.items():
        ratio = _ratio(at, to, frm)
        rows.append(CouplingRow(name, frm, to, ratio, db(ratio)))
    return tuple(rows)


def stage_table(circuit: Circuit, dc: DcSolution, resp: Response, f_ref_hz: float,
                level_v: float, *, at: Response | None = None) -> tuple[StageRow, ...]:
    """One :class:`StageRow` per stage, in signal order.

    Parameters
    ----------
    circuit
        The circuit (its stages and couplings).
    dc
        Its DC solution (operating points by triode name).
    resp
        The frequency response; its network is re-solved exactly at ``f_ref_hz``.
    f_ref_hz
        Reference frequency, Hz.
    level_v
        Source EMF, peak volts; levels scale linearly from it.
    at
        :func:`reference_response` when the caller has it already.
    """
    if at is None:
        at = reference_response(resp, f_ref_hz)
    rows = []
    loudest = 1.0  # the source EMF, per volt of itself
    for st in circuit.stages:
        row = _row(circuit, dc, at, st, level_v)
        h_in = abs(complex(at.h[st.input][0]))
        if not h_in > loudest * 10 ** (NO_SIGNAL_DB / 20.0):
            nan = complex("nan")
            row = replace(row, gain=nan, gain_db=math.nan)
        loudest = max(loudest, h_in, abs(row.cumulative_gain))
        rows.append(row)
    return tuple(rows)


def no_signal_warnings(rows, f_ref_hz: float, level_v: float) -> tuple[Diagnostic, ...]:
    """W420 for each stage that receives no signal (its gain is NaN by
    :func:`stage_table` because its input is :data:`NO_SIGNAL_DB` or more below
    the largest signal before it)."""
    out = []
    loudest = 1.0
    for row in rows:
        h_in = row.level_in_v / level_v
        if math.isnan(row.gain_db):
            below = db(h_in / loudest)
            out.append(warning(
                "W420", f"stage {row.stage} receives no signal at {format_si(f_ref_hz, 'Hz')}: its input is "
                        f"{-below:.0f} dB below the signal before it, so it has no gain to show",
                hint="a volume or level control at 0, or a coupling to ground, stops the signal here",
                subject=row.stage))
        loudest = max(loudest, h_in, abs(row.cumulative_gain))
    return tuple(out)


def overall(resp: Response, f_ref_hz: float, *, at: Response | None = None) -> OverallResult:
    """Overall gain, corners and impedances.

    ``gain`` is ``H(output)`` at ``f_ref_hz`` (solved exactly).  The corners
    are the outermost half-power (−3.01 dB) band edges of ``H(output)``
    relative to ``|H(f_ref_hz)|`` (see :func:`chain.smallsignal.corners`); a
    dip between them is a dip (``shape``, :func:`chain.smallsignal.shape.response_shape`),
    and a resonant peak (a pickup's) is inside the band, not its reference.
    ``None`` when outside the analysed band or when ``f_ref_hz`` is outside it.
    ``at`` is :func:`reference_response` when the caller has it already.
    With two or more chain outputs, ``balance`` is the second one's gain over
    the first's.
    """
    if at is None:
        at = reference_response(resp, f_ref_hz)
    gain = complex(at.output[0])
    f = resp.f_hz
    shape = None
    if f.size >= 3 and f[0] <= f_ref_hz <= f[-1]:
        shape = response_shape(resp, f_ref_hz)
        low, high = shape.f_low_hz, shape.f_high_hz
    elif f.size >= 2 and f[0] <= f_ref_hz <= f[-1]:
        low, high = response_corners(resp, ref_hz=f_ref_hz)
    else:
        low, high = None, None
    assert at.zout_ohm is not None  # a reference response computes every impedance
    outputs = []
    for label, node in resp.ss.circuit.outputs.items():
        g = complex(at.h[node][0])
        outputs.append(ChainOutput(label, node, g, db(g), complex(at.output_zout_ohm[label][0])))
    balance = None
    if len(outputs) >= 2:
        balance = outputs[1].gain / outputs[0].gain if outputs[0].gain != 0 else complex("nan")
    return OverallResult(
        f_ref_hz=float(f_ref_hz), gain=gain, gain_db=db(gain), f_low_hz=low, f_high_hz=high,
        zin_ohm=complex(at.zin_ohm[0]), zout_ohm=complex(at.zout_ohm[0]), shape=shape, outputs=tuple(outputs),
        balance=balance,
    )


def output_balance(resp: Response, stage: StageRecord) -> np.ndarray | None:
    """``H(second output)/H(first output)`` of a two-output stage over ``resp.f_hz`` (complex).

    For a phase inverter the ideal is ``−1``: equal size (0 dB) and antiphase
    (180°).  Its magnitude in dB is the imbalance, its angle the phase
    difference between the outputs.  None for a stage with one output.
    """
    if len(stage.outputs) < 2:
        return None
    first, second = list(stage.outputs.values())[:2]
    h1, h2 = np.asarray(resp.h[first]), np.asarray(resp.h[second])
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(h1 != 0, h2 / np.where(h1 != 0, h1, 1), complex("nan"))


def _row(circuit: Circuit, dc: DcSolution, at: Response, st: StageRecord,
         level_v: float) -> StageRow:
    op = dc.points[st.triode]
    h_in = complex(at.h[st.input][0])
    h_out = complex(at.h[st.output][0])
    gain = _ratio(at, st.output, st.input)
    coupling, ratio = _feeding_coupling(circuit, at, st)
    ports = []
    for port, node in st.outputs.items():
        h = complex(at.h[node][0])
        g = _ratio(at, node, st.input)
        ports.append(PortRow(port, node, g, db(g), complex(at.port_zout_ohm[st.name][port][0]), h, db(h),
                             abs(h) * level_v))
    balance = None
    if len(ports) >= 2:
        balance = ports[1].cumulative_gain / ports[0].cumulative_gain if ports[0].cumulative_gain != 0 \
            else complex("nan")
    return StageRow(
        stage=st.name, kind=st.kind, tube=st.tube,
        vp_v=op.vp_v, vk_v=op.vk_v, ip_a=op.ip_a, gm_s=op.gm_s, rp_ohm=op.rp_ohm, mu=op.mu,
        gain=gain, gain_db=db(gain),
        zin_ohm=complex(at.stage_zin_ohm[st.name][0]),
        zout_ohm=complex(at.stage_zout_ohm[st.name][0]),
        coupling=coupling, coupling_ratio=ratio,
        coupling_db=None if ratio is None else db(ratio),
        cumulative_gain=h_out, cumulative_db=db(h_out),
        level_in_v=abs(h_in) * level_v, level_out_v=abs(h_out) * level_v,
        outputs=tuple(ports), triodes=tuple(st.triodes), balance=balance,
    )


def _feeding_coupling(circuit: Circuit, at: Response, st: StageRecord):
    node_of = at.ss.node_of
    for name, (frm, to) in circuit.couplings.items():
        if to == st.input or node_of.get(to) == node_of[st.input]:
            return name, _ratio(at, to, frm)
    return None, None


def _ratio(at: Response, num: str, den: str) -> complex:
    """``H(num)/H(den)`` at the response's (single) frequency; NaN when ``H(den)`` is 0."""
    h_den = complex(at.h[den][0])
    return complex(at.h[num][0]) / h_den if h_den != 0 else complex("nan")
