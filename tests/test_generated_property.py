"""Property (issue 16 item 6): netlists generated from scratch — with ``tube``
lines, ``set`` lines, feedback networks and output paths, values drawn from
well inside and far outside the sensible ranges — are analysed or refused
with located diagnostics and exit 2.  Never an internal error (exit 3), and
an analysed one keeps Kirchhoff's current law at DC (residual below 1 nA)."""

from __future__ import annotations

import os

from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

from chain.cli import main

#: values a user might type: plausible ones, and slips (a missing prefix, a stray exponent)
TUBE_VALUES = {
    "mu": ["60", "100", "1e308", "-5", "0.2"],
    "ex": ["1.3", "1.5", "30"],
    "kg1": ["600", "1200", "0"],
    "kp": ["300", "600", "1e9"],
    "kvb": ["300", "12000"],
    "cgp": ["1.7p", "0", "-1p", "1e30"],
    "cgk": ["1.6p", "2p"],
    "pd-max": ["1", "0", "2.5"],
    "vp-max": ["300", "-300"],
}
SETTINGS = {
    "band": ["10Hz 40kHz", "20Hz 20kHz", "10Hz 1e308Hz", "20kHz 20Hz", "1e-9Hz 1kHz"],
    "points": ["50", "200", "7", "1e6", "2.5"],
    "level": ["100mV", "1V", "0V", "1e9V"],
    "heater": ["0V", "60V", "-50V", "-900V"],
    "reference": ["1kHz", "500Hz", "1e12Hz"],
}


@st.composite
def netlists(draw) -> str:
    n = draw(st.integers(1, 3))
    lines = ['title "generated"', "supply HT 300V impedance 100"]
    for key in draw(st.lists(st.sampled_from(sorted(SETTINGS)), max_size=3, unique=True)):
        lines.append(f"set {key} {draw(st.sampled_from(SETTINGS[key]))}")
    tube = "12AX7"
    if draw(st.booleans()):
        keys = draw(st.lists(st.sampled_from(sorted(TUBE_VALUES)), min_size=1, max_size=3, unique=True))
        lines.append("tube T like 12AX7 " + " ".join(f"{k} {draw(st.sampled_from(TUBE_VALUES[k]))}" for k in keys))
        tube = "T"
    lines.append("rail B1 from HT drop 10k decouple 22u")
    lines.append(f"input into V1 resistance {draw(st.sampled_from(['0', '10k', '68k']))}")
    for i in range(1, n + 1):
        rk = draw(st.sampled_from(["1k5 bypass 22u", "1k5", "820 bypass 47u", "2k7"]))
        lines += [f"stage V{i} common-cathode {tube}", f"  plate {draw(st.sampled_from(['100k', '220k', '47k']))} from B1",
                  f"  cathode {rk}", "  grid leak 1M"]
    for i in range(1, n):
        lines.append(f"couple V{i} -> V{i + 1} cap 22n")
    if n >= 2 and draw(st.booleans()):
        # a feedback network from the last plate back to the first cathode
        r = draw(st.sampled_from(["1M", "4M7", "100k"]))
        lines += ["network fb", f"  resistor rf V{n}.plate -- V1.cathode {r}",
                  f"  capacitor cf V{n}.plate -- V1.cathode {draw(st.sampled_from(['100p', '1n']))}"]
    lines += [f"couple V{n} -> output cap 22n", "output load 1M", ""]
    return "\n".join(lines)


@settings(max_examples=30, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
@given(text=netlists(), out=st.sampled_from(["file", "folder", "missing", "input", "symlink", "none"]))
def test_generated_netlists_end_in_a_result_or_a_located_error(text, out, tmp_path, capsys):
    net = tmp_path / "gen.chain"
    net.write_text(text, encoding="utf-8")
    target = {"file": tmp_path / "r.txt", "folder": tmp_path, "missing": tmp_path / "no" / "r.txt",
              "input": net, "symlink": tmp_path / "link.txt", "none": None}[out]
    if out == "symlink" and not target.is_symlink():
        target.symlink_to(tmp_path / "r.txt")
    argv = ["report", "--no-headroom", str(net)] + (["--output", str(target)] if target else [])
    code = main(argv)
    captured = capsys.readouterr()
    event(f"exit {code}")
    assert code in (0, 2, 4), captured.err  # 4: an unstable circuit, reported as such
    assert "internal error" not in captured.err and "Traceback" not in captured.err
    if code == 2:
        assert " error " in captured.err or "chain: error:" in captured.err
        if out in ("folder", "missing", "input"):
            assert "cannot write" in captured.err
    if out in ("folder", "missing", "input"):
        assert code == 2
        assert net.read_text(encoding="utf-8") == text  # the input is never overwritten
    if code == 0 and target is not None:
        assert (tmp_path / "r.txt").read_text(encoding="utf-8").startswith("chain report")
    leftovers = [p for p in os.listdir(tmp_path) if p.startswith(".")]
    assert leftovers == []  # no temporary file left behind
