"""Bias plot: line data (not pixels), labels, files."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from chain.circuit import GROUND, Capacitor, Circuit, Resistor, StageRecord, Triode, VoltageSource
from chain.dc import load_line, plate_family, solve, stage_lines
from chain.tubes import lookup


@pytest.fixture(scope="module")
def stage():
    model = lookup("12AX7")
    circuit = Circuit(
        title="one stage",
        resistors=(Resistor("V1.RL", "HT", "V1.plate", 100e3), Resistor("V1.Rk", "V1.cathode", GROUND, 1.5e3),
                   Resistor("V1.Rg", "V1.grid", GROUND, 1e6)),
        capacitors=(Capacitor("V1.Ck", "V1.cathode", GROUND, 22e-6),),
        inductors=(),
        sources=(VoltageSource("supply.HT", "HT", GROUND, 300.0),),
        triodes=(Triode("V1", "V1.plate", "V1.grid", "V1.cathode", model),),
        stages=(StageRecord("V1", "common-cathode", "12AX7", ("V1",), {"in": "V1.grid"}, {"out": "V1.plate"}, "HT"),),
        input_node="V1.grid", output_node="V1.plate", rails=("HT",))
    sol = solve(circuit)
    family = plate_family(model, [0.0, -0.5, -1.0, -1.5, -2.0, -3.0], 320.0, n=120)
    load, bias = stage_lines(circuit, sol, "V1")
    return family, load, bias, sol.points["V1"]


def test_lines_carry_the_numbers(stage):
    from chain.plot.bias import plot_characteristics

    family, load, bias, point = stage
    plot = plot_characteristics(family, load, point, bias=bias)
    assert len(plot.curves) == len(family.vgk_v)
    for i, line in enumerate(plot.curves):
        assert np.allclose(line.get_xdata(), family.vpk_v)
        assert np.allclose(line.get_ydata(), family.ip_a[i] * 1e3)  # drawn in mA
    assert np.allclose(plot.load_line.get_xdata(), load.vpk_v)
    assert np.allclose(plot.load_line.get_ydata(), load.ip_a * 1e3)
    keep = np.isfinite(bias.vpk_v)
    assert np.allclose(plot.bias_line.get_xdata(), bias.vpk_v[keep])
    assert plot.point.get_xdata()[0] == pytest.approx(point.vpk_v)
    assert plot.point.get_ydata()[0] == pytest.approx(point.ip_a * 1e3)
    assert "(V)" in plot.axes.get_xlabel() and "(mA)" in plot.axes.get_ylabel()
    # the operating point is inside the drawn area
    x0, x1 = plot.axes.get_xlim()
    y0, y1 = plot.axes.get_ylim()
    assert x0 <= point.vpk_v <= x1 and y0 <= point.ip_a * 1e3 <= y1


def test_draws_into_given_axes(stage):
    from matplotlib.figure import Figure

    from chain.plot.bias import plot_characteristics

    family, load, _, point = stage
    fig = Figure()
    ax = fig.add_subplot()
    plot = plot_characteristics(family, load, point, ax=ax)
    assert plot.axes is ax and plot.figure is fig and plot.bias_line is None


def test_textbook_load_line_also_draws(stage):
    from chain.plot.bias import plot_characteristics

    family, _, _, point = stage
    line = load_line(rail_v=300.0, rl_ohm=100e3, rk_ohm=1.5e3)
    plot = plot_characteristics(family, line, point)
    assert plot.load_line.get_xdata()[0] == 300.0


@pytest.mark.parametrize("suffix, magic", [(".png", b"\x89PNG"), (".svg", b"<?xml")])
def test_save_writes_png_and_svg(stage, tmp_path, suffix, magic):
    from chain.plot.bias import plot_characteristics
    from chain.plot.files import save_figure

    family, load, bias, point = stage
    path = save_figure(plot_characteristics(family, load, point, bias=bias), tmp_path / f"bias{suffix}")
    assert path.read_bytes()[:len(magic)] == magic
    assert [p.name for p in tmp_path.iterdir()] == [f"bias{suffix}"]


def test_save_rejects_other_formats(stage, tmp_path):
    from chain.plot.bias import plot_characteristics
    from chain.plot.files import save_figure

    family, load, _, point = stage
    with pytest.raises(ValueError, match="png"):
        save_figure(plot_characteristics(family, load, point), tmp_path / "bias.jpg")


def test_importing_the_module_does_not_load_matplotlib():
    code = "import sys, chain.plot.bias, chain.dc; print('matplotlib' in sys.modules)"
    root = Path(__file__).resolve().parents[2]
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=root)
    assert out.stdout.strip() == "False"


# --------------------------------------------------------------------------- issue 15: AC load, dissipation, labels


def _overlap(a, b) -> bool:
    return a.x0 < b.x1 and b.x0 < a.x1 and a.y0 < b.y1 and b.y0 < a.y1


def test_ac_load_line_and_dissipation_curve(stage):
    """The AC load line passes through the operating point with slope −1/R_ac
    (load-line construction, common practice); the dissipation curve is
    Ip·Vpk = Pd_max (1 W for a 12AX7 section, from memory of the Philips
    ECC83 data sheet — the library's rating)."""
    from chain.plot.bias import plot_characteristics

    family, load, bias, point = stage
    plot = plot_characteristics(family, load, point, bias=bias, ac_load_ohm=90.9e3, pd_max_w=1.0)
    x = np.asarray(plot.ac_load_line.get_xdata())
    y = np.asarray(plot.ac_load_line.get_ydata()) / 1e3
    slope = (y[1] - y[0]) / (x[1] - x[0])
    assert slope == pytest.approx(-1 / 90.9e3, rel=1e-9)
    assert np.interp(point.vpk_v, x, y[::1] if x[0] < x[1] else y[::-1]) == pytest.approx(point.ip_a, rel=1e-9)
    assert y.min() >= -1e-12  # stops at zero current
    xv = np.asarray(plot.dissipation.get_xdata())
    yv = np.asarray(plot.dissipation.get_ydata()) / 1e3
    assert np.allclose(xv * yv, 1.0)
    # steeper than the DC load line: the load after the coupling capacitor is in parallel
    assert -slope > 1 / load.r_dc_ohm


@pytest.mark.parametrize("mu", [5.0, 20.0, 60.0, 100.0, 160.0])
def test_grid_labels_never_collide_whatever_the_mu(mu):
    """Plate families of very different mu: every grid-voltage label sits
    outside the plotting area and no two labels overlap."""
    from dataclasses import replace

    from chain.plot.bias import plot_characteristics
    from chain.dc.result import OperatingPoint  # noqa: F401  (type of the point below)

    model = replace(lookup("12AX7"), mu=mu)
    top_v = 350.0
    step = 0.5 if mu > 40 else (2.0 if mu > 10 else 8.0)
    vgks = np.round(np.arange(0.0, -16 * step - step / 2, -step), 2)
    family = plate_family(model, vgks, top_v, n=200)
    line = load_line(rail_v=300.0, rl_ohm=100e3)
    # a point on the line (the figure only needs coordinates)
    point = type("P", (), {"vpk_v": 200.0, "ip_a": 1e-3, "vgk_v": -1.0})()
    plot = plot_characteristics(family, line, point, ac_load_ohm=60e3, pd_max_w=1.0)
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    canvas = FigureCanvasAgg(plot.figure)
    canvas.draw()  # lays out the figure as when it is saved
    renderer = canvas.get_renderer()
    boxes = [t.get_window_extent(renderer) for t in plot.curve_labels]
    assert len(boxes) >= 3, "too few curves labelled"
    for i in range(len(boxes)):
        for j in range(i + 1, len(boxes)):
            assert not _overlap(boxes[i], boxes[j]), (plot.curve_labels[i].get_text(), plot.curve_labels[j].get_text())
    inner = plot.axes.get_window_extent(renderer)
    for box, text in zip(boxes, plot.curve_labels):
        assert box.y0 >= inner.y1 - 0.5 or box.x0 >= inner.x1 - 0.5, f"label {text.get_text()} inside the plot"
    # the legend is below the axes, off the curves
    legend = plot.axes.get_legend().get_window_extent(renderer)
    assert legend.y1 <= inner.y0


def test_stage_plots_one_figure_titled_with_the_design(tmp_path):
    import chain
    from chain.plot.bias import stage_plots

    a = chain.analyze(Path(__file__).parents[2] / "netlists/lead_four_stage.chain", headroom=False)
    plot = stage_plots(a.circuit, a.dc, ac_load_ohm=a.ac_load_ohm, title=a.design.title)
    assert list(plot.panels) == ["V1", "V2", "V3", "V4"]
    assert plot.figure._suptitle.get_text().startswith("Basalt lead channel")
    for name, panel in plot.panels.items():
        x = np.asarray(panel.ac_load_line.get_xdata())
        y = np.asarray(panel.ac_load_line.get_ydata()) / 1e3
        assert (y[1] - y[0]) / (x[1] - x[0]) == pytest.approx(-1 / a.ac_load_ohm[name].real, rel=1e-9)
