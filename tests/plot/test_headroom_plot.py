"""Headroom plots: line and bar data (not pixels), labels, files."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from chain.build import load_text
from chain.dc import solve
from chain.headroom import headroom

TWO_STAGES = """title "two stages"
supply HT 300V
rail B1 from HT drop 10k decouple 47u
input into V1 resistance 1k
stage V1 common-cathode 12AX7
  plate 100k from B1
  cathode 1k5 bypass 47u
  grid leak 1M stopper 10k
stage V2 common-cathode 12AX7
  plate 100k from B1
  cathode 1k5 bypass 47u
  grid leak 470k stopper 10k
couple V1 -> V2 cap 22n
couple V2 -> output cap 22n
output load 1M
"""


@pytest.fixture(scope="module")
def result():
    _, circuit, _ = load_text(TWO_STAGES)
    return headroom(circuit, solve(circuit), level_v=0.05)


def test_transfer_lines_carry_the_curves(result):
    from chain.plot.headroom import plot_transfer

    curves = result.curves
    plot = plot_transfer(curves, headroom=result)
    assert set(plot.chain_lines) == {"V1", "V2", "output"}
    for s in curves.stages:
        line = plot.chain_lines[s.name]
        assert np.array_equal(line.get_xdata(), curves.input_v)
        assert np.array_equal(line.get_ydata(), curves.node_dv[s.output])
        x, y = plot.stage_lines[s.name].get_data()
        assert np.array_equal(x, curves.node_dv[s.input]) and np.array_equal(y, curves.node_dv[s.output])
        # one marker per onset found, placed at (own input, output) of the onset
        row = result.stage(s.name)
        onsets = [o for h in (row.positive, row.negative) for o in (h.grid, h.cutoff) if o is not None]
        assert len(plot.onsets[s.name]) == len(onsets)
        for marker, onset in zip(plot.onsets[s.name], onsets):
            assert marker.get_xdata()[0] == onset.stage_input_v and marker.get_ydata()[0] == onset.output_v
    assert np.array_equal(plot.chain_lines["output"].get_ydata(), curves.output_dv)
    assert plot.chain_axes.get_xscale() == "symlog"
    assert "(V" in plot.chain_axes.get_xlabel() and "(V)" in plot.chain_axes.get_ylabel()
    for ax in plot.stage_axes.values():
        assert "(V)" in ax.get_xlabel() and "(V)" in ax.get_ylabel()


def test_harmonic_bars_carry_the_levels(result):
    from chain.plot.headroom import plot_harmonics

    dist = result.distortion
    plot = plot_harmonics(dist, floor_db=-120.0)
    assert list(plot.bars) == ["V1", "V2", "output"]
    expected = {"V1": dist.stage("V1").output.relative_db, "V2": dist.stage("V2").output.relative_db,
                "output": dist.overall.relative_db}
    for label, bars in plot.bars.items():
        tops = np.array([b.get_y() + b.get_height() for b in bars])
        assert len(bars) == 8  # harmonics 2 … 9
        np.testing.assert_allclose(tops, np.maximum(expected[label], -120.0), atol=1e-9)
        assert plot.levels_db[label] == expected[label]
    texts = [t.get_text() for t in plot.figure.legends[0].get_texts()]
    assert any(f"THD {100 * dist.overall.thd:.3g} %" in t for t in texts)
    assert "(dB)" in plot.axes.get_ylabel()
    own = plot_harmonics(dist, stages=["V2"], own=True)
    assert own.levels_db["V2"] == dist.stage("V2").own_relative_db


def test_harmonics_heading_stays_inside_the_figure(result):
    """A netlist title of typical length plus the heading must not run off the
    right edge of the saved figure."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    from chain.plot.headroom import plot_harmonics

    plot = plot_harmonics(result.distortion, title="Heron bass channel, second voicing")
    canvas = FigureCanvasAgg(plot.figure)
    canvas.draw()
    box = plot.figure._suptitle.get_window_extent(canvas.get_renderer())
    assert 0.0 <= box.x0 and box.x1 <= plot.figure.bbox.width


@pytest.mark.parametrize("suffix, magic", [(".png", b"\x89PNG"), (".svg", b"<?xml")])
def test_save_by_suffix(result, tmp_path, suffix, magic):
    from chain.plot.files import save_figure as save
    from chain.plot.headroom import plot_harmonics, plot_transfer

    for name, plot in (("transfer", plot_transfer(result.curves)), ("harmonics", plot_harmonics(result.distortion))):
        path = save(plot, tmp_path / f"{name}{suffix}", dpi=40)
        assert path.read_bytes()[:len(magic)] == magic
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted([f"harmonics{suffix}", f"transfer{suffix}"])


def test_save_rejects_other_formats(result, tmp_path):
    from chain.plot.files import save_figure as save
    from chain.plot.headroom import plot_transfer

    with pytest.raises(ValueError, match="png"):
        save(plot_transfer(result.curves), tmp_path / "transfer.pdf")


def test_importing_does_not_load_matplotlib():
    code = "import sys, chain.plot.headroom, chain.headroom; print('matplotlib' in sys.modules)"
    root = Path(__file__).resolve().parents[2]
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=root)
    assert out.stdout.strip() == "False"
