"""Growth with the number of stages: DC solve, sweep and headroom timed apart,
against the numeric floor (a batched dense numpy solve and a sparse LU of the
same matrices) and the symbolic design reference (lcapy).

Circuits: N common-cathode 12AX7 stages (bypassed and unbypassed cathodes
alternating), each plate on its own decoupled rail from a stiff supply, a
three-knob tone network before the output.  No impedance is shared between
stages, so there is no feedback path: every cascade is stable, and the
script checks it (no natural frequency of the linearised circuit in the
right half-plane, counted by the argument principle) and says so per row.

Unpadded, each stage gains about 50× (bypassed) or 20× (unbypassed), so the
held mid-band network of the headroom analysis has a gain of about 10²⁸ at 16
stages, which double precision cannot represent: headroom refuses it (E404).
The headroom columns therefore use the *padded* cascade: the same stages with
a volume control between each pair (22 nF block into a 1 MΩ audio pot at
knob 3, 3.4 % of the track below the wiper, feeding the next grid), so the
net gain per stage is of order one (about 1.9 and 0.7 alternately) and the
whole chain's about 4·10⁴ at 64 stages (91 dB at 1 kHz, tone network
included).  Many stages then clip within the sweep (the column "clips"
counts them), so each one's onset is refined: the per-stage work is in the
timing.  The small-signal columns (dc … sparse,
lcapy) keep the unpadded cascade, as in the earlier runs, so they stay
comparable with them; both cascades are checked for stability.

Timed, best of REPEATS, on the same circuit objects (parsing and building
excluded):

dc        ``chain.dc.solve``
solve     ``chain.smallsignal.mna.solve``: the engine's solve of the same
          system as the floors below (every node's transfer from the source,
          refined to rounding level) — the like-for-like comparison
sweep     ``chain.smallsignal.response`` at POINTS frequencies (as the
          analysis runs it: transfers, input and output impedance) and
          ``stage_table`` at 1 kHz
headroom  ``chain.headroom.headroom`` of the padded cascade at 100 mV, and
          its peak traced memory (tracemalloc, one more run)
analysis  ``chain.analysis.analyze_design`` without headroom (best of REPEATS,
          and its peak traced memory): the whole
          small-signal analysis including what other sections add (poles,
          sensitivities)
numpy     the floor: ``numpy.linalg.solve`` of the stack of ``Y(s)`` for the
          source column, in blocks of 64 MB, no refinement, no impedances
sparse    the floor: ``scipy.sparse.linalg.splu`` of each ``Y(s)`` and one
          solve, no refinement, no impedances
lcapy     the flat symbolic solve of the whole circuit (chain.formulas.flat_solve)
          evaluated at the same frequencies, in a child killed after TIMEOUT s,
          only up to --lcapy-max-stages

Run from the repository root::

    python benchmarks/bench_growth.py                      # 1..64 stages
    python benchmarks/bench_growth.py --max-stages 16 --repeats 3
"""

from __future__ import annotations

import argparse
import os
import sys
import time
import tracemalloc
from pathlib import Path

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import numpy as np  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from chain.analysis import analyze_design  # noqa: E402
from chain.build import build  # noqa: E402
from chain.dc import solve  # noqa: E402
from chain.language import parse_text  # noqa: E402
from chain.smallsignal import linearize, response, stage_table  # noqa: E402
from chain.smallsignal.mna import assemble  # noqa: E402
from chain.smallsignal.mna import solve as mna_solve  # noqa: E402

VOLUME = """network volume: in -> out
  capacitor block in -- top 22n
  pot level cw top wiper out ccw gnd 1M audio 10% at 3
"""

TONE = """network tone: in -> out
  capacitor treble_c in -- t 390p
  resistor feed in -- a 47k
  capacitor bass_c a -- b 47n
  capacitor mid_c a -- m 22n
  pot treble cw t wiper out ccw b 250k audio 10% at 6
  rheostat bass m -- b 500k audio 10% at 5
  rheostat mid m -- gnd 20k linear at 4
"""


def stage_lines(n: int) -> list[str]:
    """The rails and stages of every cascade here: ``n`` common-cathode 12AX7
    stages, bypassed and unbypassed cathodes alternating, each plate on its
    own decoupled rail from the supply."""
    lines = [f"rail B{i} from HT drop 10k decouple 22u" for i in range(1, n + 1)]
    for i in range(1, n + 1):
        lines += [f"stage V{i} common-cathode 12AX7", f"  plate 100k from B{i}",
                  "  cathode 1k5 bypass 22u" if i % 2 else "  cathode 2k7", "  grid leak 1M stopper 33k"]
    return lines


