"""The shape of a response: band edges, peaks, dips and shelves, against
closed forms of second-order circuits (any circuit-theory text)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose

from chain.circuit import GROUND
from chain.smallsignal import linearize, response, response_shape
from chain.smallsignal.shape import golden_max, peaks_with_prominence
from ss_circuits import Net, dc_of

F = np.geomspace(10.0, 100e3, 600)


def _resp(build, out):
    net = Net()
    net.signal("src")
    build(net)
    return response(linearize(net.circuit(out, out), dc_of()), F)


def test_series_rlc_low_pass_peak_is_where_and_as_high_as_the_closed_form_says():
    # a pickup-like resonance: R, L in series into C.  H = 1/(1 - w²LC + jwRC);
    # peak at w0·sqrt(1 - 2ζ²), height 1/(2ζ·sqrt(1 - ζ²)), ζ = (R/2)·sqrt(C/L)
    r, l, c = 8e3, 3.0, 800e-12

    def build(n):
        n.r("input.R", "src", "w", r)
        n.l("input.L", "w", "out", l)
        n.c("input.C", "out", GROUND, c)

    shape = response_shape(_resp(build, "out"), 1000.0)
    zeta = r / 2 * math.sqrt(c / l)
    f0 = 1 / (2 * math.pi * math.sqrt(l * c))
    (peak,) = shape.peaks
    assert shape.dips == ()
    assert_allclose(peak.f_hz, f0 * math.sqrt(1 - 2 * zeta**2), rtol=1e-6)
    assert_allclose(peak.gain_db, 20 * math.log10(1 / (2 * zeta * math.sqrt(1 - zeta**2))), atol=1e-6)
    # relative to |H(1 kHz)| from the same closed form
    w = 2 * math.pi * 1000.0
    ref_db = -20 * math.log10(abs(1 - w**2 * l * c + 1j * w * r * c))
    assert_allclose(peak.relative_db, peak.gain_db - ref_db, atol=1e-9)
    assert shape.f_low_hz is None and shape.f_high_hz is not None


def test_a_notch_is_a_dip_and_not_two_band_edges():
    # series R2-L-C to ground behind R1: |H| = R2/(R1 + R2) at f0 = 1/(2π·sqrt(LC)),
    # 1 far from it.  The dip falls far below -3 dB, but the response is flat at
    # both ends of the band: no band edge inside the band (the innermost -3 dB
    # crossings would have reported two "corners" at the notch's skirts).
    r1, r2, l, c = 10e3, 100.0, 0.5, 100e-9

    def build(n):
        n.r("a.R1", "src", "out", r1)
        n.r("a.R2", "out", "m", r2)
        n.l("a.L", "m", "n", l)
        n.c("a.C", "n", GROUND, c)

    shape = response_shape(_resp(build, "out"), 20.0)
    (dip,) = shape.dips
    assert_allclose(dip.f_hz, 1 / (2 * math.pi * math.sqrt(l * c)), rtol=1e-6)
    assert_allclose(dip.gain_db, 20 * math.log10(r2 / (r1 + r2)), atol=1e-6)
    assert (shape.f_low_hz, shape.f_high_hz) == (None, None)


def test_shelves_are_the_mean_level_around_100_hz_and_5_khz():
    # a treble-cut shelf: R1 into R2 ∥ (R3 + C):  H = Z/(R1 + Z)
    r1, r2, r3, c = 10e3, 10e3, 1e3, 100e-9

    def build(n):
        n.r("s.R1", "src", "out", r1)
        n.r("s.R2", "out", GROUND, r2)
        n.r("s.R3", "out", "x", r3)
        n.c("s.C", "x", GROUND, c)

    def h_db(f):
        z3 = r3 + 1 / (2j * math.pi * f * c)
        z = r2 * z3 / (r2 + z3)
        return 20 * math.log10(abs(z / (r1 + z)))

    shape = response_shape(_resp(build, "out"), 1000.0)
    low = np.mean([h_db(f) for f in np.geomspace(70.0, 140.0, 17)])
    high = np.mean([h_db(f) for f in np.geomspace(3500.0, 7000.0, 17)])
    assert_allclose(shape.low_shelf_db, low, atol=1e-9)
    assert_allclose(shape.high_shelf_db, high, atol=1e-9)
    assert_allclose(shape.low_shelf_relative_db, low - h_db(1000.0), atol=1e-9)
    assert shape.peaks == () and shape.dips == ()


@pytest.mark.filterwarnings("ignore::scipy.signal._peak_finding_utils.PeakPropertyWarning")
def test_peak_finder_agrees_with_scipy_find_peaks():
    # scipy warns of peaks of zero prominence inside a narrow window; both drop them
    from scipy.signal import find_peaks

    rng = np.random.default_rng(7)
    for _ in range(200):
        y = np.round(rng.normal(size=80).cumsum(), 1)  # rounded: plateaus occur
        window = int(rng.integers(3, 40)) | 1
        found, props = find_peaks(y, prominence=0.7, wlen=window)
        mine = peaks_with_prominence(y, 0.7, window)
        assert [int(i) for i in found] == [i for i, _ in mine]
        assert_allclose(props["prominences"], [p for _, p in mine], rtol=0, atol=1e-12)


def test_golden_section_agrees_with_scipy_minimize_scalar():
    from scipy.optimize import minimize_scalar

    g = lambda x: -(x - 0.3) ** 2 + 0.1 * math.sin(5 * x)  # noqa: E731
    ref = minimize_scalar(lambda x: -g(x), bounds=(-1.0, 1.0), method="bounded", options={"xatol": 1e-10}).x
    assert golden_max(g, -1.0, 1.0) == pytest.approx(ref, abs=1e-7)


DEMO_CASES = [("lead_four_stage", {}), ("clean_two_stage", {}), ("bass_two_rail", {}),
              ("grid_driven_common_grid", {}),
              # scooped: the mids sink more than 3 dB below 1 kHz, the bass comes back above it
              ("lead_four_stage", {"tone.bass": 8, "tone.mid": 0, "tone.treble": 8})]


@pytest.mark.parametrize("name,knobs", DEMO_CASES, ids=[f"{n}{k or ''}" for n, k in DEMO_CASES])
def test_demo_band_edges_are_outermost(name, knobs):
    # the band edges are where the response leaves the -3 dB level for good:
    # nothing below the lower edge or above the upper edge comes back within 3 dB
    from pathlib import Path

    import chain
    from chain.build import with_part
    from chain.language import parse_file

    design = parse_file(Path(__file__).parents[2] / "netlists" / f"{name}.chain")
    for part, knob in knobs.items():
        design = with_part(design, part, knob)
    a = chain.analyze(design, headroom=False)
    o = a.overall
    level = np.abs(a.freq.output) / abs(o.gain)
    f = a.freq.f_hz
    edge = 10 ** (-3.0103 / 20)
    if o.f_low_hz is not None:
        assert np.all(level[f < o.f_low_hz * (1 - 1e-9)] < edge)
    if o.f_high_hz is not None:
        assert np.all(level[f > o.f_high_hz * (1 + 1e-9)] < edge)
    if knobs:  # the scoop is reported as a dip below the -3 dB level
        assert any(d.relative_db < -3.0103 for d in o.shape.dips)
