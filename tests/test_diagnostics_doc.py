"""docs/diagnostics.md lists every diagnostic code the package can emit."""

import re
from pathlib import Path

ROOT = Path(__file__).parents[1]


def test_every_code_in_the_source_is_documented():
    source = "\n".join(p.read_text(encoding="utf-8") for p in (ROOT / "chain").rglob("*.py"))
    used = set(re.findall(r'"([EW]\d{3})"', source))
    documented = set(re.findall(r"^\| ([EW]\d{3}) \|", (ROOT / "docs" / "diagnostics.md").read_text(encoding="utf-8"),
                                flags=re.M))
    assert used, "no codes found: the pattern is stale"
    assert used - documented == set(), f"undocumented codes: {sorted(used - documented)}"
    assert documented - used == set(), f"documented but never emitted: {sorted(documented - used)}"
