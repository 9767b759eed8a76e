"""The demo corpus is there: every test that loops over netlists/*.chain would
otherwise pass vacuously on an empty glob."""

from pathlib import Path

ROOT = Path(__file__).parents[1]


def test_at_least_four_demo_netlists_and_two_voicings():
    assert len(list((ROOT / "netlists").glob("*.chain"))) >= 4
    assert len(list((ROOT / "netlists" / "voicings").glob("*.chain"))) >= 2
