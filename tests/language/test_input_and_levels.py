"""The input coupling capacitor, the common-grid refusal and levels in rms and dB (issue 13)."""

import math

import pytest

from chain.analysis import analyze_design
from chain.build import load_text
from chain.errors import LanguageError
from chain.language import parse_text
from chain.language.writer import format_design
from chain.units import QuantityError, parse_level

CG_FRONT = """\
title "Wren common-grid front"
supply HT 250V
stage V1 common-grid 12AU7
  plate 47k from HT
  cathode 1k
  grid ground
stage V2 common-cathode 12AX7
  plate 100k from HT
  cathode 1k5 bypass 22u
  grid leak 1M
couple V1 -> V2 cap 47n
input into V1 {source}
output V2 load 1M
"""


def test_an_ideal_source_into_a_common_grid_cathode_is_refused_with_what_to_add():
    with pytest.raises(LanguageError) as err:
        parse_text(CG_FRONT.format(source="ideal"), "cg.chain")
    (d,) = [d for d in err.value.diagnostics if d.code == "E325"]
    assert d.span.line == 12 and "cap 10u" in d.hint


def test_a_capacitor_coupled_common_grid_front_biases_by_its_cathode_resistor():
    """With the input capacitor the cathode resistor sets the bias: Vk = Ip·Rk
    (Ohm's law across the cathode resistor, common practice), and the stage
    gain is (mu+1)·RL/(rp+RL) with the source resistance zero (standard
    common-grid result, from memory of M. Jones, "Valve Amplifiers")."""
    design, circuit, warnings = load_text(CG_FRONT.format(source="ideal cap 10u rated 63V"), "cg.chain")
    a = analyze_design(design, circuit, warnings, headroom=False)
    op = a.dc.points["V1"]
    assert op.vk_v == pytest.approx(op.ip_a * 1e3, rel=1e-6)
    assert op.vk_v > 1.0  # a real bias, not the 0 V an ideal source would force
    row = a.stages[0]
    expected = (op.mu + 1.0) * 47e3 / (op.rp_ohm + 47e3)
    # the coupling capacitor's reactance (16 ohm at 1 kHz) against the stage's
    # ~750 ohm input: well under 1 % at the reference frequency
    assert abs(row.cumulative_gain) == pytest.approx(expected, rel=0.01)
    assert any(c.name == "input->V1" for c in a.couplings)


def test_the_input_capacitor_survives_the_writer():
    design = parse_text(CG_FRONT.format(source="resistance 600 cap 100n rated 63V"))
    again = parse_text(format_design(design))
    assert again == design
    assert again.source.cap_f == pytest.approx(100e-9) and again.source.cap_rated_v == 63.0


@pytest.mark.parametrize("text, form, peak_v", [
    ("150m", None, 0.150),
    ("100m", "rms", 0.100 * math.sqrt(2.0)),          # a sine's peak is √2 × rms
    ("100mVrms", None, 0.100 * math.sqrt(2.0)),
    ("-20dBV", None, 0.1 * math.sqrt(2.0)),            # dBV: dB re 1 V rms
    ("0dBu", None, 0.7746 * math.sqrt(2.0)),           # dBu: dB re 0.7746 V rms (1 mW in 600 ohm)
    ("-10dBu", None, 0.2449 * math.sqrt(2.0)),
])
def test_levels_in_rms_and_db_become_peak_volts(text, form, peak_v):
    """dBV and dBu references as defined in audio practice (0 dBV = 1 V rms,
    0 dBu = sqrt(0.6) V rms); rms to peak of a sine by √2."""
    assert parse_level(text, form) == pytest.approx(peak_v, rel=2e-4)


def test_a_db_level_called_peak_is_an_error():
    with pytest.raises(QuantityError):
        parse_level("-20dBV", "peak")


def test_set_level_takes_rms_and_db():
    base = CG_FRONT.format(source="ideal cap 10u")
    for line, peak in (("set level 100mV rms", 0.1 * math.sqrt(2)), ("set level -20dBV", 0.1 * math.sqrt(2))):
        d = parse_text(base + line + "\n")
        assert d.settings.level_v == pytest.approx(peak, rel=1e-12)


@pytest.mark.parametrize("where, node", [("output", "V2.plate"), ("V1", "V1.plate"), ("V1.plate", "V1.plate")])
def test_strays_at_the_output_and_at_stages_land_on_the_same_node_in_every_layer(where, node):
    """``stray output`` and ``stray STAGE`` are accepted by the checks and by the
    build alike (issue 13): the capacitor sits on the node they name."""
    text = CG_FRONT.format(source="ideal cap 10u") + f"stray {where} 100p\n"
    design, circuit, _ = load_text(text, "s.chain")
    (cap,) = [c for c in circuit.capacitors if c.role == "stray capacitance"]
    assert {cap.a, cap.b} == {node, "gnd"} and cap.farads == pytest.approx(100e-12)


FIXED_BIAS = """\
title "Kite fixed-bias test"
supply HT 300V
supply CBIAS {bias}
stage V1 common-cathode 12AX7
  plate 100k from HT
input into V1 resistance 10k cap 100n
network biasfeed
  resistor leak V1.in -- CBIAS 1M
output V1 load 1M
"""


def test_a_negative_supply_biases_a_grid_through_its_leak():
    """Fixed bias (common practice): the grid sits at the bias supply's voltage
    (no grid current flows at a negative grid, so the 1M leak drops nothing),
    the cathode at 0 V; no grid-leak-bias warning for a stage without a leak line."""
    design, circuit, warnings = load_text(FIXED_BIAS.format(bias="-2V"), "fb.chain")
    assert not [w for w in warnings if w.code == "W210"]
    a = analyze_design(design, circuit, warnings, headroom=False)
    op = a.dc.points["V1"]
    assert op.vg_v == pytest.approx(-2.0, abs=1e-3) and op.vk_v == pytest.approx(0.0, abs=1e-9)
    assert 0.1e-3 < op.ip_a < 3e-3


def test_a_bias_supply_out_of_range_is_refused():
    with pytest.raises(LanguageError) as err:
        parse_text(FIXED_BIAS.format(bias="-2000V"), "fb.chain")
    assert any(d.code == "E302" and "bias supply" in d.message for d in err.value.diagnostics)
