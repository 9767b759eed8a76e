"""Clipping onsets and THD thresholds tell one story: own THD (what a stage
adds itself) and cumulative THD (at its output, from the source) are kept apart
and both are given at each stage's clipping onset."""

from __future__ import annotations

import pytest

from chain.headroom import headroom


@pytest.fixture(scope="module")
def lead(demo):
    design, circuit, dc = demo["lead_four_stage"]
    return headroom(circuit, dc, level_v=design.settings.level_v, f_ref_hz=design.settings.reference_hz,
                    spectrum=False)


def test_first_stage_own_and_cumulative_thd_agree(demo):
    # the first stage is fed by a linear source network, so the THD at its
    # output for a pure sine at the source is exactly what it adds itself
    # (the definition of THD, IEC 60268-3 from memory: harmonics over fundamental)
    design, circuit, dc = demo["clean_two_stage"]
    hr = headroom(circuit, dc, level_v=design.settings.level_v, spectrum=False)
    v1 = hr.stage("V1")
    assert v1.own_thd_at_clip is not None
    assert v1.output_thd_at_clip == pytest.approx(v1.own_thd_at_clip, rel=0.02)


def test_own_thd_at_the_onset_and_the_thresholds_agree(lead):
    # THD rises with level: a stage whose own THD at its onset is below 1 %
    # reaches 1 % only above its onset, and one above 1 % reached it below
    for row in lead.stages:
        if row.own_thd_at_clip is None or row.thd_input_v[0] is None:
            continue
        if row.own_thd_at_clip < 0.01:
            assert row.thd_input_v[0] > row.clip_input_v, row.stage
        else:
            assert row.thd_input_v[0] < row.clip_input_v, row.stage


def test_summary_names_the_first_to_clip_and_the_first_to_reach_1_percent(lead):
    # the lead demo's follower conducts first but softly; V3 reaches 1 % first
    assert lead.first.stage == "V4" and lead.first.own_thd_at_clip < 0.01
    assert lead.first_thd.stage == "V3"
    assert lead.first_thd.thd_input_v[0] == min(r.thd_input_v[0] for r in lead.stages if r.thd_input_v[0])
    assert "its own THD there is" in lead.summary
    assert "first to reach 1 % THD of its own: stage V3" in lead.summary
