"""Fixtures shared by the small-signal tests."""

import pytest

from chain.build import build
from chain.dc import solve
from chain.language import parse_text
from chain.smallsignal import linearize
from chain.smallsignal import mna as M
from tests.cascades import cascade


@pytest.fixture(scope="module")
def big():
    """A 12-stage cascade: circuit, small-signal circuit and its assembled system
    (large enough for the sparse and banded paths)."""
    circuit = build(parse_text(cascade(12), "c12.chain"))
    ss = linearize(circuit, solve(circuit))
    return circuit, ss, M.assemble(ss)
