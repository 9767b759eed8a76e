"""Operating-point warnings W401–W410: each one triggered, each one quiet when it should be.

Ratings used (chain.tubes 12AX7, from memory of the Philips ECC83 data sheet and
the RCA receiving tube manual): Vp 300 V, Pd 1 W, Ik 8 mA, Vhk 180 V, Rg 2 MΩ.
"""

from __future__ import annotations

import pytest

from chain.circuit import GROUND
from chain.dc import SolveOptions, diagnose, solve
from chain.tubes import lookup


def codes(sol, subject=None):
    return [d.code for d in sol.diagnostics if subject is None or d.subject == subject]


def find(sol, code):
    found = [d for d in sol.diagnostics if d.code == code]
    assert found, f"{code} not raised; got {codes(sol)}"
    return found[0]


def test_healthy_stage_has_no_warnings(kit):
    # 300 V on the plate load: hot and cold plate voltage both within 300 V
    sol = solve(kit.single_stage(rail_v=300.0))
    assert sol.diagnostics == ()


def test_w401_cutoff(kit):
    p = kit.Parts()
    kit.supply(p, 150.0)
    p.sources.append(kit.VoltageSource("supply.bias", "bias", GROUND, -10.0, "supply"))
    kit.common_cathode(p, "V1", rail_node="HT", rl=100e3, rk=1.5e3, rg_to="bias")
    sol = solve(kit.make_circuit(p, input_node="V1.in"))
    # 12AX7 at 150 V cuts off near −1.5 V (common practice: cutoff ≈ −Vp/mu); −10 V is far beyond
    assert sol.points["V1"].ip_a < 1e-6
    d = find(sol, "W401")
    assert d.subject == "V1" and d.severity == "warning"
    assert "cut off" in d.message and "V1" in d.message and "-10 V" in d.message


def test_w402_grid_current(kit):
    p = kit.Parts()
    kit.supply(p, 250.0)
    p.sources.append(kit.VoltageSource("supply.pos", "pos", GROUND, 5.0, "supply"))
    kit.common_cathode(p, "V1", rail_node="HT", rl=100e3, rk=10.0, rg=100e3, rg_to="pos")
    sol = solve(kit.make_circuit(p, input_node="V1.in"))
    pt = sol.points["V1"]
    # the grid leak to +5 V pulls the grid positive of its cathode: it conducts (common practice)
    assert pt.vgk_v > 0.0 and pt.ig_a > 1e-6
    # Ohm's law: the grid current is what flows down the 100 kΩ grid leak from +5 V
    assert pt.ig_a == pytest.approx((5.0 - sol.node_v["V1.in"]) / 100e3, rel=1e-6)
    d = find(sol, "W402")
    assert d.subject == "V1" and "µA" in d.message


def test_w403_dissipation_over_rating(kit):
    sol = solve(kit.single_stage(rail_v=300.0, rl=4.7e3, rk=100.0))
    pt = sol.points["V1"]
    assert pt.pd_w > 1.0
    d = find(sol, "W403")
    assert d.subject == "V1" and "W" in d.message
    # the derated warning is not repeated on top of the rating one
    assert "W404" not in codes(sol)


def test_w404_dissipation_over_derated_limit(kit):
    circuit = kit.single_stage(rail_v=300.0)
    plain = solve(circuit)
    pd = plain.points["V1"].pd_w
    assert "W404" not in codes(plain)
    # with the derating below Pd/Pd(max) the same stage is flagged, and it is within the rating
    sol = solve(circuit, SolveOptions(derating=0.5 * pd / 1.0))
    d = find(sol, "W404")
    assert d.subject == "V1"
    assert "W403" not in codes(sol)


def test_w405_hot_plate_voltage_over_rating(kit):
    sol = solve(kit.single_stage(rail_v=500.0, rl=100e3, rk=10e3))
    assert sol.points["V1"].vpk_v > 300.0
    d = find(sol, "W405")
    assert d.severity == "warning" and d.subject == "V1" and "300 V" in d.message


def _without_cold_rating(circuit):
    from dataclasses import replace

    tri = circuit.triodes[0]
    model = replace(tri.model, ratings=replace(tri.model.ratings, vp_cold_max_v=None))
    return replace(circuit, triodes=(replace(tri, model=model),))


