"""The command line: exit codes, messages, no tracebacks, fast start."""

import subprocess
import sys
from pathlib import Path

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from chain.cli import main

ROOT = Path(__file__).parents[1]
DEMOS = sorted((ROOT / "netlists").glob("*.chain"))


def test_check_accepts_every_demo(capsys):
    assert main(["check", *map(str, DEMOS)]) == 0
    out = capsys.readouterr().out
    for demo in DEMOS:
        assert f"{demo}: ok" in out


def test_check_missing_file(tmp_path, capsys):
    missing = tmp_path / "nope.chain"
    assert main(["check", str(missing)]) == 2
    err = capsys.readouterr().err
    assert f"{missing}:1:1: error E100: cannot read netlist" in err


def test_usage_error_exits_2(capsys):
    assert main(["frobnicate"]) == 2
    assert main([]) == 2


def test_help_lists_every_command(capsys):
    assert main(["--help"]) == 0
    out = capsys.readouterr().out
    for command in ("check", "bias", "report", "plot", "formulas", "headroom", "diff", "compare"):
        assert command in out


def _mutations():
    """Mutated demo text: delete, duplicate, swap or garble a random span."""
    texts = [p.read_text(encoding="utf-8") for p in DEMOS]
    junk = st.text(alphabet=st.sampled_from(list("abcxyz0123456789 .-:>#\"\tkMunp%µΩ")), max_size=6)

    @st.composite
    def mutate(draw):
        text = draw(st.sampled_from(texts))
        for _ in range(draw(st.integers(1, 3))):
            i = draw(st.integers(0, len(text)))
            j = draw(st.integers(i, min(len(text), i + 12)))
            text = text[:i] + draw(junk) + text[j:]
        return text

    return mutate()


@settings(max_examples=60, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(text=_mutations())
def test_mutated_netlists_succeed_or_fail_cleanly(text, tmp_path, capsys):
    path = tmp_path / "m.chain"
    path.write_text(text, encoding="utf-8")
    status = main(["check", str(path)])
    out, err = capsys.readouterr()
    assert status in (0, 2), err
    assert "Traceback" not in out + err
    if status == 2:
        # every error names the file with a line and column (or the file alone for whole-file problems)
        errors = [line for line in err.splitlines() if " error E" in line]
        assert errors and all(line.startswith(f"{path}:") for line in errors), err


def test_check_does_not_import_heavy_modules():
    code = ("import sys; from chain.cli import main; main(['check', %r]); "
            "heavy = [m for m in ('matplotlib', 'lcapy', 'sympy', 'scipy') if m in sys.modules]; "
            "print('HEAVY=' + ','.join(heavy))") % str(DEMOS[0])
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=ROOT)
    assert out.stdout.strip().splitlines()[-1] == "HEAVY="


def test_internal_error_says_so_and_exits_3(monkeypatch, capsys):
    import chain.cli as cli

    def broken(args):
        raise ZeroDivisionError("boom")

    monkeypatch.setitem(cli._COMMANDS, "check", broken)
    assert main(["check", str(DEMOS[0])]) == 3
    err = capsys.readouterr().err
    assert "internal error (ZeroDivisionError: boom)" in err and "bug in chain" in err
    assert "Traceback" not in err


def test_a_byte_order_mark_is_not_text(tmp_path, capsys):
    path = tmp_path / "bom.chain"
    path.write_bytes(b"\xef\xbb\xbf" + DEMOS[0].read_bytes())
    assert main(["check", str(path)]) == 0
