"""DC operating point: hand constructions, Kirchhoff's laws, common practice."""

from __future__ import annotations

import pickle

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from chain.circuit import GROUND
from chain.dc import DcSolution, SolveOptions, compile_network, solve, solve_network
from chain.errors import DcConvergenceError
from chain.tubes import lookup, plate_current


def hand_load_line_point(model, vb: float, rl: float, rk: float) -> float:
    """Plate current where the tube curve meets the load and bias lines, by bisection.

    Textbook construction (from memory of M. Jones, "Valve Amplifiers"):
    load line Vpk = Vb − Ip·(RL + Rk), bias line Vgk = −Ip·Rk; the operating
    point is the current that the tube itself draws at the (Vpk, Vgk) the
    two lines assign to it.
    """
    lo = 0.0                 # at Ip = 0 the tube would draw more than 0: below the point
    hi = vb / (rl + rk)      # here the load line reaches Vpk = 0, the tube draws nothing: above it
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        vpk = vb - mid * (rl + rk)
        vgk = -mid * rk
        if plate_current(model, vpk, vgk) > mid:
            lo = mid
        else:
            hi = mid
    return 0.5 * (lo + hi)


@pytest.mark.parametrize("tube, vb, rl, rk", [
    ("12AX7", 300.0, 100e3, 1.5e3),
    ("12AX7", 250.0, 220e3, 2.7e3),
    ("12AT7", 300.0, 47e3, 1e3),
    ("12AU7", 350.0, 22e3, 2.2e3),
])
def test_self_biased_stage_matches_hand_load_line(kit, tube, vb, rl, rk):
    ip = hand_load_line_point(lookup(tube), vb, rl, rk)
    sol = solve(kit.single_stage(rail_v=vb, rl=rl, rk=rk, tube=tube))
    p = sol.points["V1"]
    # load-line/bias-line intersection (M. Jones, "Valve Amplifiers", from memory): 0.1 %
    assert p.ip_a == pytest.approx(ip, rel=1e-3)
    assert p.vp_v == pytest.approx(vb - ip * rl, rel=1e-3)
    assert p.vk_v == pytest.approx(ip * rk, rel=1e-3)
    assert p.vg_v == pytest.approx(0.0, abs=1e-6)
    # Ohm's law: the supply delivers exactly the plate current (plus gmin's nanoamps)
    assert sol.rails["HT"].i_a == pytest.approx(p.ip_a, rel=1e-6)


def test_operating_point_carries_model_small_signal_values(kit):
    from chain.tubes import small_signal

    sol = solve(kit.single_stage())
    p = sol.points["V1"]
    ss = small_signal(lookup("12AX7"), p.vpk_v, p.vgk_v)
    # definitions gm = dIp/dVgk, rp = 1/(dIp/dVpk), mu = gm·rp (standard triode parameters)
    assert p.gm_s == pytest.approx(float(ss.gm_s), rel=1e-12)
    assert p.rp_ohm == pytest.approx(float(ss.rp_ohm), rel=1e-12)
    assert p.mu == pytest.approx(p.gm_s * p.rp_ohm, rel=1e-9)
    assert p.pd_w == pytest.approx(p.vpk_v * p.ip_a, rel=1e-12)
    assert p.ik_a == pytest.approx(p.ip_a + p.ig_a, rel=1e-12)
    assert isinstance(sol, DcSolution)


def two_stages_on_b2(kit, *, second: bool = True, r_drop: float = 22e3):
    p = kit.Parts()
    kit.supply(p, 350.0)
    kit.rail(p, "B2", "HT", r_drop)
    drive = kit.signal(p)
    plate = kit.common_cathode(p, "V1", rail_node="B2", rl=100e3, rk=1.5e3, ck=22e-6, drive=drive)
    if second:
        kit.common_cathode(p, "V2", rail_node="B2", rl=100e3, rk=820.0, ck=22e-6, drive=plate)
    return kit.make_circuit(p)


