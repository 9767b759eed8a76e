"""chain.changes: what a part change moved, on hand-made voicing pairs.

Each pair differs in one written part; the expected movements are checked
against the diff and, where a textbook formula exists, against it:

* common-cathode stage gain ``A = mu·RL' / (RL' + rp + (mu+1)·Zk)`` with
  ``Zk`` the cathode impedance (M. Jones, "Valve Amplifiers", common-cathode
  chapter — from memory of that source);
* coupling capacitor into a grid leak: a first-order high-pass with corner
  ``1 / (2π·(Rg + Rsource)·C)`` (common practice; any circuits text).
"""

from __future__ import annotations

import cmath
import json
import math

import pytest

from chain.analysis import analyze_design
from chain.build import load_text
from chain.dc import solve
from chain.changes import (
    Change,
    CompareResult,
    DiffResult,
    compare,
    diff,
    document,
    load_voicing,
    render_compare,
    render_diff,
)
from chain.report import render
from chain.smallsignal import linearize, response, stage_table

#: two common-cathode stages on a stiff supply (no rail, so the stages do not
#: interact through a shared rail impedance); values typical of the trade
BASE = """\
title "Diff test"
set band 1Hz 100kHz
supply HT 300V
input into V1 resistance 1k
stage V1 common-cathode {tube}
  plate 100k from HT
  cathode 1k5
  grid leak 1M
stage V2 common-cathode 12AX7
  plate 100k from HT
  cathode {v2_cathode}
  grid leak 1M
couple V1 -> V2 cap {cc} rated 400V
couple V2 -> output cap 1u rated 400V
output load 1M
"""

#: the same circuit written differently: other order, spacing, comments, blank lines
REWRITTEN = """\
# the same preamp, written by someone else

output load   1M          # into the next stage
couple V2 -> output cap 1u rated 400V
couple V1 -> V2 cap 100n rated 400V

stage V2 common-cathode 12AX7
  grid leak 1M
  cathode 1k5
  plate 100k from HT

title "Diff test"
set band 1Hz 100kHz
stage V1 common-cathode 12AX7     # first stage
    plate    100k from HT
    cathode  1k5
    grid     leak 1M
supply HT 300V
input into V1 resistance 1k
"""

RL = 100e3
RK = 1.5e3
RG_NEXT = 1e6
F_REF = 1000.0


def netlist(**changes) -> str:
    values = dict(tube="12AX7", v2_cathode="1k5", cc="100n")
    values.update(changes)
    return BASE.format(**values)


def analyse(text: str):
    design, circuit, warnings = load_text(text, "voicing.chain")
    return analyze_design(design, circuit, warnings, headroom=False)


def by(result: DiffResult, kind: str, subject: str | None = None, quantity: str | None = None) -> list[Change]:
    return [c for c in result.effects
            if c.kind == kind and (subject is None or c.subject == subject)
            and (quantity is None or c.quantity == quantity)]


def cathode_gain(mu: float, rp: float, rl: float, zk: complex) -> complex:
    """Common-cathode gain magnitude with cathode impedance zk (M. Jones, Valve Amplifiers)."""
    return mu * rl / (rl + rp + (mu + 1) * zk)


@pytest.fixture(scope="module")
def base():
    return analyse(netlist())


# --------------------------------------------------------------------------- bypass capacitor


def test_bypass_change_moves_the_lows_and_that_stage_only(base):
    """V2's cathode bypass 100u -> 1u: V2's mid-band gain drops (partial
    bypass at 1 kHz), the low end falls, and nothing of V1 moves."""
    a = analyse(netlist(v2_cathode="1k5 bypass 100u rated 25V"))
    b = analyse(netlist(v2_cathode="1k5 bypass 1u rated 25V"))
    r = diff(a, b)
    assert r.differs
    assert [(c.subject, c.quantity, c.old, c.new) for c in r.parts] == [("V2.Ck", "value", 100e-6, 1e-6)]
    assert not r.settings and not r.stages
    # nothing upstream of V2, and no DC change at all (a capacitor carries no DC)
    assert not [c for c in r.effects if c.subject == "V1"]
    assert not by(r, "operating point") and not by(r, "rail")
    # V2's mid-band gain: the textbook partially bypassed stage at 1 kHz
    (gain,) = by(r, "gain", "V2")
    row_a, row_b = a.stages[1], b.stages[1]
    rl = 1 / (1 / RL + 1 / RG_NEXT)
    for row, c_k, got in ((row_a, 100e-6, gain.old), (row_b, 1e-6, gain.new)):
        zk = 1 / (1 / RK + 2j * math.pi * F_REF * c_k)
        expected = 20 * math.log10(abs(cathode_gain(row.mu, row.rp_ohm, rl, zk)))
        assert got == pytest.approx(expected, abs=0.03)  # interelectrode capacitances: < 0.03 dB at 1 kHz
    assert gain.delta < -0.05
    # the low end: largest response change below the reference frequency, several dB
    (resp,) = by(r, "response")
    assert resp.at_hz < 100.0 and resp.delta < -3.0
    (low,) = by(r, "corner", quantity="low band edge")
    assert low.new > 10 * low.old


