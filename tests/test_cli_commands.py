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


def test_bias_plot_writes_one_file_per_stage(tmp_path, capsys):
    target = tmp_path / "bias.svg"
    assert main(["bias", str(LEAD), "--plot", str(target)]) == 0
    written = sorted(p.name for p in tmp_path.iterdir())
    assert written == ["bias-V1.svg", "bias-V2.svg", "bias-V3.svg", "bias-V4.svg"]
    assert (tmp_path / "bias-V1.svg").read_text(encoding="utf-8").lstrip().startswith("<?xml")


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
