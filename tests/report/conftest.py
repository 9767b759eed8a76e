"""The demo netlists, analysed once per test session.

Paths are given relative to the repository root (as a user types them),
so the reports name them the same way on every machine.
"""

from __future__ import annotations

import contextlib
import os
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
DEMOS = tuple(sorted(p.stem for p in (ROOT / "netlists").glob("*.chain")))


@contextlib.contextmanager
def at_root():
    """Run the body with the repository root as working directory."""
    before = os.getcwd()
    os.chdir(ROOT)
    try:
        yield ROOT
    finally:
        os.chdir(before)


def _analyse(headroom: bool) -> dict:
    from chain.analysis import analyze

    with at_root():
        return {name: analyze(f"netlists/{name}.chain", headroom=headroom) for name in DEMOS}


@pytest.fixture(scope="session")
def demos() -> dict:
    """Demo name → Analysis without headroom (fast)."""
    return _analyse(False)


@pytest.fixture(scope="session")
def demos_headroom() -> dict:
    """Demo name → Analysis with the headroom analysis."""
    return _analyse(True)