# --------------------------------------------------------------------------- coupling capacitor


def test_coupling_cap_change_moves_only_the_low_corner(base):
    """V1->V2 coupling 100n -> 22n: the low corner moves to the RC high-pass
    corner; mid-band gains stay within the tolerance."""
    b = analyse(netlist(cc="22n"))
    r = diff(base, b)
    assert [(c.subject, c.old, c.new) for c in r.parts] == [("couple.V1-V2.C", 100e-9, 22e-9)]
    assert r.parts[0].owner == "coupling V1->V2"
    assert {c.kind for c in r.effects} <= {"corner", "response"}
    (low,) = by(r, "corner", quantity="low band edge")
    # first-order high-pass of the coupling cap into the grid leak, driven by V1's output impedance:
    # f = 1/(2π(Rg + Rsource)C) (single-pole RC corner, any circuit-theory text)
    r_source = abs(b.stages[0].zout_ohm)
    expected = 1 / (2 * math.pi * (RG_NEXT + r_source) * 22e-9)
    assert low.new == pytest.approx(expected, rel=0.01)
    assert low.relative == pytest.approx(math.log2(low.new / low.old), rel=1e-9)
    assert low.size == pytest.approx(6 * abs(low.relative), rel=1e-9)
    assert not by(r, "gain") and not by(r, "overall")


# --------------------------------------------------------------------------- tube swap


def test_tube_swap_moves_that_stage_as_the_models_predict(base):
    """V1 12AX7 -> 12AT7: the operating point and gain change by what the DC
    solve and the stage table give when run here on their own, and the gain
    agrees with the textbook unbypassed-stage formula."""
    b = analyse(netlist(tube="12AT7"))
    r = diff(base, b)
    assert [(c.subject, c.quantity, c.old, c.new) for c in r.parts] == [("V1", "tube", "12AX7", "12AT7")]

    # independent computation of the new voicing
    design, circuit, _ = load_text(netlist(tube="12AT7"), "voicing.chain")
    dc = solve(circuit)
    rows = stage_table(circuit, dc, response(linearize(circuit, dc), [10.0, F_REF, 1e4]), F_REF,
                       design.settings.level_v)
    op = dc.points["V1"]
    expected = {"Vp": op.vp_v, "Vk": op.vk_v, "Ip": op.ip_a, "gm": op.gm_s, "rp": op.rp_ohm, "mu": op.mu}
    for quantity, value in expected.items():
        (c,) = by(r, "operating point", "V1", quantity)
        assert c.new == pytest.approx(value, rel=1e-9)
        assert c.old == pytest.approx(getattr(base.dc.points["V1"], {"Vp": "vp_v", "Vk": "vk_v", "Ip": "ip_a",
                                                                     "gm": "gm_s", "rp": "rp_ohm",
                                                                     "mu": "mu"}[quantity]), rel=1e-9)
    (gain,) = by(r, "gain", "V1")
    assert gain.new == pytest.approx(rows[0].gain_db, abs=1e-9)
    # textbook: unbypassed common-cathode stage, loaded by the next grid leak
    rl = 1 / (1 / RL + 1 / RG_NEXT)
    for point, got in ((base.dc.points["V1"], gain.old), (op, gain.new)):
        predicted = 20 * math.log10(cathode_gain(point.mu, point.rp_ohm, rl, RK))
        assert got == pytest.approx(predicted, abs=0.02)
    # handbook amplification factors: 12AX7 about 100, 12AT7 about 60 (from memory of
    # RCA Receiving Tube Manual RC-30); the model at this operating point within 15 %
    (mu,) = by(r, "operating point", "V1", "mu")
    assert mu.old == pytest.approx(100, rel=0.15) and mu.new == pytest.approx(60, rel=0.15)
    # sizes: % / 10 for ratios, |dB| for gains; sorted biggest first
    (ip,) = by(r, "operating point", "V1", "Ip")
    assert ip.size == pytest.approx(abs(ip.relative) / 10, rel=1e-9)
    assert ip.relative == pytest.approx(100 * (ip.new / ip.old - 1), rel=1e-9)
    assert gain.size == pytest.approx(abs(gain.delta), rel=1e-9)
    sizes = [c.size for c in r.effects]
    assert sizes == sorted(sizes, reverse=True)


