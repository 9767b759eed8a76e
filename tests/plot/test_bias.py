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
