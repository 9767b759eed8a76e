"""The parser: every construct of the language, located syntax errors, round trip."""

from pathlib import Path

import pytest

from chain.errors import LanguageError
from chain.language import Cathode, Coupling, Pot, parse_syntax
from chain.language.writer import format_design

DEMOS = sorted((Path(__file__).parents[2] / "netlists").glob("*.chain"))


def parse(text):
    return parse_syntax(text, "t.chain")


def test_title_and_settings():
    d = parse('title "Test amp"  # a comment\nset reference 2kHz\nset band 20Hz 20kHz\n'
              "set level 50mV\nset points 200\nset heater 60V\n")
    assert d.title == "Test amp"
    s = d.settings
    assert (s.reference_hz, s.band_low_hz, s.band_high_hz) == (2000.0, 20.0, 20000.0)
    assert (s.level_v, s.points, s.heater_v) == (0.05, 200, 60.0)


def test_defaults_when_no_settings():
    s = parse("").settings
    assert (s.reference_hz, s.band_low_hz, s.band_high_hz, s.points) == (1000.0, 10.0, 100e3, 500)


def test_supply_and_rails():
    d = parse("supply B+ 320V impedance 100\nrail B2 from B+ drop 4k7 decouple 22u rated 450V\n"
              "rail B3 from B2 drop 10k\n")
    assert d.supplies[0].name == "B+" and d.supplies[0].volts == 320.0 and d.supplies[0].impedance_ohm == 100.0
    r2, r3 = d.rails
    assert (r2.feed, r2.drop_ohm, r2.decouple_f, r2.decouple_rated_v) == ("B+", 4700.0, 22e-6, 450.0)
    assert r3.decouple_f is None


def test_stage_members():
    d = parse("stage V1 common-cathode 12AX7\n  plate 100k from B1\n  cathode 1k5 bypass 22u series 470 rated 25V\n"
              "  grid leak 1M stopper 68k\n  heater 50V\n")
    s = d.stage("V1")
    assert (s.kind, s.tube, s.plate_load_ohm, s.rail) == ("common-cathode", "12AX7", 100e3, "B1")
    assert s.cathode == Cathode(1500.0, 22e-6, 470.0, 25.0)
    assert (s.grid_leak_ohm, s.grid_stopper_ohm, s.heater_v) == (1e6, 68e3, 50.0)


def test_follower_plate_on_rail_and_common_grid():
    d = parse("stage V2 cathode-follower ECC83\n  plate on B1\n  cathode 100k\n"
              "stage V3 common-grid 12AT7\n  plate 33k from B1\n  cathode 680\n  grid ground\n")
    assert d.stage("V2").plate_load_ohm is None and d.stage("V2").rail == "B1"
    assert d.stage("V3").grid_ground


@pytest.mark.parametrize("kind", ["cathodyne", "long-tailed-pair"])
def test_two_triode_kinds_parse(kind):
    assert parse(f"stage P1 {kind} 12AU7\n").stages[0].kind == kind


def test_network_parts_and_pots():
    d = parse("network tone: in -> out\n  resistor slope in -- m 56k\n  capacitor c1 in -- t 470p rated 400V\n"
              "  inductor l1 m -- gnd 1.5H\n  pot treble cw t wiper out ccw m 250k audio 10% at 6\n"
              "  rheostat mid m -- gnd 25k linear travel 0.25\n")
    n = d.network("tone")
    assert n.ports == ("in", "out")
    r, c, l, treble, mid = n.parts
    assert (r.kind, r.a, r.b, r.value) == ("resistor", "in", "m", 56e3)
    assert (c.value, c.rated_v) == (470e-12, 400.0)
    assert l.value == 1.5
    assert treble == Pot("treble", "t", "out", "m", 250e3, "audio", 0.1, 0.6)
    assert (mid.taper, mid.position) == ("linear", 0.25)


def test_couplings():
    d = parse("couple V1 -> V2 cap 22n rated 400V\ncouple V2 -> V3 direct\ncouple V3 -> output via tone as tone2\n")
    assert d.couplings == (
        Coupling("V1", "V2", "cap", cap_f=22e-9, rated_v=400.0),
        Coupling("V2", "V3", "direct"),
        Coupling("V3", "output", "network", network="tone", instance="tone2"),
    )


def test_sources_output_stray():
    d = parse("input into V1 pickup winding 6k5 inductance 2.5H capacitance 120p cable 470p\n"
              "output V4 load 1M\nstray V1.plate 5p\n")
    src = d.source
    assert (src.kind, src.into, src.r_ohm, src.l_h, src.c_f, src.cable_f) == ("pickup", "V1", 6500.0, 2.5, 120e-12, 470e-12)
    assert (d.output.node, d.output.load_ohm) == ("V4", 1e6)
    assert (d.strays[0].node, d.strays[0].farads) == ("V1.plate", 5e-12)
    assert src.loss_ohm == 300e3  # the stated default eddy-current loss (chain.language.design)
    assert parse("input into V1 ideal\n").source.kind == "ideal"
    assert parse("input into V1 resistance 10k\n").source.r_ohm == 10e3