# --------------------------------------------------------------------------- identity, renames


def test_layout_and_comments_do_not_make_a_difference(base):
    other = analyse(REWRITTEN)
    assert other.netlist_sha256 != base.netlist_sha256  # the texts differ ...
    r = diff(base, other)
    assert not r.differs  # ... the preamps do not
    assert r.changes == ()
    assert "differs: no" in render_diff(r)


def test_a_renamed_stage_is_reported_as_renamed_and_its_parts_follow(base):
    text = netlist().replace("stage V2", "stage V9").replace("V1 -> V2", "V1 -> V9").replace("V2 -> output",
                                                                                              "V9 -> output")
    r = diff(base, analyse(text))
    assert [(c.kind, c.subject, c.old, c.new, c.note) for c in r.stages] == [
        ("stage", "V9", "V2", "V9", "renamed from V2")]
    assert r.parts == ()  # V2.RL -> V9.RL, couple.V1-V2.C -> couple.V1-V9.C: same parts
    assert r.effects == ()


def test_a_stage_fed_through_another_coupling_says_so_and_a_rename_does_not(base):
    # the same 100 nF between V1 and V2, once as a capacitor coupling, once as a network:
    # the couplings' recorded ends (from_stage, to_stage) tell them apart, not their names
    via = netlist().replace("couple V1 -> V2 cap 100n rated 400V", "couple V1 -> V2 via link") + (
        "network link: a -> b\n  capacitor c a -- b 100n rated 400V\n")
    (c,) = by(diff(base, analyse(via)), "coupling", "V2", "coupling loss")
    assert c.note == "fed through V1->V2 → link"
    renamed = via.replace("stage V2", "stage V9").replace("V1 -> V2", "V1 -> V9").replace("V2 -> output",
                                                                                         "V9 -> output")
    assert not by(diff(analyse(via), analyse(renamed)), "coupling")


def test_a_part_moved_to_another_node_is_reported_as_moved_and_only_it():
    """Parts are matched by name, nodes through the parts on both sides: a
    capacitor moved from V1's plate to V2's plate shows its nodes changed,
    also when V2 is renamed at the same time (its nodes follow the stage)."""
    snub = "network snub\n  capacitor c {node} -- gnd 100p\n"
    a = analyse(netlist() + snub.format(node="V1.plate"))
    moved = diff(a, analyse(netlist() + snub.format(node="V2.plate")))
    assert [(c.subject, c.quantity, c.old, c.new) for c in moved.parts] == [
        ("snub.c", "nodes", "V1.plate – gnd", "V2.plate – gnd")]
    renamed = netlist().replace("stage V2", "stage V9").replace("V1 -> V2", "V1 -> V9").replace(
        "V2 -> output", "V9 -> output")
    both = diff(a, analyse(renamed + snub.format(node="V9.plate")))
    assert [c.note for c in both.stages] == ["renamed from V2"]
    assert [(c.subject, c.quantity, c.new) for c in both.parts] == [("snub.c", "nodes", "V9.plate – gnd")]
    assert not diff(a, analyse(renamed + snub.format(node="V1.plate"))).parts