def test_rail_voltage_is_supply_minus_drop(kit):
    sol = solve(two_stages_on_b2(kit))
    total = sum(pt.ip_a + pt.ig_a for pt in sol.points.values())
    # Ohm's law on the dropping resistor and Kirchhoff's current law at the rail
    assert sol.rails["B2"].v == pytest.approx(350.0 - 22e3 * total, rel=1e-6)
    assert sol.rails["B2"].i_a == pytest.approx(total, rel=1e-6)
    assert sol.rails["HT"].i_a == pytest.approx(total, rel=1e-6)
    assert sol.rails["HT"].v == 350.0


def test_adding_a_stage_pulls_the_rail_down(kit):
    one = solve(two_stages_on_b2(kit, second=False))
    two = solve(two_stages_on_b2(kit, second=True))
    # Ohm's law: more current through the same dropping resistor, more drop
    assert two.rails["B2"].v < one.rails["B2"].v - 10.0
    assert one.rails["B2"].v == pytest.approx(350.0 - 22e3 * one.points["V1"].ip_a, rel=1e-6)


def dccf(kit, *, rk_follower: float = 220e3, heater_v: float = 0.0):
    p = kit.Parts()
    kit.supply(p, 350.0)
    drive = kit.signal(p)
    plate = kit.common_cathode(p, "V1", rail_node="HT", rl=100e3, rk=1.5e3, ck=22e-6, drive=drive)
    kit.cathode_follower(p, "V2", rail_node="HT", rk=rk_follower, grid_from=plate, heater_v=heater_v)
    return kit.make_circuit(p)


def test_direct_coupled_cathode_follower(kit):
    sol = solve(dccf(kit))
    v1, v2 = sol.points["V1"], sol.points["V2"]
    # the follower's grid is wired (through a stopper that carries only grid current) to V1's plate
    assert v2.vg_v == pytest.approx(v1.vp_v, abs=1e-3)
    # common practice: a follower's cathode sits a little (≈0.5–3 V for a 12AX7) above its grid
    assert 0.2 < v2.vk_v - v2.vg_v < 5.0
    # Ohm's law on the follower's cathode resistor
    assert v2.ik_a == pytest.approx(v2.vk_v / 220e3, rel=1e-6)
    # and the heater–cathode rating (12AX7: 180 V, from memory of the ECC83 data sheet) is exceeded
    codes = [(d.code, d.subject) for d in sol.diagnostics]
    assert ("W406", "V2") in codes
    assert ("W406", "V1") not in codes


def test_elevated_heater_clears_heater_cathode_warning(kit):
    sol = solve(dccf(kit, heater_v=100.0))
    # |Vk − Vh| ≈ 130 V < 180 V rating: no warning (common practice: elevated heaters)
    assert "W406" not in [d.code for d in sol.diagnostics]


@pytest.mark.parametrize("tube", ["12AX7", "12AU7"])
def test_larger_cathode_resistor_lowers_current(kit, tube):
    currents = [solve(kit.single_stage(rk=rk, tube=tube)).points["V1"].ip_a for rk in (470.0, 1.5e3, 4.7e3, 10e3)]
    # common practice: more cathode resistance, more negative bias, less current
    assert all(a > b for a, b in zip(currents, currents[1:]))


def test_grid_leak_carries_no_current_when_grid_negative(kit):
    sol = solve(kit.single_stage())
    p = sol.points["V1"]
    assert p.vgk_v < -0.5
    # common practice: a negative grid draws no current, so the grid leak drops nothing
    leak_current = (sol.node_v["V1.in"] - 0.0) / 1e6
    assert abs(leak_current) < 1e-9


def test_kirchhoff_current_law_at_every_node(kit):
    circuit = dccf(kit)
    options = SolveOptions()
    state = solve_network(circuit, options=options)
    res = kit.kcl_residuals(circuit, state, options.gmin_s)
    assert set(res) == set(circuit.nodes())
    # every node's KCL sum, recomputed independently, within the solve tolerance (1e-12 A) plus rounding
    assert max(abs(r) for r in res.values()) < 1e-11
    assert state.max_residual_a <= options.tol_a