def test_user_tube():
    d = parse("tube T1 like 12AX7 mu 96 cgk 1.6p vp-max 300V rg-max 2M2\n")
    t = d.tubes[0]
    assert (t.name, t.base) == ("T1", "12AX7")
    assert dict(t.params) == {"mu": 96.0, "cgk": 1.6e-12, "vp-max": 300.0, "rg-max": 2.2e6}


def test_all_errors_of_a_file_are_reported_together():
    with pytest.raises(LanguageError) as info:
        parse("supply HT 300V volts\nstage V1 comon-cathode 12AX7\n  plate 100k form B1\n")
    codes = [(d.code, d.span.line, d.span.column) for d in info.value.diagnostics]
    assert codes == [("E103", 1, 16), ("E103", 2, 10), ("E103", 3, 14)]
    assert "did you mean 'common-cathode'?" in str(info.value)


def test_error_message_shows_line_and_caret():
    with pytest.raises(LanguageError) as info:
        parse("supply HT 300V\nrail B1 from HT drop 10k decuple 22u\n")
    assert str(info.value) == (
        "t.chain:2:26: error E103: unexpected 'decuple': expected 'decouple', end of line\n"
        "    rail B1 from HT drop 10k decuple 22u\n"
        "                             ^\n"
        "    hint: did you mean 'decouple'?"
    )


def test_layout_and_comments_do_not_change_the_design():
    a = parse("supply HT 300V\nrail B1 from HT drop 10k\n")
    b = parse("# header\n\nsupply   HT   300V   # raw\n\n\nrail B1 from HT drop 10k  # first rail\n")
    assert a == b


@pytest.mark.parametrize("path", DEMOS, ids=[p.stem for p in DEMOS])
def test_demo_round_trips_through_the_writer(path):
    d = parse_syntax(path.read_text(encoding="utf-8"), str(path))
    assert parse_syntax(format_design(d)) == d


def test_a_misspelt_member_is_offered_only_the_words_of_its_block():
    with pytest.raises(LanguageError) as info:
        parse("stage V1 common-cathode 12AX7\n  cathod 1k5\nnetwork n\n  resistr r a -- b 1k\n")
    first, second = info.value.diagnostics
    assert first.message == "unexpected 'cathod': expected 'cathode', 'grid', 'heater', 'plate', 'second'"
    assert second.message == "unexpected 'resistr': expected 'capacitor', 'inductor', 'pot', 'resistor', 'rheostat'"
    assert second.hint == "did you mean 'resistor'?"


def test_a_pot_names_its_ends_in_any_order():
    d = parse("network n\n  pot level ccw gnd cw top wiper out 1M log at 6\n")
    level = d.network("n").parts[0]
    assert (level.a, level.wiper, level.b, level.taper, level.taper_mid) == ("top", "out", "gnd", "audio", 0.1)


def test_a_pot_must_name_each_end_once():
    with pytest.raises(LanguageError) as info:
        parse("network n\n  pot level cw top wiper out cw gnd 1M linear at 6\n")
    codes = [d.code for d in info.value.diagnostics]
    assert codes == ["E120", "E120"]  # cw twice, ccw missing
    assert "ccw" in info.value.diagnostics[1].message


def test_a_rheostat_is_a_pot_with_its_wiper_on_the_knob_10_end():
    bass = parse("network n\n  rheostat bass m -- b 1M audio 10% at 4\n").network("n").parts[0]
    assert (bass.a, bass.wiper, bass.b, bass.position) == ("m", "m", "b", 0.4)


def test_the_unlabelled_pot_form_is_refused_with_the_line_to_write():
    with pytest.raises(LanguageError) as info:
        parse("network n\n  pot bass b -- m -- m 1M audio 10% at 4  # old\n  pot level top -- out -- gnd 1M audio at 6\n")
    bass, level = info.value.diagnostics
    assert (bass.code, bass.span.line, bass.span.column) == ("E121", 2, 7)
    assert "'rheostat bass m -- b 1M audio 10% at 4'" in bass.hint
    assert level.code == "E121" and "'pot level cw top wiper out ccw gnd 1M audio at 6'" in level.hint


def test_anode_is_the_plate():
    # anode: the British and European word for the plate (common practice)
    d = parse("stage V1 common-cathode 12AX7\n  anode 100k from B1\n"
              "network fb\n  resistor r V1.anode -- fb.m 1M\n  resistor r2 fb.m -- tone.anode 1M\n"
              "output V1.anode load 1M\nstray V1.anode 10p\n")
    assert (d.stages[0].plate_load_ohm, d.stages[0].rail) == (100e3, "B1")
    r, r2 = d.network("fb").parts
    assert r.a == "V1.plate" and r2.b == "tone.anode"  # only a stage's terminal is renamed
    assert d.output.node == "V1.plate" and d.strays[0].node == "V1.plate"


@pytest.mark.parametrize("tail, loss", [("", 300e3), (" loss 150k", 150e3), (" loss 1M5", 1.5e6), (" loss off", None)])
def test_pickup_loss_is_read_after_the_cable(tail, loss):
    d = parse(f"input into V1 pickup winding 6k5 inductance 2.5H capacitance 120p cable 470p{tail}\n")
    assert d.source.loss_ohm == loss and d.source.cable_f == 470e-12
