"""The Bode plot draws exactly the response's arrays (dB and degrees only)."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose

from chain.circuit import GROUND, Capacitor, Circuit, Resistor, StageRecord, Triode, VoltageSource
from chain.dc.result import DcSolution, OperatingPoint
from chain.plot.bode import bode
from chain.plot.files import save_figure as save
from chain.smallsignal import linearize, response
from chain.tubes import lookup


@pytest.fixture(scope="module")
def resp():
    """One common-cathode stage, capacitively coupled in and out (invented values)."""
    tube = lookup("12AX7")
    circuit = Circuit(
        title="bode test",
        resistors=(Resistor("input.R", "src", "V1.in", 10e3), Resistor("V1.Rg", "V1.in", GROUND, 1e6),
                   Resistor("V1.Rs", "V1.in", "V1.grid", 68e3), Resistor("V1.RL", "HT", "V1.plate", 100e3),
                   Resistor("V1.Rk", "V1.cathode", GROUND, 1.5e3),
                   Resistor("output.load", "output", GROUND, 1e6)),
        capacitors=(Capacitor("V1.Ck", "V1.cathode", GROUND, 1e-6),
                    Capacitor("couple.V1-output.C", "V1.plate", "output", 22e-9)),
        inductors=(),
        sources=(VoltageSource("supply.HT", "HT", GROUND, 300.0, "supply"),
                 VoltageSource("sig", "src", GROUND, 0.0, "signal")),
        triodes=(Triode("V1", "V1.plate", "V1.grid", "V1.cathode", tube),),
        stages=(StageRecord("V1", "common-cathode", "12AX7", ("V1",), {"in": "V1.in"}, {"out": "V1.plate"}, "HT"),),
        input_node="V1.in", output_node="output", rails=("HT",),
        couplings={"V1->output": ("V1.plate", "output")},
    )
    op = OperatingPoint("V1", 180.0, 0.0, 1.4, 1e-3, 0.0, 0.18, 1.6e-3, 62.5e3, 100.0)
    dc = DcSolution({"V1": op}, {}, {}, {}, 0, 0.0)
    return response(linearize(circuit, dc), np.geomspace(10.0, 100e3, 200))


def test_magnitude_and_phase_are_the_response_in_db_and_degrees(resp):
    plot = bode(resp)
    h = resp.h["output"]
    assert plot.nodes == ("output",)
    assert_allclose(plot.lines[0].get_xdata(), resp.f_hz)
    assert_allclose(plot.lines[0].get_ydata(), 20 * np.log10(np.abs(h)), rtol=1e-12)
    phase = plot.phase_lines[0].get_ydata()
    # unwrapped degrees: the same angle modulo 360°, and continuous
    assert_allclose(np.exp(1j * np.radians(phase)), h / np.abs(h), atol=1e-9)
    assert np.all(np.abs(np.diff(phase)) < 90.0)
    mag_ax, ph_ax = plot.axes
    assert mag_ax.get_xscale() == "log" and ph_ax.get_xscale() == "log"
    assert "dB" in mag_ax.get_ylabel() and "°" in ph_ax.get_ylabel()


def test_stage_traces_and_corners(resp):
    plot = bode(resp, nodes=["V1.plate", "output"], corners=(35.0, None), title="stage V1")
    assert len(plot.lines) == 2 and len(plot.phase_lines) == 2
    assert_allclose(plot.lines[0].get_ydata(), 20 * np.log10(np.abs(resp.h["V1.plate"])), rtol=1e-12)
    assert len(plot.corner_lines) == 2  # one marker per panel
    assert all(line.get_xdata()[0] == 35.0 for line in plot.corner_lines)
    labels = [t.get_text() for t in plot.legend.get_texts()]
    assert labels == ["V1 out (V1.plate)", "output"]  # the node named 'output' is not named twice
    assert plot.figure._suptitle.get_text() == "stage V1"


def _extents(plot):
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    canvas = FigureCanvasAgg(plot.figure)
    canvas.draw()  # laid out as when saved
    return canvas.get_renderer()


def test_corner_labels_and_legend_are_outside_the_panels(resp):
    """Issue 15: no curve can be drawn over a corner label or under the legend."""
    plot = bode(resp, nodes=["V1.plate", "output"], corners=(35.0, 20e3), title="t")
    renderer = _extents(plot)
    mag = plot.axes[0].get_window_extent(renderer)
    ph = plot.axes[1].get_window_extent(renderer)
    assert len(plot.corner_labels) == 2
    boxes = [t.get_window_extent(renderer) for t in plot.corner_labels]
    for box in boxes:
        assert box.y0 >= mag.y1 - 0.5  # above the magnitude panel
    assert boxes[0].x1 <= boxes[1].x0  # low corner's label left of the high one's
    legend = plot.legend.get_window_extent(renderer)
    assert legend.y1 <= ph.y0  # below both panels


def test_every_phase_trace_is_wrapped_by_one_rule(resp):
    """Unwrapped along frequency, then within (−180°, 180°] at the reference frequency."""
    for f_ref in (100.0, 1e3, 20e3):
        plot = bode(resp, nodes=["V1.plate", "output"], f_ref_hz=f_ref)
        k = int(np.argmin(np.abs(np.log(resp.f_hz / f_ref))))
        for line, node in zip(plot.phase_lines, ("V1.plate", "output")):
            y = np.asarray(line.get_ydata())
            assert -180.0 < y[k] <= 180.0
            assert np.all(np.abs(np.diff(y)) < 90.0)
            assert_allclose(np.exp(1j * np.radians(y)), resp.h[node] / np.abs(resp.h[node]), atol=1e-9)



def test_unknown_node_is_an_error(resp):
    with pytest.raises(KeyError):
        bode(resp, nodes=["nowhere"])


def test_draws_into_given_axes(resp):
    from matplotlib.figure import Figure

    fig = Figure()
    axes = fig.subplots(2, 1)
    plot = bode(resp, ax=tuple(axes))
    assert plot.figure is fig and plot.axes[0] is axes[0]


def test_save_png_and_svg(resp, tmp_path):
    plot = bode(resp, corners=(35.0, 20e3))
    png = save(plot.figure, tmp_path / "b.png")
    svg = save(plot.figure, tmp_path / "b.svg")
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert b"<svg" in svg.read_bytes()[:2000]
    with pytest.raises(ValueError):
        save(plot.figure, tmp_path / "b.jpg")


def test_impedance_plot_draws_the_response_impedances(resp):
    from chain.plot.bode import impedance

    plot = impedance(resp, title="t")
    assert np.allclose(plot.lines[0].get_ydata(), np.abs(resp.zin_ohm))
    assert np.allclose(plot.lines[1].get_ydata(), np.abs(resp.zout_ohm))
    assert plot.axes.get_ylabel() == "Impedance (Ω)"


def test_peaks_and_dips_of_the_analysis_are_marked_at_their_place():
    from pathlib import Path

    import chain

    a = chain.analyze(Path(__file__).parents[2] / "netlists" / "clean_two_stage.chain", headroom=False)
    plot = chain.bode(a)
    shape = a.overall.shape
    assert len(shape.peaks) == 1  # the pickup's resonance
    (mark,) = plot.extremum_marks
    assert_allclose(mark.get_xdata(), [shape.peaks[0].f_hz])
    assert_allclose(mark.get_ydata(), [shape.peaks[0].gain_db])


def test_a_further_trace_is_drawn_over_the_chain_output(resp):
    """A stage output whose response nearly equals the chain output's (behind a
    coupling capacitor, as here above the low corner) must stay visible: the
    heavier solid output trace lies underneath, the dashed one on top."""
    plot = bode(resp, nodes=["output", "V1.plate"])
    out_line, stage_line = plot.lines
    assert out_line.get_linestyle() == "-" and stage_line.get_linestyle() != "-"
    assert stage_line.get_zorder() > out_line.get_zorder()
    assert stage_line.get_linewidth() < out_line.get_linewidth()
