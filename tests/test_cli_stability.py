"""Every analysing command says when the circuit is unstable, and exits 4."""

from __future__ import annotations

from pathlib import Path

import pytest

from chain.cli import EXIT_UNSTABLE, main

ROOT = Path(__file__).resolve().parents[1]
SQUEAL = str(ROOT / "netlists" / "unstable" / "squeal_four_stage.chain")
MOTORBOAT = str(ROOT / "netlists" / "unstable" / "motorboat_shared_rail.chain")
STABLE = str(ROOT / "netlists" / "clean_two_stage.chain")


def test_report_marks_an_unstable_circuit_and_exits_4(capsys):
    assert main(["report", SQUEAL, "--no-headroom"]) == EXIT_UNSTABLE == 4
    out = capsys.readouterr().out
    assert out.splitlines()[6].startswith("UNSTABLE: this circuit oscillates")
    assert "error E801" in out and "! 198.1 kHz + j248.7 kHz" in out


def test_bias_reports_instability(capsys):
    assert main(["bias", MOTORBOAT]) == EXIT_UNSTABLE
    out = capsys.readouterr().out
    assert "error E801" in out and "motorboating" in out


def test_plot_marks_the_figure_and_exits_4(tmp_path, capsys):
    path = tmp_path / "sq.png"
    assert main(["plot", SQUEAL, "-o", str(path)]) == EXIT_UNSTABLE
    assert path.exists()
    assert "E801" in capsys.readouterr().err


def test_diff_and_compare_exit_4_when_a_voicing_is_unstable(capsys):
    assert main(["diff", STABLE, SQUEAL]) == EXIT_UNSTABLE
    assert main(["compare", STABLE, MOTORBOAT]) == EXIT_UNSTABLE


def test_stable_demo_keeps_exit_0(capsys):
    assert main(["report", STABLE, "--no-headroom"]) == 0
    assert "stable: no pole in the right half-plane" in capsys.readouterr().out


def test_plot_of_an_unstable_circuit_says_so_on_the_figure():
    from chain import analyze, bode

    texts = [t.get_text() for t in bode(analyze(SQUEAL, headroom=False)).axes[0].texts]
    assert any(t.startswith("UNSTABLE: oscillates at about") for t in texts)
    stable = [t.get_text() for t in bode(analyze(STABLE, headroom=False)).axes[0].texts]
    assert not any(t.startswith("UNSTABLE") for t in stable)


def test_transfer_prints_numbers_and_an_expression_with_chosen_parts_symbolic(capsys):
    assert main(["transfer", STABLE, "--symbolic", "V1.Ck,V1.Rk"]) == 0
    out = capsys.readouterr().out
    assert "poles (" in out and "zeros (" in out and "denominator coefficients" in out
    assert "kept symbolic: V1.Ck (here 25 µF), V1.Rk (here 1.5 kΩ)" in out
    assert "C_{V1.Ck}*R_{V1.Rk}" in out


def test_transfer_json_and_latex(capsys):
    import json

    assert main(["transfer", STABLE, "--format", "json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["node"] == "output" and doc["denominator"][0] == 1.0 and doc["latex"].startswith("H(s) = \\frac{")
    assert main(["transfer", STABLE, "--latex", "--symbolic", "V2.RL"]) == 0
    assert "R_{V2.RL}" in capsys.readouterr().out


def test_transfer_refuses_a_part_that_is_not_there(capsys):
    assert main(["transfer", STABLE, "--symbolic", "V9.Rk"]) == 2
    assert "E802" in capsys.readouterr().err


def test_transfer_of_an_unstable_chain_exits_4(capsys):
    assert main(["transfer", MOTORBOAT]) == EXIT_UNSTABLE


def test_transfer_says_when_computed_zeros_were_left_out(tmp_path, capsys):
    """A stage into a 70-section RC ladder (1k, 1n; invented values): read at
    the far end, the ladder's transfer has no finite zero (its transfer is
    1/polynomial in s, the network-theory form of an RC ladder), so the
    computed zeros there are the eigen-solve's scatter of the zero at infinity;
    `chain transfer` lists the zeros that check out and says how many did not
    (W803), as `chain report` does."""
    lines = ['title "ladder"', "supply HT 300V", "input into V1 resistance 10k",
             "rail B1 from HT drop 10k decouple 22u", "stage V1 common-cathode 12AX7", "  plate 100k from B1",
             "  cathode 1k5 bypass 22u", "  grid leak 1M", "network lad: in -> out"]
    for i in range(70):
        a, b = ("in" if i == 0 else f"n{i}"), ("out" if i == 69 else f"n{i + 1}")
        lines += [f"  resistor r{i} {a} -- {b} 1k", f"  capacitor c{i} {b} -- gnd 1n"]
    lines += ["couple V1 -> output via lad", "output load 1M", ""]
    path = tmp_path / "ladder.chain"
    path.write_text("\n".join(lines))
    assert main(["transfer", str(path)]) == 0
    captured = capsys.readouterr()
    assert "warning W803" in captured.err and "did not check out" in captured.err
    zeros_line = next(line for line in captured.out.splitlines() if line.startswith("zeros ("))
    # the bypassed cathode's, the rail decoupling's and the Miller feed-forward zero survive; 68 do not
    assert int(zeros_line.split("(")[1].split(")")[0]) < 10
    assert main(["transfer", STABLE]) == 0
    assert "W803" not in capsys.readouterr().err


def test_plot_loop_writes_one_figure_per_feedback_network(tmp_path, capsys):
    path = tmp_path / "fp.png"
    assert main(["plot", str(ROOT / "netlists" / "feedback_pair.chain"), "-o", str(path), "--loop"]) == 0
    assert (tmp_path / "fp-loop-feedback.png").exists()
    assert "wrote" in capsys.readouterr().out
