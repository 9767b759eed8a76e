"""Design → Circuit expansion and the topology checks."""

import math

import pytest

from chain.build import WIPER_OHM, build, load_text, pot_fraction
from chain.errors import LanguageError

BASE = """supply HT 300V
rail B1 from HT drop 10k decouple 22u
input into V1 resistance 10k
stage V1 common-cathode 12AX7
  plate 100k from B1
  cathode 1k5 bypass 22u series 470
  grid leak 1M stopper 68k
stage V2 cathode-follower 12AX7
  plate on HT
  cathode 100k
couple V1 -> V2 direct
output V2 load 1M
"""


def parts(circuit):
    return {p.name: p for p in (*circuit.resistors, *circuit.capacitors, *circuit.inductors, *circuit.sources)}


def test_stage_expands_into_named_parts():
    _, c, _ = load_text(BASE)
    p = parts(c)
    assert (p["V1.RL"].a, p["V1.RL"].b, p["V1.RL"].ohms) == ("B1", "V1.plate", 100e3)
    assert (p["V1.Rk"].a, p["V1.Rk"].b) == ("V1.cathode", "gnd")
    assert (p["V1.Rkc"].a, p["V1.Rkc"].b, p["V1.Ck"].a) == ("V1.cathode", "V1.kb", "V1.kb")
    assert (p["V1.Rs"].a, p["V1.Rs"].b) == ("V1.in", "V1.grid")
    assert (p["rail.B1.R"].a, p["rail.B1.R"].b) == ("HT", "B1")
    t1, t2 = c.triodes
    assert (t1.plate, t1.grid, t1.cathode) == ("V1.plate", "V1.grid", "V1.cathode")
    # direct coupling: V2's grid is V1's plate node; the follower's plate sits on the supply
    assert (t2.plate, t2.grid, t2.cathode) == ("HT", "V1.plate", "V2.cathode")
    assert [s.name for s in c.stages] == ["V1", "V2"]
    assert c.stage("V2").output == "V2.cathode" and c.output_node == "V2.cathode"
    assert c.input_node == "V1.in"


def test_pickup_source_parts():
    text = BASE.replace("input into V1 resistance 10k",
                        "input into V1 pickup winding 6k5 inductance 2.5H capacitance 120p cable 470p")
    p = parts(load_text(text)[1])
    assert (p["input.Rw"].ohms, p["input.L"].henries) == (6500.0, 2.5)
    assert (p["input.C"].farads, p["input.Ccable"].farads) == (120e-12, 470e-12)
    assert p["input.L"].b == p["input.C"].a == "V1.in"
    # the eddy-current loss sits across the inductance (its stated default: chain.language.design)
    assert (p["input.Rloss"].a, p["input.Rloss"].b) == (p["input.L"].a, p["input.L"].b)
    assert p["input.Rloss"].ohms == 300e3
    lossless = text.replace("cable 470p", "cable 470p loss off")
    assert "input.Rloss" not in parts(load_text(lossless)[1])


@pytest.mark.parametrize("position, expected", [(0.0, 0.0), (0.5, 0.1), (1.0, 1.0)])
def test_audio_taper_passes_through_its_defining_points(position, expected):
    # the taper law's defining points: t(0)=0, t(1/2)=p, t(1)=1 (see pot_fraction)
    assert pot_fraction("audio", 0.1, position) == pytest.approx(expected, abs=1e-12)


def test_audio_taper_is_monotonic_and_linear_is_identity():
    xs = [i / 20 for i in range(21)]
    ts = [pot_fraction("audio", 0.15, x) for x in xs]
    assert all(a < b for a, b in zip(ts, ts[1:]))
    assert all(pot_fraction("linear", 0.5, x) == x for x in xs)


def test_pot_splits_into_two_resistors_and_never_zero():
    text = BASE + "network vol\n  pot level cw V1.plate wiper w ccw gnd 1M linear at 10\n  resistor r w -- gnd 1M\n"
    p = parts(load_text(text)[1])
    assert p["vol.level.a"].ohms == WIPER_OHM
    assert math.isclose(p["vol.level.b"].ohms, 1e6)


@pytest.mark.parametrize("knob,ohms", [(0, WIPER_OHM), (5, 0.1 * 1e6), (10, 1e6)])
def test_a_rheostat_adds_resistance_as_the_knob_turns_up(knob, ohms):
    # common practice: a bass or mid control wired as a variable resistor gives
    # the full track at knob 10; a 10 % audio taper gives 10 % of it at mid-rotation
    text = BASE + f"network t\n  rheostat bass V1.plate -- m 1M audio 10% at {knob}\n  resistor r m -- gnd 1M\n"
    p = parts(load_text(text)[1])
    assert "t.bass.a" not in p  # the wiper is tied to the knob-10 end: no part across it
    assert math.isclose(p["t.bass.b"].ohms, ohms, rel_tol=1e-9)


