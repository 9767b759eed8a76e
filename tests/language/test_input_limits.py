"""Inputs at the edges (issue 16 items 1, 2, 4, 5; issue 13 item 6): every
case ends in a located error (exit 2) naming the real place, never an
internal error or a plausible-looking report."""

from pathlib import Path

import pytest

from chain.cli import main
from chain.errors import LanguageError
from chain.language import parse_file, parse_text
from chain.language.parser import MAX_NETLIST_BYTES

ROOT = Path(__file__).parents[2]
CLEAN = (ROOT / "netlists" / "clean_two_stage.chain").read_text(encoding="utf-8")


def errors_of(text, tmp_path=None):
    with pytest.raises(LanguageError) as info:
        parse_text(text, "t.chain")
    return [d for d in info.value.diagnostics if d.severity == "error"]


def with_tube(line):
    """The clean demo with both stages on a tube defined by ``line``."""
    return CLEAN.replace('title "Kestrel clean channel"', 'title "Kestrel clean channel"\n' + line) \
        .replace("common-cathode 12AX7", "common-cathode T")


@pytest.mark.parametrize("line, key, code", [
    ("tube T like 12AX7 cgp -1p", "cgp", "E301"),
    ("tube T like 12AX7 cgk -2p", "cgk", "E301"),
    ("tube T like 12AX7 pd-max 0", "pd-max", "E301"),
    ("tube T like 12AX7 vp-max -300", "vp-max", "E301"),
    ("tube T like 12AX7 rg-max 0", "rg-max", "E301"),
    ("tube T like 12AX7 cgp 1e308", "cgp", "E302"),
    ("tube T like 12AX7 cgp 1e30", "cgp", "E302"),
    ("tube T like 12AX7 mu 1e308", "mu", "E302"),
    ("tube T like 12AX7 ex 30", "ex", "E302"),
    ("tube T like 12AX7 kvb 1e12", "kvb", "E302"),
    ("tube T like 12AX7 ik-max 10k", "ik-max", "E302"),
])
def test_every_tube_key_has_a_range_and_is_located_at_the_key(line, key, code):
    [err] = errors_of(with_tube(line))
    assert err.code == code
    assert err.span.line == 4 and err.span.column == line.index(key) + 1
    assert "tube 'T'" in err.message


def test_zero_interelectrode_capacitance_is_allowed():
    """A capacitance of zero leaves the Miller effect out: a deliberate choice, not an error."""
    parse_text(with_tube("tube T like 12AX7 cgp 0 cgk 0 cpk 0"), "t.chain")


def test_tube_line_error_exits_2_from_the_command_line(tmp_path, capsys):
    net = tmp_path / "t.chain"
    net.write_text(with_tube("tube T like 12AX7 cgp -1p"), encoding="utf-8")
    assert main(["check", str(net)]) == 2
    err = capsys.readouterr().err
    assert f"{net}:4:19: error E301" in err and "internal error" not in err


@pytest.mark.parametrize("setting", ["set band 10Hz 1e308Hz", "set band 1e-9Hz 20kHz", "set band 10Hz 1e12Hz"])
def test_band_edges_are_range_checked(setting):
    [err] = errors_of(CLEAN.replace("set band 10Hz 40kHz", setting))
    assert err.code == "E302" and err.span.line == 6 and "band edge" in err.message


@pytest.mark.parametrize("volts", ["-50V", "-500V", "120V", "0V"])
def test_heater_potential_may_be_negative_within_500_volts(volts):
    """Elevated and negative heater supplies both exist (common practice); the stated range is -500 to 500 V."""
    d = parse_text(CLEAN.replace("set level 100mV", f"set heater {volts}"), "t.chain")
    assert d.settings.heater_v == float(volts[:-1])


def test_heater_potential_beyond_500_volts_is_refused():
    [err] = errors_of(CLEAN.replace("set level 100mV", "set heater -600V"))
    assert err.code == "E302"


def test_network_ports_must_differ():
    [err] = errors_of(CLEAN.replace("network volume: in -> out", "network volume: in -> in"))
    assert err.code == "E250" and err.span.line == 24
    assert "ports must differ" in err.message


@pytest.mark.parametrize("char, name", [("\u00a0", "U+00A0 (NO-BREAK SPACE)"), ("\x00", "U+0000 (NUL)"),
                                        ("\u200b", "U+200B (ZERO WIDTH SPACE)"),
                                        ("\ufeff", "U+FEFF (ZERO WIDTH NO-BREAK SPACE)")])
def test_invisible_characters_are_named_with_their_code_point(char, name):
    text = CLEAN.replace("  plate 100k from B1\n  cathode 1k5 bypass 25u",
                         f"  plate{char}100k from B1\n  cathode 1k5 bypass 25u")
    [err] = errors_of(text)
    assert err.code == "E132" and name in err.message
    assert (err.span.line, err.span.column) == (15, 8)


def test_invisible_character_inside_a_quoted_title_is_text():
    parse_text(CLEAN.replace("Kestrel clean", "Kestrel\u00a0clean"), "t.chain")


def test_latin1_byte_is_located_at_its_real_line_and_column(tmp_path):
    net = tmp_path / "old.chain"
    net.write_bytes(CLEAN.replace("grid leak 1M stopper 33k", "grid leak 1M stopper 33k # 1µ").encode("utf-8")
                    .replace("µ".encode("utf-8"), b"\xb5"))
    with pytest.raises(LanguageError) as info:
        parse_file(net)
    [err] = info.value.diagnostics
    assert err.code == "E131"
    assert (err.span.line, err.span.column) == (17, 31)
    assert "not UTF-8" in err.message and "'µ'" in err.message and "UTF-8" in err.hint


def test_a_file_larger_than_the_cap_stops_at_once(tmp_path):
    big = tmp_path / "big.chain"
    big.write_bytes(b"# " + b"x" * MAX_NETLIST_BYTES)
    with pytest.raises(LanguageError) as info:
        parse_file(big)
    assert info.value.diagnostics[0].code == "E130"


def test_dev_zero_is_refused(capsys):
    assert main(["check", "/dev/zero"]) == 2
    assert "E130" in capsys.readouterr().err


def test_other_kinds_of_file_are_named_once(tmp_path, capsys):
    png = tmp_path / "bias.png"
    png.write_bytes(b"\x89PNG\r\n\x1a\n" + bytes(range(256)))
    md = tmp_path / "report.md"
    md.write_text("# chain report: Kestrel\n\n| a | b |\n| --- | --- |\n", encoding="utf-8")
    notes = tmp_path / "notes.md"
    notes.write_text("Some notes\n\nabout the amp\nand more\n", encoding="utf-8")
    for path, words in ((png, "a PNG image"), (md, "a chain report in Markdown"), (notes, "a Markdown file")):
        assert main(["diff", str(path), str(path)]) == 2
        err = capsys.readouterr().err
        assert f"this is {words}, not a netlist" in err
        assert err.count("error") == 1, err