@settings(max_examples=40, deadline=None, derandomize=True)
@given(rail_v=st.floats(150.0, 400.0), rl=st.floats(10e3, 300e3), rk=st.floats(300.0, 10e3),
       tube=st.sampled_from(["12AX7", "12AT7", "12AU7", "12AY7", "6SN7"]))
def test_random_single_stages_converge_sensibly(kit, rail_v, rl, rk, tube):
    sol = solve(kit.single_stage(rail_v=rail_v, rl=rl, rk=rk, tube=tube))
    p = sol.points["V1"]
    # common practice: a self-biased stage conducts, with 0 < Vk < Vp < rail
    assert p.ip_a > 0.0
    assert 0.0 < p.vk_v < p.vp_v < rail_v
    assert sol.max_residual_a <= sol.options.tol_a


def test_choke_is_a_short_at_dc(kit):
    p = kit.Parts()
    kit.supply(p, 300.0)
    p.inductors.append(kit.Inductor("rail.B2.L", "HT", "B2", 5.0))
    p.rails.append("B2")
    drive = kit.signal(p)
    kit.common_cathode(p, "V1", rail_node="B2", rl=100e3, rk=1.5e3, drive=drive)
    circuit = kit.make_circuit(p)
    state = solve_network(circuit)
    sol = solve(circuit)
    # an ideal inductor has no DC voltage across it and carries the stage's current (KCL)
    assert state.node_v["B2"] == pytest.approx(300.0, abs=1e-9)
    assert state.branch_i_a["rail.B2.L"] == pytest.approx(sol.points["V1"].ip_a, rel=1e-6)
    assert sol.rails["B2"].i_a == pytest.approx(sol.points["V1"].ip_a, rel=1e-6)


def test_capacitor_points_hold_dc_voltages(kit):
    circuit = two_stages_on_b2(kit)
    sol = solve(circuit)
    # a capacitor's DC voltage is the difference of its node voltages; open at DC
    assert sol.capacitors["rail.B2.C"].v == pytest.approx(sol.rails["B2"].v, rel=1e-12)
    assert sol.capacitors["V2.Cc"].v == pytest.approx(sol.points["V1"].vp_v - sol.node_v["V2.in"], rel=1e-12)
    assert sol.capacitors["V1.Ck"].v == pytest.approx(sol.points["V1"].vk_v, rel=1e-12)


# --------------------------------------------------------------- held capacitors


def held_voltages(circuit, sol):
    v = dict(sol.node_v)
    v[GROUND] = 0.0
    return {c.name: v[c.a] - v[c.b] for c in circuit.capacitors}


def test_held_caps_at_their_dc_voltage_reproduce_the_dc_point(kit):
    circuit = two_stages_on_b2(kit)
    sol = solve(circuit)
    state = solve_network(circuit, held_caps=held_voltages(circuit, sol))
    # holding every capacitor at its own DC voltage changes nothing (consistency)
    for node, volts in sol.node_v.items():
        assert state.node_v[node] == pytest.approx(volts, abs=1e-7)


@pytest.mark.parametrize("bypassed", [True, False])
def test_held_caps_give_textbook_stage_gain(kit, bypassed):
    circuit = kit.single_stage(ck=22e-6 if bypassed else None)
    sol = solve(circuit)
    p = sol.points["V1"]
    system = compile_network(circuit, held_caps=held_voltages(circuit, sol))
    dv = 1e-3
    up, down = system.solve(dv), system.solve(-dv)
    # the source sees 1 kΩ into the 1 MΩ grid leak (Ohm's-law divider); the grid draws nothing
    vin = 2 * dv * 1e6 / (1e6 + 1e3)
    gain = (up.node_v["V1.plate"] - down.node_v["V1.plate"]) / vin
    mu, rp, rl, rk = p.mu, p.rp_ohm, 100e3, 1.5e3
    # common-cathode gain, M. Jones "Valve Amplifiers" (from memory):
    # bypassed  A = −mu·RL/(RL + rp);  unbypassed  A = −mu·RL/(RL + rp + (mu + 1)·Rk)
    expected = -mu * rl / (rl + rp) if bypassed else -mu * rl / (rl + rp + (mu + 1) * rk)
    assert gain == pytest.approx(expected, rel=1e-3)


