"""`chain diff` says which changed part explains which effect (first-order sensitivities)."""

from __future__ import annotations

from pathlib import Path

from chain.analysis import analyze
from chain.changes import diff

ROOT = Path(__file__).resolve().parent.parent
CLEAN = ROOT / "netlists" / "clean_two_stage.chain"


def _effect(result, subject, quantity):
    return next(c for c in result.effects if c.subject == subject and c.quantity == quantity)


def test_two_resistor_changes_are_told_apart(tmp_path):
    """V1's plate load and cathode resistor both grow by about half: the plate
    current falls mostly through the cathode resistor (cathode bias, common
    practice), the mid-band gain rises through the plate load."""
    text = CLEAN.read_text().replace("cathode 1k5 bypass 25u", "cathode 2k2 bypass 25u").replace(
        "plate 100k from B1", "plate 150k from B1", 1)
    b_path = tmp_path / "b.chain"
    b_path.write_text(text)
    result = diff(analyze(CLEAN, headroom=False), analyze(b_path, headroom=False))
    assert "mostly V1.Rk" in _effect(result, "V1", "Ip").note
    assert "mostly V1.RL" in _effect(result, "overall", "gain").note


def test_an_effect_of_a_removed_part_is_not_pinned_on_a_value_change():
    """Bright → dark: the bypass change explains the low band edge; the high
    edge moved because the bright capacitor was removed, which has no
    sensitivity, so no part is named for it."""
    a = analyze(ROOT / "netlists" / "voicings" / "clean_bright.chain", headroom=False)
    b = analyze(ROOT / "netlists" / "voicings" / "clean_dark.chain", headroom=False)
    result = diff(a, b)
    assert _effect(result, "overall", "low band edge").note.endswith("explained by V1.Ck")
    assert "V1.Ck" not in _effect(result, "overall", "high band edge").note


def test_diff_says_when_a_voicing_is_unstable():
    """A stable feedback pair against the squealing four-stage demo: the
    instability is the first effect listed."""
    a = analyze(ROOT / "netlists" / "feedback_pair.chain", headroom=False)
    b = analyze(ROOT / "netlists" / "unstable" / "squeal_four_stage.chain", headroom=False)
    assert not a.unstable and b.unstable
    first = diff(a, b).effects[0]
    assert first.quantity == "stability" and first.old == "stable" and first.new.startswith("UNSTABLE")
