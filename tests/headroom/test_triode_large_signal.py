"""A single common-cathode stage of every library type at large signal:
gain toward 0 V grid, harmonic balance up to grid conduction, compression
points.  These hold for the model form the library chooses per type."""

from __future__ import annotations

import numpy as np
import pytest

from chain.build import load_text
from chain.dc import solve
from chain.headroom import COMPRESSION_DB, harmonic_amplitudes, headroom, transfer_curves
from chain.tubes import LIBRARY

# plate load, cathode resistor: resistance-coupled values of the trade for
# each type at 300 V (common practice)
STAGES = {"12AX7": ("100k", "1k5"), "12AT7": ("47k", "820"), "12AU7": ("22k", "1k"), "12AY7": ("47k", "1k5"),
          "5751": ("100k", "1k5"), "6SN7": ("22k", "1k")}


def _stage(name: str):
    rl, rk = STAGES[name]
    text = f"""title "one {name} stage"
supply HT 300V
input into V1 resistance 1k
stage V1 common-cathode {name}
  plate {rl} from HT
  cathode {rk} bypass 100u
  grid leak 1M stopper 1k
couple V1 -> output cap 100n
output load 1M
"""
    _design, circuit, _ = load_text(text, f"<{name} stage>")
    dc = solve(circuit)
    return circuit, dc


@pytest.fixture(scope="module", params=list(LIBRARY))
def stage_curves(request):
    circuit, dc = _stage(request.param)
    curves = transfer_curves(circuit, dc)
    return request.param, circuit, dc, curves


def test_incremental_gain_does_not_fall_as_the_grid_approaches_zero(stage_curves):
    # Langmuir's 3/2-power law (from memory of Langmuir 1913 / M. Jones,
    # "Valve Amplifiers"): gm rises and rp falls with plate current, so a
    # common-cathode stage's incremental gain rises as its grid is driven
    # from the bias point toward 0 V (until grid current starts).  Checked
    # on the positive half-wave up to Vgk = -0.15 V: never below 0.98 of
    # the gain at rest.
    name, circuit, dc, curves = stage_curves
    idx = np.arange(curves.zero_index, curves.input_v.size)
    vgk = curves.vgk_v["V1"][idx]
    y = curves.node_dv["V1.plate"][idx]
    x = curves.node_dv["V1.in"][idx]
    gain = np.abs(np.diff(y) / np.diff(x))
    mid_vgk = 0.5 * (vgk[1:] + vgk[:-1])
    before = mid_vgk < -0.15
    assert before.sum() >= 20, "the sweep must reach near 0 V grid"
    assert vgk[0] < -0.5
    rest = gain[0]
    print(name, "gain at rest", rest, "near 0 V", gain[before][-1])
    assert np.all(gain[before] >= 0.98 * rest)
    assert gain[before][-1] > rest  # and it has risen by the end


def test_second_harmonic_exceeds_third_up_to_grid_conduction(stage_curves):
    # Common practice (and the Taylor series of the 3/2-power law): a
    # single triode stage is second-harmonic dominant at every level up to
    # grid conduction.  Levels: 2 % … 100 % of the source peak at which
    # grid conduction starts: the grid current reaches 1 µA (the DC
    # diagnostics' threshold, SolveOptions.grid_current_a) or the grid 0 V,
    # whichever comes first.
    from scipy.interpolate import PchipInterpolator

    name, circuit, dc, curves = stage_curves
    z = curves.zero_index
    at_zero = np.interp(0.0, curves.vgk_v["V1"][z:], curves.input_v[z:])
    at_1ua = np.interp(np.log(1e-6), np.log(np.maximum(curves.ig_a["V1"][z:], 1e-300)), curves.input_v[z:])
    hr_grid = min(at_zero, at_1ua)
    assert hr_grid > 0.3
    f = PchipInterpolator(curves.input_v, curves.node_dv["V1.plate"], extrapolate=False)
    phase = 2.0 * np.pi * np.arange(256) / 256
    for level in np.geomspace(0.02, 1.0, 12) * hr_grid:
        assert level <= min(-curves.input_v[0], curves.input_v[-1])
        h = harmonic_amplitudes(f(level * np.sin(phase)))
        print(f"{name} {level:.3f} V: h2/h1 {h[1] / h[0]:.2e} h3/h1 {h[2] / h[0]:.2e}")
        assert h[1] > h[2], (level, h[:4])


def test_compression_points_are_where_the_gain_has_fallen(stage_curves):
    # Compression points read off the swept curve, checked by direct solves
    # of the same network (two numerical routes): the incremental gain from
    # a central difference of direct solves at the 3 dB point is 3 dB below
    # the central-difference gain at rest (±0.3 dB); the 1 dB point comes first.
    from chain.headroom.curves import build_network

    name, circuit, dc, _curves = stage_curves
    hr = headroom(circuit, dc, level_v=0.1, spectrum=False)
    stage = hr.stage("V1")
    one, three = stage.compression(COMPRESSION_DB[0]), stage.compression(COMPRESSION_DB[1])
    assert one is not None and three is not None
    assert 0.0 < one.input_v < three.input_v
    net = build_network(circuit, dc)
    polarity = "positive" if stage.positive.compression[1] is three else "negative"
    sign = 1.0 if polarity == "positive" else -1.0

    def slope(v, dv):
        xa, xb = net.solve(v - dv, net.x0), net.solve(v + dv, net.x0)
        ya, yb = net.node_voltages(np.stack([xa, xb]), ("V1.in", "V1.plate"))
        return abs((yb[1] - ya[1]) / (yb[0] - ya[0]))

    rest = slope(0.0, 1e-4)
    at3 = slope(sign * three.input_v, 1e-3 * three.input_v)
    assert 20 * np.log10(at3 / rest) == pytest.approx(-3.0, abs=0.3)
