"""Headroom runs on every demo netlist and its results hang together."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from chain.headroom import LIMITS, dbv, headroom

NETLISTS = sorted((Path(__file__).resolve().parents[2] / "netlists").glob("*.chain"))


@pytest.mark.parametrize("name", [p.stem for p in NETLISTS])
def test_every_demo_netlist(demo, name):
    design, circuit, dc = demo[name]
    level = design.settings.level_v
    hr = headroom(circuit, dc, level_v=level, f_ref_hz=design.settings.reference_hz)
    curves = hr.curves
    # the sweep: ascending, through 0, both polarities, deviations 0 at 0 V
    assert np.all(np.diff(curves.input_v) > 0.0)
    zero = curves.zero_index
    assert curves.input_v[0] < 0.0 < curves.input_v[-1]
    for node, dv in curves.node_dv.items():
        assert dv[zero] == 0.0, node
        assert np.all(np.isfinite(dv)), node
    # the zero-input point of the held-capacitor network is the DC point
    for node, v in curves.dc_v.items():
        assert v == pytest.approx(dc.node_v[node], abs=1e-6), node
    assert len(hr.stages) == len(circuit.stages)
    assert hr.first is not None
    assert hr.first.clip_input_v == min(r.clip_input_v for r in hr.stages if r.clip_input_v is not None)
    for row in hr.stages:
        assert row.swing_pos_v >= 0.0 >= row.swing_neg_v
        if row.clip_input_v is not None:
            assert row.margin_db == pytest.approx(20 * math.log10(row.clip_input_v / level), abs=1e-9)
            assert row.clip_input_dbv == pytest.approx(dbv(row.clip_input_v))
    assert hr.first.stage in hr.summary and hr.first.mechanism in hr.summary
    assert hr.limits == LIMITS and any("blocking" in text for text in hr.limits)
    spec = hr.distortion
    assert spec is not None and len(spec.stages) == len(circuit.stages)
    assert 0.0 <= spec.overall.thd < 10.0
    assert len(spec.overall.relative_db) == 8


def test_dbv_is_of_the_rms_value():
    # 0 dBV = 1 V rms (common practice): a sine of √2 V peak is 0 dBV
    assert dbv(math.sqrt(2.0)) == pytest.approx(0.0, abs=1e-12)
    assert dbv(0.1) == pytest.approx(20 * math.log10(0.1 / math.sqrt(2.0)))
