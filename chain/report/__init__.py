"""Renderers over results: they read, format and compute no new physics.

``render(analysis, fmt=…)`` builds the report document once
(:func:`report_data`, schema ``chain-report/1``) and hands it to one of three
renderers sharing a method set (one method per section, :data:`SECTIONS`):

* :class:`TextRenderer` — fixed width, one fact per line, for terminals and
  ``git diff``;
* :class:`MarkdownRenderer` — the same content as headings and tables;
* :class:`JsonRenderer` — the document itself, SI units, documented in
  ``docs/report-format.md`` and ``chain/report/schema.json``.

:func:`load_report` reads a JSON report back (for ``chain diff``).
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any, Sequence

from chain.errors import ChainError, Diagnostic, Span
from chain.report.base import SECTIONS, Renderer
from chain.report.data import SAFETY, SCHEMA, report_data
from chain.report.jsonfmt import JsonRenderer
from chain.report.markdown import MarkdownRenderer
from chain.report.text import TextRenderer

__all__ = [
    "render",
    "render_data",
    "report_data",
    "load_report",
    "schema",
    "ReportFormatError",
    "Renderer",
    "TextRenderer",
    "MarkdownRenderer",
    "JsonRenderer",
    "RENDERERS",
    "SECTIONS",
    "SCHEMA",
    "SAFETY",
]

#: format name → renderer class
RENDERERS = {"text": TextRenderer, "markdown": MarkdownRenderer, "json": JsonRenderer}
#: other accepted spellings of a format name
_ALIASES = {"md": "markdown"}


class ReportFormatError(ChainError, ValueError):
    """A file given as a JSON report is not one (code ``E601``)."""


def render(analysis, *, fmt: str = "text", sections: Sequence[str] | None = None) -> str:
    """The report of ``analysis`` as text.

    Parameters
    ----------
    analysis : chain.analysis.Analysis
    fmt : {"text", "markdown", "json"}
        Output format (``"md"`` is accepted for ``"markdown"``).
    sections : sequence of str or None
        Only these sections (names in :data:`SECTIONS`, rendered in report
        order); ``None`` renders them all.  ``("stages",)`` gives the
        per-stage table alone.

    Returns
    -------
    str
        The report, ending in a newline; identical for identical analyses
        (no dates, no machine-dependent text).
    """
    return render_data(report_data(analysis), fmt=fmt, sections=sections)


def render_data(data: dict[str, Any], *, fmt: str = "text", sections: Sequence[str] | None = None) -> str:
    """As :func:`render`, from a report document (e.g. a JSON report read back)."""
    try:
        renderer = RENDERERS[_ALIASES.get(fmt, fmt)]()
    except KeyError:
        raise ValueError(f"unknown report format {fmt!r}; expected one of {', '.join(RENDERERS)}") from None
    return renderer.render(data, sections)


def _bad(path: str, message: str, line: int = 1, column: int = 1) -> ReportFormatError:
    return ReportFormatError(Diagnostic("E601", "error", message, Span(path, line, column),
                                        hint="give a netlist (.chain) or a report written by "
                                             "'chain report --format json'"))


def load_report(source: str | Path, *, text: str | None = None) -> dict[str, Any]:
    """Read a JSON report (``chain-report/1``) back.

    Parameters
    ----------
    source
        Path of the file; with ``text`` given, only a name for messages.
    text
        The JSON text itself (then ``source`` is not opened).

    Raises
    ------
    ReportFormatError
        not JSON, or not a ``chain-report/1`` document (code E601).
    """
    name = str(source)
    if text is None:
        try:
            text = Path(source).read_text(encoding="utf-8")
        except OSError as exc:
            raise _bad(name, f"cannot read the file ({exc.strerror or exc})") from None
    try:
        data = json.loads(text)
    except json.JSONDecodeError as exc:
        raise _bad(name, f"not JSON: {exc.msg}", exc.lineno, exc.colno) from None
    if not isinstance(data, dict) or "schema" not in data:
        raise _bad(name, "not a chain report (no 'schema' key)")
    if data["schema"] != SCHEMA:
        raise _bad(name, f"report schema {data['schema']!r} is not the one this version reads ({SCHEMA!r})")
    missing = [k for k in ("netlist", "settings", "parts", "operating_points", "stages", "overall", "response",
                           "rails", "headroom") if k not in data]
    if missing:
        raise _bad(name, f"incomplete report: missing {', '.join(missing)}")
    return data


def schema() -> dict[str, Any]:
    """The JSON Schema (draft 2020-12) of ``chain-report/1`` documents."""
    return json.loads((Path(__file__).with_name("schema.json")).read_text(encoding="utf-8"))
