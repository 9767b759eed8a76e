"""Property: any Design the language can express survives writer → parser unchanged."""

from hypothesis import given, settings
from hypothesis import strategies as st

from chain.language import Cathode, Coupling, Design, Network, Output, Part, Pot, Rail, Settings, Source, Stage, Supply
from chain.language.design import Section
from chain.language import parse_syntax
from chain.language.writer import format_design

# values spread over the ranges a netlist uses, with awkward mantissas
ohms = st.floats(min_value=1.0, max_value=9.9e6, allow_nan=False, allow_infinity=False)
farads = st.floats(min_value=1e-12, max_value=9.9e-3, allow_nan=False, allow_infinity=False)
names = st.from_regex(r"[A-Za-z][A-Za-z0-9_]{0,5}", fullmatch=True).filter(
    lambda n: n not in {"gnd", "input", "output"})


@st.composite
def cathodes(draw):
    bypass = draw(st.none() | farads)
    return Cathode(draw(ohms), bypass,
                   draw(st.none() | ohms) if bypass is not None else None,
                   draw(st.none() | st.sampled_from([25.0, 63.0])) if bypass is not None else None,
                   draw(st.none() | ohms) if bypass is None else None)


@st.composite
def sections(draw):
    """The second triode of a long-tailed pair (its plate line is always written)."""
    bypass = draw(st.none() | farads)
    return Section(draw(st.none() | ohms), "B1", draw(st.none() | ohms), draw(st.none() | ohms), bypass,
                   draw(st.none() | st.just(100.0)) if bypass is not None else None)


@st.composite
def designs(draw):
    stage_names = draw(st.lists(names, min_size=1, max_size=4, unique=True))
    kinds = [draw(st.sampled_from(["common-cathode", "cathode-follower", "common-grid", "cathodyne",
                                   "long-tailed-pair"])) for _ in stage_names]
    stages = tuple(
        Stage(n, kind,
              draw(st.sampled_from(["12AX7", "12AT7", "ECC83", "12AU7"])),
              draw(st.none() | ohms), "B1", draw(st.none() | cathodes()),
              draw(st.none() | ohms), draw(st.none() | ohms), draw(st.booleans()),
              draw(st.none() | st.floats(min_value=0, max_value=100, allow_nan=False)),
              second=draw(sections()) if kind == "long-tailed-pair" else None)
        for n, kind in zip(stage_names, kinds))
    taper = draw(st.sampled_from(["linear", "audio"]))
    # a linear pot's mid-rotation fraction is 1/2 by definition
    mid = 0.5 if taper == "linear" else draw(st.floats(min_value=0.01, max_value=0.49, allow_nan=False))
    pot = Pot("p1", "out", "w", "gnd", draw(ohms), taper, mid,
              draw(st.floats(min_value=0.0, max_value=1.0, allow_nan=False)))
    parts = [Part("resistor", "r1", "in", "m", draw(ohms)),
             Part("capacitor", "c1", "m", "out", draw(farads), draw(st.none() | st.just(400.0))),
             Part("inductor", "l1", "m", "gnd", draw(st.floats(min_value=1e-3, max_value=50, allow_nan=False))),
             pot]
    couplings = tuple(Coupling(a, b, "cap", cap_f=draw(farads)) for a, b in zip(stage_names, stage_names[1:]))
    return Design(
        title=draw(st.from_regex(r"[A-Za-z0-9 ,.\-]{0,30}", fullmatch=True)).strip(),
        settings=Settings(reference_hz=draw(st.sampled_from([200.0, 1000.0, 1234.5])),
                          points=draw(st.integers(10, 2000)),
                          level_v=draw(st.floats(min_value=1e-3, max_value=5, allow_nan=False))),
        supplies=(Supply("HT", draw(st.floats(min_value=100, max_value=500, allow_nan=False)), draw(st.none() | ohms) or 0.0),),
        rails=(Rail("B1", "HT", draw(ohms), draw(st.none() | farads)),),
        stages=stages,
        networks=(Network("tone", ("in", "out"), tuple(parts)),),
        couplings=couplings + (Coupling(stage_names[-1], "output", "network", network="tone"),),
        source=draw(st.sampled_from([
            Source("ideal", stage_names[0]),
            Source("resistance", stage_names[0], 10e3),
            Source("pickup", stage_names[0], 6500.0, 2.5, 120e-12, 470e-12),
            Source("pickup", stage_names[0], 6500.0, 2.5, 120e-12, 470e-12, loss_ohm=180e3)])),
        output=draw(st.sampled_from([Output(None, 1e6),
                                     Output(f"{stage_names[-1]}.plate", 220e3,
                                            more=(Output(f"{stage_names[-1]}.cathode", 270e3),))])),
    )


@settings(max_examples=150, deadline=None, derandomize=True)
@given(designs())
def test_writer_then_parser_gives_the_same_design(design):
    assert parse_syntax(format_design(design)) == design
