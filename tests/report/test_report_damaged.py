"""JSON reports read back are validated (issue 16 items 1 and 2): wrong
types, short arrays, NaN/Infinity and stray nulls are a damaged report,
located at file, line and column, never an internal error or a diff that
says "no difference".  The reference is the report's own published schema,
``chain/report/schema.json`` (JSON Schema draft 2020-12), and RFC 8259,
which has no NaN or Infinity numbers."""

from __future__ import annotations

import copy
import json

import pytest

from chain.cli import main
from chain.report import ReportFormatError, load_report, report_data
from chain.report.locate import json_position


@pytest.fixture(scope="module")
def good(demos) -> dict:
    return json.loads(json.dumps(report_data(demos["clean_two_stage"]), allow_nan=False))


def damage(doc, how):
    d = copy.deepcopy(doc)
    how(d)
    return json.dumps(d, indent=2)


CASES = [
    ("gain as a string", lambda d: d["stages"][0].__setitem__("gain_db", "12"), "E610",
     ("stages", 0, "gain_db"), '"12" where a number or null is expected'),
    ("stage name as a number", lambda d: d["stages"][1].__setitem__("stage", 5), "E610",
     ("stages", 1, "stage"), "5 where a text is expected"),
    ("short magnitude array", lambda d: d["response"].__setitem__("magnitude_db", d["response"]["magnitude_db"][:10]),
     "E612", ("response", "magnitude_db"), "10 values for"),
    ("NaN gain", lambda d: d["stages"][0].__setitem__("gain_db", float("nan")), "E611",
     ("stages", 0, "gain_db"), "'NaN' is not a JSON number"),
    ("Infinity gain", lambda d: d["overall"].__setitem__("gain_db", float("inf")), "E611",
     ("overall", "gain_db"), "'Infinity' is not a JSON number"),
    ("null in the response", lambda d: d["response"]["magnitude_db"].__setitem__(3, None), "E612",
     ("response", "magnitude_db", 3), "null among numbers"),
    ("missing key", lambda d: d["stages"][0].pop("gain_db"), "E610", ("stages", 0), "'gain_db' is missing"),
]


@pytest.mark.parametrize("what, how, code, where, words", CASES, ids=[c[0] for c in CASES])
def test_damaged_report_is_located(good, what, how, code, where, words):
    text = damage(good, how)
    with pytest.raises(ReportFormatError) as info:
        load_report("r.json", text=text)
    first = info.value.diagnostics[0]
    assert first.code == code, first.render()
    assert words in first.message
    line, column, _ = json_position(text, where)
    assert (first.span.line, first.span.column) == (line, column)


def test_the_locator_finds_the_value_itself(good):
    text = json.dumps(good, indent=2)
    line, column, shown = json_position(text, ("stages", 1, "gain_db"))
    assert shown.strip().startswith('"gain_db":')
    assert text.splitlines()[line - 1][column - 1:].startswith(json.dumps(good["stages"][1]["gain_db"])[:5])


def test_an_undamaged_report_loads(good):
    assert load_report("r.json", text=json.dumps(good)) == good


def test_diff_of_a_damaged_report_exits_2(good, tmp_path, capsys):
    a = tmp_path / "a.json"
    a.write_text(json.dumps(good, indent=2))
    b = tmp_path / "b.json"
    b.write_text(damage(good, CASES[0][1]))
    assert main(["diff", str(a), str(b)]) == 2
    err = capsys.readouterr().err
    assert f"{b}:" in err and "damaged report: stages[0].gain_db" in err and "internal error" not in err
