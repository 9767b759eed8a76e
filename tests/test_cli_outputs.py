"""Output paths on the command line (issue 13 item 5, issue 16 items 1 and 3):
checked before the analysis runs, refused with exit 2 in plain words, and
one rule for the names of several figures drawn from one PATH."""

from pathlib import Path

import pytest

from chain.cli import main

ROOT = Path(__file__).parents[1]
CLEAN = ROOT / "netlists" / "clean_two_stage.chain"

ONE_STAGE = """title "one stage"
supply B+ 250V
input into V1 resistance 10k
stage V1 common-cathode 12AX7
  plate 100k from B+
  cathode 1k5 bypass 22u
  grid leak 1M
couple V1 -> output cap 22n
output load 1M
"""


@pytest.fixture
def no_analysis(monkeypatch):
    """Make any analysis fail loudly: the path check must come first."""
    import chain.analysis

    def boom(*a, **k):
        raise AssertionError("the analysis ran before the output path was checked")

    monkeypatch.setattr(chain.analysis, "analyze", boom)


@pytest.mark.parametrize("argv, words", [
    (["report", str(CLEAN), "--no-headroom", "--output", "{tmp}"], "it is a folder"),
    (["report", str(CLEAN), "--no-headroom", "--output", "{tmp}/nope/r.txt"], "does not exist"),
    (["report", str(CLEAN), "--no-headroom", "--output", str(CLEAN)], "it is the input file"),
    (["report", str(CLEAN), "--no-headroom", "--output", "/dev/fd/987"], "no such file or open descriptor"),
    (["report", str(CLEAN), "--no-headroom", "--plot", "{tmp}/nope/r.png"], "does not exist"),
    (["plot", str(CLEAN), "-o", "{tmp}/nope/p.png"], "does not exist"),
    (["plot", str(CLEAN), "-o", "{tmp}/dir.png"], "it is a folder"),
    (["headroom", str(CLEAN), "--plot", "/proc/h.png"], "no such file"),
    (["diff", str(CLEAN), str(CLEAN), "--plot", "{tmp}"], "must end in .png"),
])
def test_bad_output_path_exits_2_before_the_analysis(argv, words, tmp_path, capsys, no_analysis):
    (tmp_path / "dir.png").mkdir()
    code = main([a.format(tmp=tmp_path) for a in argv])
    err = capsys.readouterr().err
    assert code == 2, err
    assert words in err and "internal error" not in err


def test_bias_plot_of_one_stage_writes_exactly_the_name_asked_for(tmp_path, capsys):
    net = tmp_path / "one.chain"
    net.write_text(ONE_STAGE)
    assert main(["bias", str(net), "--plot", str(tmp_path / "bias.png")]) == 0
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bias.png", "one.chain"]
    assert (tmp_path / "bias.png").read_bytes().startswith(b"\x89PNG")
    assert f"wrote {tmp_path / 'bias.png'}" in capsys.readouterr().out


def test_report_to_standard_output_by_name(capsys):
    assert main(["report", str(CLEAN), "--no-headroom", "--output", "/dev/stdout"]) == 0
    out = capsys.readouterr().out
    assert "wrote /dev/stdout" in out


def test_report_written_through_a_symlink_keeps_the_link(tmp_path, capsys):
    real = tmp_path / "real.md"
    real.write_text("old")
    real.chmod(0o640)
    link = tmp_path / "link.md"
    link.symlink_to(real)
    assert main(["report", str(CLEAN), "--no-headroom", "--format", "markdown", "--output", str(link)]) == 0
    assert link.is_symlink()
    assert real.read_text(encoding="utf-8").startswith("#")
    assert oct(real.stat().st_mode & 0o777) == oct(0o640)
