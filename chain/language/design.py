"""The plain, immutable description a netlist parses into.

Nothing here knows the text syntax (that is :mod:`chain.language.parser`) or
any analysis.  Values are floats in SI base units (ohm, F, H, V, Hz); pot
positions are fractions of travel 0..1.  Every object carries the
:class:`~chain.errors.Span` of the line it came from, excluded from equality so
that two netlists that differ only in layout and comments compare equal.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Literal, get_args

from chain.errors import Span

__all__ = [
    "StageKind",
    "STAGE_KINDS",
    "ANALYSED_KINDS",
    "TERMINALS",
    "Settings",
    "ToleranceDef",
    "parse_tolerance",
    "Supply",
    "Rail",
    "TubeDef",
    "Cathode",
    "Section",
    "Stage",
    "Part",
    "Pot",
    "Network",
    "Coupling",
    "Source",
    "Output",
    "Stray",
    "Design",
]

#: every stage configuration the grammar knows
StageKind = Literal["common-cathode", "cathode-follower", "common-grid", "cathodyne", "long-tailed-pair"]
STAGE_KINDS: tuple[StageKind, ...] = get_args(StageKind)
#: the configurations the analysis handles (all of them)
ANALYSED_KINDS = STAGE_KINDS
#: the configurations with two triodes
TWO_TRIODE_KINDS = ("cathodyne", "long-tailed-pair")
#: stage terminals a network may name as ``STAGE.terminal`` (single-triode stages)
TERMINALS = ("plate", "grid", "cathode", "in")
#: terminals by configuration; a two-triode stage's ``tap`` is the node
#: between its cathode (bias) resistor and its tail resistor
KIND_TERMINALS = {
    "common-cathode": TERMINALS,
    "cathode-follower": TERMINALS,
    "common-grid": TERMINALS,
    "cathodyne": ("plate", "grid", "cathode", "tap", "in"),
    "long-tailed-pair": ("plate1", "plate2", "grid1", "grid2", "cathode", "tap", "in", "in2"),
}
#: the named ports of each configuration: (inputs, outputs), the main one first
KIND_PORTS = {
    "common-cathode": (("in",), ("out",)),
    "cathode-follower": (("in",), ("out",)),
    "common-grid": (("in",), ("out",)),
    "cathodyne": (("in",), ("plate", "cathode")),
    "long-tailed-pair": (("in", "in2"), ("plate1", "plate2")),
}

#: Eddy-current loss of a pickup when its line names none, ohm: a resistance
#: across the coil's inductance.  Common practice: passive magnetic pickups
#: loaded by a 1 MΩ input and a few hundred pF of cable show a resonance peak
#: of a few dB up to about +10 dB, not the +14 to +20 dB a lossless coil gives;
#: 300 kΩ across a 2–4 H coil puts typical windings in that range (about +7 dB
#: for 9.2 kΩ, 3.6 H, 610 pF into 1 MΩ).  Write ``loss off`` for the lossless
#: coil or ``loss R`` for a measured value.
DEFAULT_PICKUP_LOSS_OHM = 300e3

_NOWHERE = Span("<none>", 0, 0)


def _span() -> Span:
    return field(default=_NOWHERE, compare=False, repr=False)


@dataclass(frozen=True, slots=True)
class Settings:
    """Analysis settings with their defaults."""

    #: frequency at which gains and impedances are tabulated, Hz
    reference_hz: float = 1000.0
    #: lower and upper end of the sweep, Hz
    band_low_hz: float = 10.0
    band_high_hz: float = 100e3
    #: number of log-spaced sweep points
    points: int = 500
    #: input signal level, volts peak
    level_v: float = 0.1
    #: heater potential relative to ground, V (for the heater–cathode check)
    heater_v: float = 0.0


@dataclass(frozen=True, slots=True)
class Supply:
    """The raw DC supply: an ideal source behind an optional output impedance."""

    name: str
    volts: float
    impedance_ohm: float = 0.0
    span: Span = _span()


@dataclass(frozen=True, slots=True)
class Rail:
    """A rail fed from ``feed`` (a supply or another rail) through a dropping
    resistor, decoupled to ground by a capacitor."""

    name: str
    feed: str
    drop_ohm: float
    decouple_f: float | None = None
    decouple_rated_v: float | None = None
    span: Span = _span()


@dataclass(frozen=True, slots=True)
class TubeDef:
    """A tube model defined in the netlist: a base type (or none), a model
    form (``None``: the base's form) and parameter overrides, ``(key,
    value)`` pairs in SI units."""

    name: str
    base: str | None
    params: tuple[tuple[str, float], ...]
    span: Span = _span()
    form: str | None = None


@dataclass(frozen=True, slots=True)
class Cathode:
    """Cathode network: ``r_ohm`` to ground, optionally bypassed by
    ``bypass_f``; with ``bypass_series_ohm`` the capacitor has a resistor in
    series (the split form: the cathode sees Rk ∥ (Rkc + Ck))."""

    r_ohm: float
    bypass_f: float | None = None
    bypass_series_ohm: float | None = None
    bypass_rated_v: float | None = None
    #: two-triode stages: tail resistor from the tap under ``r_ohm`` to
    #: ground; the grid leaks return to that tap (None: ``r_ohm`` goes to
    #: ground and so do the grid leaks)
    tail_ohm: float | None = None


@dataclass(frozen=True, slots=True)
class Section:
    """The second triode of a long-tailed pair: its plate load and rail, its
    grid leak (to the tap, or to ground without a tail), grid stopper, and a
    capacitor from the top of its grid leak to ground (AC-grounding that grid)."""

    plate_load_ohm: float | None = None
    rail: str = ""
    grid_leak_ohm: float | None = None
    grid_stopper_ohm: float | None = None
    grid_bypass_f: float | None = None
    grid_bypass_rated_v: float | None = None


@dataclass(frozen=True, slots=True)
class Stage:
    name: str
    kind: StageKind
    tube: str
    #: plate load resistor, ohm; None for a plate straight on its rail
    plate_load_ohm: float | None = None
    #: the supply or rail the plate (load) hangs from
    rail: str = ""
    cathode: Cathode | None = None
    grid_leak_ohm: float | None = None
    grid_stopper_ohm: float | None = None
    #: grid tied straight to ground (the usual common-grid stage)
    grid_ground: bool = False
    #: heater potential for this tube, V; None = the design's setting
    heater_v: float | None = None
    span: Span = _span()
    #: where each member line was written: "plate", "cathode", "grid_leak", …
    #: ("second_plate", "second_grid_leak", … for the second triode)
    spans: dict = field(default_factory=dict, compare=False, repr=False)
    #: the second triode of a long-tailed pair (its ``second …`` lines)
    second: Section | None = None


@dataclass(frozen=True, slots=True)
class Part:
    """A two-terminal part in a network: ``kind`` is resistor, capacitor or inductor."""

    kind: str
    name: str
    a: str
    b: str
    value: float
    rated_v: float | None = None
    span: Span = _span()


@dataclass(frozen=True, slots=True)
class Pot:
    """A potentiometer: ends ``a`` (the end the wiper reaches at full
    rotation, knob 10: the ``cw`` end) and ``b`` (knob 0: the ``ccw`` end),
    wiper ``wiper``.  A ``rheostat`` line (variable resistor) is a pot with
    its wiper tied to the ``a`` end, so that the resistance ``a``–``b`` (the
    wiper–``b`` section) rises with the knob.

    ``taper`` is ``"linear"`` or ``"audio"``; for audio, ``taper_mid`` is the
    fraction of resistance between wiper and ``b`` at mid-rotation (0.1 for
    the usual 10 % audio taper).  ``position`` is the fraction of travel 0..1.
    """

    name: str
    a: str
    wiper: str
    b: str
    value: float
    taper: str
    taper_mid: float
    position: float
    span: Span = _span()


@dataclass(frozen=True, slots=True)
class Network:
    """A named passive network.  With ports (``in`` and ``out``) it is a
    template attached by ``couple … via NAME``; without ports it is placed
    as written, its nodes naming stage terminals directly."""

    name: str
    ports: tuple[str, ...]
    parts: tuple[Part | Pot, ...]
    span: Span = _span()


@dataclass(frozen=True, slots=True)
class Coupling:
    """How the signal passes from stage ``src`` to stage ``dst`` (or to
    ``"output"``): ``kind`` is ``cap``, ``direct`` or ``network``."""

    src: str
    dst: str
    kind: str
    cap_f: float | None = None
    rated_v: float | None = None
    network: str | None = None
    #: the instance name of the attached network (defaults to the network's name)
    instance: str | None = None
    span: Span = _span()

    @property
    def label(self) -> str:
        if self.kind == "network":
            return self.instance or self.network or ""
        return f"{self.src}->{self.dst}"

    @property
    def src_stage(self) -> str:
        """The source stage (``PI`` of ``PI.cathode``)."""
        return self.src.partition(".")[0]

    @property
    def src_port(self) -> str | None:
        """The source stage's output port when named (``cathode`` of ``PI.cathode``), else None."""
        return self.src.partition(".")[2] or None

    @property
    def dst_stage(self) -> str:
        """The destination stage (or ``"output"``)."""
        return self.dst.partition(".")[0]

    @property
    def dst_port(self) -> str | None:
        """The destination stage's input port when named (``in2`` of ``PI.in2``), else None."""
        return self.dst.partition(".")[2] or None