def test_w405_cold_start_note_when_the_cold_rating_is_unknown(kit):
    sol = solve(_without_cold_rating(kit.single_stage(rail_v=350.0)))
    # hot the plate sits near 230 V; cold (no current, no drop in RL) it sits at the 350 V rail
    assert sol.points["V1"].vpk_v < 300.0
    d = find(sol, "W405")
    assert d.severity == "note" and "cold" in d.message and "350 V" in d.message


def test_cold_start_within_the_cold_rating_is_quiet(kit):
    # 350 V cold is within the 12AX7's 550 V zero-current rating (from memory of the Philips ECC83 data sheet)
    sol = solve(kit.single_stage(rail_v=350.0))
    assert not [d for d in sol.diagnostics if d.code in ("W405", "W411")]


def test_w411_cold_start_over_the_cold_rating(kit):
    sol = solve(kit.single_stage(rail_v=600.0, rl=470e3, rk=820.0))
    assert sol.points["V1"].vpk_v < 300.0
    d = find(sol, "W411")
    assert d.severity == "warning" and "600 V" in d.message and "550 V" in d.message


def test_w406_heater_cathode(kit):
    p = kit.Parts()
    kit.supply(p, 350.0)
    drive = kit.signal(p)
    plate = kit.common_cathode(p, "V1", rail_node="HT", rl=100e3, rk=1.5e3, drive=drive)
    kit.cathode_follower(p, "V2", rail_node="HT", rk=220e3, grid_from=plate)
    sol = solve(kit.make_circuit(p))
    assert sol.points["V2"].vk_v > 180.0
    d = find(sol, "W406")
    assert d.subject == "V2" and "cathode follower" in d.message and "180 V" in d.message


def test_w407_cathode_current(kit):
    sol = solve(kit.single_stage(rail_v=450.0, rl=1e3, rk=47.0))
    assert sol.points["V1"].ik_a > 8e-3
    d = find(sol, "W407")
    assert d.subject == "V1" and "mA" in d.message


def test_w408_grid_leak_too_large(kit):
    sol = solve(kit.single_stage(rg=10e6))
    d = find(sol, "W408")
    assert d.subject == "V1" and "V1.Rg" in d.message and "10 MΩ" in d.message
    assert "W408" not in codes(solve(kit.single_stage(rg=1e6)))


def test_w409_capacitor_over_voltage(kit):
    p = kit.Parts()
    kit.supply(p, 350.0)
    kit.rail(p, "B2", "HT", 10e3, rated_v=250.0)
    drive = kit.signal(p)
    kit.common_cathode(p, "V1", rail_node="B2", rl=100e3, rk=1.5e3, ck=22e-6, ck_rated_v=25.0, drive=drive)
    sol = solve(kit.make_circuit(p))
    d = find(sol, "W409")
    assert d.subject == "rail.B2.C" and "250 V" in d.message
    # the 25 V cathode bypass sees about 1.5 V: no warning for it
    assert "V1.Ck" not in [x.subject for x in sol.diagnostics]


def test_w410_grid_without_dc_path(kit):
    p = kit.Parts()
    kit.supply(p, 300.0)
    drive = kit.signal(p)
    kit.common_cathode(p, "V1", rail_node="HT", rl=100e3, rk=1.5e3, rg=None, drive=drive)
    sol = solve(kit.make_circuit(p))
    d = find(sol, "W410")
    assert d.subject == "V1" and "'V1.grid'" in d.message


def test_diagnose_is_callable_on_its_own(kit):
    circuit = kit.single_stage(rg=10e6)
    sol = solve(circuit)
    assert diagnose(circuit, sol) == sol.diagnostics
    assert diagnose(circuit, sol, SolveOptions()) == sol.diagnostics


def test_unknown_ratings_are_not_checked(kit):
    from dataclasses import replace

    from chain.tubes import Ratings

    model = replace(lookup("12AX7"), ratings=Ratings(None, None, None, None, None, "unknown"))
    circuit = kit.single_stage(rail_v=500.0, rl=4.7e3, rk=100.0, rg=10e6)
    circuit = replace(circuit, triodes=tuple(replace(t, model=model) for t in circuit.triodes))
    sol = solve(circuit)
    assert not {"W403", "W404", "W405", "W406", "W407", "W408"} & set(codes(sol))
