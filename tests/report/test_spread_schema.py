"""The spread document (chain-spread/1) against its JSON Schema
(chain/report/spread_schema.json, JSON Schema draft 2020-12, checked with the
jsonschema package), and the schema's keys against docs/report-format.md."""

from __future__ import annotations

import copy
import json
import re
from pathlib import Path

import pytest

from chain.analysis import sweep_frequencies
from chain.build import load
from chain.cli import main
from chain.dc import solve
from chain.report.spread import SPREAD_SCHEMA, spread_data, spread_schema
from chain.spread import spread

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="module")
def validator():
    jsonschema = pytest.importorskip("jsonschema")
    s = spread_schema()
    jsonschema.Draft202012Validator.check_schema(s)
    return jsonschema.Draft202012Validator(s)


def _cli_json(tmp_path, *args):
    out = tmp_path / "spread.json"
    main(["spread", *args, "--format", "json", "--output", str(out)])
    return json.loads(out.read_text(encoding="utf-8"))


@pytest.mark.parametrize("args", [
    ("netlists/lead_four_stage.chain", "-n", "60", "--what-if", "V2=-25%"),   # what-if, rating breaks
    ("netlists/grid_driven_common_grid.chain", "-n", "60"),                  # another stage clips first
    ("netlists/splitter_cathodyne.chain", "-n", "40"),                       # two outputs on one stage
    ("netlists/unstable/motorboat_shared_rail.chain", "-n", "40"),           # E801, unstable builds
], ids=["lead-what-if", "grid-driven", "cathodyne", "motorboat"])
def test_spread_documents_follow_the_schema(tmp_path, validator, args):
    data = _cli_json(tmp_path, *(str(ROOT / args[0]),) + args[1:])
    assert data["schema"] == SPREAD_SCHEMA == validator.schema["properties"]["schema"]["const"]
    errors = sorted(validator.iter_errors(data), key=lambda e: list(e.path))
    assert not errors, [(list(e.path), e.message) for e in errors[:5]]


def test_without_first_clip_the_section_is_null_and_valid(validator):
    design, circuit, _ = load(ROOT / "netlists/clean_two_stage.chain")
    r = spread(circuit, solve(circuit), f_hz=sweep_frequencies(design)[::40], reference_hz=1000.0, samples=20,
               corners=False, clip=False)
    data = json.loads(json.dumps(spread_data(r, path="x", title="t")))
    assert data["first_clip"] is None
    assert not list(validator.iter_errors(data))


def test_the_schema_refuses_damaged_documents(tmp_path, validator):
    good = _cli_json(tmp_path, str(ROOT / "netlists/clean_two_stage.chain"), "-n", "20")
    assert not list(validator.iter_errors(good))
    damaged = []
    for change in (lambda d: d.pop("first_clip"),
                   lambda d: d.update(extra=1),
                   lambda d: d["first_clip"].update(changed_fraction=1.5),
                   lambda d: d["stability"].update(unstable_builds=-1),
                   lambda d: d["first_clip"]["stages"][0].update(nominal_mechanism="plate saturation"),
                   lambda d: d["stages"][0]["figures"]["gain_db"].update(median="31 dB")):
        d = copy.deepcopy(good)
        change(d)
        damaged.append(d)
    for d in damaged:
        assert list(validator.iter_errors(d))


def test_every_top_level_key_is_documented(validator):
    text = (ROOT / "docs" / "report-format.md").read_text(encoding="utf-8")
    section = text[text.index("## Spread"):]
    section = section[:section.index("\n## ", 3)]
    for key in validator.schema["properties"]:
        assert re.search(rf"`{re.escape(key)}`", section), key
