"""Small hand-written netlists for the time-domain tests (parsed by chain.build.load_text)."""

import pytest

from chain.build import load_text

ONE_STAGE = """title "one stage"
supply HT 300V impedance 100
rail B1 from HT drop 10k decouple 10u
input into V1 resistance 10k
stage V1 common-cathode 12AX7
  plate 100k from B1
  cathode 1k5 bypass 10u
  grid leak 1M stopper 33k
couple V1 -> output cap 47n
output load 470k
"""

TWO_STAGES = """title "two stages"
supply HT 300V impedance 100
rail B1 from HT drop 4k7 decouple 22u
input into V1 resistance 10k
stage V1 common-cathode 12AX7
  plate 100k from B1
  cathode 1k5 bypass 22u
  grid leak 1M stopper 33k
stage V2 common-cathode 12AX7
  plate 100k from B1
  cathode 1k5
  grid leak 470k stopper 10k
couple V1 -> V2 cap 22n
couple V2 -> output cap 22n
output load 1M
"""


def circuit_of(text: str):
    return load_text(text)[1]


@pytest.fixture(scope="module")
def one_stage():
    return circuit_of(ONE_STAGE)


@pytest.fixture(scope="module")
def two_stages():
    return circuit_of(TWO_STAGES)
