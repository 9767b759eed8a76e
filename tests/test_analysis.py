"""The one entry point: chain.analyze → Analysis, and its delegates."""

from dataclasses import replace
from pathlib import Path

import pytest

import chain
from chain.errors import LanguageError
from chain.language import parse_file

CLEAN = Path(__file__).parents[1] / "netlists" / "clean_two_stage.chain"


@pytest.fixture(scope="module")
def clean():
    return chain.analyze(CLEAN, headroom=False)


def test_analysis_holds_every_step(clean):
    assert [r.stage for r in clean.stages] == ["V1", "V2"]
    assert clean.headroom is None
    assert set(clean.dc.points) == {"V1", "V2"}
    assert clean.response() is clean.freq
    assert clean.freq.f_hz[0] == pytest.approx(10.0) and clean.freq.f_hz[-1] == pytest.approx(40e3)
    # the reference frequency is on the sweep grid exactly
    assert 1000.0 in clean.freq.f_hz


def test_table_is_the_stage_section_of_the_text_report(clean):
    table = chain.table(clean)
    assert table.splitlines()[0].startswith("Stages at 1 kHz")
    assert "V1" in table and "V2" in table


def test_level_override_scales_the_signal_levels(clean):
    louder = chain.analyze(CLEAN, headroom=False, level_v=0.2)
    for a, b in zip(clean.stages, louder.stages):
        assert b.level_out_v == pytest.approx(2 * a.level_out_v, rel=1e-12)
        assert b.gain == a.gain


def test_a_changed_design_gets_its_own_hash_and_diff(clean):
    d = parse_file(CLEAN)
    lean = d.with_stage("V1", cathode=replace(d.stage("V1").cathode, bypass_f=1e-6))
    b = chain.analyze(lean, headroom=False)
    assert b.netlist_sha256 != clean.netlist_sha256
    assert chain.diff(clean, b).differs
    assert not chain.diff(clean, chain.analyze(d, headroom=False)).differs


def test_bad_design_raises_a_language_error(tmp_path):
    bad = tmp_path / "bad.chain"
    bad.write_text("stage V1 common-cathode 12AX7\n", encoding="utf-8")
    with pytest.raises(LanguageError):
        chain.analyze(bad)


def test_with_stage_unknown_name():
    with pytest.raises(KeyError):
        parse_file(CLEAN).with_stage("V9", grid_leak_ohm=1e6)


def test_operating_point_warnings_point_at_the_stage_line(tmp_path):
    hot = tmp_path / "hot.chain"
    hot.write_text("supply HT 450V\ninput into V1 resistance 10k\nstage V1 common-cathode 12AX7\n"
                   "  plate 10k from HT\n  cathode 100\n  grid leak 1M\noutput V1 load 1M\n", encoding="utf-8")
    a = chain.analyze(hot, headroom=False)
    w403 = [d for d in a.diagnostics if d.code == "W403"]
    assert w403 and (w403[0].span.path, w403[0].span.line, w403[0].span.column) == (str(hot), 3, 7)


def test_dc_failure_is_located(monkeypatch):
    """A DC failure about a stage gets the stage's netlist line.  The failure is
    made directly: with impossible tolerances the node of the largest residual
    is rounding noise and may be a supply node that no line owns."""
    import chain.analysis
    from chain.errors import DcConvergenceError, error

    def fail(circuit, options):
        raise DcConvergenceError(error("E401", "DC solve did not converge", subject="V2"))

    monkeypatch.setattr(chain.analysis, "solve", fail)
    path = Path(__file__).parents[1] / "netlists" / "lead_four_stage.chain"
    with pytest.raises(DcConvergenceError) as info:
        chain.analyze(path, headroom=False)
    located = [d for d in info.value.diagnostics if d.span is not None]
    assert located and located[0].span.path == str(path)
    assert path.read_text(encoding="utf-8").splitlines()[located[0].span.line - 1].startswith("stage V2 ")


# --------------------------------------------------------------------------- AC load (issue 15)

LOW_CURRENT = """title "Starved"
supply HT 250V
input into V1 resistance 1k
stage V1 common-cathode 12AX7
  plate 470k from HT
  cathode 2k7 bypass 47u
  grid leak 1M
stage V2 common-cathode 12AX7
  plate 220k from HT
  cathode 3k3
  grid leak 1M
couple V1 -> V2 cap 1u
couple V2 -> output cap 1u
output load 470k
"""


def test_ac_load_is_the_plate_load_in_parallel_with_what_follows(tmp_path):
    """Load-line construction (common practice; e.g. Langford-Smith,
    Radiotron Designer's Handbook, 4th ed., ch. 12, from memory): with the
    cathode bypassed the AC load is R_L ∥ (the next grid leak, through a
    coupling capacitor that is a short at 1 kHz); an unbypassed cathode
    resistor adds in series: R_L ∥ R_load + R_k."""
    net = tmp_path / "starved.chain"
    net.write_text(LOW_CURRENT, encoding="utf-8")
    a = chain.analyze(net, headroom=False)
    par = lambda x, y: x * y / (x + y)  # noqa: E731
    # V1: 470k ∥ 1M (V2's grid leak); 1 µF is 159 Ω at 1 kHz, the Miller capacitance of V2 a few pF
    assert a.ac_load_ohm["V1"].real == pytest.approx(par(470e3, 1e6), rel=0.01)
    # V2: 220k ∥ 470k output load, plus its 3k3 unbypassed cathode resistor
    assert a.ac_load_ohm["V2"].real == pytest.approx(par(220e3, 470e3) + 3.3e3, rel=0.01)
    assert abs(a.ac_load_ohm["V2"].imag) < 0.02 * a.ac_load_ohm["V2"].real


def test_transconductance_is_printed_in_millisiemens_everywhere(tmp_path, capsys):
    from chain.cli import main

    net = tmp_path / "starved.chain"
    net.write_text(LOW_CURRENT.replace("plate 470k", "plate 1M").replace("cathode 2k7", "cathode 10k"),
                   encoding="utf-8")
    a = chain.analyze(net, headroom=False)
    assert a.stages[0].gm_s < 1e-3  # a starved stage: under 1 mS, where an SI prefix would switch to µS
    for fmt in ("text", "markdown"):
        text = chain.report.render(a, fmt=fmt)
        assert "µS" not in text and "A/V" not in text
        assert f"{a.stages[0].gm_s * 1e3:.4g} mS" in text
    assert main(["bias", str(net)]) == 0
    out = capsys.readouterr().out
    assert "µS" not in out and "A/V" not in out and " mS" in out