def cascade(n: int, points: int) -> str:
    """The netlist of an ``n``-stage stable cascade."""
    lines = [f'title "growth {n} stages"', f"set points {points}", "supply HT 330V",
             "input into V1 resistance 10k"]
    lines += stage_lines(n)
    lines.append(TONE)
    lines += [f"couple V{i} -> V{i + 1} cap 22n" for i in range(1, n)]
    lines += [f"couple V{n} -> output via tone", "output load 1M", ""]
    return "\n".join(lines)


def padded_cascade(n: int, points: int) -> str:
    """The netlist of an ``n``-stage stable cascade with a volume control
    between the stages (for the headroom columns)."""
    lines = [f'title "padded growth {n} stages"', f"set points {points}", "supply HT 330V",
             "input into V1 resistance 10k"]
    lines += stage_lines(n)
    lines += [TONE, VOLUME]
    lines += [f"couple V{i} -> V{i + 1} via volume as volume{i}" for i in range(1, n)]
    lines += [f"couple V{n} -> output via tone", "output load 1M", ""]
    return "\n".join(lines)


def time_headroom(n: int, points: int, repeats: int = 1) -> tuple[float, float, int, bool]:
    """Headroom of the padded ``n``-stage cascade: (seconds, best of
    ``repeats``; peak MB; stages that clip; stable)."""
    from chain.headroom import headroom

    design = parse_text(padded_cascade(n, points), f"padded{n}.chain")
    circuit = build(design)
    dc = solve(circuit)
    ok = stable(assemble(linearize(circuit, dc)))
    got = {}

    def run():
        got["room"] = headroom(circuit, dc, level_v=0.1)

    seconds = best_of(run, repeats)
    room = got["room"]
    tracemalloc.start()
    headroom(circuit, dc, level_v=0.1)
    peak_mb = tracemalloc.get_traced_memory()[1] / 2**20
    tracemalloc.stop()
    return seconds, peak_mb, sum(r.clip_input_v is not None for r in room.stages), ok


def best_of(fn, repeats: int) -> float:
    best = float("inf")
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def stable(mna) -> bool:
    """No natural frequency of G + sC in the right half-plane, counted by the
    argument principle on det Y(jω) (chain.smallsignal.poles.rhp_count: the
    eigenvalues of a long chain of equal stages are scattered by rounding,
    some across the axis, so they cannot say)."""
    from chain.smallsignal.poles import rhp_count

    return rhp_count(mna) == 0


