"""The nonlinear time-domain solve (chain.transient) against outside references.

* at a tiny level it must reproduce the small-signal gain and phase
  (chain.smallsignal, itself checked against lcapy and textbook formulas)
  within 0.05 dB and 0.5° at 100 Hz, 1 kHz and 5 kHz on every demo;
* an RC coupling into a grid leak discharges with the time constant
  C·(R_source + R_leak) (common practice: first-order RC circuit);
* scipy.integrate.solve_ivp (Radau, tight tolerances) on the same circuit's
  equations agrees within 1e-3 of the peak swing for a one- and a two-stage
  chain driven into clipping.
"""

import math
from pathlib import Path

import numpy as np
import pytest

from chain.build import load
from chain.circuit import Capacitor, Circuit, Owner, Resistor, Role, StageRecord, Triode, VoltageSource
from chain.dc import solve
from chain.errors import AnalysisError
from chain.smallsignal import linearize, response
from chain.transient import (
    TransientOptions,
    compile_transient,
    periodic_response,
    simulate,
)
from chain.transient.reference import reference_solve
from chain.tubes import lookup

ROOT = Path(__file__).parents[2]
DEMOS = sorted((ROOT / "netlists").glob("*.chain")) + sorted((ROOT / "netlists" / "voicings").glob("*.chain"))


@pytest.fixture(scope="module", params=DEMOS, ids=[p.name for p in DEMOS])
def demo(request):
    _, circuit, _ = load(request.param)
    dc = solve(circuit)
    return circuit, dc, compile_transient(circuit, dc=dc), linearize(circuit, dc)


def test_dc_start_is_the_dc_solve(demo):
    """The transient's own equations hold at chain.dc.solve's operating point (independent stamping)."""
    circuit, dc, system, _ = demo
    for node, v in dc.node_v.items():
        assert system.x_dc[system.index[node]] == pytest.approx(v, abs=1e-6)


@pytest.mark.parametrize("f_hz", [100.0, 1000.0, 5000.0])
def test_tiny_sine_matches_the_small_signal_gain(demo, f_hz):
    """Settled response to a sine at a tiny level vs chain.smallsignal: 0.05 dB and 0.5° at every stage output."""
    circuit, _, system, ss = demo
    nodes = list(dict.fromkeys([s.output for s in circuit.stages] + [circuit.output_node]))
    resp = response(ss, [f_hz], output_impedances=False, stage_impedances=False)
    biggest = max(abs(resp.h[n][0]) for n in nodes)
    level = 1e-2 / biggest  # 10 mV peak at the loudest node: small-signal territory
    pr = periodic_response(system, f_hz, level, nodes=nodes, steps=128)
    for node in nodes:
        h = complex(resp.h[node][0])
        g = pr.gain(node)
        assert 20 * math.log10(abs(g) / abs(h)) == pytest.approx(0.0, abs=0.05), node
        assert math.degrees(np.angle(g / h)) == pytest.approx(0.0, abs=0.5), node


def _rc_into_grid_leak(r_source, c_coupling, r_leak):
    """Signal source → R_source → C → grid leak, the grid of a biased 12AX7 stage."""
    tube = lookup("12AX7")
    st = Owner("stage", "V1")
    parts = dict(
        resistors=(Resistor("Rs", "emf", "a", r_source, Owner("input", "input"), Role.SOURCE_RESISTANCE),
                   Resistor("Rg", "g", "gnd", r_leak, st, Role.GRID_LEAK),
                   Resistor("RL", "HT", "p", 100e3, st, Role.PLATE_LOAD),
                   Resistor("Rk", "k", "gnd", 1.5e3, st, Role.CATHODE_RESISTOR)),
        capacitors=(Capacitor("Cc", "a", "g", c_coupling, None, Owner("coupling", "in"), Role.COUPLING),),
        inductors=(),
        sources=(VoltageSource("HT", "HT", "gnd", 300.0, Role.SUPPLY, Owner("supply", "HT")),
                 VoltageSource("in", "emf", "gnd", 0.0, Role.SIGNAL, Owner("input", "input"))),
        triodes=(Triode("V1", "p", "g", "k", tube, owner=st),),
    )
    stage = StageRecord("V1", "common-cathode", "12AX7", ("V1",), {"in": "g"}, {"out": "p"}, "HT")
    return Circuit(title="rc", stages=(stage,), input_node="a", output_node="p", rails=("HT",), **parts)


