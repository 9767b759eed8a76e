"""The first stage to clip is the one whose curve saturates first in the chain sweep.

Independent reading of the swept curves: a stage's output "saturates" on a
half-wave where its incremental gain against the source, dy/dv, has fallen
to half its small-signal value (−6 dB).  A stage downstream of a clipping
stage inherits the saturation at the same source level, so among the stages
saturating within 10 % of the lowest level the earliest in signal order is
the one that clips.  The circuits are chosen so that no stage's grid current
loads the stage before it (which would saturate the earlier output first).

The reported onset (grid conduction at Vgk = 0, or cutoff at 1 % of the
quiescent current) and the −6 dB point are different criteria on the same
knee; with a large grid-circuit resistance the model's grid current already
flattens the peaks from about Vgk = −0.2 V, so the onset may lie up to
3× (10 dB) above the −6 dB point — the tolerance used below.
"""

from __future__ import annotations

import numpy as np
import pytest

from chain.headroom import headroom


def first_saturating(curves):
    """(stage, polarity, source level V) of the first output to fall to half gain;
    polarity is "either" when the stage's two half-waves get there within 10 %."""
    v = curves.input_v
    zero = curves.zero_index
    found = []
    for order, stage in enumerate(curves.stages):
        y = curves.node_dv[stage.output]
        for polarity, idx in (("positive", np.arange(zero, v.size)), ("negative", np.arange(zero, -1, -1))):
            slope = np.diff(y[idx]) / np.diff(v[idx])
            below = np.flatnonzero(np.abs(slope) < 0.5 * abs(slope[0]))
            if below.size:
                found.append((abs(float(v[idx][below[0]])), order, stage.name, polarity))
    lowest = min(f[0] for f in found)
    tied = [f for f in found if f[0] <= 1.1 * lowest]
    level, _, name, polarity = min(tied, key=lambda f: (f[1], f[0]))
    sides = [f for f in found if f[2] == name]
    if len(sides) == 2 and max(f[0] for f in sides) <= 1.1 * min(f[0] for f in sides):
        polarity = "either"
    return name, polarity, level


def check(circuit, dc, expected_stage, *, level_v=0.1, f_ref_hz=1000.0):
    hr = headroom(circuit, dc, level_v=level_v, f_ref_hz=f_ref_hz, spectrum=False)
    name, polarity, level = first_saturating(hr.curves)
    assert name == expected_stage
    assert hr.first is not None and hr.first.stage == name
    # the half-wave whose gain halves first is the one with the first onset
    # or the one whose gain is first down 3 dB (they can differ: a soft
    # approach to cutoff is 3 dB down early but halves late; grid conduction
    # is counted from 0 V, after a large grid stopper has already cut the gain)
    three = hr.first.compression(3.0)
    assert three is not None
    side = "positive" if hr.first.positive.compression[1] is three else "negative"
    assert polarity == "either" or polarity in (side, hr.first.first_polarity)
    assert level / 2.0 < hr.first.clip_input_v < 3.0 * level
    # every other stage's own onset comes later
    for row in hr.stages:
        if row.stage != name and row.clip_input_v is not None:
            assert row.clip_input_v > hr.first.clip_input_v
    assert hr.summary.startswith(f"first to clip: stage {name}, by {hr.first.mechanism}")
    return hr


def test_demo_clean_channel_second_stage_clips_first(demo):
    design, circuit, dc = demo["clean_two_stage"]
    check(circuit, dc, "V2", level_v=design.settings.level_v, f_ref_hz=design.settings.reference_hz)


def test_hand_built_hot_second_stage_clips_first(two_stages_hot):
    _, circuit, dc = two_stages_hot
    hr = check(circuit, dc, "V2")
    # behind its 470k grid stopper the stage's gain is first down 3 dB on the
    # half-wave that drives its grid into conduction
    three = hr.first.compression(3.0)
    side = "positive" if hr.first.positive.compression[1] is three else "negative"
    assert hr.first.half(side).grid is not None


def test_hand_built_padded_first_stage_clips_first(two_stages_padded):
    # a 1:100 pad leaves the second stage far from its limits: the first clips
    _, circuit, dc = two_stages_padded
    hr = check(circuit, dc, "V1")
    assert hr.stage("V2").clip_input_v is None or hr.stage("V2").clip_input_v > hr.first.clip_input_v
    assert hr.stage("V1").margin_db == pytest.approx(20 * np.log10(hr.first.clip_input_v / 0.1), abs=1e-9)
