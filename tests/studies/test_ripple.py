"""Supply ripple carried to the output (chain.studies.ripple), against the
hand analysis of the same circuits.

References: the plate of a triode with grid held at AC ground looks like
rp + (mu + 1)·Rk to ground (standard small-signal valve analysis, e.g. from
memory of Langford-Smith, Radiotron Designer's Handbook, 4th ed., ch. 12),
and a rail's dropping resistor and decoupling capacitor form a voltage
divider (any circuit-theory text)."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose

from chain.analysis import analyze
from chain.language import parse_text
from chain.studies.ripple import RIPPLE_HZ

ONE_STAGE = """supply HT 300V impedance 100
{rail}
input into V1 resistance 10k
stage V1 common-cathode 12AX7
  plate 100k from {feed}
  cathode 1k5
  grid leak 1M
output V1 load 470k
"""


def _run(text):
    a = analyze(parse_text(text), headroom=False, noise=False)
    return a, a.studies["ripple"]


def _tube_as_seen_from_plate(a, rk):
    p = a.dc.points["V1"]
    mu = p.gm_s * p.rp_ohm  # the linearised model's own mu (gm·rp)
    return p.rp_ohm + (mu + 1.0) * rk


def _par(x, y):
    return x * y / (x + y)


def test_plate_is_a_divider_of_the_plate_load_and_the_tube():
    a, r = _run(ONE_STAGE.format(rail="", feed="HT"))
    z_down = _par(_tube_as_seen_from_plate(a, 1.5e3), 470e3)
    expected = z_down / (100.0 + 100e3 + z_down)  # supply impedance, plate load, tube ∥ load
    (ht,) = r.supplies
    assert ht.supply == "HT" and r.f_hz == RIPPLE_HZ
    # interelectrode capacitances (pF) shunt nothing at 100–120 Hz to this precision
    assert_allclose(np.abs(ht.output), expected, rtol=1e-3)
    assert_allclose(np.abs(ht.stages["V1"]), expected, rtol=1e-3)


@pytest.mark.parametrize("c_f", [10e-6, 47e-6])
def test_a_decoupled_rail_divides_the_ripple_again(c_f):
    rail = f"rail B1 from HT drop 10k decouple {c_f * 1e6:g}u"
    a, r = _run(ONE_STAGE.format(rail=rail, feed="B1"))
    z_down = _par(_tube_as_seen_from_plate(a, 1.5e3), 470e3)
    w = 2j * np.pi * np.array(RIPPLE_HZ)
    z_rail = _par(1.0 / (w * c_f), 100e3 + z_down)
    expected = z_rail / (100.0 + 10e3 + z_rail) * z_down / (100e3 + z_down)
    assert_allclose(r.supplies[0].output, expected, rtol=2e-3)


def test_more_decoupling_means_less_hum_and_the_demo_figures_are_plausible():
    # common practice: each RC section of a rail ladder buys tens of dB at 100 Hz
    a = analyze("netlists/lead_four_stage.chain", headroom=False, noise=False)
    ht = a.studies["ripple"].supplies[0]
    out_db = 20 * np.log10(np.abs(ht.output))
    assert np.all(out_db < -40.0)
    v1 = 20 * np.log10(abs(ht.stages["V1"][0]))
    v3 = 20 * np.log10(abs(ht.stages["V3"][0]))
    assert v1 < v3  # V1 sits at the end of the ladder, V3 one section up


def test_studies_switched_off_leave_the_section_null():
    a = analyze("netlists/clean_two_stage.chain", headroom=False, noise=False, studies=False)
    assert "ripple" not in a.studies
    from chain.report import report_data

    assert report_data(a)["ripple"] is None
