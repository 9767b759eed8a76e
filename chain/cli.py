"""The `chain` command line: argument parsing, exit codes, error display.

Exit status: 0 success; 1 ``diff``/``compare`` found differences beyond the
tolerance; 2 bad input (a message naming file, line and column); 3 an
internal error (a bug in chain: the message says so); 4 the analysis ran
but the circuit is unstable (a pole in the right half-plane: it will
oscillate; error E801 says where) — for ``diff``/``compare`` when any
voicing is, in place of 0 or 1.

Heavy modules (matplotlib, lcapy, sympy) are imported inside the commands
that use them, so ``chain check`` starts fast.
"""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path
from typing import TYPE_CHECKING, Sequence

# The matrices here are small (tens of nodes): BLAS threads only add overhead,
# and on a busy two-core machine they made the response several times slower.
# Set before numpy is first imported; a user's own setting wins.
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

from chain import bode as chain_bode  # noqa: E402
from chain.about import SAFETY, __version__  # noqa: E402
from chain.errors import ChainError, Diagnostic  # noqa: E402
from chain.fileio import OutputPathError, check_output, write_atomically  # noqa: E402

if TYPE_CHECKING:  # pragma: no cover - typing only
    from chain.transient.measure import DistortionPoint

__all__ = ["main", "run"]



class UsageError(Exception):
    """A command-line mistake that argparse cannot see (exit 2)."""


