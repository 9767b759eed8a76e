"""Slow DC fallbacks say which one runs and why (issue 16 item 4), through the
``chain.progress`` logger; the command line shows it after the first second."""

import logging
from pathlib import Path

import pytest

from chain.build import load
from chain.dc import SolveOptions
from chain.dc.engine import compile_network
from chain.errors import DcConvergenceError

LEAD = Path(__file__).parents[2] / "netlists" / "lead_four_stage.chain"


def test_each_fallback_is_announced_with_the_reason(caplog):
    _, circuit, _ = load(LEAD)
    system = compile_network(circuit)
    caplog.set_level(logging.INFO, logger="chain.progress")
    with pytest.raises(DcConvergenceError):
        system.solve_vector(0.0, options=SolveOptions(max_iter=0))  # no Newton step allowed: every attempt fails
    messages = [r.getMessage() for r in caplog.records if r.name == "chain.progress"]
    assert len(messages) == 3
    assert "did not converge from the stage-by-stage starting point" in messages[0]
    assert "trying source stepping" in messages[0]
    assert "trying gmin stepping" in messages[1] and "trying a hybrid (dogleg) root finder" in messages[2]
    assert all(f"{system.size} unknowns" in m for m in messages)


def test_progress_is_shown_only_after_the_first_second():
    from chain.cli import _AfterOneSecond

    gate = _AfterOneSecond()
    record = logging.LogRecord("chain.progress", logging.INFO, __file__, 1, "x", (), None)
    assert not gate.filter(record)
    gate._start -= 2.0
    assert gate.filter(record)