def numpy_floor(mna, s: np.ndarray) -> np.ndarray:
    n = mna.size
    b = mna.source_rhs()
    block = max(1, (64 * 2**20) // (16 * n * n))
    out = np.empty((s.size, n), dtype=complex)
    for lo in range(0, s.size, block):
        y = mna.g[None] + s[lo:lo + block, None, None] * mna.c[None]
        out[lo:lo + block] = np.linalg.solve(y, np.broadcast_to(b, (y.shape[0], n))[..., None])[..., 0]
    return out


def sparse_floor(mna, s: np.ndarray) -> np.ndarray:
    from scipy.sparse import csc_matrix
    from scipy.sparse.linalg import splu

    g, c = csc_matrix(mna.g), csc_matrix(mna.c)
    b = mna.source_rhs().astype(complex)
    out = np.empty((s.size, mna.size), dtype=complex)
    for k, sk in enumerate(s):
        out[k] = splu((g + sk * c).tocsc()).solve(b)
    return out


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--stages", default="1,2,4,8,16,32,64", help="comma-separated stage counts")
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--points", type=int, default=500)
    ap.add_argument("--headroom-max-stages", type=int, default=64)
    ap.add_argument("--lcapy-max-stages", type=int, default=2)
    ap.add_argument("--timeout", type=float, default=60.0, help="lcapy limit per chain, s")
    args = ap.parse_args(argv)
    counts = [int(x) for x in args.stages.split(",")]
    print(f"python {sys.version.split()[0]}, numpy {np.__version__}, {os.cpu_count()} CPUs, "
          f"load average {os.getloadavg()[0]:.2f}; {args.points} points; best of {args.repeats}")
    head = (f"{'stages':>6} {'unknowns':>8} {'stable':>6} {'dc ms':>8} {'solve ms':>9} {'sweep ms':>9} "
            f"{'method':>16} {'sweep MB':>8} {'headroom s':>10} {'head MB':>7} {'clips':>5} {'padded':>6} "
            f"{'analysis s':>10} {'an. MB':>6} {'numpy ms':>9} "
            f"{'sparse ms':>9} {'lcapy s':>8} {'numpy/solve':>11} {'sparse/solve':>12}")
    print(head)
    if args.headroom_max_stages >= 1:
        time_headroom(1, args.points)  # imports (scipy.optimize, scipy.interpolate) out of the timing
    heads: dict[int, tuple[float, float]] = {}
    whole: dict[int, tuple[float, float]] = {}
    dcs: dict[int, tuple[float, float]] = {}
    for n in counts:
        design = parse_text(cascade(n, args.points), f"growth{n}.chain")
        circuit = build(design)
        from chain.analysis import sweep_frequencies

        f = sweep_frequencies(design)
        s = 2j * np.pi * f
        dc = solve(circuit)
        ss = linearize(circuit, dc)
        mna = assemble(ss)
        t_dc = best_of(lambda: solve(circuit), args.repeats)
        result = {}

        def sweep():
            result["r"] = response(ss, f, stage_impedances=False)
            stage_table(circuit, dc, result["r"], 1000.0, 0.1)

        t_sweep = best_of(sweep, args.repeats)
        t_solve = best_of(lambda: mna_solve(mna, s, mna.source_rhs()), args.repeats)
        tracemalloc.start()
        sweep()
        peak_mb = tracemalloc.get_traced_memory()[1] / 2**20
        tracemalloc.stop()
        t_np = best_of(lambda: numpy_floor(mna, s), args.repeats)
        t_sp = best_of(lambda: sparse_floor(mna, s), args.repeats)
        out = mna.index[ss.node_of[circuit.output_node]]
        ref = numpy_floor(mna, s)[:, out]
        assert np.allclose(result["r"].output, ref, rtol=1e-6), "the engine disagrees with the numpy floor"
        t_head = mb_head = float("nan")
        clips, pad_ok = -1, "-"
        if n <= args.headroom_max_stages:
            try:
                t_head, mb_head, clips, ok = time_headroom(n, args.points, args.repeats)
                pad_ok = "yes" if ok else "NO"
            except Exception as exc:  # reported, not hidden
                print(f"  headroom of {n} stages: {type(exc).__name__}: {str(exc).splitlines()[0]}", file=sys.stderr)
        t_an = mb_an = float("nan")
        try:
            t_an = best_of(lambda: analyze_design(design, circuit, (), headroom=False), args.repeats)
            tracemalloc.start()
            analyze_design(design, circuit, (), headroom=False)
            mb_an = tracemalloc.get_traced_memory()[1] / 2**20
            tracemalloc.stop()
        except Exception as exc:  # an analysis section refusing the circuit is reported, not hidden
            tracemalloc.stop()
            print(f"  analysis of {n} stages: {type(exc).__name__}: {exc}", file=sys.stderr)
        t_lc = float("nan")
        if n <= args.lcapy_max_stages:
            from bench_chain import time_lcapy

            import lcapy  # noqa: F401  (imported before timing)
            got = time_lcapy(circuit, dc, f, args.timeout)
            if got is not None:
                t_lc = got[1]
        print(f"{n:6d} {mna.size:8d} {'yes' if stable(mna) else 'NO':>6} {t_dc * 1e3:8.1f} {t_solve * 1e3:9.1f} "
              f"{t_sweep * 1e3:9.1f} {result['r'].method:>16} {peak_mb:8.1f} {t_head:10.2f} {mb_head:7.1f} "
              f"{clips:5d} {pad_ok:>6} {t_an:10.2f} {mb_an:6.1f} "
              f"{t_np * 1e3:9.1f} {t_sp * 1e3:9.1f} {t_lc:8.2f} {t_np / t_solve:11.2f} {t_sp / t_solve:12.2f}",
              flush=True)
        heads[n] = (t_head, mb_head)
        whole[n] = (t_an, mb_an)
        dcs[n] = (t_dc, float("nan"))
    doubled = [(n, 2 * n) for n in counts if 2 * n in heads and n in heads]
    for what, table in (("headroom", heads), ("analysis", whole), ("dc solve", dcs)):
        if doubled:
            print(f"{what} per doubling of stages (time, memory): " + "; ".join(
                f"{a}->{b}: x{table[b][0] / table[a][0]:.2f}"
                + (f", x{table[b][1] / table[a][1]:.2f}" if np.isfinite(table[a][1]) else "")
                for a, b in doubled))
    return 0


if __name__ == "__main__":
    sys.exit(main())
