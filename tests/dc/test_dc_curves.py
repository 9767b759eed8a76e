"""Plate characteristics, load lines and bias lines (numbers only)."""

from __future__ import annotations

import numpy as np
import pytest

from chain.dc import bias_line, load_line, plate_family, solve, stage_lines
from chain.tubes import lookup, plate_current


def test_plate_family_rows_follow_the_model():
    model = lookup("12AX7")
    fam = plate_family(model, [0.0, -1.0, -2.0, -3.0], 400.0, n=81)
    assert fam.ip_a.shape == (4, 81) and fam.vpk_v[0] == 0.0 and fam.vpk_v[-1] == 400.0
    # row i is the curve at vgk_v[i]
    for i, vgk in enumerate(fam.vgk_v):
        assert np.allclose(fam.ip_a[i], plate_current(model, fam.vpk_v, vgk), rtol=1e-12, atol=0.0)
    # triode physics (common practice): current rises with plate voltage and with grid voltage
    assert np.all(np.diff(fam.ip_a, axis=1) >= 0.0)
    # (strictly wherever the lower curve conducts; in deep cutoff both are exactly 0)
    upper, lower = fam.ip_a[:-1, 1:], fam.ip_a[1:, 1:]
    assert np.all(upper >= lower) and np.all(upper[lower > 0] > lower[lower > 0])
    # RCA handbook point, 12AX7 at 250 V and −2 V: about 1.2 mA (from memory of RCA RC-30), within 10 %
    ip_250 = np.interp(250.0, fam.vpk_v, fam.ip_a[2])
    assert ip_250 == pytest.approx(1.2e-3, rel=0.1)


def test_load_line_obeys_kirchhoff_voltage_law():
    line = load_line(rail_v=300.0, rl_ohm=100e3, rk_ohm=1.5e3, n=50)
    # KVL round rail, plate load, tube and cathode resistor: Vpk = Vb − Ip·(RL + Rk)
    assert np.allclose(line.vpk_v, 300.0 - line.ip_a * 101.5e3, rtol=0.0, atol=1e-9)
    assert line.vpk_v[0] == 300.0 and line.ip_a[0] == 0.0
    assert line.vpk_v[-1] == pytest.approx(0.0, abs=1e-9)
    assert line.ip_a[-1] == pytest.approx(300.0 / 101.5e3, rel=1e-12)
    assert line.r_dc_ohm == 101.5e3
    with pytest.raises(ValueError):
        load_line(rail_v=300.0, rl_ohm=0.0)


def test_bias_line_points_lie_on_the_tube_curves():
    model = lookup("12AX7")
    line = bias_line(model, rk_ohm=1.5e3, ip_max_a=2.5e-3, vpk_max_v=400.0, n=40)
    # bias line Vgk = −Ip·Rk (cathode self-bias), and at each point the tube draws that current
    assert np.allclose(line.vgk_v, -line.ip_a * 1.5e3, rtol=1e-12)
    ok = np.isfinite(line.vpk_v)
    assert ok.sum() > 10
    assert np.allclose(plate_current(model, line.vpk_v[ok], line.vgk_v[ok]), line.ip_a[ok], rtol=1e-6)


def test_stage_lines_of_a_lone_stage_are_the_textbook_lines(kit):
    circuit = kit.single_stage(rail_v=300.0, rl=100e3, rk=1.5e3)
    sol = solve(circuit)
    p = sol.points["V1"]
    load, bias = stage_lines(circuit, sol, "V1")
    # M. Jones, "Valve Amplifiers" (from memory): load line from Vb through RL + Rk, bias line slope −Rk
    assert load.vpk0_v == pytest.approx(300.0, rel=1e-6)
    assert load.r_dc_ohm == pytest.approx(101.5e3, rel=1e-6)
    assert bias.rk_ohm == pytest.approx(1.5e3, rel=1e-6)
    assert bias.vgk0_v == pytest.approx(0.0, abs=1e-6)
    # the operating point lies on the load line and on the bias line
    assert p.vpk_v == pytest.approx(load.vpk0_v - p.ip_a * load.r_dc_ohm, rel=1e-6)
    assert p.vgk_v == pytest.approx(bias.vgk0_v - p.ip_a * bias.rk_ohm, rel=1e-6)
    # and where the bias line crosses the operating current it is at the operating plate voltage
    vpk_on_bias = np.interp(p.ip_a, bias.ip_a, bias.vpk_v)
    assert vpk_on_bias == pytest.approx(p.vpk_v, rel=1e-3)


def test_stage_lines_include_the_dropping_resistor(kit):
    p = kit.Parts()
    kit.supply(p, 350.0)
    kit.rail(p, "B2", "HT", 22e3)
    drive = kit.signal(p)
    kit.common_cathode(p, "V1", rail_node="B2", rl=100e3, rk=1.5e3, drive=drive)
    circuit = kit.make_circuit(p)
    sol = solve(circuit)
    load, _ = stage_lines(circuit, sol, "V1")
    # alone on the rail the stage sees the supply through Rdrop + RL + Rk (series resistors)
    assert load.r_dc_ohm == pytest.approx(22e3 + 100e3 + 1.5e3, rel=1e-6)
    assert load.vpk0_v == pytest.approx(350.0, rel=1e-6)