def test_continuation_matches_fresh_solve(kit):
    circuit = two_stages_on_b2(kit)
    sol = solve(circuit)
    held = held_voltages(circuit, sol)
    system = compile_network(circuit, held_caps=held)
    state = system.solve(0.0)
    for volts in np.linspace(0.0, 2.0, 21)[1:]:
        state = system.solve(float(volts), state.x)
    fresh = solve_network(circuit, held_caps=held, signal_v=2.0)
    for node in circuit.nodes():
        assert state.node_v[node] == pytest.approx(fresh.node_v[node], abs=1e-6)
    # a 2 V swing on a 12AX7 with its cathode held drives the grid past its cathode: grid current
    ip, ig, *_ = system.triode_currents(state.x)
    assert ig[0] > 1e-6


def test_held_cap_across_a_source_is_dropped(kit):
    p = kit.Parts()
    kit.supply(p, 300.0, c=47e-6)
    drive = kit.signal(p)
    kit.common_cathode(p, "V1", rail_node="HT", rl=100e3, rk=1.5e3, drive=drive)
    circuit = kit.make_circuit(p)
    system = compile_network(circuit, held_caps={"supply.HT.C": 300.0})
    # a held capacitor in parallel with the supply would make a loop of sources: it is left out
    assert system.dropped == ("supply.HT.C",)
    assert system.solve().node_v["V1.plate"] == pytest.approx(solve(circuit).points["V1"].vp_v, abs=1e-9)


def test_unknown_held_cap_is_rejected(kit):
    with pytest.raises(ValueError, match="nope"):
        compile_network(kit.single_stage(), held_caps={"nope": 1.0})


def test_guess_mapping_is_used(kit):
    circuit = kit.single_stage()
    exact = solve_network(circuit)
    again = solve_network(circuit, guess=exact.node_v)
    assert again.node_v["V1.plate"] == pytest.approx(exact.node_v["V1.plate"], abs=1e-9)
    assert again.iterations <= 2


def test_floating_node_settles_at_zero(kit):
    p = kit.Parts()
    kit.supply(p, 300.0)
    drive = kit.signal(p)
    kit.common_cathode(p, "V1", rail_node="HT", rl=100e3, rk=1.5e3, drive=drive)
    # a node reached only through capacitors: held by gmin alone, it settles at 0 V
    p.capacitors.append(kit.Capacitor("float.C", "V1.plate", "float", 1e-9))
    state = solve_network(kit.make_circuit(p))
    assert state.node_v["float"] == pytest.approx(0.0, abs=1e-9)


# -------------------------------------------------------------- failure path


def grid_pulled_positive(kit):
    """A stage whose grid leak returns to +5 V: grid current, which the starting guess ignores."""
    p = kit.Parts()
    kit.supply(p, 250.0)
    p.sources.append(kit.VoltageSource("supply.pos", "pos", GROUND, 5.0, "supply"))
    kit.common_cathode(p, "V1", rail_node="HT", rl=100e3, rk=10.0, rg=100e3, rg_to="pos")
    return kit.make_circuit(p, input_node="V1.in")


def test_non_convergence_names_a_stage(kit):
    circuit = grid_pulled_positive(kit)
    assert solve(circuit).iterations > 1
    with pytest.raises(DcConvergenceError) as info:
        solve(circuit, SolveOptions(max_iter=1))
    err = info.value
    diag = err.diagnostics[0]
    assert diag.code == "E401"
    assert diag.severity == "error"
    assert diag.subject == "V1"
    assert "V1 (common-cathode stage)" in diag.message
    assert "did not converge" in diag.message
    assert err.iterations >= 1
    assert set(err.last_guess) == set(circuit.nodes())
    again = pickle.loads(pickle.dumps(err))
    assert str(again) == str(err)


