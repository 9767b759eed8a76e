"""Every knob of every demo netlist turns the way a player expects.

Common practice (how a guitar amplifier's controls behave, checked with the
ear and the scope on any amplifier with these controls): turning *bass* up
raises the response at 100 Hz against 1 kHz; *treble* up raises 5 kHz against
1 kHz; *mid* up fills the scoop of a passive tone network (the dip between the
bass and treble regions rises); *volume* or *gain* up raises the response at
every frequency.  Each check compares knob 2 with knob 8 of one control, all
other parts as in the demo.
"""

from pathlib import Path

import numpy as np
import pytest

import chain
from chain.build import with_part
from chain.language import parse_file
from chain.smallsignal import gain_at

NETLISTS = Path(__file__).resolve().parent.parent / "netlists"
SPOT_HZ = np.array([50.0, 100.0, 300.0, 1000.0, 3000.0, 5000.0, 10e3])


def _db_at_knob(path: Path, pot: str, knob: float) -> dict[float, float]:
    design = with_part(parse_file(path), pot, knob)
    a = chain.analyze(design, headroom=False)
    h = gain_at(a.freq, a.circuit.output_node, SPOT_HZ)
    return dict(zip(SPOT_HZ.tolist(), (20 * np.log10(np.abs(h))).tolist()))


def _scoop_db(path: Path, pot: str, knob: float) -> float:
    """Level of the deepest point of the response between 150 Hz and 3 kHz, dB."""
    design = with_part(parse_file(path), pot, knob)
    a = chain.analyze(design, headroom=False)
    f = np.geomspace(150.0, 3000.0, 60)
    return float(np.min(20 * np.log10(np.abs(gain_at(a.freq, a.circuit.output_node, f)))))


# (netlist, pot, what turning it up does) for every pot of every demo
KNOBS = [
    ("lead_four_stage.chain", "tone.bass", "bass"),
    ("lead_four_stage.chain", "tone.treble", "treble"),
    ("lead_four_stage.chain", "tone.mid", "mid"),
    ("lead_four_stage.chain", "drive.gain", "volume"),
    ("clean_two_stage.chain", "volume.level", "volume"),
    ("voicings/clean_bright.chain", "volume.level", "volume"),
    ("voicings/clean_dark.chain", "volume.level", "volume"),
    ("splitter_cathodyne.chain", "volume.level", "volume"),
    ("splitter_long_tail.chain", "volume.level", "volume"),
]


def test_every_pot_of_every_demo_is_listed():
    from chain.language.design import Pot

    listed = {(n, p) for n, p, _ in KNOBS}
    for path in sorted(NETLISTS.rglob("*.chain")):
        d = parse_file(path)
        for net in d.networks:
            for part in net.parts:
                if isinstance(part, Pot):
                    assert (str(path.relative_to(NETLISTS)), f"{net.name}.{part.name}") in listed


@pytest.mark.parametrize("netlist,pot,role", KNOBS, ids=[f"{n}:{p}" for n, p, _ in KNOBS])
def test_turning_the_knob_up_does_what_its_name_says(netlist, pot, role):
    path = NETLISTS / netlist
    if role == "mid":
        low, high = _scoop_db(path, pot, 2), _scoop_db(path, pot, 8)
        assert high > low + 1.0, f"mid 2 → 8 moved the scoop from {low:.2f} dB to {high:.2f} dB"
        return
    low, high = _db_at_knob(path, pot, 2), _db_at_knob(path, pot, 8)
    if role == "bass":
        tilt = (high[100.0] - high[1000.0]) - (low[100.0] - low[1000.0])
        assert tilt > 1.0, f"bass 2 → 8 changed 100 Hz against 1 kHz by {tilt:+.2f} dB"
    elif role == "treble":
        tilt = (high[5000.0] - high[1000.0]) - (low[5000.0] - low[1000.0])
        assert tilt > 1.0, f"treble 2 → 8 changed 5 kHz against 1 kHz by {tilt:+.2f} dB"
    else:
        rises = {f: high[f] - low[f] for f in SPOT_HZ.tolist()}
        assert all(r > 0.5 for r in rises.values()), f"volume 2 → 8 changed the response by {rises}"
