"""Engine cost against a flat lcapy solve, for chains of 1..8 common-cathode stages.

Each chain is written in the `chain` language (N common-cathode 12AX7 stages
coupled by capacitors, a passive three-knob tone network after the last
stage, the output load behind it), parsed and built once.  Then, side by
side:

engine
    ``chain.dc.solve`` + ``linearize`` + ``response`` at POINTS log-spaced
    frequencies + ``stage_table`` at 1 kHz; best of REPEATS runs, taken in
    rounds over all chains so that load from other processes is spread
    evenly; imports and parsing/building excluded.
lcapy
    ``chain.formulas.flat_solve`` of the same circuit (numbers, exact
    rationals, solved symbolically in s) for the output node, then the
    transfer function evaluated at the same POINTS frequencies (mpmath);
    one run in a child process, killed after TIMEOUT seconds.

The two outputs are compared (largest relative difference over the band).
Targets, printed PASS/FAIL: the 6-stage chain's engine time < 0.2 s; the
engine >= 50x faster than lcapy at 6 stages; roughly linear growth of the
engine time with the stage count (the per-stage slope over 5..8 stages at
most twice the slope over 1..4).

BLAS threads: the script sets ``OPENBLAS_NUM_THREADS`` (and the OpenMP/MKL
equivalents) to 1 unless they are already set; run with
``OPENBLAS_NUM_THREADS=2`` to measure threaded BLAS.

Run from the repository root::

    python benchmarks/bench_chain.py                 # 1..8 stages
    python benchmarks/bench_chain.py --max-stages 4 --timeout 30
"""

from __future__ import annotations

import argparse
import multiprocessing as mp
import os
import platform
import queue as queue_module
import sys
import time
from dataclasses import dataclass
from pathlib import Path

# One BLAS thread unless the caller says otherwise (set before numpy loads).
# The engine solves many small systems; on a loaded 2-core machine a second
# OpenBLAS thread makes the response step several times slower, not faster.
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import numpy as np  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from chain.build import build  # noqa: E402
from chain.dc import solve  # noqa: E402
from chain.language import parse_text  # noqa: E402
from chain.smallsignal import linearize, response, stage_table  # noqa: E402

#: targets
T6_MAX_S = 0.2
SPEEDUP_MIN = 50.0
SLOPE_RATIO_MAX = 2.0

F_REF_HZ = 1000.0
LEVEL_V = 0.1

# An invented three-knob passive tone network (treble, bass, middle), its
# pots expanded to two resistors each by the builder.
TONE = """\
network tone: in -> out
  capacitor treble_c in -- t 390p
  resistor feed in -- a 47k
  capacitor bass_c a -- b 47n
  capacitor mid_c a -- m 22n
  pot treble cw t wiper out ccw b 250k audio 10% at 6
  rheostat bass m -- b 500k audio 10% at 5
  rheostat mid m -- gnd 20k linear at 4
"""


def chain_text(n_stages: int) -> str:
    """The netlist of an ``n_stages`` common-cathode chain with the tone network."""
    lines = [
        f'title "bench {n_stages} stages"',
        "supply HT 330V impedance 100",
        "rail B1 from HT drop 1k decouple 47u",
        "rail B2 from B1 drop 10k decouple 22u",
        "input into V1 resistance 10k",
        "",
    ]
    for i in range(1, n_stages + 1):
        # alternate a bypassed and an unbypassed cathode, as real chains do
        cathode = "cathode 1k5 bypass 22u" if i % 2 else "cathode 2k7"
        lines += [
            f"stage V{i} common-cathode 12AX7",
            "  plate 100k from B2",
            f"  {cathode}",
            "  grid leak 1M stopper 33k",
            "",
        ]
    lines.append(TONE)
    for i in range(1, n_stages):
        lines.append(f"couple V{i} -> V{i + 1} cap 22n")
    lines += [f"couple V{n_stages} -> output via tone", "output load 1M", ""]
    return "\n".join(lines)


def run_engine(circuit, f_hz: np.ndarray):
    """DC solve, linearisation, the response at ``f_hz`` and the stage table."""
    dc = solve(circuit)
    resp = response(linearize(circuit, dc), f_hz, stage_impedances=False)
    table = stage_table(circuit, dc, resp, F_REF_HZ, LEVEL_V)
    return dc, resp, table


