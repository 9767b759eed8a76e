"""How the two-triode stages expand: parts with owner and role, triodes, named ports."""

import pytest

from chain.build import load_text, part_names, with_part
from chain.circuit import GROUND, Owner, Role
from chain.errors import LanguageError

PAIR = """supply HT 330V
rail B1 from HT drop 4k7 decouple 22u
input into V1 resistance 10k
stage V1 common-cathode 12AX7
  plate 100k from B1
  cathode 1k5 bypass 22u
  grid leak 1M
stage PI long-tailed-pair 12AX7
  plate 82k from HT
  second plate 100k from HT
  cathode 1k tail 10k
  grid leak 1M stopper 1k
  second grid leak 1M bypass 100n
couple V1 -> PI cap 22n
network drive
  capacitor a PI.plate1 -- ga 47n
  capacitor b PI.plate2 -- gb 47n
output drive.ga load 220k and drive.gb load 220k
"""

SPLIT = """supply HT 330V
input into V1 resistance 10k
stage V1 common-cathode 12AX7
  plate 220k from HT
  cathode 1k5 bypass 22u
  grid leak 1M
stage PI cathodyne 12AU7
  plate 47k from HT
  cathode 47k
couple V1 -> PI direct
stage V3 cathode-follower 12AU7
  plate on HT
  cathode 100k
  grid leak 1M
couple PI.cathode -> V3 cap 100n
output PI.plate load 1M and V3 load 1M
"""


def test_long_tailed_pair_expands_into_two_triodes_over_a_shared_tail():
    _, c, _ = load_text(PAIR)
    st = c.stage("PI")
    assert st.triodes == ("PIa", "PIb")
    assert dict(st.inputs) == {"in": "PI.in", "in2": "PI.in2"}
    assert dict(st.outputs) == {"plate1": "PI.plate1", "plate2": "PI.plate2"}
    a, b = c.triode("PIa"), c.triode("PIb")
    assert a.cathode == b.cathode == "PI.cathode"
    assert (a.plate, a.grid, b.plate, b.grid) == ("PI.plate1", "PI.grid", "PI.plate2", "PI.in2")
    own = Owner("stage", "PI")
    by_role = {}
    for p in c.parts(owner=own):
        by_role.setdefault(p.role, []).append(p)
    assert {(p.a, p.b) for p in by_role[Role.PLATE_LOAD]} == {("HT", "PI.plate1"), ("HT", "PI.plate2")}
    (rk,) = by_role[Role.CATHODE_RESISTOR]
    (rt,) = by_role[Role.TAIL_RESISTOR]
    assert (rk.a, rk.b, rk.ohms) == ("PI.cathode", "PI.tap", 1e3)
    assert (rt.a, rt.b, rt.ohms) == ("PI.tap", GROUND, 10e3)
    # both grid leaks return to the tap; the second grid is AC-grounded by its capacitor
    assert {(p.a, p.b) for p in by_role[Role.GRID_LEAK]} == {("PI.in", "PI.tap"), ("PI.in2", "PI.tap")}
    (cg,) = by_role[Role.GRID_BYPASS]
    assert (cg.a, cg.b, cg.farads) == ("PI.in2", GROUND, 100e-9)
    assert {t.owner for t in c.triodes if t.name.startswith("PI")} == {own}


def test_two_output_ports_with_their_loads():
    _, c, _ = load_text(PAIR)
    assert dict(c.outputs) == {"drive.ga": "drive.ga", "drive.gb": "drive.gb"}
    assert c.output_node == "drive.ga"
    loads = c.parts(role=Role.LOAD)
    assert {(p.a, p.b, p.ohms) for p in loads} == {("drive.ga", GROUND, 220e3), ("drive.gb", GROUND, 220e3)}


def test_cathodyne_ports_couple_on_and_a_stage_name_loads_every_output():
    _, c, _ = load_text(SPLIT)
    st = c.stage("PI")
    assert dict(st.outputs) == {"plate": "PI.plate", "cathode": "PI.cathode"}
    # a direct coupling puts the cathodyne's grid on V1's plate (no grid leak needed)
    assert c.triode("PI").grid == "V1.plate" == st.input
    assert c.couplings["PI.cathode->V3"] == ("PI.cathode", "V3.in")
    assert dict(c.outputs) == {"PI.plate": "PI.plate", "V3": "V3.cathode"}
    rk = c.part(Owner("stage", "PI"), Role.CATHODE_RESISTOR)
    assert (rk.a, rk.b) == ("PI.cathode", GROUND)
    _, c2, _ = load_text(SPLIT.replace("output PI.plate load 1M and V3 load 1M", "output PI load 470k")
                         .replace("couple PI.cathode -> V3 cap 100n\n", "couple PI.plate -> V3 cap 100n\n"))
    assert dict(c2.outputs) == {"PI.plate": "PI.plate", "PI.cathode": "PI.cathode"}


def test_pair_parts_can_be_changed_by_name():
    design, _, _ = load_text(PAIR)
    names = part_names(design)
    for name in ("PI.RL", "PI.RL2", "PI.Rk", "PI.Rt", "PI.Rg", "PI.Rs", "PI.Rg2", "PI.Cg2"):
        assert name in names
    assert "PI.Rs2" not in names
    changed = with_part(design, "PI.Rt", 22e3)
    assert changed.stage("PI").cathode.tail_ohm == 22e3
    assert with_part(design, "PI.RL2", 120e3).stage("PI").second.plate_load_ohm == 120e3
    assert with_part(design, "PI.Cg2", 1e-6).stage("PI").second.grid_bypass_f == 1e-6
    no_bias = load_text(PAIR.replace("cathode 1k tail 10k", "cathode 10k"))[0]
    assert "PI.Rk" not in part_names(no_bias)
    assert with_part(no_bias, "PI.Rt", 15e3).stage("PI").cathode.r_ohm == 15e3


@pytest.mark.parametrize("change, code", [
    (("couple V1 -> PI cap 22n", "couple V1 -> PI.in3 cap 22n"), "E273"),
    (("  second plate 100k from HT\n", ""), "E272"),
    (("  second plate 100k from HT\n", "  second plate 100k from B9\n"), "E204"),
    (("cathode 1k tail 10k", "cathode 1k bypass 22u"), "E271"),
    (("output drive.ga load 220k and drive.gb load 220k", "output drive.ga load 220k and drive.ga load 220k"),
     "E274"),
    (("stage V1 common", "stage PIa common"), "E275"),
])
def test_pair_mistakes_are_refused(change, code):
    text = PAIR.replace(*change)
    if code == "E275":
        text = text.replace("input into V1", "input into PIa").replace("couple V1", "couple PIa")
    with pytest.raises(LanguageError) as info:
        load_text(text)
    assert code in {d.code for d in info.value.diagnostics}