def test_a_renamed_two_triode_stage_keeps_its_parts_by_role():
    """A long-tailed pair has two plate loads, two grid leaks and two
    triodes of one role each: renaming the stage matches them in order."""
    with open("netlists/splitter_long_tail.chain", encoding="utf-8") as fh:
        text = fh.read()
    r = diff(analyse(text), analyse(text.replace("PI", "PX")))
    assert [c.note for c in r.stages] == ["renamed from PI"]
    assert r.parts == () and r.effects == ()
    # and a change of the second plate load is that part's, not the first's
    changed = diff(analyse(text), analyse(text.replace("PI", "PX").replace("second plate 100k", "second plate 120k")))
    assert [(c.subject, c.quantity) for c in changed.parts] == [("PX.RL2", "value")]


def test_added_and_removed_stages(base):
    three = netlist().replace("couple V2 -> output cap 1u rated 400V", """\
couple V2 -> V3 cap 22n rated 400V
stage V3 cathode-follower 12AU7
  plate on HT
  cathode 100k
  grid leak 1M
couple V3 -> output cap 1u rated 400V""")
    grown = diff(base, analyse(three))
    assert [(c.subject, c.note) for c in grown.stages] == [("V3", "added")]
    added = [c for c in grown.parts if c.note == "added"]
    assert {c.subject for c in added} >= {"V3", "V3.Rk", "V3.Rg", "couple.V2-V3.C", "couple.V3-output.C"}
    assert any(c.subject == "couple.V2-output.C" and c.note == "removed" for c in grown.parts)
    shrunk = diff(analyse(three), base)
    assert [(c.subject, c.note) for c in shrunk.stages] == [("V3", "removed")]


def test_tolerances_filter_effects_but_never_part_changes(base):
    b = analyse(netlist(cc="22n"))
    loose = diff(base, b, tol_db=100.0, tol_pct=1e6)
    assert loose.effects == () and len(loose.parts) == 1 and loose.differs
    tight = diff(base, b, tol_db=0.0, tol_pct=0.0)
    assert len(tight.effects) > len(diff(base, b).effects)
    with pytest.raises(ValueError):
        diff(base, b, tol_db=-1.0)


def test_settings_changes_are_reported():
    a = analyse(netlist())
    b = analyse(netlist().replace("set band 1Hz 100kHz", "set band 1Hz 100kHz\nset level 200mV"))
    r = diff(a, b)
    assert [(c.subject, c.old, c.new, c.unit) for c in r.settings] == [("level_v", 0.1, 0.2, "V")]


# --------------------------------------------------------------------------- JSON reports


@pytest.mark.parametrize("change", [dict(cc="22n"), dict(tube="12AT7"),
                                    dict(v2_cathode="1k5 bypass 1u rated 25V")])
def test_diff_of_json_reports_equals_diff_of_analyses(base, change):
    b = analyse(netlist(**change))
    direct = diff(base, b)
    ja, jb = (json.loads(render(x, fmt="json")) for x in (base, b))
    assert diff(ja, jb) == direct
    assert diff(base, jb) == direct  # a mix works too
    assert render_diff(diff(ja, jb)) == render_diff(direct)


def test_document_and_load_voicing(base, tmp_path):
    assert document(json.loads(render(base, fmt="json"))) == json.loads(render(base, fmt="json"))
    with pytest.raises(ValueError):
        document({"schema": "something-else/1"})
    with pytest.raises(TypeError):
        document("netlists/clean_two_stage.chain")
    report = tmp_path / "a.json"
    report.write_text(render(base, fmt="json"), encoding="utf-8")
    assert load_voicing(report) == json.loads(report.read_text(encoding="utf-8"))
    net = tmp_path / "a.chain"
    net.write_text(netlist(), encoding="utf-8")
    loaded = load_voicing(net, headroom=False)
    assert not diff(base, loaded).differs


def test_render_diff_text_and_json(base):
    r = diff(base, analyse(netlist(tube="12AT7")))
    text = render_diff(r)
    assert "stage V1: V1 tube" in text and "12AX7 → 12AT7" in text
    assert text.index("Parts changed") < text.index("Effects, largest first")
    data = json.loads(render_diff(r, fmt="json"))
    assert data["schema"] == "chain-diff/1" and data["differs"] is True
    assert [e["quantity"] for e in data["effects"]] == [c.quantity for c in r.effects]
    with pytest.raises(ValueError):
        render_diff(r, fmt="yaml")


# --------------------------------------------------------------------------- compare


