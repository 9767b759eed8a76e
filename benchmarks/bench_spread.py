"""Monte Carlo cost: the batched spread engine against looping the single analysis.

For ``netlists/lead_four_stage.chain`` (four triodes, 38 varied parts and
tubes), in one run and one process:

batched
    ``chain.spread.montecarlo._Model.run`` on N drawn builds: batched DC
    Newton, per-sample small-signal matrices, the response at the design's
    500 sweep points (+ the reference frequency), and per stage at 1 kHz the
    loaded gain and output impedance.  Best of REPEATS.
    With the first clip of every build (``chain.spread.clip``: the batched
    quasi-static mid-band sweep of the headroom analysis); the time without
    it is printed beside.
loop
    the same figures one build at a time with the single-circuit code:
    ``chain.dc.solve`` + ``linearize`` + ``response`` (500 points) +
    ``stage_table`` at 1 kHz + ``chain.headroom.headroom`` (no spectrum), on
    LOOP builds (parts scaled in the circuit); the time per build × N gives
    the loop's cost for N builds.
noise
    ``chain.smallsignal.noise.noise`` of the nominal build (one adjoint sweep
    over 242 points) against one ``response`` sweep of the same circuit
    without output impedances (the transfers alone: one sweep).

Times are this process's CPU time by default (``--clock wall`` for elapsed
time): with one BLAS thread the work is single-threaded, and on a machine
shared with other jobs the CPU time is what the code costs.
Printed: seconds, builds per second, the ratio, and PASS/FAIL for the
targets (N = 1000 batched within 5 s on this machine; noise at most the
cost of one extra sweep).  Run from the repository root::

    python benchmarks/bench_spread.py            # N = 1000
    python benchmarks/bench_spread.py -n 200 --loop 10
"""

from __future__ import annotations

import argparse
import os
import platform
import sys
import time
from dataclasses import replace
from pathlib import Path

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import numpy as np  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from chain.analysis import sweep_frequencies  # noqa: E402
from chain.build import load  # noqa: E402
from chain.dc import SolveOptions, solve  # noqa: E402
from chain.headroom import headroom  # noqa: E402
from chain.smallsignal import linearize, response, stage_table  # noqa: E402
from chain.smallsignal.noise import noise  # noqa: E402
from chain.spread.montecarlo import _Model, draw  # noqa: E402
from chain.spread.tolerance import varied_parts  # noqa: E402

NETLIST = "netlists/lead_four_stage.chain"


def _modified(circuit, factor):
    return replace(
        circuit,
        resistors=tuple(replace(r, ohms=r.ohms * factor.get(r.name, 1.0)) for r in circuit.resistors),
        capacitors=tuple(replace(c, farads=c.farads * factor.get(c.name, 1.0)) for c in circuit.capacitors),
        inductors=tuple(replace(i, henries=i.henries * factor.get(i.name, 1.0)) for i in circuit.inductors),
        triodes=tuple(replace(t, model=replace(t.model, kg1=t.model.kg1 / factor.get(t.name, 1.0)))
                      for t in circuit.triodes),
    )


#: which clock: "cpu" (this process's CPU time: fair on a machine shared with other work) or "wall"
CLOCK = {"cpu": time.process_time, "wall": time.perf_counter}


def best(fn, repeats, clock="cpu"):
    times = []
    for _ in range(repeats):
        t0 = CLOCK[clock]()
        fn()
        times.append(CLOCK[clock]() - t0)
    return min(times)


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("-n", type=int, default=1000, help="builds (default 1000)")
    ap.add_argument("--loop", type=int, default=20, help="builds analysed one at a time (default 20)")
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--clock", choices=("cpu", "wall"), default="cpu",
                    help="cpu: process CPU time (default; fair on a busy machine), wall: elapsed time")
    args = ap.parse_args()

    design, circuit, _ = load(NETLIST)
    dc = solve(circuit)
    f = sweep_frequencies(design)
    groups = varied_parts(circuit)
    model = _Model(circuit, dc, groups, f, design.settings.reference_hz, SolveOptions())
    dev = draw(groups, args.n, seed=1)
    out = {}

    def batched():
        out["r"] = model.run(dev, sweep=True)

    def batched_clip():
        out["c"] = model.run(dev, sweep=True, clip=True)

    t_small = best(batched, args.repeats, args.clock)
    t_batch = best(batched_clip, args.repeats, args.clock)
    assert out["r"]["converged"].all()
    assert not out["c"]["_clip"].failed.any()

    fac = model.factors(dev[:args.loop])
    circuits = [_modified(circuit, dict(zip(model.batch.elements, row))) for row in fac]

    def loop():
        for cm in circuits:
            dm = solve(cm)
            ss = linearize(cm, dm)
            resp = response(ss, f, stage_impedances=False)
            stage_table(cm, dm, resp, design.settings.reference_hz, design.settings.level_v)
            headroom(cm, dm, level_v=design.settings.level_v, spectrum=False)

    t_loop = best(loop, args.repeats, args.clock) / args.loop * args.n

    ss = linearize(circuit, dc)
    t_sweep = best(lambda: response(ss, np.geomspace(20, 20e3, 242), output_impedances=False), 20, args.clock)
    t_noise = best(lambda: noise(ss, reference_hz=1000.0), 20, args.clock)

    print(f"python {platform.python_version()}, numpy {np.__version__}, {os.cpu_count()} CPUs, "
          f"OPENBLAS_NUM_THREADS={os.environ.get('OPENBLAS_NUM_THREADS')}, clock: {args.clock}")
    print(f"{NETLIST}: {len(groups)} varied groups, {len(f)} frequencies")
    print(f"batched  {args.n} builds, small-signal only: {t_small:8.3f} s; first clip adds {t_batch - t_small:6.3f} s")
    print(f"batched  {args.n} builds: {t_batch:8.3f} s  ({args.n / t_batch:8.0f} builds/s)")
    print(f"loop     {args.n} builds: {t_loop:8.3f} s  (extrapolated from {args.loop} builds, "
          f"{args.n / t_loop:6.1f} builds/s)")
    print(f"ratio loop/batched: {t_loop / t_batch:6.1f}x")
    print(f"noise (adjoint, 242 points): {1e3 * t_noise:7.1f} ms; one response sweep, same points: "
          f"{1e3 * t_sweep:7.1f} ms; ratio {t_noise / t_sweep:4.2f}")
    ok1 = t_batch <= 5.0
    ok2 = t_noise <= 1.5 * t_sweep
    print(f"{'PASS' if ok1 else 'FAIL'}: {args.n} builds batched within 5 s")
    print(f"{'PASS' if ok2 else 'FAIL'}: noise costs about one sweep (within 1.5x of one)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
