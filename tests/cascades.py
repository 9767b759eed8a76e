"""Netlists of long stable cascades for the tests of long chains.

Invented values typical of the trade: common-cathode 12AX7 stages, bypassed
and unbypassed cathodes alternating, each plate on its own decoupled rail
from a stiff supply (so no impedance is shared and there is no feedback
path); a tone network before the output (:func:`cascade`) or a volume
control between each pair of stages (:func:`padded`).
"""

TONE = """network tone: in -> out
  capacitor treble_c in -- t 390p
  resistor feed in -- a 47k
  capacitor bass_c a -- b 47n
  capacitor mid_c a -- m 22n
  pot treble cw t wiper out ccw b 250k audio 10% at 6
  rheostat bass m -- b 500k audio 10% at 5
  rheostat mid m -- gnd 20k linear at 4
"""


def cascade(n: int) -> str:
    """n common-cathode 12AX7 stages, each on its own decoupled rail from a stiff supply (no
    feedback through the supply: a stable cascade), then a tone network."""
    lines = ['title "cascade"', "supply HT 330V", "input into V1 resistance 10k"]
    lines += [f"rail R{i} from HT drop 10k decouple 22u" for i in range(1, n + 1)]
    for i in range(1, n + 1):
        lines += [f"stage V{i} common-cathode 12AX7", f"  plate 100k from R{i}",
                  "  cathode 1k5 bypass 22u" if i % 2 else "  cathode 2k7", "  grid leak 1M stopper 33k"]
    lines.append(TONE)
    lines += [f"couple V{i} -> V{i + 1} cap 22n" for i in range(1, n)]
    lines += [f"couple V{n} -> output via tone", "output load 1M", ""]
    return "\n".join(lines)


def padded(n: int) -> str:
    """``n`` stages with a volume pot (22 nF block into 1 MΩ audio at knob 3)
    between each pair: a net gain per stage of order one, so a long chain's
    held mid-band network stays within double precision."""
    lines = ['title "padded"', "supply HT 330V", "input into V1 resistance 10k"]
    lines += [f"rail B{i} from HT drop 10k decouple 22u" for i in range(1, n + 1)]
    for i in range(1, n + 1):
        lines += [f"stage V{i} common-cathode 12AX7", f"  plate 100k from B{i}",
                  "  cathode 1k5 bypass 22u" if i % 2 else "  cathode 2k7", "  grid leak 1M stopper 33k"]
    lines += ["network volume: in -> out", "  capacitor block in -- top 22n",
              "  pot level cw top wiper out ccw gnd 1M audio 10% at 3"]
    lines += [f"couple V{i} -> V{i + 1} via volume as volume{i}" for i in range(1, n)]
    lines += [f"couple V{n} -> output cap 22n", "output load 1M", ""]
    return "\n".join(lines)
