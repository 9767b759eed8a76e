"""Time-domain speed: one second of 48 kHz through the lead demo, against references.

A script, not a test (run from the repository root)::

    python benchmarks/bench_transient.py                  # everything
    python benchmarks/bench_transient.py --max-stages 4   # quicker stage sweep

What is timed (wall clock, best of ``--repeats`` runs, in one process so that
the ratios see the same machine load):

* **compiled** — ``chain.transient.simulate`` with the numba loop, one second
  of a plucked-string-like tone at 48 kHz through
  ``netlists/lead_four_stage.chain`` (100 mV peak: the chain clips hard), at
  ``--oversample`` 1, 2 and 4 solver steps per sample.  The compile itself
  (cached on disk after the first run) is timed separately.
* **numpy** — the same equations through :meth:`TransientSystem.step` over
  ``--numpy-ms`` of the signal, scaled to one second.
* **solve_ivp** — ``chain.transient.reference.reference_solve`` (scipy Radau,
  rtol 1e-7) over ``--ivp-ms`` of the signal, scaled to one second.
* **stages** — the compiled loop on the common-cathode chains of
  ``bench_chain.py`` (1 … N stages with the tone network), one second each.

Scaling a short run to one second assumes a steady cost per simulated second
(true for a steady tone; the start from the DC point is included).
"""

from __future__ import annotations

import argparse
import math
import os
import sys
import time
from pathlib import Path

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import numpy as np  # noqa: E402

from chain.build import load, load_text  # noqa: E402
from chain.transient import compile_transient, simulate  # noqa: E402
from chain.transient import fast  # noqa: E402
from chain.transient.reference import reference_solve  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_chain import chain_text  # noqa: E402

FS = 48000.0
LEAD = Path(__file__).resolve().parents[1] / "netlists" / "lead_four_stage.chain"


def pluck(seconds: float, peak_v: float, f0: float = 110.0) -> np.ndarray:
    t = np.arange(int(round(seconds * FS)) + 1) / FS
    x = sum(np.exp(-t * (3.0 + 2.0 * k)) * np.sin(2 * math.pi * k * f0 * t) / k for k in range(1, 9))
    x[0] = 0.0
    return peak_v * x / np.abs(x).max()


def best(fn, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--max-stages", type=int, default=6)
    ap.add_argument("--numpy-ms", type=float, default=20.0)
    ap.add_argument("--ivp-ms", type=float, default=5.0)
    args = ap.parse_args(argv)
    if not fast.AVAILABLE:
        print("numba is not installed: only the numpy stepper is available")
        return 1
    _, circuit, _ = load(LEAD)
    system = compile_transient(circuit)
    u = pluck(1.0, 0.1)
    t0 = time.perf_counter()
    simulate(system, u[:50], FS, oversample=1, engine="compiled")
    print(f"compile (or load from the numba cache) + 50 samples: {time.perf_counter() - t0:.2f} s")

    print("\nOne second of 48 kHz through netlists/lead_four_stage.chain (plucked tone, 100 mV peak)")
    print(f"{'engine':26} {'oversample':>10} {'wall s per audio s':>18} {'x real time':>12}")
    compiled = {}
    for os_ in (1, 2, 4):
        s = best(lambda: simulate(system, u, FS, oversample=os_, engine="compiled"), args.repeats)
        compiled[os_] = s
        print(f"{'compiled (numba)':26} {os_:10d} {s:18.3f} {1.0 / s:12.2f}")
    n_np = int(args.numpy_ms * 1e-3 * FS) + 1
    s_np = best(lambda: simulate(system, u[:n_np], FS, oversample=2, engine="numpy"), 1) * (FS / (n_np - 1))
    print(f"{'numpy stepper':26} {2:10d} {s_np:18.3f} {1.0 / s_np:12.3f}")
    n_ivp = int(args.ivp_ms * 1e-3 * FS) + 1
    from chain.transient import interpolator

    uf = interpolator(u, FS)
    t_eval = np.arange(n_ivp) / FS
    t0 = time.perf_counter()
    reference_solve(system, uf, t_eval, nodes=[circuit.output_node], rtol=1e-7, atol=1e-9)
    s_ivp = (time.perf_counter() - t0) * (FS / (n_ivp - 1))
    print(f"{'solve_ivp Radau (rtol 1e-7)':26} {'—':>10} {s_ivp:18.1f} {1.0 / s_ivp:12.4f}")
    print(f"\nratios: solve_ivp / compiled(oversample 2) = {s_ivp / compiled[2]:.0f}x, "
          f"numpy / compiled(oversample 2) = {s_np / compiled[2]:.0f}x")

    print("\nCost against the number of stages (bench_chain.py chains, one second, oversample 2)")
    print(f"{'stages':>6} {'unknowns':>8} {'wall s':>8} {'x real time':>12}")
    for n in range(1, args.max_stages + 1):
        c = load_text(chain_text(n))[1]
        sysn = compile_transient(c)
        un = pluck(1.0, 0.02)
        s = best(lambda: simulate(sysn, un, FS, oversample=2, engine="compiled"), args.repeats)
        print(f"{n:6d} {sysn.size:8d} {s:8.3f} {1.0 / s:12.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
