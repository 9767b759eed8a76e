"""The HTML report: one self-contained page to share or print.

One file, nothing fetched when it is opened: the style sheet is inline, the
figures are inline SVG, and there is no script.  The content is the
Markdown report's (same facts, same number formatting: each section of
:class:`~chain.report.markdown.MarkdownRenderer` is turned into HTML here),
arranged for reading on a screen: the safety caution first, then the
schematic, the stage table, the overall response with its plots, headroom
with its plots, diagnostics, the rest of the tables, and the netlist itself.

This module reads results only.  The figures are passed in as SVG text by
the caller (:mod:`chain.page` draws them with :mod:`chain.plot`), so nothing
here imports matplotlib.
"""

from __future__ import annotations

import html
import re
from dataclasses import dataclass
from typing import Any, Sequence

from chain.report.markdown import MarkdownRenderer

__all__ = ["Figure", "render_html", "FIGURE_SLOTS"]

#: where a figure may be placed: after which section it is shown
FIGURE_SLOTS = ("schematic", "response", "headroom", "bias")


@dataclass(frozen=True, slots=True)
class Figure:
    """One inline figure: ``svg`` is the text of an SVG document."""

    #: one of :data:`FIGURE_SLOTS`
    slot: str
    caption: str
    svg: str


_CSS = """
:root { --ink: #22262c; --muted: #5f6670; --rule: #d5d9df; --accent: #1d3557; --warn: #8a3b12; }
* { box-sizing: border-box; }
body { font: 15px/1.45 system-ui, -apple-system, "Segoe UI", Roboto, "DejaVu Sans", sans-serif;
       color: var(--ink); margin: 0 auto; max-width: 1180px; padding: 24px 28px 60px; background: #fff; }
h1 { font-size: 26px; margin: 0 0 6px; color: var(--accent); }
h2 { font-size: 20px; margin: 34px 0 10px; padding-bottom: 4px; border-bottom: 2px solid var(--rule);
     color: var(--accent); }
h3 { font-size: 16px; margin: 22px 0 8px; }
p { margin: 8px 0; }
code, pre { font-family: "DejaVu Sans Mono", Menlo, Consolas, monospace; font-size: 13px; }
table { border-collapse: collapse; margin: 8px 0 14px; font-size: 13.5px; }
th, td { border-bottom: 1px solid var(--rule); padding: 4px 10px; text-align: left; vertical-align: top; }
th { background: #f1f3f6; font-weight: 600; }
td.num, th.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
.table-wrap { overflow-x: auto; }
.safety { border: 2px solid var(--warn); background: #fff6ef; color: var(--warn); padding: 10px 14px;
          border-radius: 6px; margin: 14px 0 8px; font-weight: 600; }
.meta td { border: none; padding: 1px 12px 1px 0; color: var(--muted); }
figure { margin: 16px 0 22px; }
figure .svg { overflow-x: auto; border: 1px solid var(--rule); border-radius: 4px; padding: 6px; }
figure svg { display: block; max-width: 100%; height: auto; }
figure:not(.wide) svg { width: 100%; max-width: 920px; }
figure.wide svg { min-width: 900px; }
figcaption { color: var(--muted); font-size: 13px; margin-top: 4px; }
pre.netlist { background: #f6f7f9; border: 1px solid var(--rule); padding: 12px 14px; overflow-x: auto;
              line-height: 1.35; }
ul.notes { color: var(--muted); font-size: 13.5px; }
nav { font-size: 13.5px; margin: 10px 0 0; }
nav a { color: var(--accent); margin-right: 12px; }
footer { margin-top: 40px; color: var(--muted); font-size: 12.5px; border-top: 1px solid var(--rule);
         padding-top: 8px; }
@media print {
  body { max-width: none; padding: 0; font-size: 11pt; }
  nav { display: none; }
  h2 { break-after: avoid; }
  figure, table, .safety { break-inside: avoid; }
  figure .svg { overflow: visible; border: none; }
  figure.wide svg { min-width: 0; }
  .table-wrap { overflow: visible; }
  pre.netlist { white-space: pre-wrap; }
  a { color: inherit; text-decoration: none; }
}
@page { size: A4 landscape; margin: 12mm; }
"""

