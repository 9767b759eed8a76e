"""Headroom of a long DC-coupled mid-band network (issue 16): eight stages
multiply rounding by about 10¹⁴, so Newton's steps never fall below
tol_v although every node's current balance holds to rounding."""

import pytest

from chain.build import build
from chain.dc import solve
from chain.headroom import headroom
from chain.language import parse_text
from tests.cascades import padded


def _cascade(n: int) -> str:
    lines = ['title "cascade"', "supply HT 330V", "input into V1 resistance 10k"]
    lines += [f"rail B{i} from HT drop 10k decouple 22u" for i in range(1, n + 1)]
    for i in range(1, n + 1):
        lines += [f"stage V{i} common-cathode 12AX7", f"  plate 100k from B{i}",
                  "  cathode 1k5 bypass 22u" if i % 2 else "  cathode 2k7", "  grid leak 1M stopper 33k"]
    lines += [f"couple V{i} -> V{i + 1} cap 22n" for i in range(1, n)]
    lines += [f"couple V{n} -> output cap 22n", "output load 1M", ""]
    return "\n".join(lines)


def _first_stage_clip_v(n: int) -> float:
    circuit = build(parse_text(_cascade(n), f"cascade{n}.chain"))
    room = headroom(circuit, solve(circuit), level_v=0.1)
    v = room.stage("V1").clip_input_v
    assert v is not None
    return v


def test_eight_stage_headroom_solves_and_its_first_stage_clips_as_in_a_short_chain():
    """The first stage drives the same 1 MΩ grid leak whatever follows it, so
    the input at which it clips must not depend on how many stages follow
    (common practice: a stage is loaded only by the next grid's resistance)."""
    short = _first_stage_clip_v(2)
    long_ = _first_stage_clip_v(8)
    assert abs(long_ / short - 1.0) < 1e-3


def test_a_chain_beyond_double_precision_says_so():
    """Sixteen stages: the held mid-band network's gain is about 10²⁸, far past
    the 2⁵³ that double precision resolves (IEEE 754), so its zero-input state
    cannot be solved; the error must say that the headroom network failed,
    not the operating point (which the same circuit's DC solve found)."""
    from chain.errors import DcConvergenceError

    circuit = build(parse_text(_cascade(16), "cascade16.chain"))
    dc = solve(circuit)
    with pytest.raises(DcConvergenceError) as info:
        headroom(circuit, dc, level_v=0.1)
    assert info.value.diagnostics[0].code == "E404"


def _padded_headroom(n: int):
    circuit = build(parse_text(padded(n), f"padded{n}.chain"))
    return headroom(circuit, solve(circuit), level_v=0.1, spectrum=False)


@pytest.fixture(scope="module")
def long_padded():
    """Sixteen padded stages: the held network has 147 unknowns, so it is solved sparse."""
    return _padded_headroom(16)


def _onsets(stages):
    """Per stage and half-wave: (grid-conduction onset, cutoff onset), source peaks in V or None."""
    return [(h.grid.input_v if h.grid else None, h.cutoff.input_v if h.cutoff else None)
            for s in stages for h in (s.positive, s.negative)]


def _same(got, ref, rel):
    for a, b in zip(got, ref):
        for x, y in zip(a, b):
            assert (x is None) == (y is None)
            if x is not None:
                assert x == pytest.approx(y, rel=rel, abs=1e-12)


def test_the_sparse_solve_agrees_with_the_dense_one(monkeypatch):
    """Every stage's onsets with the network solved sparse (SuperLU, forced
    here on eight stages; long chains get it by themselves) against the same
    analysis solved dense (numpy's LAPACK solve as the reference): the same
    equations, solved independently, to the refinement's accuracy."""
    from chain.dc import engine

    dense = _padded_headroom(8)
    assert sum(s.clip_input_v is not None for s in dense.stages) >= 4  # the per-stage work is exercised
    monkeypatch.setattr(engine, "SPARSE_MIN_SIZE", 0)
    sparse = _padded_headroom(8)
    assert len(dense.stages) == len(sparse.stages) == 8
    _same(_onsets(sparse.stages), _onsets(dense.stages), 1e-9)


def test_early_stages_of_a_long_padded_chain_clip_as_in_its_prefix(long_padded):
    """V1 is loaded by the volume pot and V2's grid whatever follows V2, and
    the later stages do not reach back through V2's grid (common practice: a
    stage is loaded only by the next grid's network), so V1's onsets in
    sixteen stages equal those of the two-stage prefix."""
    short = _padded_headroom(2)
    assert long_padded.stage("V1").clip_input_v is not None
    _same(_onsets([long_padded.stage("V1")]), _onsets([short.stage("V1")]), 1e-9)
