"""JSON reports: the chain-report/1 schema, SI numbers, reading back."""

from __future__ import annotations

import cmath
import json
import math
from pathlib import Path

import numpy as np
import pytest

from chain.report import SCHEMA, ReportFormatError, load_report, render, report_data, schema

ROOT = Path(__file__).resolve().parents[2]
DEMOS = tuple(sorted(p.stem for p in (ROOT / "netlists").glob("*.chain")))

#: the documented top-level keys, in order (docs/report-format.md)
TOP_KEYS = ["schema", "tool", "netlist", "settings", "solve_options", "dc_solve", "safety", "parts",
            "operating_points", "rails", "capacitors", "stages", "couplings", "overall", "response", "headroom", "noise",
            "diagnostics", "stability", "sensitivity", "ripple"]

#: relative agreement of a number after the 12-significant-digit rounding of the document
RTOL = 1e-11


@pytest.fixture(scope="module")
def validator():
    jsonschema = pytest.importorskip("jsonschema")
    s = schema()
    jsonschema.Draft202012Validator.check_schema(s)
    return jsonschema.Draft202012Validator(s)


@pytest.mark.parametrize("name", DEMOS)
def test_json_report_validates_against_the_schema(name, demos, demos_headroom, validator):
    for a in (demos[name], demos_headroom[name]):
        text = render(a, fmt="json")
        data = json.loads(text)
        errors = sorted(validator.iter_errors(data), key=lambda e: list(e.path))
        assert not errors, [f"{list(e.path)}: {e.message}" for e in errors[:5]]
        assert list(data) == TOP_KEYS
        assert data["schema"] == SCHEMA
        assert "NaN" not in text and "Infinity" not in text


def test_schema_rejects_a_broken_document(demos, validator):
    data = report_data(demos["clean_two_stage"])
    data["stages"][0]["gain"] = 59.4  # a complex value must be {"re", "im"}
    assert not validator.is_valid(data)
    data = report_data(demos["clean_two_stage"])
    data["extra"] = 1
    assert not validator.is_valid(data)


def test_numbers_are_si_and_complex_values_are_re_im(demos):
    a = demos["lead_four_stage"]
    data = json.loads(render(a, fmt="json"))
    for row, got in zip(a.stages, data["stages"]):
        assert got["stage"] == row.stage
        assert math.isclose(got["ip_a"], row.ip_a, rel_tol=RTOL)  # A, not mA
        assert math.isclose(got["gm_s"], row.gm_s, rel_tol=RTOL)  # S
        assert math.isclose(got["rp_ohm"], row.rp_ohm, rel_tol=RTOL)  # ohm
        assert cmath.isclose(complex(got["gain"]["re"], got["gain"]["im"]), row.gain, rel_tol=RTOL)
        assert cmath.isclose(complex(got["zin_ohm"]["re"], got["zin_ohm"]["im"]), row.zin_ohm, rel_tol=RTOL)
        assert math.isclose(got["phase_deg"], row.phase_deg, rel_tol=RTOL, abs_tol=1e-9)
    o = data["overall"]
    assert math.isclose(o["f_low_hz"], a.overall.f_low_hz, rel_tol=RTOL)  # Hz, not rad/s
    assert o["corner_reference"]["f_hz"] == a.overall.f_ref_hz
    # the response on the sweep grid
    r = data["response"]
    assert len(r["f_hz"]) == len(a.freq.f_hz)
    mag = 20 * np.log10(np.abs(a.freq.output))
    np.testing.assert_allclose(r["magnitude_db"], mag, rtol=RTOL)
    np.testing.assert_allclose(r["phase_deg"], np.degrees(np.angle(a.freq.output)), rtol=RTOL, atol=1e-9)


def test_every_circuit_part_is_listed_with_kind_value_and_nodes(demos):
    a = demos["lead_four_stage"]
    parts = {p["name"]: p for p in report_data(a)["parts"]}
    c = a.circuit
    expected = ([r.name for r in c.resistors] + [x.name for x in c.capacitors] + [x.name for x in c.inductors]
                + [x.name for x in c.sources] + [t.name for t in c.triodes])
    assert sorted(parts) == sorted(expected)
    assert parts["V2.Ck"]["value"] == 2.2e-6 and parts["V2.Ck"]["unit"] == "F"
    assert parts["V2.Ck"]["owner"] == {"kind": "stage", "name": "V2"}
    assert parts["drive.block"]["owner"] == {"kind": "network", "name": "drive"}
    assert parts["couple.V2-V3.C"]["owner"] == {"kind": "coupling", "name": "V2->V3"}
    assert parts["rail.B2.R"]["owner"] == {"kind": "rail", "name": "B2"}
    assert parts["V4"]["tube"]["type"] == "12AX7" and parts["V4"]["tube"]["heater_v"] == 70.0
    assert parts["V1.RL"]["nodes"] == ["B3", "V1.plate"]


def test_absent_values_are_null(demos):
    data = report_data(demos["bass_two_rail"])
    assert data["headroom"] is None
    assert data["overall"]["f_high_hz"] is None  # above the 20 kHz band edge
    assert data["stages"][0]["coupling"] is None and data["stages"][0]["coupling_ratio"] is None
    caps = {c["name"]: c for c in data["capacitors"]}
    assert caps["stray.V2.plate"]["rated_v"] is None and caps["stray.V2.plate"]["fraction_of_rating"] is None


def test_headroom_entry_carries_the_first_clip(demos_headroom):
    a = demos_headroom["grid_driven_common_grid"]
    h = report_data(a)["headroom"]
    assert h["first_stage"] == a.headroom.first.stage
    assert math.isclose(h["first_clip_input_v"], a.headroom.first.clip_input_v, rel_tol=RTOL)
    assert [s["stage"] for s in h["stages"]] == [s.name for s in a.circuit.stages]
    assert "elapsed_s" not in json.dumps(h)  # wall time would make reports differ run to run


def test_load_report_round_trip_and_errors(demos, tmp_path):
    text = render(demos["clean_two_stage"], fmt="json")
    path = tmp_path / "r.json"
    path.write_text(text, encoding="utf-8")
    assert load_report(path) == json.loads(text)
    assert load_report("r.json", text=text) == json.loads(text)
    with pytest.raises(ReportFormatError, match="not JSON") as err:
        load_report("bad.json", text="{nope")
    assert err.value.diagnostics[0].code == "E601"
    with pytest.raises(ReportFormatError, match="schema"):
        load_report("old.json", text=json.dumps({"schema": "chain-report/0"}))
    with pytest.raises(ReportFormatError, match="missing"):
        load_report("cut.json", text=json.dumps({"schema": SCHEMA}))
    with pytest.raises(ReportFormatError, match="cannot read"):
        load_report(tmp_path / "absent.json")


def test_partial_json_holds_the_chosen_sections_only(demos):
    data = json.loads(render(demos["clean_two_stage"], fmt="json", sections=("stages", "overall")))
    assert list(data) == ["schema", "stages", "couplings", "overall"]
