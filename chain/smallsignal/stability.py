"""Is the linearised chain stable, and if not, which loop makes it oscillate.

Stability
---------
The chain is stable when every natural frequency (pole, see
:mod:`chain.smallsignal.poles`) lies in the left half-plane.  A pole
``s = σ + jω`` with ``σ > 0`` is a mode that grows as ``e^{σt}·cos(ωt)``:
the circuit oscillates at about ``ω/2π`` Hz (or, for a real pole, runs
away without oscillating) until the tubes limit it.  The small-signal
response computed for such a circuit is not what it will do.

Poles are located by an eigen-solve; in a long chain of similar stages
they come in near-equal clusters whose computed positions rounding
scatters by many percent, some of them across the axis.  So a pole
located in the right half-plane is checked by counting such poles with
the argument principle (:func:`chain.smallsignal.poles.rhp_count`); when
the count is zero the chain is stable and W802 says the positions are
uncertain.

Which loop closes it
--------------------
Each candidate feedback path is broken in turn and the poles are computed
again: a feedback network (a network without ports, connecting stage
terminals) is removed; a supply rail is tied to AC ground (as an ideal
filter capacitor would).  The candidates after whose removal no pole
remains in the right half-plane are the path that closes the loop.

Loop gain of a feedback network
-------------------------------
A feedback network is broken where it leaves the later stage (node ``k``,
a plate or a cathode: a low impedance that hardly feels what the network
does to it): in the nodal matrix, the network's parts (admittances ``yᵢ``
from ``k`` to network nodes ``mᵢ``) stop driving the ``mᵢ`` from ``k`` —
the entries ``(mᵢ, k)`` are taken out, while the parts still load both
ends.  That is a rank-one change ``Y = Y₀ − (Σ yᵢ·e_mᵢ)·e_kᵀ``, and the
return ratio of the cut is

    T(s) = −[Y₀(s)⁻¹·Σ yᵢ(s)·e_mᵢ]_k,

the voltage coming back to ``k`` when the currents ``yᵢ`` that 1 V at ``k``
would drive into the network are injected with the loop open, sign
turned; by the matrix determinant lemma
``det Y = det Y₀·(1 + T)``, so the closed loop's poles are the zeros of
``1 + T`` and a negative-feedback loop has ``T > 0`` at mid-band (Bode's
return ratio; from memory of H. W. Bode, "Network Analysis and Feedback
Amplifier Design", 1945, ch. 4).  Phase margin is ``180° − |∠T|`` where
``|T| = 1``; gain margin ``−20·log₁₀|T|`` where ``∠T = ±180°`` (phase
unwrapped from 0° at the frequency of largest ``|T|``).  Margins below
45° of phase or 10 dB of gain are a warning (common practice).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np

from chain.circuit import Capacitor, Circuit, Inductor, Resistor, Role
from chain.errors import Diagnostic, error, warning
from chain.smallsignal.mna import DirectSolver, Mna, assemble
from chain.smallsignal.model import SmallSignalCircuit
from chain.smallsignal.poles import Pole, PoleZero, pencil_eigen, pole_zero, poles, rhp_count
from chain.decibels import db_array

__all__ = [
    "FeedbackPath",
    "LoopGain",
    "Stability",
    "stability",
    "loop_gain",
    "feedback_networks",
    "PHASE_MARGIN_DEG",
    "GAIN_MARGIN_DB",
    "zeros_left_out_warning",
]

#: phase margin below which a loop is reported as marginal, degrees (common practice)
PHASE_MARGIN_DEG = 45.0
#: gain margin below which a loop is reported as marginal, dB (common practice)
GAIN_MARGIN_DB = 10.0
#: conductance (S) tying a rail to ground when its loop is broken
_RAIL_SHORT_S = 1e3



@dataclass(frozen=True, slots=True)
class FeedbackPath:
    """A loop candidate: ``kind`` is ``"network"`` or ``"rail"``.

    ``parts`` the parts it consists of; ``stages`` the stages it connects
    (for a rail: the stages whose plates hang from it or from a rail fed by it).
    """

    kind: Literal["network", "rail"]
    name: str
    parts: tuple[str, ...]
    stages: tuple[str, ...]

    def describe(self) -> str:
        if self.kind == "network":
            return f"feedback network '{self.name}' ({' → '.join(self.stages)})" if self.stages \
                else f"network '{self.name}'"
        return f"rail {self.name}" + (f" (feeding {', '.join(self.stages)})" if self.stages else "")


@dataclass(frozen=True, slots=True, eq=False)
class LoopGain:
    """The return ratio ``T(f)`` of a feedback network cut where it leaves ``node``."""

    path: FeedbackPath
    #: the node of the later stage where the loop is cut
    node: str
    f_hz: np.ndarray
    t: np.ndarray
    #: unwrapped phase of T, degrees, 0 at mid-band for negative feedback
    phase_deg: np.ndarray
    #: T at the frequency of largest |T|
    t_mid: complex
    #: (frequency Hz, phase margin deg) at each |T| = 1 crossing
    crossovers: tuple[tuple[float, float], ...]
    #: (frequency Hz, gain margin dB) at each ∠T = ±180° crossing with |T| … any
    phase_crossings: tuple[tuple[float, float], ...]

    @property
    def negative(self) -> bool:
        """Negative feedback at mid-band (Re T > 0)."""
        return self.t_mid.real > 0.0

    @property
    def phase_margin_deg(self) -> float | None:
        return min((pm for _, pm in self.crossovers), default=None)

    @property
    def gain_margin_db(self) -> float | None:
        return min((gm for _, gm in self.phase_crossings), default=None)


@dataclass(frozen=True, slots=True, eq=False)
class Stability:
    """Poles, the output transfer, the unstable poles and what closes their loop."""

    poles: tuple[Pole, ...]
    output: PoleZero
    #: poles in the right half-plane (one of each conjugate pair)
    unstable: tuple[Pole, ...]
    #: per unstable pole, the loop candidates whose breaking removes it
    culprits: tuple[tuple[FeedbackPath, ...], ...]
    loops: tuple[LoopGain, ...]
    diagnostics: tuple[Diagnostic, ...]

    @property
    def stable(self) -> bool:
        return not self.unstable


# -- loop candidates -------------------------------------------------------------


def _stage_of_node(circuit: Circuit, node: str) -> str:
    owner = circuit.stage_of_node(node)
    return owner if owner in {s.name for s in circuit.stages} else ""


def feedback_networks(circuit: Circuit) -> tuple[FeedbackPath, ...]:
    """Networks placed by naming stage terminals (not attached by a coupling), in netlist order."""
    nets: dict[str, list] = {}
    passive: tuple[Resistor | Capacitor | Inductor, ...] = (*circuit.resistors, *circuit.capacitors, *circuit.inductors)
    for part in passive:
        if part.owner.kind != "network" or part.owner.name in circuit.couplings:
            continue
        nets.setdefault(part.owner.name, []).append(part)
    order = [s.name for s in circuit.stages]
    out = []
    for name, parts in nets.items():
        touched = {_stage_of_node(circuit, n) for p in parts for n in (p.a, p.b)} - {""}
        stages_in = tuple(sorted(touched, key=order.index, reverse=True))
        out.append(FeedbackPath("network", name, tuple(p.name for p in parts), stages_in))
    return tuple(out)


def _rails(circuit: Circuit) -> tuple[FeedbackPath, ...]:
    """Every rail node, with the stages fed from it (directly or through later rails)."""
    feeds: dict[str, set[str]] = {}
    for r in circuit.resistors:
        if r.role == Role.RAIL_DROP and r.owner.kind == "rail":
            rail = r.owner.name
            feeds.setdefault(r.b if r.a == rail else r.a, set()).add(rail)
    out = []
    for rail in circuit.rail_names():
        reach, todo = set(), [rail]
        while todo:
            x = todo.pop()
            if x in reach:
                continue
            reach.add(x)
            todo.extend(feeds.get(x, ()))
        stages = tuple(s.name for s in circuit.stages if s.rail in reach)
        rc: tuple[Resistor | Capacitor, ...] = (*circuit.resistors, *circuit.capacitors)
        parts = tuple(p.name for p in rc
                      if p.owner.kind in ("rail", "supply") and p.owner.name == rail)
        out.append(FeedbackPath("rail", rail, parts, stages))
    if len(out) > 1:  # loops through several rails at once
        out.append(FeedbackPath("rail", ", ".join(p.name for p in out), tuple(x for p in out for x in p.parts),
                                tuple(dict.fromkeys(x for p in out for x in p.stages))))
    return tuple(out)


def _rhp(s: np.ndarray) -> np.ndarray:
    from chain.smallsignal.poles import UNSTABLE_REL

    return s[s.real > UNSTABLE_REL * np.abs(s)]


def _broken(ss: SmallSignalCircuit, mna: Mna, path: FeedbackPath) -> Mna | None:
    if path.kind == "network":
        names = set(path.parts)
        cut = mna.without([st for st in mna.stamps if st.name in names])
        # a node left with no part at all (inside the network) would make the
        # pencil singular for every s: pin it to 0 V
        empty = ~(np.any(cut.g != 0.0, axis=1) | np.any(cut.c != 0.0, axis=1))
        if np.any(empty):
            g = cut.g.copy()
            g[empty, empty] = 1.0
            cut = Mna(cut.nodes, cut.index, g, cut.c, cut.stamps, cut.source)
        return cut
    g = mna.g.copy()
    tied = 0
    for rail in path.name.split(", "):
        node = ss.node_of.get(rail)
        i = mna.index.get(node, -1) if node is not None else -1
        if i >= 0:  # else the rail is already AC ground (a supply)
            g[i, i] += _RAIL_SHORT_S
            tied += 1
    if not tied:
        return None
    return Mna(mna.nodes, mna.index, g, mna.c, mna.stamps, mna.source)


def culprits(ss: SmallSignalCircuit, mna: Mna, unstable: tuple[Pole, ...]) -> tuple[tuple[FeedbackPath, ...], ...]:
    """Per unstable pole, the loop candidates whose breaking leaves no pole in
    the right half-plane within a factor of 4 of its natural frequency."""
    out: list[list[FeedbackPath]] = [[] for _ in unstable]
    for path in (*feedback_networks(ss.circuit), *_rails(ss.circuit)):
        broken = _broken(ss, mna, path)
        if broken is None:
            continue
        left = np.abs(_rhp(pencil_eigen(broken))) / (2.0 * math.pi)
        for k, p in enumerate(unstable):
            if path.kind == "rail" and ", " in path.name and any(q.kind == "rail" for q in out[k]):
                continue  # a single rail already explains it
            if not np.any((left > p.f_hz / 4.0) & (left < p.f_hz * 4.0)):
                out[k].append(path)
    return tuple(tuple(x) for x in out)


def describe_paths(paths: tuple[FeedbackPath, ...]) -> str:
    """``"feedback network 'fb' (V2 → V1)"``, ``"rails B1, B2 (feeding V1, V2)"``."""
    nets = [p.describe() for p in paths if p.kind == "network"]
    rails = [p for p in paths if p.kind == "rail"]
    if len(rails) == 1 and ", " in rails[0].name:
        nets.append(f"the shared supply rails {rails[0].name} together (feeding {', '.join(rails[0].stages)})")
        rails = []
    if rails:
        fed = tuple(dict.fromkeys(s for p in rails for s in p.stages))
        word = "rail" if len(rails) == 1 else "rails"
        nets.append(f"the shared supply {word} {', '.join(p.name for p in rails)}"
                    + (f" (feeding {', '.join(fed)})" if fed else ""))
    return " or ".join(nets)


# -- loop gain -----------------------------------------------------------------


def loop_gain(ss: SmallSignalCircuit, path: FeedbackPath, f_hz: np.ndarray, *,
              mna: Mna | None = None) -> LoopGain | None:
    """Return ratio of feedback network ``path`` cut where it leaves its later stage.

    None when the network does not connect two stages, leaves its later
    stage at more than one node, or through an inductor.
    """
    mna = assemble(ss) if mna is None else mna
    circuit = ss.circuit
    if len(path.stages) < 2:
        return None
    last = path.stages[0]
    names = set(path.parts)
    passive: tuple[Resistor | Capacitor | Inductor, ...] = (*circuit.resistors, *circuit.capacitors, *circuit.inductors)
    ends = {n for p in passive if p.name in names
            for n in (p.a, p.b)}
    exits = [n for n in sorted(ends) if _stage_of_node(circuit, n) == last]
    if len(exits) != 1:
        return None
    node = exits[0]
    k = mna.index.get(ss.node_of.get(node, node), -1)
    if k < 0:
        return None
    g0, c0 = mna.g.copy(), mna.c.copy()
    links = []  # (network-side index, conductance, capacitance)
    for st in mna.stamps:
        if st.name not in names or not st.touches(k):
            continue
        if st.kind not in ("R", "C"):
            return None
        m = st.b if st.a == k else st.a
        if m < 0:
            continue
        mat = g0 if st.kind == "R" else c0
        mat[m, k] += st.value  # the network no longer hears the later stage
        links.append((m, st.value if st.kind == "R" else 0.0, st.value if st.kind == "C" else 0.0))
    if not links:
        return None
    f = np.asarray(f_hz, dtype=float)
    s = 2j * math.pi * f
    rhs = np.zeros((f.size, mna.size), dtype=complex)
    for m, g, c in links:
        rhs[:, m] += g + s * c
    x = DirectSolver(g0, c0, s).solve(rhs)
    return _margins(path, node, f, -x[:, k])


def _margins(path: FeedbackPath, node: str, f: np.ndarray, t: np.ndarray) -> LoopGain:
    mag = np.abs(t)
    k = int(np.argmax(mag))
    ph = np.unwrap(np.angle(t))
    ph -= 2.0 * math.pi * round(ph[k] / (2.0 * math.pi))
    ph_deg = np.degrees(ph)
    lf = np.log(f)
    db = db_array(np.maximum(mag, 1e-300))
    cross = []
    for i in np.nonzero(np.diff(np.sign(db)) != 0)[0]:
        w = db[i] / (db[i] - db[i + 1])
        fc = float(np.exp(lf[i] + w * (lf[i + 1] - lf[i])))
        phc = float(ph_deg[i] + w * (ph_deg[i + 1] - ph_deg[i]))
        cross.append((fc, 180.0 - abs(phc)))
    pcross = []
    for target in (180.0, -180.0):
        d = ph_deg - target
        for i in np.nonzero(np.diff(np.sign(d)) != 0)[0]:
            w = d[i] / (d[i] - d[i + 1])
            fp = float(np.exp(lf[i] + w * (lf[i + 1] - lf[i])))
            gm = -float(db[i] + w * (db[i + 1] - db[i]))
            pcross.append((fp, gm))
    pcross.sort()
    return LoopGain(path, node, f, t, ph_deg, complex(t[k]), tuple(cross), tuple(pcross))


def loop_frequencies(band_low_hz: float, band_high_hz: float) -> np.ndarray:
    """A wide log grid for loop gains: a decade below the band to 100× above it (at least 1 MHz)."""
    return np.geomspace(band_low_hz / 10.0, max(band_high_hz * 100.0, 1e6), 800)


# -- the whole check ---------------------------------------------------------------


def _pair_representatives(ps: tuple[Pole, ...]) -> tuple[Pole, ...]:
    """One pole of each conjugate pair (the one with Im ≥ 0), real poles as they are."""
    return tuple(p for p in ps if p.s_hz.imag >= 0.0)


def _kind_words(pole: Pole) -> str:
    f = pole.oscillation_hz
    if f == 0.0:
        return "it runs away without oscillating (latch-up, or a slow drift to one limit)"
    if f < 20.0:
        return f"it will oscillate at about {_hz(f)} (motorboating)"
    if f > 20e3:
        return f"it will oscillate at about {_hz(f)}, above hearing (squeal, heat, a hard, fizzy tone)"
    return f"it will oscillate at about {_hz(f)} (squeal)"


def _hz(f: float) -> str:
    from chain.units import format_si

    return format_si(f, "Hz")


def stability(ss: SmallSignalCircuit, *, ref_hz: float = 1e3, band_hz: tuple[float, float] = (10.0, 100e3),
              mna: Mna | None = None) -> Stability:
    """Poles, zeros at the output, the unstable poles with their loop, and feedback loop gains.

    Diagnostics: E801 per unstable pole (pair); W801 for a stable feedback
    network loop with a phase margin under :data:`PHASE_MARGIN_DEG` or a
    gain margin under :data:`GAIN_MARGIN_DB`; W802 when located right-half-plane
    poles are counted there by none; W803 when computed output zeros failed
    their check and were left out.
    """
    mna = assemble(ss) if mna is None else mna
    eigen = pencil_eigen(mna, vectors=True)  # one eigen-solve for the poles and the pole–zero form
    ps = poles(ss, mna=mna, eigen=eigen)
    out = pole_zero(ss, ref_hz=ref_hz, mna=mna, poles_rad_s=eigen[0])
    unstable = _pair_representatives(tuple(p for p in ps if p.unstable))
    diags: list[Diagnostic] = []
    if unstable and rhp_count(mna, np.array([2.0 * math.pi * p.s_hz for p in ps])) == 0:
        # located in the right half-plane, counted there by none: rounding has
        # scattered a cluster of near-equal poles across the axis (module docstring)
        diags.append(warning(
            "W802",
            f"{len(tuple(p for p in ps if p.unstable))} of the {len(ps)} poles were located in the right "
            "half-plane, but counting them by the argument principle on det Y(jω) finds none there: "
            "the circuit is stable, and the listed pole positions are uncertain (near-equal poles of "
            "similar stages in a long chain, which rounding scatters by many percent)"))
        unstable = ()
    if out.zeros_left_out:
        diags.append(zeros_left_out_warning(out))
    guilty = culprits(ss, mna, unstable) if unstable else ()
    loops = []
    f_loop = loop_frequencies(*band_hz)
    for path in feedback_networks(ss.circuit):
        lg = loop_gain(ss, path, f_loop, mna=mna)
        if lg is not None:
            loops.append(lg)
    for p, paths in zip(unstable, guilty):
        where = f"; the loop closes through {describe_paths(paths)}" if paths else \
            "; breaking no single feedback network or rail removes it (a loop inside the stages)"
        parts = ", ".join(name for name, _ in p.dominant)
        diags.append(error(
            "E801",
            f"unstable: a pole in the right half-plane at s/2π = {_s_text(p.s_hz)}: {_kind_words(p)}{where}. "
            "The small-signal response shown is not what the circuit will do",
            hint=f"the parts that move this pole most: {parts}" if parts else "",
            subject=paths[0].parts[0] if paths and paths[0].parts else ""))
    if not unstable:
        for lg in loops:
            pm, gm = lg.phase_margin_deg, lg.gain_margin_db
            if not lg.negative:
                continue
            low_pm = pm is not None and pm < PHASE_MARGIN_DEG
            low_gm = gm is not None and gm < GAIN_MARGIN_DB
            if low_pm or low_gm:
                bits = []
                if pm is not None:
                    bits.append(f"phase margin {pm:.0f}°")
                if gm is not None:
                    bits.append(f"gain margin {gm:.1f} dB")
                diags.append(warning(
                    "W801", f"{lg.path.describe()}: stable but with little margin ({', '.join(bits)}; "
                    f"common practice wants at least {PHASE_MARGIN_DEG:.0f}° and {GAIN_MARGIN_DB:.0f} dB): "
                    "expect ringing and a peak in the response near the crossover",
                    subject=lg.path.parts[0] if lg.path.parts else ""))
    return Stability(ps, out, unstable, guilty, tuple(loops), tuple(diags))


def zeros_left_out_warning(out: PoleZero) -> Diagnostic:
    """W803: computed zeros of the output transfer at which the solved output
    does not vanish (:func:`chain.smallsignal.poles.verified_zeros`)."""
    n = out.zeros_left_out
    total = n + len(out.zeros_hz)
    return warning(
        "W803",
        f"{n} of the {total} computed zeros of the transfer to {out.node} did not check out (solving the "
        "circuit at each, the output does not vanish there) and are left out of the zeros listed: the "
        "eigen-solve cannot resolve a zero at infinity of high order (a long ladder-like path whose "
        "response falls steeply at high frequencies) and scatters it into spurious finite zeros")


def _s_text(s_hz: complex) -> str:
    from chain.units import format_si

    re_ = format_si(s_hz.real, "Hz")
    if s_hz.imag == 0.0:
        return re_
    return f"{re_} ± j{format_si(abs(s_hz.imag), 'Hz')}"
