"""The analysis commands end to end on the demo netlists."""

from pathlib import Path

import pytest

from chain.cli import main

ROOT = Path(__file__).parents[1]
DEMOS = sorted((ROOT / "netlists").glob("*.chain"))
LEAD = ROOT / "netlists" / "lead_four_stage.chain"


@pytest.mark.parametrize("path", DEMOS, ids=[p.stem for p in DEMOS])
def test_bias_prints_every_stage(path, capsys):
    assert main(["bias", str(path)]) == 0
    out = capsys.readouterr().out
    from chain.build import load

    _, circuit, _ = load(path)
    for st in circuit.stages:
        assert f"\n{st.name} " in out
    assert "Safety:" in out


def test_bias_plot_writes_one_file_named_as_given(tmp_path, capsys):
    target = tmp_path / "bias.svg"
    assert main(["bias", str(LEAD), "--plot", str(target)]) == 0
    written = sorted(p.name for p in tmp_path.iterdir())
    assert written == ["bias.svg"]  # one figure, a panel per stage, named exactly as given
    assert (tmp_path / "bias.svg").read_text(encoding="utf-8").lstrip().startswith("<?xml")


def test_plot_png(tmp_path, capsys):
    target = tmp_path / "lead.png"
    assert main(["plot", str(LEAD), "-o", str(target), "--stages"]) == 0
    assert target.read_bytes().startswith(b"\x89PNG")


def test_plot_refuses_other_suffix_and_writes_nothing(tmp_path, capsys):
    target = tmp_path / "lead.jpg"
    assert main(["plot", str(LEAD), "-o", str(target)]) == 2
    assert "must end in .png or .svg" in capsys.readouterr().err
    assert list(tmp_path.iterdir()) == []


def test_bad_netlist_writes_no_plot(tmp_path, capsys):
    bad = tmp_path / "bad.chain"
    bad.write_text("supply HT 300V volts\n", encoding="utf-8")
    assert main(["plot", str(bad), "-o", str(tmp_path / "x.png")]) == 2
    assert not (tmp_path / "x.png").exists()
    assert f"{bad}:1:16: error E103" in capsys.readouterr().err


CLEAN = ROOT / "netlists" / "clean_two_stage.chain"
BRIGHT = ROOT / "netlists" / "voicings" / "clean_bright.chain"
DARK = ROOT / "netlists" / "voicings" / "clean_dark.chain"


@pytest.mark.parametrize("fmt", ["text", "markdown", "json"])
def test_report_formats_to_file(fmt, tmp_path, capsys):
    out = tmp_path / f"r.{fmt}"
    assert main(["report", str(CLEAN), "--format", fmt, "--output", str(out), "--no-headroom"]) == 0
    text = out.read_text(encoding="utf-8")
    assert "Kestrel clean channel" in text
    if fmt == "json":
        import json

        assert json.loads(text)["schema"] == "chain-report/1"


def test_report_into_missing_folder_is_a_usage_error(tmp_path, capsys):
    assert main(["report", str(CLEAN), "--output", str(tmp_path / "no" / "r.txt"), "--no-headroom"]) == 2
    assert "does not exist" in capsys.readouterr().err


def test_diff_exit_status_follows_the_diff_tool(tmp_path, capsys):
    # identical voicing written differently: exit 0, like diff(1)
    rewritten = tmp_path / "same.chain"
    rewritten.write_text("# same circuit, other layout\n" + CLEAN.read_text(encoding="utf-8").replace("  ", "   "),
                         encoding="utf-8")
    assert main(["diff", str(CLEAN), str(rewritten)]) == 0
    assert main(["diff", str(BRIGHT), str(DARK), "--plot", str(tmp_path / "d.png")]) == 1
    out = capsys.readouterr().out
    assert "V1.Ck" in out
    assert (tmp_path / "d.png").read_bytes().startswith(b"\x89PNG")
    assert main(["diff", str(CLEAN), str(tmp_path / "missing.chain")]) == 2


def test_compare_three_voicings(tmp_path, capsys):
    assert main(["compare", str(CLEAN), str(BRIGHT), str(DARK), "--plot", str(tmp_path / "c.svg")]) == 1
    out = capsys.readouterr().out
    assert "clean_bright" in out and "clean_dark" in out
    assert (tmp_path / "c.svg").exists()


def test_headroom_command_names_the_first_stage_to_clip(tmp_path, capsys):
    assert main(["headroom", str(CLEAN), "--level", "50mV", "--plot", str(tmp_path / "h.png")]) == 0
    out = capsys.readouterr().out
    assert "first to clip: stage" in out
    assert sorted(p.name for p in tmp_path.iterdir()) == ["h-harmonics.png", "h.png"]


def test_headroom_bad_level(capsys):
    assert main(["headroom", str(CLEAN), "--level", "5 V"]) == 2
    assert "--level" in capsys.readouterr().err