#: Markdown sections, in page order, with the figure slot shown after each
_ORDER = (
    ("stages", None),
    ("stage_details", None),
    ("overall", None),
    ("response", "response"),
    ("headroom", "headroom"),
    ("diagnostics", None),
    ("rails", "bias"),
    ("capacitors", None),
    ("settings", None),
    ("parts", None),
)

_CELL_SPLIT = re.compile(r"(?<!\\)\|")


def _inline(text: str) -> str:
    """Escape, then the two inline forms the Markdown renderer writes: `code` and **bold**."""
    out = html.escape(text, quote=False)
    out = re.sub(r"`([^`]+)`", r"<code>\1</code>", out)
    out = re.sub(r"\*\*(.+?)\*\*", r"<strong>\1</strong>", out)
    return out


def _cells(line: str) -> list[str]:
    inner = line.strip()[1:-1]
    return [c.strip().replace("\\|", "|").replace("\\\\", "\\") for c in _CELL_SPLIT.split(inner)]


def markdown_to_html(lines: Sequence[str]) -> str:
    """The subset of Markdown that :class:`MarkdownRenderer` writes, as HTML:
    headings, pipe tables (``---:`` right-aligned), block quotes, ``*``
    bullet lists and paragraphs."""
    out: list[str] = []
    i = 0
    lines = list(lines)
    while i < len(lines):
        line = lines[i]
        if not line.strip():
            i += 1
            continue
        m = re.match(r"(#{1,3}) (.*)", line)
        if m:
            level = len(m.group(1))
            out.append(f"<h{level}>{_inline(m.group(2))}</h{level}>")
            i += 1
        elif line[:1] == "|":
            block = []
            while i < len(lines) and lines[i][:1] == "|":
                block.append(lines[i])
                i += 1
            out.append(_table(block))
        elif line[:2] == "> ":
            out.append(f"<blockquote>{_inline(line[2:])}</blockquote>")
            i += 1
        elif line[:2] == "* ":
            items = []
            while i < len(lines) and lines[i][:2] == "* ":
                items.append(f"<li>{_inline(lines[i][2:])}</li>")
                i += 1
            out.append('<ul class="notes">' + "".join(items) + "</ul>")
        else:
            para = []
            while i < len(lines) and lines[i].strip() and not re.match(r"(#{1,3} |\||> |\* )", lines[i]):
                para.append(_inline(lines[i]))
                i += 1
            out.append("<p>" + " ".join(para) + "</p>")
    return "\n".join(out)


def _table(block: list[str]) -> str:
    head = _cells(block[0])
    align = _cells(block[1]) if len(block) > 1 else []
    right = {k for k, a in enumerate(align) if a.endswith(":")}
    rows = [_cells(r) for r in block[2:]]

    def cls(k: int) -> str:
        return ' class="num"' if k in right else ""

    parts = ['<div class="table-wrap"><table>']
    if any(h for h in head):
        parts.append("<thead><tr>" + "".join(f"<th{cls(k)}>{_inline(h)}</th>" for k, h in enumerate(head))
                     + "</tr></thead>")
    parts.append("<tbody>")
    for r in rows:
        parts.append("<tr>" + "".join(f"<td{cls(k)}>{_inline(c)}</td>" for k, c in enumerate(r)) + "</tr>")
    parts.append("</tbody></table></div>")
    return "".join(parts)


