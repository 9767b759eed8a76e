"""Netlist text of the per-stage model: pure string building, no lcapy."""

from __future__ import annotations

import subprocess
import sys

import pytest

from chain.errors import FormulaError
from chain.formulas.netlist import flat_node_names, stage_netlist
from chain.formulas.parts import StageParts


def _parts(text: str) -> dict[str, list[str]]:
    """Part name -> its fields, comment lines dropped."""
    out = {}
    for line in text.splitlines():
        if line.startswith("#"):
            continue
        name, *rest = line.split()
        assert name not in out, f"duplicate part {name}"
        out[name] = rest
    return out


CC = StageParts("V1", "common-cathode", 100.0, 62.5e3, rl_ohm=100e3, rk_ohm=1.5e3,
                ck_f=22e-6, rg_ohm=1e6, rs_ohm=68e3, cgk_f=1.6e-12, cgp_f=1.7e-12,
                cpk_f=0.46e-12, rload_ohm=1e6)


def test_triode_is_vcvs_behind_rp():
    # Thevenin triode model: V(pi) - V(k) = mu*(V(k) - V(g)) = -mu*vgk, rp from
    # pi to the plate (standard small-signal valve model, from memory of
    # M. Jones, "Valve Amplifiers")
    parts = _parts(stage_netlist(CC))
    assert parts["Eu"] == ["pi", "k", "k", "g", "mu"]
    assert parts["Rp"] == ["p", "pi", "r_p"]


def test_symbolic_and_numeric_values():
    sym = _parts(stage_netlist(CC, symbolic=True))
    num = _parts(stage_netlist(CC, symbolic=False))
    assert sym["RL"] == ["p", "0", "R_L"] and num["RL"] == ["p", "0", "100000.0"]
    assert sym["Ck"] == ["k", "0", "C_k"] and float(num["Ck"][2]) == 22e-6
    assert sym["Rs"] == ["in", "g", "R_s"] and sym["Rg"] == ["in", "0", "R_g"]
    assert sym["Cgp"] == ["g", "p", "C_gp"] and float(num["Cpk"][2]) == 0.46e-12
    # unit s-domain source at the input, load attached
    assert sym["Vin"] == ["in", "0", "s", "1"] and sym["Rload"] == ["p", "0", "R_load"]


def test_midband_shorts_bypass_and_drops_interelectrode_caps():
    parts = _parts(stage_netlist(CC, midband=True))
    # a fully bypassed cathode is AC ground: Rk and Ck vanish, k becomes node 0
    assert "Rk" not in parts and "Ck" not in parts
    assert parts["Eu"] == ["pi", "0", "0", "g", "mu"]
    assert not {"Cgk", "Cgp", "Cpk"} & parts.keys()


def test_split_bypass_midband_keeps_series_resistor():
    split = StageParts("V2", "common-cathode", 100.0, 62.5e3, rl_ohm=100e3, rk_ohm=1.5e3,
                       ck_f=1e-6, rkc_ohm=470.0)
    full = _parts(stage_netlist(split))
    assert full["Rkc"] == ["k", "kb", "R_kc"] and full["Ck"] == ["kb", "0", "C_k"]
    mid = _parts(stage_netlist(split, midband=True))
    assert mid["Rkc"] == ["k", "0", "R_kc"] and mid["Rk"] == ["k", "0", "R_k"]


def test_output_drive_shorts_input_and_removes_load():
    parts = _parts(stage_netlist(CC, drive="output"))
    assert "Vin" not in parts and "Rload" not in parts and "Rg" not in parts
    assert parts["Rs"] == ["0", "g", "R_s"]
    assert parts["Vt"] == ["p", "0", "s", "1"]


def test_follower_plate_on_rail_and_output_at_cathode():
    cf = StageParts("V3", "cathode-follower", 100.0, 62.5e3, rk_ohm=100e3, rg_ohm=1e6)
    parts = _parts(stage_netlist(cf, drive="output"))
    assert parts["Rp"] == ["0", "pi", "r_p"]
    assert parts["Vt"] == ["k", "0", "s", "1"]


def test_common_grid_driven_at_cathode_grid_grounded():
    cg = StageParts("V4", "common-grid", 100.0, 62.5e3, rl_ohm=100e3)
    parts = _parts(stage_netlist(cg))
    assert parts["Vin"] == ["k", "0", "s", "1"]
    assert parts["Eu"] == ["pi", "k", "k", "0", "mu"]


def test_bad_drive_is_refused():
    with pytest.raises(ValueError, match="drive"):
        stage_netlist(CC, drive="sideways")


@pytest.mark.parametrize("changes, words", [
    (dict(kind="cathodyne"), "kind"),
    (dict(mu=0.0), "mu must be positive"),
    (dict(rl_ohm=None), "needs rl_ohm"),
    (dict(rk_ohm=-1.0), "rk_ohm must be positive"),
    (dict(ck_f=None, rkc_ohm=100.0), "without ck_f"),
])
def test_stage_parts_validation(changes, words):
    from dataclasses import asdict
    with pytest.raises(FormulaError, match=words) as info:
        StageParts(**{**asdict(CC), **changes})
    assert all(d.code == "E520" for d in info.value.diagnostics)


def test_flat_node_names_are_safe_and_distinct():
    names = flat_node_names(["gnd", "V1.plate", "V1_plate", "1st", "tone.mid"])
    assert names["gnd"] == "0"
    assert names["V1.plate"] == "V1_plate" and names["V1_plate"] == "V1_plate_2"
    assert names["1st"] == "n_1st" and names["tone.mid"] == "tone_mid"


def test_importing_formulas_loads_neither_lcapy_nor_sympy():
    # heavy imports only inside the functions that use them (project rule)
    code = ("import sys, chain.formulas.netlist, chain.formulas.parts, chain.formulas.stage, "
            "chain.formulas.flat; bad = [m for m in ('lcapy', 'sympy') if m in sys.modules]; "
            "print(bad); sys.exit(1 if bad else 0)")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert done.returncode == 0, done.stdout + done.stderr