@dataclass(frozen=True, slots=True)
class Source:
    """The input signal source, driving stage ``into``.

    ``kind`` is ``ideal``, ``resistance`` (``r_ohm``) or ``pickup``
    (winding resistance ``r_ohm`` and inductance ``l_h`` in series, its own
    capacitance ``c_f`` and the cable's ``cable_f`` across the output, and
    its eddy-current loss ``loss_ohm`` across the inductance — None for a
    lossless coil); ``cap_f`` couples it to the stage through a capacitor."""

    kind: str
    into: str
    r_ohm: float = 0.0
    l_h: float = 0.0
    c_f: float = 0.0
    cable_f: float = 0.0
    #: eddy-current loss of a pickup, a resistance across its inductance, ohm (None: lossless)
    loss_ohm: float | None = None
    #: coupling capacitor between the source and the first stage, F (None: DC-coupled)
    cap_f: float | None = None
    cap_rated_v: float | None = None
    span: Span = _span()


@dataclass(frozen=True, slots=True)
class Output:
    """Where the output is taken (a stage name, a stage terminal or a network
    node; None when a coupling leads to ``output``) and the load there."""

    node: str | None
    load_ohm: float
    span: Span = _span()
    #: further output ports named on the same line (``… and PI.cathode load 220k``)
    more: tuple["Output", ...] = ()