def _svg_body(svg: str, prefix: str) -> str:
    """The ``<svg>`` element of an SVG document (no XML prolog or doctype),
    its element ids prefixed so that several figures on one page never
    share an id."""
    start = svg.find("<svg")
    if start < 0:
        raise ValueError("not an SVG document: no <svg> element")
    body = svg[start:].strip()
    body = re.sub(r'\bid="([^"]+)"', lambda m: f'id="{prefix}{m.group(1)}"', body)
    body = re.sub(r"url\(#([^)]+)\)", lambda m: f"url(#{prefix}{m.group(1)})", body)
    return re.sub(r'href="#([^"]+)"', lambda m: f'href="#{prefix}{m.group(1)}"', body)


def _figure(fig: Figure, index: int) -> str:
    wide = ' class="wide"' if fig.slot == "schematic" else ""
    return (f'<figure id="figure-{index}"{wide}><div class="svg">{_svg_body(fig.svg, f"f{index}-")}</div>'
            f"<figcaption>Figure {index}. {_inline(fig.caption)}</figcaption></figure>")


def render_html(data: dict[str, Any], *, figures: Sequence[Figure] = (), netlist_text: str | None = None) -> str:
    """The report document ``data`` (:func:`chain.report.report_data`) as one HTML page.

    Parameters
    ----------
    data
        The report document.
    figures
        Inline figures, each shown after its slot's section, in the order given.
    netlist_text
        The netlist as written, shown at the end (omitted when None).

    Returns
    -------
    str
        A complete HTML5 document; identical for identical input.
    """
    unknown = [f.slot for f in figures if f.slot not in FIGURE_SLOTS]
    if unknown:
        raise ValueError(f"unknown figure slot(s) {unknown}; known: {', '.join(FIGURE_SLOTS)}")
    md = MarkdownRenderer()
    n = data["netlist"]
    title = n["title"] or "untitled design"
    counter = iter(range(1, len(figures) + 1))

    def figures_at(slot: str) -> str:
        return "\n".join(_figure(f, next(counter)) for f in figures if f.slot == slot)

    body = [f"<h1>{_inline(title)}</h1>",
            '<table class="meta"><tbody>'
            f"<tr><td>netlist</td><td><code>{_inline(n['path'])}</code></td></tr>"
            f"<tr><td>netlist sha256</td><td><code>{n['sha256']}</code></td></tr>"
            f"<tr><td>chain version</td><td>{_inline(str(data['tool']['version']))}</td></tr>"
            "</tbody></table>",
            f'<p class="safety" role="note">{_inline(data["safety"])}</p>',
            '<nav><a href="#schematic">Schematic</a><a href="#stages">Stages</a><a href="#overall">Response</a>'
            '<a href="#headroom">Headroom</a><a href="#diagnostics">Diagnostics</a>'
            '<a href="#netlist">Netlist</a></nav>']
    if any(f.slot == "schematic" for f in figures):
        body.append('<section id="schematic"><h2>Schematic</h2>'
                    "<p>Drawn from the netlist as written: check that it is the circuit you meant.</p>"
                    + figures_at("schematic") + "</section>")
    anchors = {"stages": "stages", "overall": "overall", "headroom": "headroom", "diagnostics": "diagnostics"}
    for name, slot in _ORDER:
        lines = getattr(md, name)(data)
        if not lines and not (slot and any(f.slot == slot for f in figures)):
            continue
        section_id = f' id="{anchors[name]}"' if name in anchors else ""
        content = markdown_to_html(lines)
        if slot:
            content += "\n" + figures_at(slot)
        body.append(f"<section{section_id}>{content}</section>")
    if netlist_text is not None:
        body.append('<section id="netlist"><h2>The netlist</h2>'
                    f'<pre class="netlist">{html.escape(netlist_text, quote=False)}</pre></section>')
    body.append(f"<footer>Written by chain {_inline(str(data['tool']['version']))}, report format "
                f"{_inline(data['schema'])}. {_inline(data['safety'])}</footer>")
    return ("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
            '<meta name="viewport" content="width=device-width, initial-scale=1">\n'
            f"<title>{_inline(title)} — chain report</title>\n<style>{_CSS}</style>\n</head>\n<body>\n"
            + "\n".join(body) + "\n</body>\n</html>\n")