def test_compare_tabulates_key_numbers_side_by_side(base):
    b = analyse(netlist(cc="22n"))
    c = analyse(netlist(tube="12AT7"))
    result = compare([base, b, c], labels=["base", "small cap", "12AT7"])
    assert isinstance(result, CompareResult) and result.differs
    rows = {(r.subject, r.quantity): r for r in result.rows}
    low = rows[("overall", "low band edge")]
    assert low.values == pytest.approx((base.overall.f_low_hz, b.overall.f_low_hz, c.overall.f_low_hz),
                                       rel=1e-11)  # Hz, rounded to 12 digits like the JSON report
    assert low.differs
    gain = rows[("overall", "gain")]
    assert gain.values[0] == pytest.approx(base.overall.gain_db, abs=1e-9)
    assert not rows[("V2", "Ip")].differs  # stiff supply: V1's tube does not move V2's bias
    assert rows[("V1", "Ip")].differs
    text = render_compare(result)
    assert "small cap" in text and "12AT7" in text
    assert json.loads(render_compare(result, fmt="json"))["rows"][0]["values"][0] == pytest.approx(
        base.overall.gain_db)
    assert render_compare(result, fmt="markdown").startswith("| quantity | base | small cap | 12AT7 |")


def test_compare_of_identical_voicings_does_not_differ(base):
    result = compare([base, analyse(REWRITTEN)])
    assert not result.differs
    assert all(cmath.isfinite(v) for r in result.rows for v in r.values if v is not None)


def test_a_tone_knob_shows_as_the_output_network_transfer():
    """Turning a pot in the network into the output moves that network's transfer
    and nothing at DC (common practice: a passive network carries no DC here)."""
    from pathlib import Path

    from chain.analysis import analyze_design
    from chain.build import build, load, with_part
    from chain.changes import diff

    design, _, _ = load(Path(__file__).parents[1] / "netlists" / "lead_four_stage.chain")
    low, high = (with_part(design, "tone.treble", k) for k in (2, 8))
    result = diff(analyze_design(low, build(low), headroom=False), analyze_design(high, build(high), headroom=False))
    tone = [c for c in result.effects if c.kind == "coupling" and c.subject == "tone"]
    assert tone and tone[0].quantity == "transfer" and tone[0].new > tone[0].old
    assert not [c for c in result.effects if c.kind == "operating point"]


# --------------------------------------------------------------------------- noise


def test_a_larger_grid_stopper_shows_as_more_output_noise():
    # a series resistor in front of the first grid adds its 4kTR to the input noise (Johnson–Nyquist):
    # 100k in series with the 1k source raises the input noise density and so the output noise
    quiet = analyse(netlist())
    noisy = analyse(netlist().replace("  grid leak 1M\nstage V2", "  grid leak 1M stopper 100k\nstage V2", 1))
    result = diff(quiet, noisy)
    [change] = by(result, "noise", quantity="output noise")
    assert change.relative > 10.0  # dB: 4kT·100k against about 4kT·3k of source, tube and load
    [top] = by(result, "noise", quantity="largest contributor")
    assert top.new == "V1 grid stopper"
    # the same change read from the JSON reports
    again = diff(json.loads(render(quiet, fmt="json")), json.loads(render(noisy, fmt="json")))
    assert by(again, "noise") == by(result, "noise")


# --------------------------------------------------------------------------- two outputs (a phase inverter at the end)


def _demo(name: str) -> str:
    with open(f"netlists/{name}.chain", encoding="utf-8") as fh:
        return fh.read()


def _par(a: float, b: float) -> float:
    return a * b / (a + b)


@pytest.mark.parametrize("old, new, sign", [("plate 47k from B1", "plate 56k from B1", -1.0),
                                             ("cathode 47k", "cathode 56k", +1.0)],
                         ids=["plate-load", "cathode-load"])