@dataclass(frozen=True, slots=True)
class ToleranceDef:
    """A ``tolerance`` line: relative deviations ``low <= 0 <= high`` allowed for
    ``target`` — a kind (``resistors``, ``pots``, ``capacitors``,
    ``electrolytics``, ``inductors``, ``tubes``), a part or a stage's tube, or,
    with ``tube_type``, every tube of that type."""

    target: str
    low: float
    high: float
    tube_type: bool = False
    span: Span = _span()


def parse_tolerance(text: str, span: Span) -> tuple[float, float]:
    """``5%`` → (−0.05, +0.05); ``-20%+50%`` → (−0.20, +0.50); a plain
    fraction (``0.05``) is read as such.  Raises a located E950 otherwise."""
    import re

    from chain.errors import LanguageError, error

    m = re.fullmatch(r"([+-]?\d+(?:\.\d+)?)(%?)(?:([+-]\d+(?:\.\d+)?)(%?))?", text)
    if m is not None:
        first = float(m.group(1)) / (100.0 if m.group(2) else 1.0)
        if m.group(3) is None:
            if not m.group(1).startswith(("+", "-")) and 0.0 <= first < 1.0:
                return -first, first
        else:
            second = float(m.group(3)) / (100.0 if m.group(4) else 1.0)
            if -1.0 < first <= 0.0 <= second:
                return first, second
    raise LanguageError([error("E950", f"bad tolerance '{text}'", span,
                               "write a percentage below 100 such as 5%, or a band such as -20%+50%")])


@dataclass(frozen=True, slots=True)
class Stray:
    """Stray capacitance from a node to ground."""

    node: str
    farads: float
    span: Span = _span()


@dataclass(frozen=True, slots=True)
class Design:
    """A whole preamp as written."""

    title: str = ""
    settings: Settings = Settings()
    supplies: tuple[Supply, ...] = ()
    rails: tuple[Rail, ...] = ()
    tubes: tuple[TubeDef, ...] = ()
    stages: tuple[Stage, ...] = ()
    networks: tuple[Network, ...] = ()
    couplings: tuple[Coupling, ...] = ()
    source: Source | None = None
    output: Output | None = None
    strays: tuple[Stray, ...] = ()
    #: part and tube tolerances for ``chain spread``, in netlist order
    tolerances: tuple[ToleranceDef, ...] = ()
    #: the file it came from ("<string>" for text)
    path: str = field(default="<string>", compare=False)
    #: the lines of the text, for error display
    lines: tuple[str, ...] = field(default=(), compare=False, repr=False)
    #: the validation warnings of the parsed text (set by ``parse_text``, so
    #: that a file is validated once; empty for a design made in Python)
    warnings: tuple = field(default=(), compare=False, repr=False)

    def stage(self, name: str) -> Stage:
        for s in self.stages:
            if s.name == name:
                return s
        raise KeyError(name)

    def network(self, name: str) -> Network:
        for n in self.networks:
            if n.name == name:
                return n
        raise KeyError(name)

    def with_stage(self, name: str, **changes) -> "Design":
        """A new Design with stage ``name``'s fields replaced."""
        if not any(s.name == name for s in self.stages):
            raise KeyError(name)
        stages = tuple(replace(s, **changes) if s.name == name else s for s in self.stages)
        # the result no longer matches the file's text: drop the text and its
        # warnings, mark the origin
        return replace(self, stages=stages, lines=(), warnings=(), path=f"{self.path} (modified)")
