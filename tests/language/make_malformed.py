"""Regenerate the malformed-netlist corpus in ``malformed/`` (run by hand).

Each case is a small valid netlist with one deliberate mistake; its first
line records the expected diagnostic: ``# expect: CODE LINE:COLUMN``.
The test ``test_malformed.py`` checks that ``chain check`` reports exactly
that code at that place, exits 2 and prints no traceback.
"""

from pathlib import Path

BASE = """title "Corpus base"
supply HT 300V
rail B1 from HT drop 10k decouple 22u
input into V1 resistance 10k

stage V1 common-cathode 12AX7
  plate 100k from B1
  cathode 1k5 bypass 22u
  grid leak 1M

stage V2 common-cathode 12AX7
  plate 100k from B1
  cathode 1k5
  grid leak 1M

couple V1 -> V2 cap 22n
output V2 load 1M
"""

# (name, old text, new text, code, line, column) — line/column of the mistake
# counted in BASE with the expectation comment as an extra first line.
CASES = [
    ("misspelt_kind", "common-cathode 12AX7\n  plate 100k from B1\n  cathode 1k5 bypass",
     "comon-cathode 12AX7\n  plate 100k from B1\n  cathode 1k5 bypass", "E103", 7, 10),
    ("misspelt_from", "plate 100k from B1\n  cathode 1k5 bypass", "plate 100k form B1\n  cathode 1k5 bypass", "E103", 8, 14),
    ("misspelt_leak", "  grid leak 1M\n\nstage V2", "  grid leek 1M\n\nstage V2", "E103", 10, 8),
    ("bad_value_letters", "cathode 1k5 bypass", "cathode 1x5 bypass", "E110", 9, 12),
    ("unit_mismatch", "cathode 1k5 bypass 22u", "cathode 1k5 bypass 22uH", "E110", 9, 25),
    ("missing_value", "rail B1 from HT drop 10k decouple 22u", "rail B1 from HT drop", "E101", 4, 21),
    ("extra_word", "supply HT 300V", "supply HT 300V volts", "E103", 3, 16),
    ("value_without_rated", "couple V1 -> V2 cap 22n", "couple V1 -> V2 cap 22n 400V", "E103", 17, 25),
    ("complete_then_more", "couple V1 -> V2 cap 22n", "couple V1 -> V2 direct now", "E102", 17, 24),
    ("arrow", "couple V1 -> V2", "couple V1 => V2", "E103", 17, 11),
    ("capacitor_word", "V2 cap 22n", "V2 capacitor 22n", "E103", 17, 17),
    ("member_outside", "output V2 load 1M", "output V2 load 1M\n  grid leak 1M", "E105", 19, 3),
    ("unindented_member", "  grid leak 1M\n\nstage V2", "grid leak 1M\n\nstage V2", "E107", 10, 1),
    ("tab_indent", "  cathode 1k5\n", "\tcathode 1k5\n", "E104", 14, 1),
    ("duplicate_member", "  cathode 1k5\n", "  cathode 1k5\n  cathode 2k2\n", "E108", 15, 3),
    ("unknown_tube", "common-cathode 12AX7\n  plate 100k from B1\n  cathode 1k5\n",
     "common-cathode 12AX9\n  plate 100k from B1\n  cathode 1k5\n", "E206", 12, 7),
    ("unknown_rail", "plate 100k from B1\n  cathode 1k5\n", "plate 100k from B9\n  cathode 1k5\n", "E204", 13, 3),
    ("unknown_stage_couple", "couple V1 -> V2", "couple V1 -> V3", "E215", 17, 8),
    ("duplicate_stage", "stage V2 common-cathode", "stage V1 common-cathode", "E201", 12, 7),
    ("zero_plate_load", "plate 100k from B1\n  cathode 1k5\n", "plate 0 from B1\n  cathode 1k5\n", "E301", 13, 3),
    ("negative_cathode", "cathode 1k5\n  grid leak 1M\n\ncouple", "cathode -1k5\n  grid leak 1M\n\ncouple", "E301", 14, 3),
    ("absurd_coupling_cap", "cap 22n", "cap 10F", "E302", 17, 8),
    ("pickup_loss_tiny", "input into V1 resistance 10k",
     "input into V1 pickup winding 6k5 inductance 2.5H capacitance 120p loss 10", "E302", 5, 12),
    ("absurd_plate_load", "plate 100k from B1\n  cathode 1k5\n", "plate 1m from B1\n  cathode 1k5\n", "E302", 13, 3),
    ("unknown_input_stage", "input into V1", "input into V7", "E215", 5, 12),
    ("no_output", "output V2 load 1M\n", "", "E221", 1, 1),
    ("no_plate", "  plate 100k from B1\n  cathode 1k5\n", "  cathode 1k5\n", "E304", 12, 7),
    ("grid_no_dc_path", "  cathode 1k5\n  grid leak 1M\n\ncouple", "  cathode 1k5\n\ncouple", "E314", 12, 7),
    ("node_no_dc_path",
     "output V2 load 1M\n", "output V2 load 1M\nnetwork hang\n  capacitor c1 V2.plate -- x 1n\n  capacitor c2 x -- gnd 1n\n",
     "E313", 20, 13),
    ("dangling_node", "output V2 load 1M\n", "output V2 load 1M\nnetwork hang\n  resistor r1 V2.plate -- x 10k\n",
     "E312", 20, 12),
    ("pot_out_of_range", "output V2 load 1M\n",
     "output V2 load 1M\nnetwork vol\n  pot level cw V2.plate wiper w ccw gnd 1M audio 10% at 12\n  resistor r w -- gnd 1M\n",
     "E309", 20, 7),
    ("stage_fed_twice", "couple V1 -> V2 cap 22n\n", "couple V1 -> V2 direct\ncouple V2 -> V1 direct\n", "E219", 18, 8),
    ("direct_loop", "couple V1 -> V2 cap 22n\n",
     "couple V1 -> V2 cap 22n\nstage V3 common-cathode 12AX7\n  plate 100k from B1\n  cathode 1k5\n"
     "stage V4 common-cathode 12AX7\n  plate 100k from B1\n  cathode 1k5\ncouple V3 -> V4 direct\ncouple V4 -> V3 direct\n",
     "E315", 24, 8),
    ("pair_without_second_plate", "stage V2 common-cathode", "stage V2 long-tailed-pair", "E272", 12, 7),
    ("tail_on_single_triode", "  cathode 1k5\n  grid leak 1M\n\ncouple", "  cathode 1k5 tail 10k\n  grid leak 1M\n\ncouple",
     "E271", 14, 3),
    ("second_on_cathodyne", "stage V2 common-cathode 12AX7\n  plate 100k from B1\n",
     "stage V2 cathodyne 12AX7\n  plate 100k from B1\n  second plate 100k from B1\n", "E270", 14, 3),
    ("unknown_output_port", "couple V1 -> V2 cap 22n", "couple V1.plate -> V2 cap 22n", "E273", 17, 8),
    ("grid_bypass_first_grid", "  grid leak 1M\n\ncouple", "  grid leak 1M bypass 100n\n\ncouple", "E270", 15, 3),
    ("rail_loop", "rail B1 from HT drop 10k decouple 22u", "rail B1 from B1 drop 10k decouple 22u", "E205", 4, 6),
    ("bad_tube_param", "title \"Corpus base\"", "title \"Corpus base\"\ntube T9 like 12AX7 mu 90 gain 3", "E111", 3, 26),
    ("meg_suffix", "grid leak 1M\n\nstage V2", "grid leak 1meg\n\nstage V2", "E110", 10, 14),
    ("follower_needs_cathode", "stage V2 common-cathode 12AX7\n  plate 100k from B1\n  cathode 1k5\n",
     "stage V2 cathode-follower 12AX7\n  plate on B1\n", "E306", 12, 7),
    ("reserved_name", "stage V2 common-cathode", "stage gnd common-cathode", "E202", 12, 7),
    ("unknown_terminal", "output V2 load 1M\n", "output V2 load 1M\nstray V2.anod 5p\n", "E209", 19, 7),
    ("band_reversed", "title \"Corpus base\"", "title \"Corpus base\"\nset band 20kHz 20Hz", "E303", 3, 1),
    ("tube_loop", "title \"Corpus base\"", "title \"Corpus base\"\ntube A like B\ntube B like A", "E223", 3, 6),
    ("level_zero", "title \"Corpus base\"", "title \"Corpus base\"\nset level 0V", "E301", 3, 1),
    ("second_input", "input into V1 resistance 10k", "input into V1 resistance 10k\ninput into V1 ideal", "E113", 6, 12),
]


def main() -> None:
    here = Path(__file__).parent / "malformed"
    here.mkdir(exist_ok=True)
    for old in here.glob("*.chain"):
        old.unlink()
    for name, old, new, code, line, col in CASES:
        assert old in BASE, name
        text = f"# expect: {code} {line}:{col}\n" + BASE.replace(old, new, 1)
        (here / f"{name}.chain").write_text(text, encoding="utf-8")


if __name__ == "__main__":
    main()