def test_network_attached_twice_gets_two_instances():
    text = BASE.replace("couple V1 -> V2 direct\noutput V2 load 1M\n", "") + """
stage V3 common-cathode 12AX7
  plate 100k from B1
  cathode 1k5
network att: in -> out
  resistor top in -- out 100k
  resistor bottom out -- gnd 100k
couple V1 -> V3 via att
couple V3 -> V2 via att as att2
output V2 load 1M
"""
    c = load_text(text)[1]
    names = {r.name for r in c.resistors}
    assert {"att.top", "att.bottom", "att2.top", "att2.bottom"} <= names
    assert c.couplings["att"] == ("V1.plate", "V3.in")
    assert [s.name for s in c.stages] == ["V1", "V3", "V2"]


def test_feedback_network_names_stage_terminals():
    text = BASE + "network fb\n  resistor r V2.cathode -- m 1M\n  capacitor c m -- V1.cathode 10n\n"
    p = parts(load_text(text)[1])
    assert (p["fb.r"].a, p["fb.r"].b, p["fb.c"].b) == ("V2.cathode", "fb.m", "V1.cathode")


def test_grid_without_dc_path_is_reported_at_the_stage():
    text = BASE.replace("  grid leak 1M stopper 68k\n", "  grid stopper 68k\n").replace(
        "input into V1 resistance 10k", "input into V2 resistance 10k").replace(
        "couple V1 -> V2 direct", "couple V2 -> V1 cap 22n").replace("output V2 load 1M", "output V1 load 1M")
    with pytest.raises(LanguageError) as info:
        load_text(text, "x.chain")
    d = info.value.diagnostics[0]
    assert (d.code, d.span.line) == ("E314", 4)
    assert "add a grid leak" in d.hint


def test_user_tube_overrides_a_builtin():
    text = "tube T1 like 12AX7 mu 90 cgk 2p vp-max 250V\n" + BASE.replace("common-cathode 12AX7", "common-cathode T1")
    c = load_text(text)[1]
    m = c.triode("V1").model
    assert (m.name, m.mu, m.cgk_f, m.ratings.vp_max_v) == ("T1", 90.0, 2e-12, 250.0)
    assert "T1" not in {t.model.name for t in c.triodes[1:]}


def test_build_is_deterministic():
    d = load_text(BASE)[0]
    assert build(d) == build(d)


def test_with_part_changes_exactly_one_value():
    from chain.build import part_names, with_part

    d = load_text(BASE + "network vol\n  pot level cw V1.plate wiper w ccw gnd 1M linear at 5\n  resistor r w -- gnd 1M\n")[0]
    assert "V1.Ck" in part_names(d) and "vol.level" in part_names(d)
    c = build(with_part(d, "V1.Ck", 47e-6))
    assert parts(c)["V1.Ck"].farads == 47e-6
    assert parts(c)["V1.Rk"].ohms == 1500.0
    # a pot takes a knob setting: 10 puts the wiper at the 'a' end (minimum resistance a–w)
    c = build(with_part(d, "vol.level", 10))
    assert parts(c)["vol.level.a"].ohms == WIPER_OHM
    assert parts(build(with_part(d, "rail.B1.R", 22e3)))["rail.B1.R"].ohms == 22e3
    assert parts(build(with_part(d, "output.load", 470e3)))["output.load"].ohms == 470e3


def test_with_part_unknown_name_suggests():
    from chain.build import with_part

    with pytest.raises(KeyError, match="did you mean V1.Ck"):
        with_part(load_text(BASE)[0], "V1.Cx", 1e-6)


def test_tube_like_itself_changes_the_builtin_of_that_name():
    c = load_text("tube 12AX7 like 12AX7 mu 95\n" + BASE)[1]
    assert {t.model.mu for t in c.triodes} == {95.0}


def test_a_network_port_named_from_outside_is_the_node_it_is_attached_to():
    text = BASE.replace("couple V1 -> V2 direct\noutput V2 load 1M\n", "") + """
network pad: in -> out
  resistor top in -- out 100k
  resistor bottom out -- gnd 100k
couple V1 -> V2 via pad
output pad.out load 1M
"""
    c = load_text(text)[1]
    assert c.output_node == "V2.in"


def test_every_stage_kind_of_the_language_has_one_expansion_module():
    # chain.kinds finds a module per kind by looking in its package; the language's list is the contract
    from chain.kinds import kinds
    from chain.language.design import STAGE_KINDS

    assert sorted(kinds()) == sorted(STAGE_KINDS)
