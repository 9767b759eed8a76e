"""Whole-process start-up of `chain check` and `chain report --no-headroom` on the demos.

Each command is run as a fresh process (``python -m chain …``, output to
/dev/null), interleaved in rounds with ``python -c pass`` so that the load
of other processes hits every command alike; the best of ROUNDS runs is
kept.  Printed: seconds, and the ratio to ``python -c pass`` measured in the
same run, which is what carries over from one machine to another.

Goals (issue 16): ``chain check`` at most 0.3 s and ``chain report
--no-headroom`` at most 0.5 s per demo on an unloaded machine.  Absolute
times move with the machine and its load, so the goals are printed beside
the measured seconds, and the ratios are what docs/performance.md records.

Run from the repository root::

    python benchmarks/bench_startup.py              # 7 rounds
    python benchmarks/bench_startup.py --rounds 15
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
GOALS = {"check": 0.3, "report --no-headroom": 0.5}


# an installed package has its bytecode compiled; a PYTHONDONTWRITEBYTECODE
# inherited from the shell would make every run compile chain's sources again
# (about 0.1 s), which no user sees twice
ENV = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}


def _run(argv: list[str]) -> float:
    t0 = time.perf_counter()
    subprocess.run(argv, cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=True, env=ENV)
    return time.perf_counter() - t0


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rounds", type=int, default=7)
    args = ap.parse_args(argv)
    demos = sorted((ROOT / "netlists").glob("*.chain"))
    py = sys.executable
    jobs = {("python -c pass", ""): [py, "-c", "pass"]}
    for d in demos:
        rel = str(d.relative_to(ROOT))
        jobs[("check", d.stem)] = [py, "-m", "chain", "check", rel]
        jobs[("report --no-headroom", d.stem)] = [py, "-m", "chain", "report", "--no-headroom", rel]
    for cmd in jobs.values():  # warm the file cache, lark's parser cache and the bytecode
        _run(cmd)
    best = {k: float("inf") for k in jobs}
    for _ in range(args.rounds):
        for k, cmd in jobs.items():
            best[k] = min(best[k], _run(cmd))
    base = best[("python -c pass", "")]
    print(f"python {sys.version.split()[0]}, {os.cpu_count()} CPUs, load average "
          f"{os.getloadavg()[0]:.2f}; best of {args.rounds} rounds")
    print(f"{'command':22} {'demo':28} {'seconds':>8} {'× python -c pass':>17} {'goal':>7}")
    print(f"{'python -c pass':22} {'':28} {base:8.3f} {1.0:17.1f}")
    for (cmd, demo), t in best.items():
        if cmd == "python -c pass":
            continue
        goal = GOALS[cmd]
        print(f"{cmd:22} {demo:28} {t:8.3f} {t / base:17.1f} {goal:6.1f}s {'ok' if t <= goal else 'over'}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
