"""Text and Markdown reports: golden files, content, layout made for diffs."""

from __future__ import annotations

import difflib
import re
from pathlib import Path

import pytest

import chain

from chain.analysis import analyze_design
from chain.build import load_text
from chain.report import SAFETY, SECTIONS, render, render_data, report_data
from chain.report import fmt
from chain.report.base import spot_frequencies

ROOT = Path(__file__).resolve().parents[2]
GOLDEN = Path(__file__).parent / "golden"
DEMOS = tuple(sorted(p.stem for p in (ROOT / "netlists").glob("*.chain")))

#: a small two-stage preamp (values typical of the trade; common practice)
TWO_STAGE = """\
title "Report test"
set band 5Hz 50kHz
supply HT 300V
rail B1 from HT drop 4k7 decouple 47u rated 450V
input into V1 resistance 10k
stage V1 common-cathode 12AX7
  plate 100k from B1
  cathode 1k5 bypass 47u rated 25V
  grid leak 1M
stage V2 common-cathode 12AX7
  plate 100k from B1
  cathode 1k5 bypass {v2_bypass} rated 25V
  grid leak 1M
couple V1 -> V2 cap 22n rated 400V
couple V2 -> output cap 100n rated 400V
output load 1M
"""


def _analysis(text: str):
    design, circuit, warnings = load_text(text, "test.chain")
    return analyze_design(design, circuit, warnings, headroom=False)


# --------------------------------------------------------------------------- golden files


@pytest.mark.parametrize("name", DEMOS)
def test_text_report_matches_golden_file(name, demos_headroom, request):
    """Byte-for-byte against tests/report/golden/<demo>.txt; refresh with --update-golden."""
    text = render(demos_headroom[name], fmt="text")
    path = GOLDEN / f"{name}.txt"
    if request.config.getoption("--update-golden"):
        path.write_bytes(text.encode("utf-8"))
    if not path.exists():
        pytest.fail(f"{path} is missing; run the tests once with --update-golden")
    expected = path.read_bytes().decode("utf-8")
    if text != expected:
        delta = "".join(difflib.unified_diff(expected.splitlines(True), text.splitlines(True),
                                             "golden", "now", n=1))
        pytest.fail(f"report of {name} differs from {path.name} (refresh with --update-golden if intended):\n"
                    + delta[:4000])


def test_golden_files_cover_every_demo_and_nothing_else():
    assert sorted(p.stem for p in GOLDEN.glob("*.txt")) == sorted(DEMOS)


# --------------------------------------------------------------------------- content


@pytest.mark.parametrize("name", DEMOS)
def test_text_report_names_the_safety_reminder_and_the_netlist_hash(name, demos):
    a = demos[name]
    text = render(a)
    assert SAFETY in text.splitlines()
    assert re.fullmatch(r"[0-9a-f]{64}", a.netlist_sha256)
    assert re.search(rf"^netlist sha256 +{a.netlist_sha256}$", text, re.M)
    assert re.search(rf"^netlist +netlists/{name}\.chain$", text, re.M)
    assert re.search(rf"^chain version +{re.escape(a.version)}$", text, re.M)


def test_safety_reminder_is_the_command_lines():
    from chain.cli import SAFETY as CLI_SAFETY

    assert SAFETY == CLI_SAFETY


@pytest.mark.parametrize("name", DEMOS)
def test_reports_are_deterministic_and_undated(name, demos):
    a = demos[name]
    for kind in ("text", "markdown", "json"):
        first = render(a, fmt=kind)
        assert first == render(a, fmt=kind)
        assert not re.search(r"\b(19|20)\d\d-\d\d-\d\d\b", first), "a date in the report"
        assert first.endswith("\n") and not first.endswith("\n\n")


def test_text_report_lists_every_stage_in_signal_order_with_its_facts(demos):
    a = demos["lead_four_stage"]
    text = render(a)
    names = [s.name for s in a.circuit.stages]
    blocks = re.findall(r"^Stage (\w+): ", text, re.M)
    assert blocks == names
    for row in a.stages:
        n = row.stage
        # the loaded gain, its dB and the plate current, at four significant digits
        assert f"{n} loaded gain" in text
        line = next(x for x in text.splitlines() if x.startswith(f"{n} loaded gain"))
        assert fmt.db(row.gain_db) in line
        line = next(x for x in text.splitlines() if x.startswith(f"{n} plate current Ip"))
        assert line.endswith(fmt.amps(row.ip_a))