def time_engine(circuit, f_hz: np.ndarray, repeats: int) -> float:
    """Best wall time of ``repeats`` engine runs, s."""
    best = float("inf")
    for _ in range(repeats):
        t0 = time.perf_counter()
        run_engine(circuit, f_hz)
        best = min(best, time.perf_counter() - t0)
    return best


def _lcapy_child(circuit, dc, f_hz, results) -> None:
    from chain.errors import FormulaError
    from chain.formulas import flat_solve

    t0 = time.perf_counter()
    try:
        sol = flat_solve(circuit, dc, [circuit.output_node])
        t_solve = time.perf_counter() - t0
        h = sol.at(circuit.output_node, f_hz)
    except FormulaError as exc:
        results.put(str(exc))
        return
    results.put((t_solve, time.perf_counter() - t0, h))


def time_lcapy(circuit, dc, f_hz: np.ndarray, timeout_s: float):
    """(solve s, solve + evaluation s, h) of the flat lcapy solve, or None on timeout.

    Runs in a forked child so that a solve past ``timeout_s`` can be stopped;
    lcapy and sympy are imported in the parent beforehand, so import time is
    not counted.
    """
    ctx = mp.get_context("fork")
    results = ctx.Queue()
    child = ctx.Process(target=_lcapy_child, args=(circuit, dc, f_hz, results))
    child.start()
    deadline = time.monotonic() + timeout_s
    result = None
    while result is None:
        try:
            result = results.get(timeout=0.5)
        except queue_module.Empty:
            if not child.is_alive() or time.monotonic() > deadline:
                break
    if child.is_alive():
        child.terminate()
    child.join()
    if isinstance(result, str):
        print(f"lcapy failed: {result}", file=sys.stderr)
        return None
    return result


@dataclass(frozen=True, slots=True)
class Row:
    stages: int
    nodes: int
    engine_s: float
    lcapy_solve_s: float | None
    lcapy_total_s: float | None
    max_rel_diff: float | None
    #: "" (solved), "timeout" or "not run"
    lcapy_status: str = ""

    @property
    def ratio(self) -> float | None:
        return None if self.lcapy_total_s is None else self.lcapy_total_s / self.engine_s


