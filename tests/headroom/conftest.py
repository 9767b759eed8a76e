"""Small hand-written netlists for the headroom tests (parsed by chain.build.load_text)."""

from __future__ import annotations

from pathlib import Path

import pytest

from chain.build import load, load_text
from chain.dc import solve

NETLISTS = sorted((Path(__file__).resolve().parents[2] / "netlists").glob("*.chain"))

#: one bypassed common-cathode stage into a coupling capacitor and the next stage's grid leak
ONE_STAGE = """title "one stage"
supply HT 300V
input into V1 resistance 1k
stage V1 common-cathode 12AX7
  plate 100k from HT
  cathode 1k5 bypass 100u
  grid leak 1M stopper 10k
couple V1 -> output cap 100n
output load 470k
"""

#: a common-cathode stage direct-coupled into a cathode follower (grid about 1 V below its cathode)
STAGE_AND_FOLLOWER = """title "stage and follower"
supply HT 300V
input into V1 resistance 1k
stage V1 common-cathode 12AX7
  plate 220k from HT
  cathode 1k5 bypass 100u
  grid leak 1M stopper 10k
stage V2 cathode-follower 12AX7
  plate on HT
  cathode 100k
couple V1 -> V2 direct
couple V2 -> output cap 100n
output load 470k
"""

#: two common-cathode stages; the second gets the full first-stage swing (it clips first); its
#: large grid stopper keeps its grid current from loading the first stage's plate
TWO_STAGES_HOT = """title "two stages, second clips"
supply HT 300V
rail B1 from HT drop 10k decouple 47u
input into V1 resistance 1k
stage V1 common-cathode 12AX7
  plate 100k from B1
  cathode 1k5 bypass 47u
  grid leak 1M stopper 10k
stage V2 common-cathode 12AX7
  plate 100k from B1
  cathode 1k5 bypass 47u
  grid leak 470k stopper 470k
couple V1 -> V2 cap 22n
couple V2 -> output cap 22n
output load 1M
"""

#: two common-cathode stages with a 1:100 pad between them (the first clips first)
TWO_STAGES_PADDED = """title "two stages, padded"
supply HT 300V
rail B1 from HT drop 10k decouple 47u
input into V1 resistance 1k
stage V1 common-cathode 12AX7
  plate 100k from B1
  cathode 1k5 bypass 47u
  grid leak 1M stopper 10k
stage V2 common-cathode 12AU7
  plate 47k from B1
  cathode 1k bypass 47u
  grid stopper 10k
network pad: in -> out
  capacitor block in -- top 47n
  resistor upper top -- out 1M
  resistor lower out -- gnd 10k
couple V1 -> V2 via pad
couple V2 -> output cap 22n
output load 1M
"""


def circuit_of(text: str):
    design, circuit, _ = load_text(text)
    return design, circuit, solve(circuit)


@pytest.fixture(scope="session")
def one_stage():
    return circuit_of(ONE_STAGE)


@pytest.fixture(scope="session")
def demo():
    """Per demo netlist: (design, circuit, dc)."""
    out = {}
    for path in NETLISTS:
        design, circuit, _ = load(path)
        out[path.stem] = (design, circuit, solve(circuit))
    return out


@pytest.fixture(scope="session")
def stage_and_follower():
    return circuit_of(STAGE_AND_FOLLOWER)


@pytest.fixture(scope="session")
def two_stages_hot():
    return circuit_of(TWO_STAGES_HOT)


@pytest.fixture(scope="session")
def two_stages_padded():
    return circuit_of(TWO_STAGES_PADDED)