def test_formulas_for_one_stage_plain_and_latex(capsys):
    assert main(["formulas", str(CLEAN), "V2"]) == 0
    out = capsys.readouterr().out
    assert "stage V2 (common-cathode)" in out and "stage V1" not in out
    # bypassed common-cathode mid-band gain in its own symbols (M. Jones, "Valve Amplifiers", from memory)
    assert "mid-band:  -R_L*mu/(R_L + r_p)" in out
    assert main(["formulas", str(CLEAN), "--latex"]) == 0
    assert "\\frac{R_{L} \\mu}{R_{L} + r_{p}}" in capsys.readouterr().out


@pytest.mark.parametrize("demo, labels", [
    ("splitter_cathodyne.chain", ("stage PI (cathodyne)", "gain to the plate", "gain to the cathode",
                                  "balance, cathode against plate", "output impedance at the cathode")),
    ("splitter_long_tail.chain", ("stage PI (long-tailed-pair)", "gain to plate 2", "differential gain",
                                  "common-mode gain", "output impedance at plate 2")),
])
def test_formulas_of_the_phase_inverter_demos(demo, labels, capsys):
    """The two-triode stages have closed forms too (once refused with E520)."""
    assert main(["formulas", str(ROOT / "netlists" / demo), "PI"]) == 0
    out = capsys.readouterr().out
    for label in labels:
        assert label in out
    assert "balance:" in out and "ideal 0 dB and 180°" in out


def test_formulas_unknown_stage(capsys):
    assert main(["formulas", str(CLEAN), "V9"]) == 2
    assert "no stage 'V9'" in capsys.readouterr().err


def test_compare_varies_one_part(tmp_path, capsys):
    # bigger cathode bypass: the low corner falls, the operating point stays (common practice)
    assert main(["compare", str(CLEAN), "--vary", "V1.Ck=680n,22u", "--plot", str(tmp_path / "v.png")]) == 1
    out = capsys.readouterr().out
    assert "V1.Ck=680n" in out and "V1.Ck=22u" in out
    low = next(line for line in out.splitlines() if line.startswith("overall low band edge"))
    assert low.rstrip().endswith("*")
    ip = next(line for line in out.splitlines() if line.startswith("V1 Ip"))
    assert not ip.rstrip().endswith("*")


@pytest.mark.parametrize("spec, message", [("V1.Cx=1u", "no part 'V1.Cx'"), ("V1.Ck", "PART=V1,V2"),
                                           ("V1.Ck=1x", "bad value '1x'")])
def test_compare_vary_errors(spec, message, capsys):
    assert main(["compare", str(CLEAN), "--vary", spec]) == 2
    assert message in capsys.readouterr().err


def test_report_with_plot_writes_report_and_bode(tmp_path, capsys):
    out = tmp_path / "r.md"
    png = tmp_path / "r.png"
    assert main(["report", str(CLEAN), "--format", "markdown", "--output", str(out), "--plot", str(png),
                 "--no-headroom"]) == 0
    assert out.read_text(encoding="utf-8").startswith("#")
    assert png.read_bytes().startswith(b"\x89PNG")


def test_plot_impedance_figure(tmp_path, capsys):
    assert main(["plot", str(CLEAN), "-o", str(tmp_path / "c.svg"), "--impedance"]) == 0
    assert sorted(p.name for p in tmp_path.iterdir()) == ["c-impedance.svg", "c.svg"]


@pytest.mark.parametrize("argv, message", [
    (["diff", str(CLEAN), str(CLEAN), "--tolerance-db", "-1"], "must be a finite number"),
    (["diff", str(CLEAN), str(CLEAN), "--tolerance-pct", "nan"], "must be a finite number"),
    (["headroom", str(CLEAN), "--level", "1e-12"], "outside the sensible range"),
    (["headroom", str(CLEAN), "--level", "1kV"], "outside the sensible range"),
    (["compare", str(CLEAN), "--vary", "volume.level=5,12"], "position out of range"),
    (["compare", str(CLEAN), "--vary", "V1.Rk=0,1k"], "must be positive"),
])
def test_out_of_range_options_exit_2(argv, message, capsys):
    assert main(argv) == 2
    assert message in capsys.readouterr().err


def test_tutorial_netlist_checks(tmp_path, capsys):
    """The netlist printed in docs/tutorial.md is valid as printed."""
    doc = (ROOT / "docs" / "tutorial.md").read_text(encoding="utf-8")
    text = doc.split("`wren.chain`:\n\n```text\n", 1)[1].split("```", 1)[0]
    path = tmp_path / "wren.chain"
    path.write_text(text, encoding="utf-8")
    assert main(["check", str(path)]) == 0


def test_diff_of_a_broken_json_report_is_located(tmp_path, capsys):
    bad = tmp_path / "a.json"
    bad.write_text('{"schema": "chain-report/1"\n  "x": 1}\n', encoding="utf-8")
    assert main(["diff", str(bad), str(CLEAN)]) == 2
    assert f"{bad}:2:3: error E601: not JSON" in capsys.readouterr().err