def test_coupling_into_a_grid_leak_discharges_with_c_times_r_source_plus_r_leak():
    """A step through C into R_leak decays as exp(−t/τ), τ = C·(R_source + R_leak) (common practice)."""
    r_s, c, r_g = 47e3, 22e-9, 1e6
    tau = c * (r_s + r_g)
    system = compile_transient(_rc_into_grid_leak(r_s, c, r_g))
    fs = 10e3
    w = simulate(system, lambda t: -0.5 if t > 0 else 0.0, fs, duration_s=3.2 * tau, nodes=["g"], oversample=1)
    v = w.signal("g")
    i1, i3 = int(round(tau * fs)), int(round(3 * tau * fs))
    tau_seen = (w.t_s[i3] - w.t_s[i1]) / math.log(v[i1] / v[i3])
    assert tau_seen == pytest.approx(tau, rel=0.01)
    # the first jump divides between R_source and R_leak
    assert v[1] == pytest.approx(-0.5 * r_g / (r_s + r_g) * math.exp(-w.t_s[1] / tau), rel=0.01)


@pytest.mark.parametrize("which, level_v, nodes", [
    ("one_stage", 3.0, ["V1.grid", "V1.plate", "output"]),
    ("two_stages", 0.3, ["V1.plate", "V2.grid", "V2.plate", "output"]),
])
def test_matches_scipy_radau_on_the_same_equations(request, which, level_v, nodes):
    """TR-BDF2 + DK waveforms within 1e-3 of the peak swing of scipy's Radau (rtol 1e-7) while clipping."""
    system = compile_transient(request.getfixturevalue(which))

    def u(t):
        return level_v * math.sin(2 * math.pi * 1000.0 * t)

    w = simulate(system, u, 48e3, duration_s=1e-3, nodes=nodes, oversample=8)
    ref = reference_solve(system, u, w.t_s, nodes=nodes, rtol=1e-7, atol=1e-9)
    for node in nodes:
        swing = np.abs(ref[node] - ref[node][0]).max()
        assert swing > 1.0  # driven hard: the check is not about a quiet circuit
        assert np.abs(w.v[node] - ref[node]).max() <= 1e-3 * swing, node


def test_failure_names_the_time_and_the_stage(two_stages):
    system = compile_transient(two_stages, options=TransientOptions(max_iter=1, max_halvings=0))
    with pytest.raises(AnalysisError) as err:
        simulate(system, lambda t: 20.0 * math.sin(2 * math.pi * 1e3 * t), 48e3, duration_s=1e-3)
    d = err.value.diagnostics[0]
    assert d.code == "E900"
    assert "t = " in d.message and " ms" in d.message
    assert d.subject in ("V1", "V2") and "common-cathode stage" in d.message


def test_bad_inputs_are_located_errors(one_stage):
    system = compile_transient(one_stage)
    for kwargs, code in (({"input_v": [], "fs_hz": 48e3}, "E903"),
                         ({"input_v": [0.0, math.nan], "fs_hz": 48e3}, "E903"),
                         ({"input_v": [0.0, 1.0], "fs_hz": 0.0}, "E903"),
                         ({"input_v": [0.0, 1.0], "fs_hz": 48e3, "nodes": ["nowhere"]}, "E902")):
        with pytest.raises(AnalysisError) as err:
            simulate(system, **kwargs)
        assert err.value.diagnostics[0].code == code


def test_quiet_input_stays_at_the_operating_point(one_stage):
    system = compile_transient(one_stage)
    w = simulate(system, np.zeros(200), 48e3)
    for node, v in w.v.items():
        assert np.abs(v - w.dc_v[node]).max() < 1e-9 * (1.0 + abs(w.dc_v[node])), node