def test_non_convergence_explains_a_grid_without_dc_path(kit):
    p = kit.Parts()
    kit.supply(p, 350.0)
    drive = kit.signal(p)
    plate = kit.common_cathode(p, "V1", rail_node="HT", rl=100e3, rk=1.5e3, rg=None, drive=drive)
    kit.cathode_follower(p, "V2", rail_node="HT", rk=100e3, grid_from=plate)
    circuit = kit.make_circuit(p)
    assert solve(circuit).iterations > 1
    with pytest.raises(DcConvergenceError) as info:
        solve(circuit, SolveOptions(max_iter=1))
    diag = info.value.diagnostics[0]
    assert diag.subject == "V1"
    assert "no DC path" in diag.message and "'V1.grid'" in diag.message
    assert "grid leak" in diag.hint


def test_loop_of_sources_is_reported(kit):
    p = kit.Parts()
    kit.supply(p, 300.0)
    p.sources.append(kit.VoltageSource("supply.HT2", "HT", GROUND, 250.0, "supply"))
    with pytest.raises(DcConvergenceError, match="E402"):
        solve(kit.make_circuit(p, input_node="HT"))


# -------------------------------------------------------------- robustness


def test_mixed_tube_types_obey_kirchhoff(kit):
    p = kit.Parts()
    kit.supply(p, 300.0)
    drive = kit.signal(p)
    plate = kit.common_cathode(p, "V1", rail_node="HT", rl=100e3, rk=1.5e3, tube="12AX7", drive=drive)
    plate = kit.common_cathode(p, "V2", rail_node="HT", rl=47e3, rk=1e3, tube="12AT7", drive=plate)
    kit.cathode_follower(p, "V3", rail_node="HT", rk=47e3, grid_from=plate, tube="12AU7")
    circuit = kit.make_circuit(p)
    options = SolveOptions()
    state = solve_network(circuit, options=options)
    # Kirchhoff's current law recomputed per part, each triode with its own model
    assert max(abs(r) for r in kit.kcl_residuals(circuit, state, options.gmin_s).values()) < 1e-11


@pytest.mark.parametrize("strategy", ["_source_stepping", "_gmin_stepping", "_scipy_root"])
def test_each_fallback_reaches_the_newton_solution(kit, strategy):
    circuit = dccf(kit, rk_follower=100e3)
    system = compile_network(circuit)
    options = SolveOptions()
    reference = system.solve(options=options).x
    x, iterations, ok, _ = getattr(system, strategy)(0.0, options)
    assert ok and iterations > 0
    # the DC point is unique here: every route must land on it
    assert np.abs(x[:len(system.nodes)] - reference[:len(system.nodes)]).max() < 1e-8


def test_absurd_guess_still_converges(kit):
    circuit = two_stages_on_b2(kit)
    system = compile_network(circuit)
    reference = system.solve()
    state = system.solve(0.0, np.full(system.size, 1e4))
    for node in circuit.nodes():
        assert state.node_v[node] == pytest.approx(reference.node_v[node], abs=1e-8)


def test_analytic_jacobian_matches_finite_differences(kit):
    circuit = dccf(kit, rk_follower=100e3)
    system = compile_network(circuit)
    x = system.solve().x
    b = system.rhs(0.0)
    jac = system.jacobian(x)
    # central differences of the residual (step 1 µV/1 nA): the derivative's definition
    h = 1e-6
    numeric = np.empty_like(jac)
    for j in range(system.size):
        e = np.zeros(system.size)
        e[j] = h
        numeric[:, j] = (system.residual(x + e, b) - system.residual(x - e, b)) / (2 * h)
    assert np.allclose(jac, numeric, rtol=1e-5, atol=1e-9)
