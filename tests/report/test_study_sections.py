"""The open analysis record: a study and its report section dropped into
chain/studies/ and chain/report/sections/ reach the text, Markdown and JSON
reports, the schema, diff and compare with no edit anywhere else."""

from __future__ import annotations

import json
import sys
import textwrap

import pytest

import chain.report.sections as report_sections
import chain.studies as studies_pkg
from chain.analysis import analyze
from chain.changes import compare, diff
from chain.report import render, report_data, schema

STUDY = '''
from chain.studies import Study

def count(ctx):
    return len(ctx.circuit.stages)

STEP = Study("probe", "how many stages", count)
'''

SECTION = '''
from chain.report.sections import Figure, Section, Table

SECTION = Section(
    key="probe", title="Probe of the open record", after="overall",
    data=lambda n: None if n is None else {"stages": n},
    schema={"type": "object", "required": ["stages"], "properties": {"stages": {"type": "integer"}}},
    facts=lambda d: [("stages counted", str(d["stages"]))],
    figures=lambda d: [Figure("chain", "stages counted", float(d["stages"]), "")],
    tables=lambda d: [Table(("what", "how many"), (("stages", str(d["stages"])),), frozenset({1}))],
)
'''


@pytest.fixture
def probe(tmp_path, monkeypatch):
    (tmp_path / "s").mkdir()
    (tmp_path / "r").mkdir()
    (tmp_path / "s" / "zz_probe.py").write_text(textwrap.dedent(STUDY), encoding="utf-8")
    (tmp_path / "r" / "zz_probe.py").write_text(textwrap.dedent(SECTION), encoding="utf-8")
    monkeypatch.setattr(studies_pkg, "__path__", [*studies_pkg.__path__, str(tmp_path / "s")])
    monkeypatch.setattr(report_sections, "__path__", [*report_sections.__path__, str(tmp_path / "r")])
    yield
    for name in ("chain.studies.zz_probe", "chain.report.sections.zz_probe"):
        sys.modules.pop(name, None)


def test_a_new_study_reaches_every_report_diff_and_compare(probe):
    two = analyze("netlists/clean_two_stage.chain", headroom=False, noise=False)
    four = analyze("netlists/lead_four_stage.chain", headroom=False, noise=False)
    assert two.studies["probe"] == 2 and four.studies["probe"] == 4

    text = render(two, fmt="text")
    assert "Probe of the open record\n------------------------\nstages counted" in text
    # placed after the built-in section it names
    assert text.index("Overall: source EMF") < text.index("Probe of the open record") < text.index("Response:")
    md = render(two, fmt="markdown")
    assert "## Probe of the open record" in md and "- stages counted: 2" in md and "| stages | 2 |" in md

    doc = json.loads(render(two, fmt="json"))
    assert doc["probe"] == {"stages": 2}
    from jsonschema import Draft202012Validator

    Draft202012Validator(schema()).validate(doc)
    bad = dict(doc, probe={"stages": "two"})
    assert list(Draft202012Validator(schema()).iter_errors(bad))

    d = diff(two, four)
    moved = [c for c in d.effects if c.quantity == "stages counted"]
    assert len(moved) == 1 and (moved[0].old, moved[0].new) == (2.0, 4.0)
    rows = [r for r in compare([two, four]).rows if r.quantity == "stages counted"]
    assert len(rows) == 1 and rows[0].values == (2.0, 4.0) and rows[0].differs


def test_without_the_files_nothing_of_it_appears():
    a = analyze("netlists/clean_two_stage.chain", headroom=False, noise=False)
    assert "probe" not in a.studies and "probe" not in report_data(a)
