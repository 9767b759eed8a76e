"""Chains too big for memory (issue 16 item 1) are refused before any solve,
with the estimate, exit 2; a 64-stage chain at the default points is not."""

import pytest

import chain.analysis

from chain.analysis import analyze
from chain.build import build
from chain.cli import main
from chain.errors import AnalysisError
from chain.language import parse_text
from chain.smallsignal import mna as M

from tests.cascades import cascade


def test_sixteen_stages_at_100000_points_are_refused_with_the_estimate(monkeypatch):
    monkeypatch.setattr(chain.analysis, "solve", lambda *a, **k: pytest.fail("the DC solve started"))
    text = cascade(16).replace('title "cascade"', 'title "cascade"\nset points 100000')
    with pytest.raises(AnalysisError) as info:
        analyze(parse_text(text, "c.chain"), headroom=False)
    [d] = info.value.diagnostics
    assert d.code == "E330" and "GB needed" in d.message and "100001 frequencies" in d.message
    assert "set points" in d.hint


def test_the_estimate_grows_linearly_in_points_and_refuses_1000_stages():
    n = 5008  # the unknowns of a 1000-stage cascade
    assert M.memory_estimate(n, 501) > M.MEMORY_BUDGET
    small = M.memory_estimate(326, 501)  # 64 stages
    assert small < 100 * 2**20
    assert M.memory_estimate(100, 2000) - M.memory_estimate(100, 1000) == \
        M.memory_estimate(100, 3000) - M.memory_estimate(100, 2000)


def test_sixty_four_stages_at_the_default_points_pass_the_check():
    circuit = build(parse_text(cascade(64), "c64.chain"))
    M.check_size(circuit, 501)


def test_refusal_exits_2_from_the_command_line(tmp_path, capsys):
    net = tmp_path / "big.chain"
    net.write_text(cascade(16).replace('title "cascade"', 'title "cascade"\nset points 100000'))
    assert main(["report", "--no-headroom", str(net)]) == 2
    err = capsys.readouterr().err
    assert "E330" in err and "internal error" not in err


@pytest.mark.parametrize("stages, points", [(8, 2000), (16, 500)])
def test_the_estimate_bounds_what_the_analysis_allocates(stages, points):
    """The planned memory against the peak that Python's tracemalloc measures over
    the whole analysis without headroom (numpy's arrays included): at least the
    peak, and not more than three times it.  At these sizes the sweep takes the
    banded solve, whose kept factors the estimate counts."""
    import tracemalloc

    from chain.analysis import analyze_design, sweep_frequencies

    design = parse_text(cascade(stages).replace('title "cascade"', f'title "cascade"\nset points {points}'),
                        "c.chain")
    circuit = build(design)
    n_freq = len(sweep_frequencies(design))
    n, planned = M.planned_memory(circuit, n_freq)
    analyze_design(design, circuit, (), headroom=False)  # imports and caches outside the measurement
    tracemalloc.start()
    try:
        analyze_design(design, circuit, (), headroom=False)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak <= planned <= 3 * peak, (n, peak, planned)


def test_the_structure_gives_the_assembled_pattern():
    """chain.smallsignal.model.unknown_pattern (before any DC solve) against the
    non-zero pattern of the matrices assembled after linearising."""
    from pathlib import Path

    import numpy as np

    from chain.build import load
    from chain.dc import solve
    from chain.smallsignal import linearize
    from chain.smallsignal.model import unknown_pattern

    demos = sorted((Path(__file__).parents[2] / "netlists").glob("*.chain"))
    circuits = [load(p)[1] for p in demos] + [build(parse_text(cascade(5), "c5.chain"))]
    for circuit in circuits:
        mna = M.assemble(linearize(circuit, solve(circuit)))
        assert np.array_equal(unknown_pattern(circuit), (mna.g != 0.0) | (mna.c != 0.0))
