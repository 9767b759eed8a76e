"""Linearisation rules, errors, the Response contract and the two solvers."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from numpy.testing import assert_allclose

from chain.circuit import GROUND
from chain.errors import AnalysisError
from chain.smallsignal import gain_at, linearize, response
from ss_circuits import Net, common_cathode, dc_of, model, op, six_stage_chain


def one_stage(*, caps=(1.6e-12, 1.7e-12, 0.46e-12)):
    net = Net()
    net.supply("HT")
    net.signal("src")
    net.r("input.R", "src", "V1.in", 1e3)
    net.r("rail.B2.R", "HT", "B2", 10e3)
    net.c("rail.B2.C", "B2", GROUND, 22e-6)
    common_cathode(net, "V1", rail="B2", rl=100e3, rk=1.5e3, ck=22e-6, tube_model=model(*caps), rs=10e3)
    return net


def test_supplies_are_ac_ground_and_rails_stay_nodes():
    net = one_stage()
    ss = linearize(net.circuit("V1.in", "V1.plate"), dc_of(op("V1")))
    assert ss.node_of["HT"] == GROUND
    assert "B2" in ss.nodes
    assert ss.shorted == ("supply.HT",)
    # the rail dropping resistor now runs from ground to B2
    (rail_r,) = [r for r in ss.resistors if r.name == "rail.B2.R"]
    assert {rail_r.a, rail_r.b} == {GROUND, "B2"}


def test_triode_becomes_rp_gm_and_three_capacitances():
    # Thevenin mu·vgk in series with rp equals Norton gm·vgk ∥ rp with gm = mu/rp
    # (definition of the amplification factor, Jones, from memory)
    ss = linearize(one_stage().circuit("V1.in", "V1.plate"), dc_of(op("V1", 97.0, 58e3)))
    t = ss.triode("V1")
    assert t.gm_s * t.rp_ohm == pytest.approx(97.0, rel=1e-15)
    names = {c.name: c for c in ss.capacitors}
    assert names["V1.Cgk"].farads == 1.6e-12 and {names["V1.Cgk"].a, names["V1.Cgk"].b} == {"V1.grid", "V1.cathode"}
    assert names["V1.Cgp"].farads == 1.7e-12 and {names["V1.Cgp"].a, names["V1.Cgp"].b} == {"V1.grid", "V1.plate"}
    assert names["V1.Cpk"].farads == 0.46e-12 and {names["V1.Cpk"].a, names["V1.Cpk"].b} == {"V1.plate", "V1.cathode"}
    (rp,) = [r for r in ss.resistors if r.name == "V1.rp"]
    assert rp.ohms == 58e3
    (gm,) = ss.transconductances
    assert (gm.a, gm.b, gm.ctrl_pos, gm.ctrl_neg) == ("V1.plate", "V1.cathode", "V1.grid", "V1.cathode")


def test_zero_capacitances_add_no_parts():
    ss = linearize(one_stage(caps=(0.0, 0.0, 0.0)).circuit("V1.in", "V1.plate"), dc_of(op("V1")))
    assert not [c for c in ss.capacitors if c.name.startswith("V1.C") and c.name != "V1.Ck"]


def test_cut_off_triode_has_no_gain():
    # at cutoff rp = ∞ and gm = 0: the plate sees only its load
    cutoff = dataclasses.replace(op("V1"), gm_s=0.0, rp_ohm=math.inf, mu=0.0)
    ss = linearize(one_stage(caps=(0.0, 0.0, 0.0)).circuit("V1.in", "V1.plate"), dc_of(cutoff))
    assert not ss.transconductances and not [r for r in ss.resistors if r.name == "V1.rp"]
    resp = response(ss, np.geomspace(100.0, 1e3, 10))
    assert np.all(np.abs(resp.h["V1.plate"]) < 1e-15)
    assert np.all(np.abs(resp.h["V1.grid"]) > 0.99)


@pytest.mark.parametrize("change, code", [
    (lambda n: n.sources.pop(1), "E501"),  # no signal source
    (lambda n: n.signal("V1.in"), "E501"),  # two signal sources
    (lambda n: n.r("stray", "x1", "x2", 1e3), "E504"),  # a floating pair of nodes
    (lambda n: n.r("bad", "V1.in", GROUND, -5.0), "E503"),
])
def test_bad_circuits_are_reported(change, code):
    net = one_stage()
    change(net)
    with pytest.raises(AnalysisError) as err:
        linearize(net.circuit("V1.in", "V1.plate"), dc_of(op("V1")))
    assert err.value.diagnostics[0].code == code


def test_missing_operating_point():
    with pytest.raises(AnalysisError) as err:
        linearize(one_stage().circuit("V1.in", "V1.plate"), dc_of())
    assert err.value.diagnostics[0].code == "E502"


@pytest.mark.parametrize("f", [[0.0, 1.0], [-1.0], [], [np.nan], [[1.0, 2.0]]])
def test_bad_frequencies(f):
    ss = linearize(one_stage().circuit("V1.in", "V1.plate"), dc_of(op("V1")))
    with pytest.raises(AnalysisError) as err:
        response(ss, f)
    assert err.value.diagnostics[0].code == "E507"


def test_response_is_frozen_complete_and_exactly_comparable():
    circuit = one_stage().circuit("V1.in", "V1.plate")
    ss = linearize(circuit, dc_of(op("V1")))
    f = np.geomspace(20.0, 20e3, 30)
    resp = response(ss, f)
    assert set(resp.h) == set(circuit.nodes()) | {GROUND}
    assert np.all(resp.h[GROUND] == 0) and np.all(resp.h["HT"] == 0)
    with pytest.raises(dataclasses.FrozenInstanceError):
        resp.method = "x"
    with pytest.raises(ValueError):
        resp.h["V1.plate"][0] = 0.0
    assert resp == response(ss, f)
    assert resp != response(ss, f[:-1])
    light = response(ss, f, output_impedances=False)
    assert light.zout_ohm is None and light.stage_zout_ohm == {}
    assert_allclose(light.h["V1.plate"], resp.h["V1.plate"], rtol=0, atol=0)


def test_gain_at_solves_exactly_off_the_grid():
    ss = linearize(one_stage().circuit("V1.in", "V1.plate"), dc_of(op("V1")))
    f = np.geomspace(20.0, 20e3, 30)
    resp = response(ss, f)
    assert_allclose(gain_at(resp, "V1.plate", f[7]), resp.h["V1.plate"][7], rtol=1e-12)
    off = 1234.5
    assert isinstance(gain_at(resp, "V1.plate", off), complex)
    assert_allclose(gain_at(resp, "V1.plate", off), response(ss, [off]).h["V1.plate"][0], rtol=1e-12)


def test_modal_and_direct_solves_agree_on_a_six_stage_chain():
    circuit, dc = six_stage_chain()
    ss = linearize(circuit, dc)
    f = np.geomspace(20.0, 20e3, 200)
    fast = response(ss, f, method="modal")
    slow = response(ss, f, method="direct")
    assert fast.method == "modal" and slow.method.startswith("direct")
    for node in circuit.nodes():
        scale = np.abs(slow.h[node]).max()
        assert_allclose(fast.h[node], slow.h[node], rtol=0, atol=1e-11 * scale, err_msg=node)
    assert_allclose(fast.zin_ohm, slow.zin_ohm, rtol=1e-10)
    assert_allclose(fast.zout_ohm, slow.zout_ohm, rtol=1e-10)
    for st in circuit.stages:
        assert_allclose(fast.stage_zin_ohm[st.name], slow.stage_zin_ohm[st.name], rtol=1e-10)
        assert_allclose(fast.stage_zout_ohm[st.name], slow.stage_zout_ohm[st.name], rtol=1e-10)
