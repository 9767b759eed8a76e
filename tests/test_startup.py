"""Start-up (issue 16 item 7): the commands that do not need the heavy
libraries do not import them.  Times are measured in benchmarks/bench_startup.py,
never asserted here."""

import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).parents[1]
DEMO = ROOT / "netlists" / "lead_four_stage.chain"
# scipy as a whole: its linalg alone (QZ for the poles, once) cost 0.1-0.17 s, more than the analysis;
# numpy.ma: loaded by the first np.unique
HEAVY = ("scipy", "networkx", "matplotlib", "lcapy", "sympy", "jsonschema", "numpy.ma")


@pytest.mark.parametrize("argv, allowed", [
    (["check", str(DEMO)], ()),
    (["report", "--no-headroom", str(DEMO)], ()),
    (["report", "--no-headroom", "--format", "json", str(DEMO)], ()),
    (["bias", str(DEMO)], ()),
], ids=["check", "report", "report-json", "bias"])
def test_light_commands_leave_the_heavy_libraries_alone(argv, allowed):
    code = (f"import sys, io, contextlib; from chain.cli import main\n"
            f"with contextlib.redirect_stdout(io.StringIO()): status = main({argv!r})\n"
            f"print(f'{{status}}|' + ','.join(m for m in {HEAVY!r} if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=ROOT)
    status, loaded = out.stdout.strip().splitlines()[-1].split("|")
    assert status == "0", out.stderr
    assert [m for m in loaded.split(",") if m and m not in allowed] == []


def test_check_does_not_load_the_analysis():
    code = ("import sys, io, contextlib; from chain.cli import main\n"
            f"with contextlib.redirect_stdout(io.StringIO()): main(['check', {str(DEMO)!r}])\n"
            "print(','.join(sorted(m for m in sys.modules if m.startswith(('chain.dc', 'chain.smallsignal', "
            "'chain.headroom', 'chain.formulas', 'chain.analysis', 'scipy')))))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=ROOT)
    assert out.stdout.strip() == ""
