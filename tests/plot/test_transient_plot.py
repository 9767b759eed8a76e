"""The time-domain figures draw the waveforms they are given, each trace
told apart by its dash pattern, and state levels with engineering prefixes."""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np
from numpy.testing import assert_allclose

from chain.plot.transient import plot_periods


def _point(level_v: float) -> SimpleNamespace:
    """One settled period at 1 kHz: a follower (V2) copies its input stage (V1)."""
    t = np.linspace(0.0, 1e-3, 64, endpoint=False)
    wave = 2.0 * np.sin(2 * np.pi * 1e3 * t)
    period = SimpleNamespace(t_s=t, f_hz=1e3, v={"a": 150.0 + wave, "b": 80.0 + 0.98 * wave},
                             dc_v={"a": 150.0, "b": 80.0})
    nodes = {"V1": SimpleNamespace(node="a", thd=0.01), "V2": SimpleNamespace(node="b", thd=0.011)}
    return SimpleNamespace(period=period, nodes=nodes, f_hz=1e3, level_v=level_v)


def test_waveforms_are_the_signal_about_the_operating_point_and_distinguishable():
    plot = plot_periods([_point(0.1)])
    v1, v2 = (plot.lines[f"1000 Hz 0.1 V {k}"] for k in ("V1", "V2"))
    assert_allclose(v1.get_ydata()[:64], 2.0 * np.sin(2 * np.pi * np.arange(64) / 64), atol=1e-12)
    # two traces nearly on top of each other (a follower) must differ in more than colour
    assert v1.get_linestyle() != v2.get_linestyle()


def test_levels_in_the_titles_use_engineering_prefixes():
    plot = plot_periods([_point(1.0), _point(0.05)])
    titles = [ax.get_title(loc="left") for ax in plot.axes]
    assert titles[0] == "1000 Hz, source 1 V peak (settled)"
    assert titles[1] == "1000 Hz, source 50 mV peak (settled)"
