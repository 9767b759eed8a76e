"""Each stage's grid leak found in one pass over the resistors (issue 16),
against the per-triode filter over every resistor (the definition), on every
shipped demo and on a long cascade."""

from pathlib import Path

import pytest

from chain.build import build, load
from chain.circuit import Owner, Role
from chain.dc.diagnose import _grid_leaks
from chain.language import parse_text

from tests.cascades import cascade

ROOT = Path(__file__).resolve().parents[2]


def _by_filter(circuit, triode):
    own = Owner("stage", circuit.stage_of_triode(triode))
    leaks = [r for r in circuit.resistors if r.owner == own and r.role == Role.GRID_LEAK]
    return max(leaks, key=lambda r: r.ohms) if leaks else None


@pytest.mark.parametrize("path", sorted((ROOT / "netlists").glob("*.chain")), ids=lambda p: p.stem)
def test_one_pass_grid_leaks_equal_the_per_triode_filter(path):
    _, circuit, _ = load(path)
    leaks = _grid_leaks(circuit)
    for t in circuit.triodes:
        assert leaks.get(Owner("stage", circuit.stage_of_triode(t.name))) is _by_filter(circuit, t.name)


def test_one_pass_grid_leaks_of_a_long_cascade():
    circuit = build(parse_text(cascade(12), "c12.chain"))
    leaks = _grid_leaks(circuit)
    assert len(circuit.triodes) == 12
    for t in circuit.triodes:
        got = leaks.get(Owner("stage", circuit.stage_of_triode(t.name)))
        assert got is not None and got is _by_filter(circuit, t.name)