def test_cathodyne_load_change_moves_the_balance_of_the_stage_and_of_the_chain(old, new, sign):
    """The cathodyne's balance ``A_k/A_p = −R_K'/R_L'`` (from memory of M.
    Jones, "Valve Amplifiers", the cathodyne section; each load in parallel
    with what it drives, here the 220k grid circuits behind 100 nF — taken as
    220k, hence the 0.05 dB tolerance): a larger plate load lowers the
    balance in dB, a larger cathode load raises it, by ``20·log10`` of the
    loaded ratio.  The mu, rp and operating point drop out of the ratio.
    The chain's two outputs follow (same stage, same grid circuits)."""
    text = _demo("splitter_cathodyne")
    assert old in text
    a, b = analyse(text), analyse(text.replace(old, new))
    r = diff(a, b)
    stage = [c for c in r.effects if (c.kind, c.subject, c.quantity) == ("gain", "PI", "balance")]
    chain = [c for c in r.effects if (c.kind, c.quantity) == ("overall", "balance")]
    assert len(stage) == 1 and len(chain) == 1
    expected = sign * 20 * math.log10(_par(56e3, 220e3) / _par(47e3, 220e3))
    assert stage[0].delta == pytest.approx(expected, abs=0.05)
    assert chain[0].delta == pytest.approx(stage[0].delta, abs=0.05)
    assert stage[0].unit == "dB" and stage[0].old == pytest.approx(0.0, abs=0.01)
    # the chain's two outputs: the changed half's gain moves the same way as the balance says
    moved = {c.quantity: c.delta for c in r.effects if c.kind == "overall" and "gain" in c.quantity}
    if sign < 0:  # bigger plate load: the plate output (the main one, drive.grid_a) grows
        assert moved["gain"] > 0.5
    else:  # bigger cathode load: the cathode output (drive.grid_b) grows relative to the plate's
        assert moved.get("gain to output drive.grid_b", 0.0) - moved.get("gain", 0.0) > 0.5
    # compare shows both outputs and the balance, and marks the balance as differing
    rows = {(row.subject, row.quantity): row for row in compare([a, b]).rows}
    for key in (("overall", "gain to output drive.grid_b"), ("overall", "balance"), ("overall", "balance phase"),
                ("PI", "gain to cathode"), ("PI", "balance"), ("PI", "balance phase")):
        assert key in rows
    assert rows["overall", "balance"].differs and rows["PI", "balance"].differs


def test_long_tailed_pair_second_grid_capacitor_moves_the_balance_phase():
    """A small second-grid capacitor leaves grid 2 following the tap at low
    frequencies instead of at AC ground (common practice; see
    tests/smallsignal/test_pairs.py): with 1 nF against the 1M leak the
    corner is 160 Hz, and at the 1 kHz reference the balance has moved off
    antiphase and the second plate's gain has fallen.  The phase change is
    reported in degrees, wrapped across ±180°."""
    text = _demo("splitter_long_tail")
    a, b = analyse(text), analyse(text.replace("bypass 100n rated", "bypass 1n rated"))
    r = diff(a, b)
    phase = [c for c in r.effects if c.quantity == "balance phase"]
    assert {c.kind for c in phase} == {"gain", "overall"}
    for c in phase:
        assert c.unit == "deg"
        off_old, off_new = 180.0 - abs(c.old), 180.0 - abs(c.new)
        assert off_new > off_old
        # the step across ±180°, as the angle of e^{j(new − old)}
        assert c.delta == pytest.approx(math.degrees(cmath.phase(cmath.exp(1j * math.radians(c.new - c.old)))),
                                        abs=1e-6)
        assert abs(c.delta) < 5.0
        assert c.size == pytest.approx(math.radians(abs(c.delta)) * 20 / math.log(10), rel=1e-9)
    second = [c for c in r.effects if (c.subject, c.quantity) == ("PI", "gain to plate2")]
    assert len(second) == 1 and second[0].delta < 0
    assert "balance phase" in render_diff(r) and "°" in render_diff(r)
    rows = {(row.subject, row.quantity): row for row in compare([a, b]).rows}
    assert rows["PI", "balance phase"].differs and rows["PI", "balance phase"].unit == "deg"


def test_phase_tolerance_matches_the_db_tolerance():
    """A phase step of θ rad is as large as a level step of θ nepers
    (ln r = ln|r| + j·arg r): 0.05 dB ↔ 0.33°."""
    from chain.changes.common import _deg_change, tol_deg

    assert tol_deg(0.05) == pytest.approx(math.degrees(0.05 / 20 * math.log(10)), rel=1e-12)
    assert _deg_change("gain", "PI", "balance phase", 179.9, -179.9, 0.05) is None  # 0.2° across ±180°
    c = _deg_change("gain", "PI", "balance phase", 179.0, -179.0, 0.05)
    assert c is not None and c.delta == pytest.approx(2.0)
