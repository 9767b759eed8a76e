"""A stage whose input is essentially zero (issue 16 item 2): no "gain"
made of the ratio of two leakage voltages, but a located warning.

Common practice: a volume control turned fully down passes no signal, and
what the next stage's output carries then is leakage (here through the
shared supply rail), not amplification; no working coupling loses 100 dB at
the reference frequency."""

import math
from pathlib import Path

from chain.analysis import analyze
from chain.language import parse_text

CLEAN = (Path(__file__).parents[2] / "netlists" / "clean_two_stage.chain").read_text(encoding="utf-8")


def _at(knob: str):
    text = CLEAN.replace("1M audio 10% at 6", f"1M audio 10% at {knob}")
    assert text != CLEAN or knob == "6"
    return analyze(parse_text(text, "vol.chain"), headroom=False)


def test_volume_at_zero_says_the_stage_receives_no_signal():
    a = _at("0")
    v2 = next(r for r in a.stages if r.stage == "V2")
    assert math.isnan(v2.gain_db)
    [w] = [d for d in a.diagnostics if d.code == "W420"]
    assert w.severity == "warning" and w.subject == "V2"
    assert "receives no signal" in w.message
    assert w.span is not None and w.span.line == CLEAN.splitlines().index("stage V2 common-cathode 12AX7") + 1


def test_volume_turned_up_keeps_a_plausible_gain():
    """A bypassed 12AX7 stage with a 100k plate load gains some 50-65x (about 34-36 dB; common practice)."""
    a = _at("5")
    v2 = next(r for r in a.stages if r.stage == "V2")
    assert 30.0 < v2.gain_db < 37.0
    assert not [d for d in a.diagnostics if d.code == "W420"]