def test_stage_table_section_is_analysis_table(demos):
    a = demos["clean_two_stage"]
    table = render(a, sections=("stages",))
    assert table == chain.table(a)
    assert SAFETY not in table
    rows = [line.split()[0] for line in table.splitlines()[3:] if line and line.split()[0] in ("V1", "V2")]
    assert rows == ["V1", "V2", "V1", "V2"]  # one row per stage in each of the two tables


def test_sections_and_formats_are_checked(demos):
    a = demos["clean_two_stage"]
    with pytest.raises(ValueError, match="unknown report section"):
        render(a, sections=("stage",))
    with pytest.raises(TypeError):
        render(a, sections="stages")
    with pytest.raises(ValueError, match="unknown report format"):
        render(a, fmt="html")
    # any subset renders in report order
    two = render(a, sections=("diagnostics", "header"))
    assert two.index("chain report") < two.index("Diagnostics")


def test_headroom_section_only_when_analysed(demos, demos_headroom):
    assert "\nHeadroom\n" not in render(demos["clean_two_stage"])
    with_h = render(demos_headroom["clean_two_stage"])
    assert "\nHeadroom\n" in with_h
    h = demos_headroom["clean_two_stage"].headroom
    line = next(x for x in with_h.splitlines() if x.startswith("first-clip input level"))
    assert fmt.volts(h.first.clip_input_v) in line


def test_a_report_read_back_from_json_renders_the_same_text(demos_headroom):
    import json

    a = demos_headroom["bass_two_rail"]
    data = json.loads(render(a, fmt="json"))
    for kind in ("text", "markdown"):
        assert render_data(data, fmt=kind) == render(a, fmt=kind)


# --------------------------------------------------------------------------- made for diffs


def test_a_part_change_changes_lines_in_place_and_leaves_dc_lines_alone():
    """One fact per line: changing V2's bypass capacitor replaces changed lines
    one for one (same label, new value), moves V2's gain, and leaves every
    DC line (operating points, rails, capacitor voltages) as it was."""
    before = render(_analysis(TWO_STAGE.format(v2_bypass="47u"))).splitlines()
    after = render(_analysis(TWO_STAGE.format(v2_bypass="2u2"))).splitlines()
    assert len(before) == len(after)
    changed = [(b, a) for b, a in zip(before, after) if b != a]
    assert changed, "the reports should differ"
    assert len(changed) < len(before) // 3
    for b, a in changed:
        label = b.split("  ")[0]
        assert a.startswith(label), (b, a)
    labels = [b.split("  ")[0] for b, _ in changed]
    assert "V2 loaded gain" in labels
    assert "V2.Ck" in labels  # the part itself, in the parts list
    # DC is untouched by a capacitor
    for fact in ("plate voltage", "cathode voltage", "grid voltage", "plate current", "transconductance",
                 "plate resistance", "amplification", "dissipation"):
        assert not [x for x in labels if fact in x], fact
    assert not [x for x in labels if x in ("HT", "B1")]


# --------------------------------------------------------------------------- Markdown


def _tables(md: str) -> list[list[str]]:
    out, cur = [], []
    for line in md.splitlines():
        if line.startswith("|"):
            cur.append(line)
        elif cur:
            out.append(cur)
            cur = []
    if cur:
        out.append(cur)
    return out


@pytest.mark.parametrize("name", DEMOS)
def test_markdown_tables_are_well_formed_and_carry_the_stage_numbers(name, demos_headroom):
    a = demos_headroom[name]
    md = render(a, fmt="markdown")
    assert md.startswith("# chain report")
    assert SAFETY in md
    for table in _tables(md):
        widths = {len(re.split(r"(?<!\\)\|", row)) for row in table}
        assert len(widths) == 1, table[0]
        assert re.fullmatch(r"\|( ---:? \|)+", table[1])
    for row in a.stages:
        assert f"| {row.stage} | {row.kind} | {row.tube} |" in md
        assert fmt.db(row.gain_db) in md


# --------------------------------------------------------------------------- number formatting


@pytest.mark.parametrize("value, text", [
    (103.4343, "103.4"), (0.415082, "0.4151"), (59.4, "59.4"), (33976.2, "33980"), (1.0, "1"),
    (-7.4099, "-7.41"), (0.0, "0"), (None, "n/a"), (9.99951, "10"),
])
def test_plain_numbers_have_four_significant_digits(value, text):
    assert fmt.plain(value) == text