def _slope(rows, lo: int, hi: int) -> float:
    pts = [(r.stages, r.engine_s) for r in rows if lo <= r.stages <= hi]
    x, y = np.array(pts).T
    return float(np.polyfit(x, y, 1)[0])


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--max-stages", type=int, default=8)
    ap.add_argument("--repeats", type=int, default=15,
                    help="engine rounds over all chains (best run of each chain taken)")
    ap.add_argument("--points", type=int, default=1000, help="frequencies, 10 Hz .. 100 kHz")
    ap.add_argument("--timeout", type=float, default=60.0, help="lcapy time limit per chain, s")
    ap.add_argument("--lcapy-max-stages", type=int, default=8,
                    help="skip lcapy above this stage count")
    args = ap.parse_args(argv)

    import lcapy  # noqa: F401  (imported here so that children do not count it)
    import mpmath  # noqa: F401
    import sympy  # noqa: F401

    f_hz = np.geomspace(10.0, 100e3, args.points)
    print(f"python {platform.python_version()}, numpy {np.__version__}, lcapy {lcapy.__version__}, "
          f"sympy {sympy.__version__}; {mp.cpu_count()} CPUs, "
          f"OPENBLAS_NUM_THREADS={os.environ.get('OPENBLAS_NUM_THREADS')}; {args.points} points, "
          f"engine best of {args.repeats}, lcapy timeout {args.timeout:.0f} s")
    header = (f"{'stages':>6} {'nodes':>5} {'engine ms':>10} {'d/stage ms':>10} "
              f"{'lcapy solve s':>13} {'lcapy total s':>13} {'ratio':>8} {'max rel diff':>12}")
    print(header)
    print("-" * len(header))

    # engine first, for every chain, in interleaved rounds: the best time of
    # each chain then comes from quiet moments even on a shared machine
    circuits = {n: build(parse_text(chain_text(n))) for n in range(1, args.max_stages + 1)}
    for circuit in circuits.values():
        run_engine(circuit, f_hz)  # warm-up (first-call caches)
    best = {n: float("inf") for n in circuits}
    for _ in range(args.repeats):
        for n, circuit in circuits.items():
            best[n] = min(best[n], time_engine(circuit, f_hz, 1))

    rows: list[Row] = []
    skip_lcapy = False
    for n, circuit in circuits.items():
        dc, resp, _ = run_engine(circuit, f_hz)
        lc, status = None, "not run"
        if not skip_lcapy and n <= args.lcapy_max_stages:
            lc = time_lcapy(circuit, dc, f_hz, args.timeout)
            status = "" if lc is not None else "timeout"
            if lc is None:
                skip_lcapy = True  # longer chains only take longer
        elif skip_lcapy:
            status = "timeout"  # a shorter chain already ran past the limit
        diff = None
        if lc is not None:
            h_ref = resp.h[circuit.output_node]
            diff = float(np.max(np.abs(lc[2] - h_ref) / np.abs(h_ref)))
        row = Row(n, len(circuit.nodes()), best[n], None if lc is None else lc[0],
                  None if lc is None else lc[1], diff, status)
        rows.append(row)
        step = "" if n == 1 else f"{1e3 * (row.engine_s - rows[-2].engine_s):10.2f}"
        if lc is not None:
            tail = f"{row.lcapy_solve_s:13.2f} {row.lcapy_total_s:13.2f} {row.ratio:8.0f} {diff:12.1e}"
        elif status == "timeout":
            tail = f"{'skipped: > ' + format(args.timeout, '.0f') + ' s':>27}"
        else:
            tail = f"{'not run':>27}"
        print(f"{n:6d} {row.nodes:5d} {1e3 * row.engine_s:10.2f} {step:>10} {tail}", flush=True)

    # per-stage closed forms (lcapy): one bypassed and one unbypassed stage,
    # cold cache, symbolic and numeric-only
    from chain.formulas import stage_formulas, stage_parts

    circuit = circuits[max(circuits)]
    dc = solve(circuit)
    print()
    for name in [s.name for s in circuit.stages][:2]:
        parts = stage_parts(circuit, dc, name)
        timings = []
        for symbolic in (True, False):
            t0 = time.perf_counter()
            sf = stage_formulas(parts, symbolic=symbolic)
            timings.append(time.perf_counter() - t0)
        print(f"stage formulas {name} ({'bypassed' if parts.ck_f else 'unbypassed'}): "
              f"symbolic {timings[0]:.2f} s, numeric only {timings[1]:.2f} s; "
              f"gain = {sf.gain.midband_value:.4g} at mid-band")

    print()
    verdicts = []
    six = next((r for r in rows if r.stages == 6), None)
    if six is not None:
        ok = six.engine_s < T6_MAX_S
        verdicts.append(ok)
        print(f"{'PASS' if ok else 'FAIL'}  6-stage engine time {1e3 * six.engine_s:.1f} ms "
              f"< {1e3 * T6_MAX_S:.0f} ms")
        if six.ratio is not None:
            ok = six.ratio >= SPEEDUP_MIN
            verdicts.append(ok)
            print(f"{'PASS' if ok else 'FAIL'}  6-stage speed-up over flat lcapy {six.ratio:.0f}x "
                  f">= {SPEEDUP_MIN:.0f}x")
        elif six.lcapy_status == "timeout":
            # lcapy ran past the limit, so the speed-up is at least limit/engine time
            ok = args.timeout / six.engine_s >= SPEEDUP_MIN
            verdicts.append(ok)
            print(f"{'PASS' if ok else 'FAIL'}  6-stage flat lcapy solve exceeded {args.timeout:.0f} s: "
                  f"speed-up > {args.timeout / six.engine_s:.0f}x (target {SPEEDUP_MIN:.0f}x)")
        else:
            print("SKIP  6-stage speed-up over flat lcapy (lcapy not run)")
    if len(rows) >= 8:
        lo, hi = _slope(rows, 1, 4), _slope(rows, 5, 8)
        ratio = hi / lo
        ok = ratio <= SLOPE_RATIO_MAX
        verdicts.append(ok)
        print(f"{'PASS' if ok else 'FAIL'}  growth: {1e3 * lo:.2f} ms/stage over 1..4, "
              f"{1e3 * hi:.2f} ms/stage over 5..8 (ratio {ratio:.2f} <= {SLOPE_RATIO_MAX:.1f})")
    diffs = [r.max_rel_diff for r in rows if r.max_rel_diff is not None]
    if diffs:
        print(f"note  engine vs lcapy at the output: largest relative difference {max(diffs):.1e}")
    return 0 if all(verdicts) else 1


if __name__ == "__main__":
    sys.exit(main())