def _tolerance(text: str) -> float:
    """argparse type: a finite, non-negative number."""
    import math

    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a number: '{text}'") from None
    if not (math.isfinite(value) and value >= 0.0):
        raise argparse.ArgumentTypeError(f"must be a finite number ≥ 0, not '{text}'")
    return value


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="chain",
        description="Analyse a tube (valve) guitar or bass preamp written as a stage-level netlist: "
                    "operating points, gains, frequency response, headroom; compare voicings.",
        epilog=SAFETY,
    )
    p.add_argument("--version", action="version", version=f"chain {__version__}")
    p.add_argument("--traceback", action="store_true", help="show Python tracebacks (for developers)")
    sub = p.add_subparsers(dest="command", metavar="COMMAND", required=True)

    c = sub.add_parser("check", help="parse and validate netlists; print a summary of each",
                       description="Parse and validate each netlist and print its stages in signal order, "
                                   "networks and rails. Exit 2 on the first file with errors (all files are checked).")
    c.add_argument("files", nargs="+", metavar="FILE", help="netlist file(s)")

    b = sub.add_parser("bias", help="DC operating point of every stage, with ratings warnings",
                       description="Solve the DC operating point of the whole chain and print Vp, Vg, Vk, Ip, "
                                   "dissipation, gm, rp and mu per stage, the rails and the diagnostics.")
    b.add_argument("file", metavar="FILE")
    b.add_argument("--plot", metavar="PATH", help="draw every stage's plate characteristics with its DC and AC "
                   "load lines, bias line, dissipation limit and operating point, one panel per stage, to "
                   "PATH (.png or .svg)")

    r = sub.add_parser("report", help="the full analysis: stage table, response, corners, headroom",
                       description="Analyse the netlist and print the report.")
    r.add_argument("file", metavar="FILE")
    r.add_argument("--format", choices=("text", "markdown", "json", "html"), default="text",
                   help="html: one self-contained page (schematic, every plot inline, the netlist), "
                        "to share or print")
    r.add_argument("--output", metavar="PATH", help="write the report here instead of standard output")
    r.add_argument("--plot", metavar="PATH", help="also draw the Bode plot to PATH (.png or .svg)")
    r.add_argument("--no-headroom", action="store_true", help="skip the large-signal headroom analysis")

    pl = sub.add_parser("plot", help="draw the Bode plot (magnitude and phase) to PNG or SVG",
                        description="Draw the frequency response from the input to the output, corners marked.")
    pl.add_argument("file", metavar="FILE")
    pl.add_argument("--output", "-o", metavar="PATH", help="PNG or SVG file (default: FILE with .png)")
    pl.add_argument("--stages", action="store_true", help="also draw every stage's output node")
    pl.add_argument("--impedance", action="store_true",
                    help="also draw |Zin| and |Zout| against frequency, to PATH with -impedance added")
    pl.add_argument("--loop", action="store_true",
                    help="also draw the loop gain and margins of each feedback network, to PATH with "
                         "-loop-NETWORK added")
    pl.add_argument("--balance", action="store_true",
                    help="also draw the balance of each two-output stage (phase inverter) against frequency, "
                         "to PATH with -balance added")

    f = sub.add_parser("formulas", help="closed-form gain and impedances of each stage (symbolic)",
                       description="Print each stage's gain, input and output impedance as formulas in its "
                                   "own parts, and with the numbers at its operating point.")
    f.add_argument("file", metavar="FILE")
    f.add_argument("stage", nargs="?", metavar="STAGE", help="only this stage")
    f.add_argument("--latex", action="store_true", help="print LaTeX instead of plain text")

    t = sub.add_parser("fit", help="fit a triode model to measured plate-curve points; print a tube line",
                       description="Fit a triode model form to measured points (CSV with columns vpk_v, vgk_v, "
                                   "ip_a or ip_ma or ip_ua, optional ig_a/ig_ma), print the residuals per curve "
                                   "and a 'tube' line ready to paste into a netlist. Bad data: exit 2 with the "
                                   "file, line and column.")
    t.add_argument("file", metavar="CSV", help="measured points, one per line")
    t.add_argument("--form", choices=("koren", "dempwolf"), default="koren",
                   help="model form to fit (default koren: Koren with contact potential)")
    t.add_argument("--name", default="MEASURED", help="name of the fitted tube (default MEASURED)")
    t.add_argument("--like", metavar="TYPE", default="12AX7",
                   help="built-in type the tube inherits capacitances, ratings and grid current from (default 12AX7)")
    t.add_argument("--plot", metavar="PATH", help="draw the points against the fitted curves (PNG or SVG)")
    t.add_argument("--netlist", metavar="FILE",
                   help="copy this netlist with the tube line added and every stage of the --like type using it")
    t.add_argument("-o", "--output", metavar="PATH",
                   help="where to write that copy (default: FILE with -NAME before the suffix)")

    h = sub.add_parser("headroom", help="where each stage clips, which first, and how it distorts",
                       description="Large-signal transfer curves at mid-band: clipping points per stage, "
                                   "the first stage to clip, and the harmonic spectrum at the input level.")
    h.add_argument("file", metavar="FILE")
    h.add_argument("--level", metavar="LEVEL",
                   help="input level: peak volts (150mV), rms (100mVrms) or dB (-20dBV, -10dBu); default: the netlist's")
    h.add_argument("--plot", metavar="PATH", help="draw the transfer curves to "
                   "PATH exactly and the harmonics to PATH with -harmonics added before the suffix (.png or .svg)")

    dr = sub.add_parser("drive", help="time domain: what the chain does to a real signal",
                        description="Drive the whole chain in the time domain from its DC operating point: "
                                    "distortion of the settled response per frequency and level, the first "
                                    "clip beside the quasi-static one, a burst's bias shift and recovery "
                                    "(blocking), rail sag, and rendering a WAV file through the preamp.")
    dr.add_argument("file", metavar="FILE")
    dr.add_argument("--freq", metavar="HZ,…", default="1k", help="frequencies, e.g. 100,1k,5k (default 1k)")
    dr.add_argument("--level", metavar="VOLTS,…", help="source levels, peak, e.g. 10m,100m; default: the netlist's")
    dr.add_argument("--clip", action="store_true", help="first clip per frequency, time domain vs quasi-static")
    dr.add_argument("--burst", metavar="LOUD[,QUIET]", help="a loud burst then a quiet tone (default quiet: "
                    "LOUD/100) at the first frequency: each grid's bias shift and recovery")
    dr.add_argument("--sag", action="store_true", help="rail voltages under sustained drive")
    dr.add_argument("--wav", nargs=2, metavar=("IN", "OUT"), help="render the WAV file IN through the preamp to "
                    "OUT (32-bit float, mono)")
    dr.add_argument("--peak", metavar="VOLTS", help="with --wav: the source EMF the input's largest sample "
                    "becomes, e.g. 200mV (required)")
    dr.add_argument("--full-scale", metavar="VOLTS", help="with --wav: output volts written as 1.0 (default: "
                    "the output peak at -1 dBFS); a full scale the output exceeds is an error")
    dr.add_argument("--oversample", type=int, default=2, metavar="N",
                    help="solver steps per sample for --burst and --wav (default 2)")
    dr.add_argument("--plot", metavar="PATH", help="waveforms to PATH (.png or .svg); with --burst also "
                    "PATH-burst")

    d = sub.add_parser("diff", help="what a part change moved: two netlists or two JSON reports",
                       description="Compare two voicings. Exit 0 when nothing differs beyond the tolerance, "
                                   "1 when something does, 2 on error.")
    d.add_argument("a", metavar="A")
    d.add_argument("b", metavar="B")
    d.add_argument("--tolerance-db", type=_tolerance, default=0.05, metavar="DB",
                   help="smallest gain change reported, dB (default 0.05)")
    d.add_argument("--tolerance-pct", type=_tolerance, default=0.5, metavar="PCT",
                   help="smallest impedance, current or voltage change reported, %% (default 0.5)")
    d.add_argument("--plot", metavar="PATH", help="overlay both responses with their difference, .png or .svg")
    d.add_argument("--format", choices=("text", "json"), default="text")

    t = sub.add_parser("transfer", help="the whole chain's H(s): poles, zeros, coefficients, expression",
                       description="The transfer function from the source EMF to the output (or NODE) as a "
                                   "rational function in s: poles and zeros, gain, coefficients, a sympy "
                                   "expression or LaTeX; --symbolic keeps chosen parts as symbols.")
    t.add_argument("file", metavar="FILE")
    t.add_argument("--node", metavar="NODE", help="node to take H(s) at (default: the output)")
    t.add_argument("--symbolic", metavar="PART,PART,…",
                   help="parts kept as symbols, e.g. V1.Ck,V1.Rk (at most 10)")
    t.add_argument("--latex", action="store_true", help="print the expression as LaTeX")
    t.add_argument("--format", choices=("text", "json"), default="text")

    cm = sub.add_parser("compare", help="several voicings side by side",
                        description="Tabulate the key numbers of several netlists side by side; exit 1 "
                                    "if they differ.")
    cm.add_argument("files", nargs="+", metavar="FILE")
    cm.add_argument("--vary", metavar="PART=V1,V2,…",
                    help="analyse one netlist with one part set to each value in turn, e.g. "
                         "V1.Ck=680n,2u2,22u or tone.treble=2,5,8 (a pot takes knob settings 0-10)")
    cm.add_argument("--plot", metavar="PATH", help="overlay all responses, .png or .svg")

    sp = sub.add_parser("spread", help="many builds at once: part and tube tolerances, worst cases, what-ifs",
                        description="Monte Carlo over the part and tube tolerances (the netlist's 'tolerance' "
                                    "lines, else common-practice defaults): per stage the spread of the bias "
                                    "point, dissipation, gain, output impedance and first-clip level, which "
                                    "stage clips first, the unstable builds, the response band, and the "
                                    "builds that break a rating; worst-case corners beside the percentiles.")
    sp.add_argument("file", metavar="FILE")
    sp.add_argument("--samples", "-n", type=int, default=1000, metavar="N", help="builds drawn (default 1000)")
    sp.add_argument("--seed", type=int, default=1, help="random seed (default 1): the same seed, the same builds")
    sp.add_argument("--what-if", action="append", default=[], metavar="NAME=DEV",
                    help="hold a stage's tube or a part at a deviation in every build and show that build "
                         "alone beside the nominal one, e.g. V2=-25%% (a tube drawing 25%% less current); "
                         "may be repeated")
    sp.add_argument("--tolerance", action="append", default=[], metavar="WHAT=TOL",
                    help="override a 'tolerance' line: a kind (resistors, pots, capacitors, electrolytics, "
                         "inductors, tubes), a stage's tube or a part, e.g. resistors=1%% or V1.Ck=-20%%+50%%")
    sp.add_argument("--format", choices=("text", "markdown", "json"), default="text")
    sp.add_argument("--output", metavar="PATH", help="write the report here instead of standard output")
    sp.add_argument("--plot", metavar="PATH", help="draw the response band (5-95 %% of the builds) to PATH")

    sc = sub.add_parser("schematic", help="draw the netlist as a schematic (PNG or SVG)",
                        description="Draw the stages, rails, couplings and networks as written, so you can "
                                    "check that the file says what you meant. Nothing is analysed.")
    sc.add_argument("file", metavar="FILE")
    sc.add_argument("--output", "-o", metavar="PATH",
                    help="PNG or SVG file (default: FILE with -schematic.png in place of its suffix)")

    w = sub.add_parser("watch", help="run a command again each time its netlist is saved",
                       description="Run COMMAND (any chain command with its own arguments) now and again "
                                   "whenever one of its input files is saved; the screen is cleared and the "
                                   "output printed afresh. Ctrl-C stops.",
                       epilog="example: chain watch report netlists/lead_four_stage.chain --no-headroom")
    w.add_argument("rest", nargs=argparse.REMAINDER, metavar="COMMAND …",
                   help="the command to run and its arguments, as they would follow 'chain'")
    return p


