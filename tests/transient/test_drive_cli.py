"""`chain drive`: the time-domain command (tables, plots, usage errors)."""

from pathlib import Path

from chain.cli import main

ROOT = Path(__file__).parents[2]
CLEAN = str(ROOT / "netlists" / "clean_two_stage.chain")


def test_drive_prints_distortion_and_sag_and_draws(tmp_path, capsys):
    plot = tmp_path / "w.png"
    code = main(["drive", CLEAN, "--freq", "1k", "--level", "20m", "--sag", "--plot", str(plot)])
    out = capsys.readouterr().out
    assert code == 0
    assert "Distortion" in out and "THD" in out and "Rail sag" in out and "Safety" in out
    assert plot.exists() and plot.stat().st_size > 1000


def test_drive_burst_table(tmp_path, capsys):
    code = main(["drive", CLEAN, "--freq", "1k", "--level", "5m", "--burst", "300m,3m", "--oversample", "1"])
    out = capsys.readouterr().out
    assert code == 0
    assert "Burst" in out and "capacitor" in out and "source" in out


def test_drive_usage_errors_exit_2(capsys):
    assert main(["drive", CLEAN, "--freq", "abc"]) == 2
    assert main(["drive", CLEAN, "--freq", "100k"]) == 2
    assert main(["drive", CLEAN, "--peak", "1"]) == 2
    assert main(["drive", CLEAN, "--wav", "a.wav", "b.wav"]) == 2  # --peak missing
    err = capsys.readouterr().err
    assert "Traceback" not in err


def test_an_unstable_circuit_exits_4_with_e801_and_no_settled_response(capsys):
    code = main(["drive", str(ROOT / "netlists" / "unstable" / "motorboat_shared_rail.chain"), "--freq", "1k"])
    out = capsys.readouterr().out
    assert code == 4
    assert "E801" in out and "no settled response" in out and "Distortion" not in out
