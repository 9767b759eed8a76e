"""Whole analyses of the demo netlists, with and without headroom.

Each demo under ``netlists/`` (top level) is parsed and built once; then
``chain.analysis.analyze_design`` is timed without headroom and with it, best
of REPEATS, taken in rounds over all demos so that load from other processes
hits every demo alike.  One BLAS thread, as the ``chain`` command runs.

Run from the repository root::

    python benchmarks/bench_demos.py
    python benchmarks/bench_demos.py --repeats 3
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from chain.analysis import analyze_design  # noqa: E402
from chain.build import build  # noqa: E402
from chain.language import parse_file  # noqa: E402


def timed(fn) -> float:
    """Seconds one call of ``fn`` takes."""
    t0 = time.perf_counter()
    fn()
    return time.perf_counter() - t0


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=5)
    args = ap.parse_args(argv)
    demos = []
    for path in sorted((ROOT / "netlists").glob("*.chain")):
        design = parse_file(path)
        demos.append((path.name, design, build(design)))
    best = {name: [float("inf"), float("inf")] for name, _, _ in demos}
    for _ in range(args.repeats):
        for name, design, circuit in demos:
            for k, with_headroom in enumerate((False, True)):
                t = timed(lambda: analyze_design(design, circuit, (), headroom=with_headroom))
                best[name][k] = min(best[name][k], t)
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(f"best of {args.repeats}, one BLAS thread, load average {load:.2f}")
    print(f"{'netlist':<32} {'stages':>6} {'without headroom (ms)':>22} {'with headroom (ms)':>19}")
    for name, _, circuit in demos:
        without, with_ = best[name]
        print(f"{name:<32} {len(circuit.stages):>6} {1e3 * without:>22.1f} {1e3 * with_:>19.0f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
