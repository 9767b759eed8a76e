"""Overlay of voicings: the drawn lines carry the responses and their difference.

Checks read the Line2D data (``get_xdata``/``get_ydata``), not pixels.  The
reference for the magnitude is ``20·log10|H|`` of the response arrays (the
definition of the decibel for a voltage ratio, IEC 60027-3 — common practice).
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from chain.analysis import analyze_design
from chain.build import load_text
from chain.plot.compare import Curve, curve, difference_db, overlay
from chain.plot.files import save_figure as save
from chain.report import render

NETLIST = """\
title "Overlay test"
set band 5Hz 50kHz
set points 120
supply HT 300V
input into V1 resistance 10k
stage V1 common-cathode 12AX7
  plate 100k from HT
  cathode 1k5 bypass {ck} rated 25V
  grid leak 1M
couple V1 -> output cap 22n rated 400V
output load 1M
"""


def analyse(ck: str):
    design, circuit, warnings = load_text(NETLIST.format(ck=ck), f"{ck}.chain")
    return analyze_design(design, circuit, warnings, headroom=False)


@pytest.fixture(scope="module")
def pair():
    return analyse("47u"), analyse("1u")


def db(a) -> np.ndarray:
    return 20.0 * np.log10(np.abs(a.freq.output))


def test_lines_carry_each_voicings_magnitude_and_the_difference(pair):
    a, b = pair
    plot = overlay([a, b], ["47u", "1u"])
    assert len(plot.lines) == 2 and len(plot.diff_lines) == 1
    for line, x in zip(plot.lines, (a, b)):
        np.testing.assert_array_equal(line.get_xdata(), x.freq.f_hz)
        np.testing.assert_allclose(line.get_ydata(), db(x), rtol=1e-12)
    d = plot.diff_lines[0]
    np.testing.assert_array_equal(d.get_xdata(), a.freq.f_hz)
    np.testing.assert_allclose(d.get_ydata(), db(b) - db(a), rtol=1e-12, atol=1e-12)
    # the smaller bypass loses gain at low frequencies and not at the top
    assert d.get_ydata()[0] < -3.0 and abs(d.get_ydata()[-1]) < 0.05
    assert [line.get_label() for line in plot.lines] == ["47u", "1u"]
    assert plot.diff_axes is plot.axes[-1]
    assert plot.axes[0].get_xscale() == "log"
    assert "dB" in plot.axes[0].get_ylabel() and "dB" in plot.diff_axes.get_ylabel()


def test_json_reports_draw_the_same_lines(pair):
    a, b = pair
    docs = [json.loads(render(x, fmt="json")) for x in pair]
    plot = overlay(docs)
    for line, x in zip(plot.lines, (a, b)):
        np.testing.assert_allclose(line.get_ydata(), db(x), rtol=1e-10)  # 12 digits in the report
    assert [line.get_label() for line in plot.lines] == ["47u.chain", "1u.chain"]  # the netlist paths
    np.testing.assert_allclose(plot.diff_lines[0].get_ydata(), db(b) - db(a), atol=1e-9)


def test_phase_panel_is_unwrapped_degrees(pair):
    a, b = pair
    plot = overlay([a.freq, b.freq], ["a", "b"], phase=True, diff_panel=False)
    assert len(plot.axes) == 2 and plot.diff_lines == () and plot.diff_axes is None
    expected = np.degrees(np.unwrap(np.angle(a.freq.output)))
    np.testing.assert_allclose(plot.phase_lines[0].get_ydata(), expected, rtol=1e-12)
    assert "°" in plot.axes[1].get_ylabel()


def test_difference_on_other_grids_is_interpolated_in_log_frequency():
    # magnitudes linear in log10(f): linear interpolation against log f is exact
    fa = np.geomspace(10.0, 1e4, 31)
    fb = np.geomspace(20.0, 2e4, 17)
    a = Curve(fa, 3.0 * np.log10(fa), np.zeros_like(fa))
    b = Curve(fb, 5.0 * np.log10(fb) + 1.0, np.zeros_like(fb))
    d = difference_db(a, b)
    inside = fa >= 20.0 * (1 - 1e-12)
    np.testing.assert_allclose(d[inside], 2.0 * np.log10(fa[inside]) + 1.0, rtol=1e-12)
    assert np.all(np.isnan(d[~inside]))


def test_three_voicings_give_two_difference_traces(pair):
    a, b = pair
    c = analyse("10u")
    plot = overlay([a, b, c])
    assert len(plot.diff_lines) == 2
    np.testing.assert_allclose(plot.diff_lines[1].get_ydata(), db(c) - db(a), rtol=1e-12, atol=1e-12)
    assert plot.diff_lines[1].get_label() == "10u.chain − 47u.chain"


def test_curve_rejects_what_it_cannot_read():
    with pytest.raises(TypeError):
        curve(42)
    with pytest.raises(ValueError):
        overlay([], None)


def test_save_png_and_svg(pair, tmp_path):
    plot = overlay(list(pair))
    png = save(plot, tmp_path / "o.png")
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    svg = save(plot.figure, tmp_path / "o.svg")
    assert "<svg" in svg.read_text(encoding="utf-8")[:500]
    with pytest.raises(ValueError):
        save(plot, tmp_path / "o.pdf")