def test_db_deg_pct_and_zero_snapping():
    assert fmt.db(35.48114) == "35.48 dB"
    assert fmt.db(-0.001) == "0.00 dB"
    assert fmt.deg(-0.04) == "0.0°"
    assert fmt.deg(177.84) == "177.8°"
    assert fmt.pct(0.6667) == "66.7 %"
    assert fmt.volts(1.1e-25) == "0 V" and fmt.volts(-1.6e-22) == "0 V"
    assert fmt.volts(1.5572) == "1.557 V"
    assert fmt.amps(2.5e-26) == "0 A" and fmt.amps(1.0381e-3) == "1.038 mA"
    assert fmt.si(66952.47, "Ω") == "66.95 kΩ"
    assert fmt.polar({"re": 3.0, "im": -4.0}, "Ω") == "5 Ω, phase -53.1°"


def test_spot_frequencies_are_the_1_2_5_series_inside_the_band():
    assert spot_frequencies(10.0, 40e3) == [10, 20, 50, 100, 200, 500, 1e3, 2e3, 5e3, 1e4, 2e4]
    assert spot_frequencies(5.0, 20e3)[0] == 5.0 and spot_frequencies(5.0, 20e3)[-1] == 20e3


def test_every_section_has_a_renderer_method():
    from chain.report import JsonRenderer, MarkdownRenderer, TextRenderer
    from chain.report.jsonfmt import SECTION_KEYS

    assert tuple(SECTION_KEYS) == SECTIONS
    for cls in (TextRenderer, MarkdownRenderer, JsonRenderer):
        for name in SECTIONS:
            assert callable(getattr(cls, name))


def test_report_data_of_an_analysis_is_plain_data(demos):
    import json

    data = report_data(demos["grid_driven_common_grid"])
    assert json.loads(json.dumps(data, allow_nan=False)) == data


# --------------------------------------------------------------------------- order and levels past clipping


@pytest.mark.parametrize("fmt_name", ["text", "markdown"])
def test_stage_table_and_summary_come_first_and_solver_settings_last(fmt_name, demos_headroom):
    text = render(demos_headroom["lead_four_stage"], fmt=fmt_name).lower()
    at = {key: re.search("^[#| ]*" + key.lower(), text, re.M).start()
          for key in ("Stages at", "Overall", "Stated input level", "Analysis settings and solver",
                      "Parts as analysed")}
    at["Headroom"] = at["Stated input level"]
    assert at["Stages at"] < at["Overall"] < at["Headroom"] < at["Analysis settings and solver"] \
        < at["Parts as analysed"]
    assert text.index("gmin") > at["Analysis settings and solver"]


def _stage_table_levels(text: str) -> list[str]:
    rows = text.split("stage   gain V/V", 1)[1].split("\n(coupling:", 1)[0].splitlines()[1:]
    return [cell for row in rows for cell in re.split(r"\s{2,}", row.strip())[-2:]]


def test_levels_past_clipping_are_bounded_by_the_supply(demos_headroom):
    # common practice: no signal in a preamp swings further than its supply, so a
    # small-signal level of kilovolts past the clipping point must not be shown
    a = demos_headroom["lead_four_stage"]
    supply_v = max(s.volts for s in a.design.supplies)
    cells = _stage_table_levels(render(a, fmt="text"))
    assert any(c.startswith("past clip ") for c in cells)
    for cell in cells:
        number, unit = cell.removeprefix("past clip ").split()
        volts = float(number) * {"V": 1.0, "mV": 1e-3, "µV": 1e-6, "kV": 1e3}[unit]
        assert volts <= supply_v, cell


def test_levels_below_clipping_are_not_marked(demos_headroom):
    # the clean demo at its stated level clips nowhere (margin > 0 on every stage)
    a = demos_headroom["clean_two_stage"]
    assert all(s.margin_db > 0 for s in a.headroom.stages)
    assert not any(c.startswith("past clip") for c in _stage_table_levels(render(a, fmt="text")))


def test_the_headroom_command_says_headroom(capsys):
    from chain.cli import main

    assert main(["headroom", str(ROOT / "netlists" / "clean_two_stage.chain")]) == 0
    assert capsys.readouterr().out.startswith("chain headroom: Kestrel clean channel\n")


def test_every_thd_figure_says_whether_it_is_the_stage_own_or_cumulative(demos_headroom):
    text = render(demos_headroom["lead_four_stage"], fmt="text", sections=("headroom",))
    facts = [line for line in text.splitlines() if "THD" in line and not line.startswith(("definition", "summary"))]
    assert facts
    for line in facts:
        assert "own THD" in line or "cumulative" in line, line
    assert "first to reach 1 % own THD       V3" in text
