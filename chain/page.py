"""The shareable HTML page of an analysis: the report plus every figure.

Sits above :mod:`chain.report` and :mod:`chain.plot` in the house plan: it
draws the figures with :mod:`chain.plot`, keeps them as SVG text and hands
them to :func:`chain.report.html.render_html`, which reads results only.
"""

from __future__ import annotations

from chain.report.html import Figure, render_html

__all__ = ["figures", "page"]


def figures(analysis) -> list[Figure]:
    """Every figure of the page, drawn by :mod:`chain.plot` (imported inside
    the function: importing this module loads no matplotlib) and kept as SVG
    text."""
    from chain import bode
    from chain.plot.bias import stage_plots
    from chain.plot.bode import impedance
    from chain.plot.files import figure_svg
    from chain.plot.schematic import schematic
    from chain.units import format_si

    design = analysis.design
    title = design.title
    out_node = analysis.circuit.output_node
    nodes = [*dict.fromkeys(s.output for s in analysis.circuit.stages if s.output != out_node), out_node]
    out = [Figure("schematic", "The netlist drawn as a schematic.", figure_svg(schematic(design))),
           Figure("response", "Frequency response from the source to the output and to every stage output, "
                  "corners marked.", figure_svg(bode(analysis, nodes=nodes))),
           Figure("response", "Input and output impedance against frequency.",
                  figure_svg(impedance(analysis.freq, title=title)))]
    h = analysis.headroom
    if h is not None:
        from chain.plot.headroom import plot_harmonics, plot_transfer

        out.append(Figure("headroom", "Transfer curves at mid-band: every stage output against the source, "
                          "and each stage against its own input.",
                          figure_svg(plot_transfer(h.curves, headroom=h, title=title))))
        if h.distortion is not None:
            out.append(Figure("headroom", f"Harmonics at each stage output for a "
                              f"{format_si(h.distortion.level_v, 'V')} peak sine at the input.",
                              figure_svg(plot_harmonics(h.distortion, title=title))))
    plates = stage_plots(analysis.circuit, analysis.dc, ac_load_ohm=analysis.ac_load_ohm, title=title)
    out.append(Figure("bias", "Plate characteristics of every stage: DC and AC load lines, cathode bias line, "
                      "maximum plate dissipation and the operating point.", figure_svg(plates)))
    return out


def page(analysis) -> str:
    """The whole HTML page of an :class:`~chain.analysis.Analysis`: its report,
    every figure, and the netlist text."""
    from chain.report.data import report_data

    text = "\n".join(analysis.design.lines) if analysis.design.lines else None
    return render_html(report_data(analysis), figures=figures(analysis), netlist_text=text)
