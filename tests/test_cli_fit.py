"""`chain fit`: measured points → residuals, plot, tube line, fitted netlist copy."""

from __future__ import annotations

from pathlib import Path

import pytest

from chain.cli import main
from chain.tubes import LIBRARY, plate_current

ROOT = Path(__file__).parents[1]


def _points(tmp_path, scale=1.0, unit="ma"):
    # points computed from the library 12AX7 with its current scaled: a
    # "hotter" tube of the same shape (self-consistency of the command)
    rows = [f"{vp},{vg},{scale * 1e3 * float(plate_current(LIBRARY['12AX7'], vp, vg)):.5g}"
            for vg in (0.0, -0.5, -1.0, -1.5) for vp in (100.0, 150.0, 200.0, 250.0, 300.0)]
    path = tmp_path / "meas.csv"
    path.write_text(f"# curve tracer\nvpk_v,vgk_v,ip_{unit}\n" + "\n".join(rows) + "\n", encoding="utf-8")
    return path


def test_fit_to_tube_line_to_report_in_two_commands(tmp_path, capsys):
    meas = _points(tmp_path, scale=1.2)
    out = tmp_path / "clean-hot.chain"
    plot = tmp_path / "fit.png"
    status = main(["fit", str(meas), "--name", "HOT12", "--like", "12AX7", "--plot", str(plot),
                   "--netlist", str(ROOT / "netlists" / "clean_two_stage.chain"), "-o", str(out)])
    text = capsys.readouterr().out
    assert status == 0
    assert "tube HOT12 like 12AX7 model koren mu " in text
    assert "RMS error" in text and "-1.5 V" in text
    assert plot.stat().st_size > 10_000 and out.exists()
    assert main(["report", str(out)]) == 0
    report = capsys.readouterr().out
    assert "HOT12" in report
    # the fitted tube draws 20 % more current at a given bias: the copy's
    # first stage carries more current than the original's (cathode bias
    # gives back part of it)
    assert main(["bias", str(out)]) == 0
    hot = capsys.readouterr().out
    assert main(["bias", str(ROOT / "netlists" / "clean_two_stage.chain")]) == 0
    cold = capsys.readouterr().out

    def ip_ma(text):
        line = next(ln for ln in text.splitlines() if ln.startswith("V1 "))
        return float(line.split()[7])

    assert 1.03 < ip_ma(hot) / ip_ma(cold) < 1.2


@pytest.mark.parametrize("body,code", [
    ("vpk_v,vgk_v,ip_ma\n100,0,1\n200,0,2\n300,0,3\n120,0,1.2\n220,0,2.2\n320,0,3.2\n", "E705"),
    ("vpk_v,vgk_v,ip_ma\n100,0,-1\n", "E703"),
])
def test_fit_bad_data_exit_2_with_location(body, code, tmp_path, capsys):
    path = tmp_path / "bad.csv"
    path.write_text(body, encoding="utf-8")
    assert main(["fit", str(path)]) == 2
    err = capsys.readouterr().err
    assert code in err and str(path) in err and "Traceback" not in err


def test_fit_units_off_by_1000(tmp_path, capsys):
    # milliampere numbers under an ampere header
    path = _points(tmp_path, unit="a")
    assert main(["fit", str(path)]) == 2
    err = capsys.readouterr().err
    assert "E706" in err and "mA" in err


def test_fit_unknown_like_type(tmp_path, capsys):
    assert main(["fit", str(_points(tmp_path)), "--like", "12AX8"]) == 2
    assert "E707" in capsys.readouterr().err


def test_readme_example_measurement_fits(tmp_path, capsys):
    # the README's two commands, on the shipped example file
    out = tmp_path / "clean-v1x.chain"
    assert main(["fit", str(ROOT / "netlists" / "measured" / "hot_12ax7.csv"), "--name", "V1X", "--like", "12AX7",
                 "--netlist", str(ROOT / "netlists" / "clean_two_stage.chain"), "-o", str(out)]) == 0
    text = capsys.readouterr().out
    assert "tube V1X like 12AX7 model koren mu 96.01 ex 1.401 kg1 1529 kp 3000 kvb 1 vct 0.5575" in text
    assert main(["report", str(out)]) == 0
