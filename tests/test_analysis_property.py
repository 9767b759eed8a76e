"""Property: a demo netlist with its part values scaled at random (within the
language's sensible ranges) is either analysed or refused with a located
error: never a crash, and never a result that breaks Kirchhoff's laws at DC."""

import re
from pathlib import Path

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from chain.analysis import analyze_design
from chain.build import load_text
from chain.errors import ChainError
from chain.units import QuantityError, parse_quantity

DEMOS = [p.read_text(encoding="utf-8") for p in sorted((Path(__file__).parents[1] / "netlists").glob("*.chain"))]
#: part values of stage, rail and network lines (not settings, pots or the source)
VALUE = re.compile(r"(?<=\s)(\d[\w.]*)")
SCALED = ("  plate ", "  second ", "  cathode ", "  grid ", "rail ", "  resistor ", "  capacitor ", "couple ")


def scaled(text: str, factors: list[float]) -> str:
    """``text`` with the n-th part value multiplied by ``factors[n % len(factors)]``."""
    out, k = [], 0
    for line in text.splitlines():
        if line.startswith(SCALED):
            def times(m):
                nonlocal k
                factor = factors[k % len(factors)]
                k += 1
                try:
                    return repr(parse_quantity(m.group(1)) * factor)
                except QuantityError:  # a word that is not a value (a node name such as 'B1')
                    return m.group(1)
            line = VALUE.sub(times, line)
        out.append(line)
    return "\n".join(out) + "\n"


@settings(max_examples=25, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow])
@given(demo=st.sampled_from(DEMOS),
       factors=st.lists(st.floats(min_value=0.2, max_value=5.0), min_size=1, max_size=12))
def test_scaled_demos_are_analysed_or_refused_cleanly(demo, factors):
    text = scaled(demo, factors)
    try:
        design, circuit, warnings = load_text(text, "scaled.chain")
        a = analyze_design(design, circuit, warnings, headroom=False)
    except ChainError as exc:
        assert exc.diagnostics and all(d.message for d in exc.diagnostics)
        return
    assert a.dc.max_residual_a < 1e-9
    for row in a.stages:
        for triode in row.triodes:
            op = a.dc.points[triode]
            assert op.ip_a >= 0.0 and op.vp_v > op.vk_v - 1e-9
