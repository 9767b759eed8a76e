"""Every coupling's transfer at the reference frequency, the output network included."""

import math

import pytest

from chain.analysis import analyze_design
from chain.build import load_text

NETLIST = """supply HT 300V
input into V1 resistance 1k
stage V1 common-cathode 12AX7
  plate 100k from HT
  cathode 1k5 bypass 1000u
  grid leak 1M
network pad: in -> out
  resistor top in -- out 100k
  resistor bottom out -- gnd 100k
couple V1 -> output via pad
output load 1M
"""


def test_output_network_transfer_is_the_loaded_divider():
    # Ohm's law: the pad's lower leg in parallel with the 1M load, over the whole pad
    a = analyze_design(*load_text(NETLIST), headroom=False)
    (row,) = a.couplings
    assert (row.name, row.from_node, row.to_node) == ("pad", "V1.plate", "output")
    bottom = 1 / (1 / 100e3 + 1 / 1e6)
    assert abs(row.ratio) == pytest.approx(bottom / (100e3 + bottom), rel=1e-9)
    assert row.loss_db == pytest.approx(20 * math.log10(bottom / (100e3 + bottom)), rel=1e-9)