class _AfterOneSecond:
    """A logging filter passing records only once the command has run for a second:
    progress of slow steps, and silence on fast ones."""

    def __init__(self):
        import time

        self._clock = time.monotonic
        self._start = time.monotonic()

    def filter(self, record) -> bool:
        return self._clock() - self._start >= 1.0


def _show_progress() -> None:
    """Send ``chain.progress`` messages to standard error, after the first second."""
    import logging

    log = logging.getLogger("chain.progress")
    if not any(getattr(h, "_chain", False) for h in log.handlers):
        handler = logging.StreamHandler(sys.stderr)
        handler.setFormatter(logging.Formatter("chain: %(message)s"))
        handler._chain = True  # type: ignore[attr-defined]
        log.addHandler(handler)
        log.setLevel(logging.INFO)
        log.propagate = False
    for h in log.handlers:
        if getattr(h, "_chain", False):
            h.filters = [_AfterOneSecond()]


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; return the exit status."""
    _show_progress()
    parser = _parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # argparse exits 2 on usage errors, 0 on --help
        return int(exc.code or 0)
    try:
        return _COMMANDS[args.command](args)
    except ChainError as exc:
        if args.traceback:
            raise
        _print_diagnostics(exc.diagnostics)
        return 2
    except (UsageError, OutputPathError) as exc:
        if args.traceback:
            raise
        print(f"chain: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        return 130
    except BrokenPipeError:  # the reader went away (`chain report … | head`)
        sys.stdout = open(os.devnull, "w")
        return 0
    except Exception as exc:  # an internal error: say so, never a bare traceback
        if args.traceback:
            raise
        print(f"chain: internal error ({type(exc).__name__}: {exc}). This is a bug in chain; "
              "run again with --traceback and report it.", file=sys.stderr)
        return 3


def run() -> None:
    """Console-script entry point."""
    sys.exit(main())


def _print_diagnostics(diagnostics: Sequence[Diagnostic]) -> None:
    errors = [d for d in diagnostics if d.severity == "error"]
    for d in diagnostics:
        print(d.render(), file=sys.stderr)
    if len(errors) > 1:
        print(f"{len(errors)} errors", file=sys.stderr)


#: exit status of a command whose circuit (or any of whose voicings) is unstable
EXIT_UNSTABLE = 4


def _unstable_status(analyses, *, echo: bool = True) -> int | None:
    """:data:`EXIT_UNSTABLE` when any analysis has a right-half-plane pole; with
    ``echo`` its E801 diagnostics go to standard error."""
    bad = []
    for a in analyses:
        if isinstance(a, dict):  # a JSON report read back
            if (a.get("stability") or {}).get("stable") is False:
                bad.append(a)
                if echo:
                    for d in a.get("diagnostics", ()):
                        if d.get("code") == "E801":
                            print(f"{a['netlist']['path']}: error E801: {d['message']}", file=sys.stderr)
        elif getattr(a, "unstable", False):
            bad.append(a)
            if echo:
                _print_diagnostics([d for d in a.diagnostics if d.code == "E801"])
    return EXIT_UNSTABLE if bad else None


def _inputs(args) -> list[str]:
    """The files a command reads (never to be overwritten by its output)."""
    found = [getattr(args, "file", None), getattr(args, "a", None), getattr(args, "b", None)]
    return [f for f in found + list(getattr(args, "files", None) or []) if f]


def _writable(path: str, args=None) -> str:
    """``path``, if it can be written and is not an input (a usage error otherwise).

    Called for every output before the analysis runs, so that a bad path
    costs no waiting and leaves nothing half-done.
    """
    check_output(path, inputs=_inputs(args) if args is not None else ())
    return path


def _figure_path(path: str, args=None) -> str:
    if Path(path).suffix.lower() not in (".png", ".svg"):
        raise UsageError(f"plot file must end in .png or .svg, not '{path}'")
    return _writable(path, args)


def _figure_names(path: str, names: Sequence[str]) -> list[str]:
    """Where the figures of one figure option go (README, "Output files"):
    the first is written to PATH exactly as given; each further one to PATH
    with ``-NAME`` added before the suffix (``h.png``, ``h-harmonics.png``).
    The first name is only a label and never appears in a file name."""
    target = Path(path)
    return [path] + [str(target.with_name(f"{target.stem}-{name}{target.suffix}")) for name in names[1:]]


# --------------------------------------------------------------------------- commands


def _cmd_check(args) -> int:
    from chain.build import load
    from chain.report.summary import check_summary

    status = 0
    for path in args.files:
        try:
            design, circuit, warnings = load(path)
        except ChainError as exc:
            _print_diagnostics(exc.diagnostics)
            status = 2
            continue
        print(check_summary(design, circuit))
        for w in warnings:
            print(w.render())
    return status


def _cmd_bias(args) -> int:
    from chain.build import load
    from chain.dc import solve
    from chain.report.summary import bias_table

    plot_path = _figure_path(args.plot, args) if args.plot else None
    design, circuit, warnings = load(args.file)
    dc = solve(circuit)
    print(bias_table(design, circuit, dc))
    for w in warnings:
        print(w.render())
    unstable = _bias_stability(design, circuit, dc)
    for d in unstable:
        print(d.render())
    if plot_path:
        from chain.analysis import analyze_design
        from chain.plot.bias import stage_plots

        # the AC load lines need the small-signal analysis (no headroom)
        analysis = analyze_design(design, circuit, warnings, headroom=False)
        plot = stage_plots(circuit, analysis.dc, ac_load_ohm=analysis.ac_load_ohm, title=design.title)
        _save_figure(plot.figure, plot_path)
        print(f"wrote {plot_path}")
    return EXIT_UNSTABLE if unstable else 0


def _bias_stability(design, circuit, dc):
    """E801 diagnostics of the circuit linearised at this operating point."""
    from chain.analysis import locate
    from chain.smallsignal import linearize
    from chain.smallsignal.stability import stability

    s = design.settings
    st = stability(linearize(circuit, dc), ref_hz=s.reference_hz, band_hz=(s.band_low_hz, s.band_high_hz))
    return [d for d in locate(st.diagnostics, circuit, design) if d.code == "E801"]


def _save_figure(figure, path: str) -> None:
    from chain.plot.files import save_figure

    save_figure(figure, path)


def _bode_nodes(analysis, with_stages: bool):
    out = analysis.circuit.output_node
    if not with_stages:
        return None
    nodes = [n for s in analysis.circuit.stages for n in s.outputs.values() if n != out]
    return [*dict.fromkeys(nodes), *analysis.circuit.outputs.values()]


def _cmd_plot(args) -> int:
    from chain.analysis import analyze

    path = _figure_path(args.output or str(Path(args.file).with_suffix(".png")), args)
    extra, balance_path = _figure_names(path, ["bode", "impedance", "balance"])[1:]
    if args.impedance:
        _writable(extra, args)
    if args.balance:
        _writable(balance_path, args)
    analysis = analyze(args.file, headroom=False)
    figures = [(path, chain_bode(analysis, nodes=_bode_nodes(analysis, args.stages)).figure)]
    if args.impedance:
        from chain.plot.bode import impedance

        figures.append((extra, impedance(analysis.freq, title=analysis.design.title).figure))
    if args.loop:
        from chain.plot.loop import loop_plot

        loops = analysis.stability.loops if analysis.stability is not None else ()
        if not loops:
            print("no feedback network closes a loop between stages: no loop gain to draw")
        for lg in loops:
            name = _figure_names(path, ["bode", f"loop-{lg.path.name}"])[1]
            _writable(name, args)
            figures.append((name, loop_plot(lg, title=analysis.design.title).figure))
    if args.balance:
        from chain.plot.bode import balance

        pairs = [s for s in analysis.circuit.stages if len(s.outputs) >= 2]
        if not pairs:
            raise UsageError(f"--balance: {args.file} has no stage with two outputs (a cathodyne or a "
                             "long-tailed pair)")
        figures.append((balance_path, balance(analysis.freq, pairs, title=analysis.design.title).figure))
    for name, figure in figures:
        _save_figure(figure, name)
        print(f"wrote {name}")
    return _unstable_status([analysis]) or 0


def _emit(text: str, output: str | None) -> None:
    """Print ``text``, or write it atomically to ``output``."""
    if output:
        write_atomically(output, text if text.endswith("\n") else text + "\n")
        print(f"wrote {output}")
    else:
        print(text)


def _cmd_report(args) -> int:
    from chain.analysis import analyze
    from chain.report import render

    plot_path = _figure_path(args.plot, args) if args.plot else None
    if args.output:
        _writable(args.output, args)
    analysis = analyze(args.file, headroom=not args.no_headroom)
    if args.format == "html":
        from chain.page import page

        text = page(analysis)
    else:
        text = render(analysis, fmt=args.format)
    figure = chain_bode(analysis).figure if plot_path else None
    _emit(text, args.output)
    if figure is not None and plot_path:
        _save_figure(figure, plot_path)
        print(f"wrote {plot_path}")
    # the report itself says it; echo to standard error only when it went to a file
    return _unstable_status([analysis], echo=bool(args.output)) or 0


def _cmd_diff(args) -> int:
    from chain.changes import diff, load_voicing, render_diff

    plot_path = _figure_path(args.plot, args) if args.plot else None
    a, b = load_voicing(args.a), load_voicing(args.b)
    result = diff(a, b, tol_db=args.tolerance_db, tol_pct=args.tolerance_pct)
    print(render_diff(result, fmt=args.format))
    if plot_path:
        from chain.plot.compare import overlay, title_of

        plot = overlay([a, b], [Path(args.a).stem, Path(args.b).stem], title=title_of([a, b]))
        _save_figure(plot.figure, plot_path)
        print(f"wrote {plot_path}")
    return _unstable_status([a, b]) or (1 if result.differs else 0)


def _varied(path: str, spec: str):
    """Analyses of one netlist with one part stepped through values (``PART=V1,V2,…``)."""
    from chain.analysis import analyze_design
    from chain.build import build, load, with_part
    from chain.errors import LanguageError
    from chain.language.validate import check
    from chain.units import QuantityError, parse_quantity

    part, eq, values = spec.partition("=")
    if not eq or not part or not values:
        raise UsageError(f"--vary wants PART=V1,V2,…, not '{spec}'")
    design, _, warnings = load(path)
    numbers = []
    for text in values.split(","):
        try:
            numbers.append(parse_quantity(text.strip()))
        except QuantityError as exc:
            raise UsageError(f"--vary {part}: bad value '{text}': {exc.message}") from None
    voicings, labels = [], []
    for text, value in zip(values.split(","), numbers):
        try:
            varied = with_part(design, part, value)
            check(varied)
        except KeyError as exc:
            raise UsageError(f"--vary: {exc.args[0]}") from None
        except LanguageError as exc:
            first = next(d for d in exc.diagnostics if d.severity == "error")
            raise UsageError(f"--vary {part}={text.strip()}: {first.message}") from None
        voicings.append(analyze_design(varied, build(varied), warnings))
        labels.append(f"{part}={text.strip()}")
    return voicings, labels


def _cmd_compare(args) -> int:
    from chain.changes import compare, load_voicing, render_compare

    plot_path = _figure_path(args.plot, args) if args.plot else None
    if args.vary:
        if len(args.files) != 1:
            raise UsageError("--vary takes exactly one netlist")
        voicings, labels = _varied(args.files[0], args.vary)
    else:
        voicings = [load_voicing(f) for f in args.files]
        labels = [Path(f).stem for f in args.files]
    result = compare(voicings, labels=labels)
    print(render_compare(result))
    if plot_path:
        from chain.plot.compare import overlay, title_of

        title = title_of(voicings)
        if args.vary:
            title = f"{title}: {args.vary.partition('=')[0]} stepped"
        plot = overlay(voicings, labels, diff_panel=len(voicings) == 2, title=title)
        _save_figure(plot.figure, plot_path)
        print(f"wrote {plot_path}")
    return _unstable_status(voicings) or (1 if result.differs else 0)


def _cmd_headroom(args) -> int:
    from chain.analysis import analyze
    from chain.report import render
    from chain.units import QuantityError, parse_level

    level = None
    if args.level is not None:
        try:
            level = parse_level(args.level)
        except QuantityError as exc:
            raise UsageError(f"--level {args.level}: {exc.message}") from None
        from chain.language.validate import RANGES

        low, high, _ = RANGES["level"]
        if not low <= level <= high:
            raise UsageError(f"--level {args.level} is outside the sensible range 1 µV to 100 V peak")
    plot_path = _figure_path(args.plot, args) if args.plot else None
    if plot_path:
        for name in _figure_names(plot_path, ["transfer", "harmonics"]):
            _writable(name, args)
    analysis = analyze(args.file, headroom=True, level_v=level)
    print(render(analysis, fmt="text", sections=("header", "safety", "headroom"), heading="chain headroom"))
    if plot_path:
        from chain.plot.headroom import plot_harmonics, plot_transfer

        h = analysis.headroom
        assert h is not None  # analyze(headroom=True) computes it
        drawn = [plot_transfer(h.curves, headroom=h, title=analysis.design.title).figure]
        if h.distortion is not None:
            drawn.append(plot_harmonics(h.distortion, title=analysis.design.title).figure)
        figures = zip(_figure_names(plot_path, ["transfer", "harmonics"][:len(drawn)]), drawn)
        for path, figure in figures:
            _save_figure(figure, str(path))
            print(f"wrote {path}")
    return _unstable_status([analysis]) or 0


def _cmd_formulas(args) -> int:
    from chain.build import load
    from chain.dc import solve
    from chain.formulas import stage_formulas, stage_parts
    from chain.report.summary import formulas_text

    design, circuit, _ = load(args.file)
    names = [s.name for s in circuit.stages]
    if args.stage is not None and args.stage not in names:
        raise UsageError(f"no stage '{args.stage}' in {args.file}; its stages are {', '.join(names)}")
    dc = solve(circuit)
    chosen = [args.stage] if args.stage else names
    f_ref = design.settings.reference_hz
    results = [stage_formulas(stage_parts(circuit, dc, n), f_hz=f_ref) for n in chosen]
    print(formulas_text(design, results, latex=args.latex), end="")
    return 0


def _cmd_transfer(args) -> int:
    from chain.build import load
    from chain.dc import solve
    from chain.formulas.transfer import symbolic_transfer
    from chain.report.transfer import transfer_document, transfer_json, transfer_text
    from chain.smallsignal import linearize
    from chain.smallsignal.poles import pole_zero
    from chain.smallsignal.stability import zeros_left_out_warning

    design, circuit, _ = load(args.file)
    node = args.node or circuit.output_node
    if node not in circuit.nodes():
        raise UsageError(f"no node '{node}' in {args.file}")
    parts = [p.strip() for p in args.symbolic.split(",") if p.strip()] if args.symbolic else []
    dc = solve(circuit)
    ss = linearize(circuit, dc)
    if ss.node_of.get(node, node) == "gnd":
        raise UsageError(f"node '{node}' is AC ground (a supply holds it): its H(s) is 0")
    pz = pole_zero(ss, node, ref_hz=design.settings.reference_hz)
    doc = transfer_document(design.title, pz, symbolic_transfer(ss, parts, node=node))
    print(transfer_json(doc) if args.format == "json" else transfer_text(doc, latex=args.latex), end="")
    unstable = _bias_stability(design, circuit, dc)
    notes = [zeros_left_out_warning(pz)] if pz.zeros_left_out else []
    _print_diagnostics([*notes, *unstable])
    return EXIT_UNSTABLE if unstable else 0


def _quantities(text: str, unit: str, option: str) -> list[float]:
    from chain.units import QuantityError, parse_quantity

    out = []
    for part in text.split(","):
        try:
            value = parse_quantity(part.strip(), unit)
        except QuantityError as exc:
            raise UsageError(f"{option} {text}: {exc.message}") from None
        if not (value > 0.0):
            raise UsageError(f"{option} {text}: values must be positive")
        out.append(value)
    return out


def _cmd_drive(args) -> int:
    from chain.build import load
    from chain.dc import solve
    from chain.report.transient import burst_text, clip_text, distortion_text, render_text, sag_text
    from chain.transient import compile_transient
    from chain.transient import measure

    freqs = _quantities(args.freq, "Hz", "--freq")
    if any(not 1.0 <= f <= 40e3 for f in freqs):
        raise UsageError(f"--freq {args.freq}: frequencies must lie between 1 Hz and 40 kHz")
    levels = _quantities(args.level, "V", "--level") if args.level else None
    if levels and any(not 1e-6 <= v <= 100.0 for v in levels):
        raise UsageError(f"--level {args.level} is outside the sensible range 1 µV to 100 V peak")
    if not 1 <= args.oversample <= 64:
        raise UsageError("--oversample must be between 1 and 64")
    loud = quiet = None
    if args.burst:
        vals = _quantities(args.burst, "V", "--burst")
        if len(vals) > 2:
            raise UsageError("--burst takes LOUD or LOUD,QUIET")
        loud = vals[0]
        quiet = vals[1] if len(vals) == 2 else loud / 100.0
    peak = full_scale = None
    if args.wav:
        if not args.peak:
            raise UsageError("--wav needs --peak VOLTS: the source level the input's largest sample becomes")
        peak = _quantities(args.peak, "V", "--peak")[0]
        if args.full_scale:
            full_scale = _quantities(args.full_scale, "V", "--full-scale")[0]
        if Path(args.wav[0]).resolve() == Path(args.wav[1]).resolve():
            raise UsageError("--wav IN OUT: the output would overwrite the input")
        _writable(args.wav[1], args)
    elif args.peak or args.full_scale:
        raise UsageError("--peak and --full-scale go with --wav")
    plot_path = _figure_path(args.plot, args) if args.plot else None
    names = ["periods", "burst"] if args.burst else ["periods"]
    if plot_path:
        for name in _figure_names(plot_path, names):
            _writable(name, args)

    design, circuit, _ = load(args.file)
    if levels is None:
        levels = [design.settings.level_v]
    dc = solve(circuit)
    system = compile_transient(circuit, dc=dc)
    wav_in = None
    if args.wav:
        from chain.transient.wav import read_wav

        wav_in = read_wav(args.wav[0])  # before the long work: a bad file fails fast
    sections = [f"chain drive — {design.title}", SAFETY, ""]
    unstable = _bias_stability(design, circuit, dc)
    points: tuple[DistortionPoint, ...] = ()
    if unstable:
        # no settled response exists: only runs in time (burst, WAV) show what it does
        sections.append("The circuit is unstable (E801 below): it has no settled response, so distortion, "
                        "first clip and sag are left out; --burst and --wav show it oscillating.\n")
    else:
        points = measure.distortion(system, freqs, levels)
        sections.append(distortion_text(points))
    if args.clip and not unstable:
        from chain.headroom import headroom

        qs = headroom(circuit, dc, level_v=levels[0], spectrum=False)
        first = qs.first
        quasi = (first.clip_input_v, first.stage, first.mechanism) if first is not None and \
            first.clip_input_v is not None else None
        guess = quasi[0] if quasi else 1e-3
        rows = [measure.first_clip(system, f, guess_v=guess) for f in freqs]
        sections.append(clip_text(rows, quasi))
    if args.sag and not unstable:
        sections.append(sag_text([(f, v, measure.sag(system, f, v)) for f in freqs for v in levels]))
    burst = None
    if args.burst:
        assert loud is not None and quiet is not None  # set with --burst
        with _progress("burst") as bar:
            burst = measure.burst(system, freqs[0], loud, quiet, oversample=args.oversample, progress=bar)
        sections.append(burst_text(burst))
    if wav_in is not None:
        from chain.fileio import write_atomically
        from chain.transient.wav import render, wav_bytes
        from chain.units import format_si

        assert peak is not None  # --wav needs --peak
        with _progress("render", enabled=wav_in.samples.size / wav_in.fs_hz > 1.0) as bar:
            out = render(system, wav_in, peak_v=peak, full_scale_v=full_scale, oversample=args.oversample,
                         progress=bar)
        write_atomically(args.wav[1], wav_bytes(out))
        mix = " (stereo mixed to mono)" if wav_in.channels == 2 else ""
        sections.append(
            f"Rendered {args.wav[0]}{mix}: {wav_in.samples.size / wav_in.fs_hz:.3g} s at {wav_in.fs_hz} Hz; its "
            f"largest sample = {format_si(peak, 'V')} source EMF.\nwrote {args.wav[1]}: output node minus its DC "
            f"voltage, 32-bit float mono, 1.0 = {format_si(out.full_scale_v, 'V')}; output peak "
            f"{format_si(out.output_peak_v, 'V')} "
            f"({20 * __import__('math').log10(max(out.output_peak_v, 1e-300) / out.full_scale_v):.1f} dBFS)\n")
    print(render_text(sections))
    for d in unstable:
        print(d.render())
    if plot_path:
        from chain.plot.transient import plot_burst, plot_periods

        drawn = {"periods": plot_periods(points, title=design.title).figure} if points else {}
        if burst is not None:
            drawn["burst"] = plot_burst(burst, title=design.title).figure
        for path, name in zip(_figure_names(plot_path, names), names):
            if name in drawn:
                _save_figure(drawn[name], str(path))
                print(f"wrote {path}")
    return EXIT_UNSTABLE if unstable else 0


class _progress:
    """A tqdm bar on stderr for long runs, as a ``progress(done, total)`` callback (or None)."""

    def __init__(self, what: str, *, enabled: bool = True):
        self.what = what
        self.enabled = enabled
        self.bar = None

    def __enter__(self):
        if not self.enabled:
            return None
        from tqdm import tqdm

        def update(done, total):
            if self.bar is None:
                self.bar = tqdm(total=total, desc=self.what, unit="sample", unit_scale=True, leave=False,
                                file=sys.stderr, disable=None)
            self.bar.update(done - self.bar.n)

        return update

    def __exit__(self, *exc):
        if self.bar is not None:
            self.bar.close()
        return False


def _cmd_fit(args) -> int:
    import re

    from chain.errors import Diagnostic as _D
    from chain.tubes import lookup
    from chain.tubes.fit import fit_points, fit_warnings, read_points, residual_table, tube_line

    try:
        base = lookup(args.like)
    except KeyError as exc:
        raise ChainError([_D("E707", "error", f"--like: {exc}")]) from None
    if not re.fullmatch(r"[A-Za-z0-9_][A-Za-z0-9_+\-]*", args.name):
        raise UsageError(f"--name must be a tube name (letters, digits, _ + -), not '{args.name}'")
    plot_path = _figure_path(args.plot) if args.plot else None
    data = read_points(args.file)
    result = fit_points(data, args.form, base=base)
    print(f"{args.file}: {len(data.points)} points, {args.form} form fitted to "
          f"{sum(1 for p in data.points if p.split == 'fit')}")
    print()
    print(residual_table(result))
    for w in fit_warnings(result, args.file):
        print(w.render(), file=sys.stderr)
    line = tube_line(args.name, result, like=base.name)
    print()
    print("tube line (paste into a netlist; capacitances, ratings"
          + (" and grid current" if not result.grid_fitted else "") + f" come from {base.name}):")
    print(line)
    if plot_path:
        from chain.plot.fit import plot_fit

        figure = plot_fit(data.points, [(f"{args.form} fit", result.model)],
                          title=f"{args.name}: {Path(args.file).name} against the {args.form} form").figure
        _save_figure(figure, plot_path)
        print(f"wrote {plot_path}")
    if args.netlist:
        out = args.output or str(Path(args.netlist).with_name(
            f"{Path(args.netlist).stem}-{args.name}{Path(args.netlist).suffix}"))
        _write_fitted_netlist(args.netlist, out, line, base.name, args.name)
    return 0


def _write_fitted_netlist(path: str, out: str, line: str, like: str, name: str) -> None:
    """Copy a netlist with ``line`` added and the stages of type ``like`` switched to ``name``."""
    import re

    from chain.build import load_text
    from chain.tubes import lookup

    try:
        text = Path(path).read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise UsageError(f"cannot read {path}: {exc}") from None
    lines = text.splitlines()
    stage_re = re.compile(r"^(\s*stage\s+\S+\s+\S+\s+)(\S+)(.*)$")
    first_stage, switched = None, 0
    for i, ln in enumerate(lines):
        m = stage_re.match(ln)
        if not m:
            continue
        first_stage = i if first_stage is None else first_stage
        try:
            same = lookup(m.group(2)).name == like
        except KeyError:
            same = False
        if same:
            lines[i] = m.group(1) + name + m.group(3)
            switched += 1
    if first_stage is None or switched == 0:
        raise UsageError(f"{path} has no stage using {like}; nothing to switch to {name}")
    lines.insert(first_stage, line)
    new = "\n".join(lines) + "\n"
    load_text(new, out)  # the copy must be a valid netlist before it is written
    write_atomically(_writable(out), new)
    print(f"wrote {out} ({switched} stage(s) switched from {like} to {name}); next: chain report {out}")


def _cmd_spread(args) -> int:
    from dataclasses import replace

    from chain.analysis import sweep_frequencies
    from chain.build import load
    from chain.dc import solve
    from chain.language.design import ToleranceDef, parse_tolerance
    from chain.report.jsonfmt import dumps
    from chain.report.spread import render_spread, spread_data
    from chain.spread import from_design, spread
    from chain.errors import Span

    if not 1 <= args.samples <= 100000:
        raise UsageError(f"--samples {args.samples}: give 1 to 100000 builds")
    plot_path = _figure_path(args.plot, args) if args.plot else None
    if args.output:
        _writable(args.output, args)
    fixed = {}
    for spec in args.what_if:
        name, sep, dev = spec.partition("=")
        if not sep or not name:
            raise UsageError(f"--what-if {spec}: write NAME=DEVIATION, e.g. V2=-25%")
        try:
            fixed[name] = _deviation(dev)
        except ValueError:
            raise UsageError(f"--what-if {spec}: the deviation must be a percentage above -100%, "
                             f"e.g. -25% or +10%") from None
    overrides = []
    for spec in args.tolerance:
        what, sep, tol = spec.partition("=")
        if not sep or not what:
            raise UsageError(f"--tolerance {spec}: write WHAT=TOLERANCE, e.g. resistors=1%")
        low, high = parse_tolerance(tol, Span("--tolerance", 1, len(what) + 2, spec))
        tube_type = what.lower()[:5] == "tube:"
        overrides.append(ToleranceDef(what[5:] if tube_type else what, low, high, tube_type,
                                      Span("--tolerance", 1, 1, spec)))
    design, circuit, _ = load(args.file)
    by_kind, by_part = from_design(replace(design, tolerances=design.tolerances + tuple(overrides)), circuit)
    dc = solve(circuit)
    try:
        result = spread(circuit, dc, f_hz=sweep_frequencies(design), reference_hz=design.settings.reference_hz,
                        samples=args.samples, seed=args.seed, by_kind=by_kind, by_part=by_part, fixed=fixed)
    except KeyError as exc:
        raise UsageError(f"--what-if: {exc.args[0]!r} is neither a stage nor a varied part "
                         f"(parts are named as in the report's parts list)") from None
    # an unstable nominal circuit: the report says so, E801 goes to standard error, exit 4 (as `report`)
    unstable = _bias_stability(design, circuit, dc)
    data = spread_data(result, path=design.path, title=design.title, diagnostics=unstable)
    text = dumps(data) if args.format == "json" else render_spread(data, fmt_name=args.format)
    figure = None
    if plot_path:
        from chain.plot.spread import envelope

        figure = envelope(data, title=design.title).figure
    _emit(text.rstrip("\n"), args.output)
    if figure is not None and plot_path:
        _save_figure(figure, plot_path)
        print(f"wrote {plot_path}")
    _print_diagnostics(unstable)
    return EXIT_UNSTABLE if unstable else 0


def _deviation(text: str) -> float:
    """``-25%`` → -0.25 (above -100 %)."""
    body = text.strip()
    value = float(body[:-1]) / 100.0 if body.endswith("%") else float(body)
    if not (value > -1.0 and value < 10.0):
        raise ValueError(text)
    return value


def _cmd_schematic(args) -> int:
    from chain.build import load
    from chain.plot.schematic import schematic

    source = Path(args.file)
    path = _figure_path(args.output or str(source.with_name(f"{source.stem}-schematic.png")), args)
    design, _, warnings = load(args.file)
    for w in warnings:
        print(w.render())
    _save_figure(schematic(design).figure, path)
    print(f"wrote {path}")
    return 0


def _watched_files(args) -> list[str]:
    """The input files of a parsed command (not its output files)."""
    files = []
    for key in ("file", "files", "a", "b"):
        value = getattr(args, key, None)
        if value:
            files.extend(value if isinstance(value, list) else [value])
    return files


def _cmd_watch(args) -> int:
    from chain.watch import watch

    rest = [a for a in args.rest if a != "--"] if args.rest[:1] == ["--"] else list(args.rest)
    if not rest:
        raise UsageError("watch needs a command to run, e.g. 'chain watch report FILE'")
    if rest[0] == "watch":
        raise UsageError("watch cannot watch itself")
    try:
        inner = _parser().parse_args(rest)
    except SystemExit as exc:  # argparse has printed the problem
        return int(exc.code or 0)
    files = _watched_files(inner)
    missing = [f for f in files if not Path(f).is_file()]
    if missing:
        raise UsageError(f"cannot watch {missing[0]}: no such file")
    if args.traceback:
        rest = ["--traceback", *rest]
    watch(files, lambda: main(rest))
    return 0


_COMMANDS = {
    "fit": _cmd_fit,
    "transfer": _cmd_transfer,
    "drive": _cmd_drive,
    "spread": _cmd_spread,
    "watch": _cmd_watch,
    "schematic": _cmd_schematic,
    "formulas": _cmd_formulas,
    "headroom": _cmd_headroom,
    "check": _cmd_check,
    "bias": _cmd_bias,
    "plot": _cmd_plot,
    "report": _cmd_report,
    "diff": _cmd_diff,
    "compare": _cmd_compare,
}


if __name__ == "__main__":
    run()
