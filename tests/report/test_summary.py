"""``chain check``'s one-line part count."""

from pathlib import Path

from chain.build import load
from chain.report.summary import check_summary

NETLISTS = Path(__file__).resolve().parents[2] / "netlists"


def _parts_line(name: str) -> str:
    design, circuit, _ = load(NETLISTS / name)
    return next(line for line in check_summary(design, circuit).splitlines() if "parts:" in line)


def test_pot_halves_are_counted_as_pots_and_one_is_singular():
    # lead demo: 22 resistors written as resistors or made by stages, rails, the
    # pickup (its eddy-current loss) and the load; 4 controls (drive gain and treble are pots, bass and mid rheostats)
    assert _parts_line("lead_four_stage.chain") == \
        "  parts:    22 resistors, 4 pots, 13 capacitors, 1 inductor, 4 triodes"
    assert _parts_line("clean_two_stage.chain") == \
        "  parts:    12 resistors, 1 pot, 8 capacitors, 1 inductor, 2 triodes"
