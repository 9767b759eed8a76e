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

#: names of this package and the module each comes from: imported on first use
#: (PEP 562), so that ``chain check``, which needs only ``chain.report.summary``,
#: does not load the renderers and the analysis behind them
_LAZY = {
    "SECTIONS": "chain.report.base", "Renderer": "chain.report.base",
    "SAFETY": "chain.report.data", "SCHEMA": "chain.report.data", "report_data": "chain.report.data",
    "JsonRenderer": "chain.report.jsonfmt", "MarkdownRenderer": "chain.report.markdown",
    "TextRenderer": "chain.report.text",
}


def __getattr__(name: str):
    import importlib

    if name == "RENDERERS":
        return _renderers()
    if name in _LAZY:
        value = getattr(importlib.import_module(_LAZY[name]), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'chain.report' has no attribute {name!r}")


def _renderers() -> dict:
    """Format name → renderer class (also ``chain.report.RENDERERS``)."""
    from chain.report.jsonfmt import JsonRenderer
    from chain.report.markdown import MarkdownRenderer
    from chain.report.text import TextRenderer

    return {"text": TextRenderer, "markdown": MarkdownRenderer, "json": JsonRenderer}

#: other accepted spellings of a format name
_ALIASES = {"md": "markdown"}


class ReportFormatError(ChainError, ValueError):
    """A file given as a JSON report is not one (code ``E601``), or is a
    damaged one (``E610`` wrong types or keys, ``E611`` NaN or Infinity,
    ``E612`` arrays that do not match their frequency grid)."""


def render(analysis, *, fmt: str = "text", sections: Sequence[str] | None = None,
           heading: str = "chain report") -> str:
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
    heading : str
        The first words of the title line (``"chain headroom"`` for the
        headroom command); the JSON document has no title line.

    Returns
    -------
    str
        The report, ending in a newline; identical for identical analyses
        (no dates, no machine-dependent text).
    """
    from chain.report.data import report_data

    return render_data(report_data(analysis), fmt=fmt, sections=sections, heading=heading)


def render_data(data: dict[str, Any], *, fmt: str = "text", sections: Sequence[str] | None = None,
                heading: str = "chain report") -> str:
    """As :func:`render`, from a report document (e.g. a JSON report read back)."""
    renderers = _renderers()
    try:
        renderer = renderers[_ALIASES.get(fmt, fmt)](heading=heading)
    except KeyError:
        raise ValueError(f"unknown report format {fmt!r}; expected one of {', '.join(renderers)}") from None
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
    from chain.report.data import SCHEMA

    name = str(source)
    if text is None:
        try:
            text = Path(source).read_text(encoding="utf-8")
        except OSError as exc:
            raise _bad(name, f"cannot read the file ({exc.strerror or exc})") from None
    constants: list[str] = []

    def constant(word: str) -> float:
        constants.append(word)
        return float("nan")

    try:
        data = json.loads(text, parse_constant=constant)
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
    if constants:
        raise ReportFormatError(_non_numbers(name, text))
    problems = _schema_problems(data) or _grid_problems(data)
    if problems:
        raise ReportFormatError([_damaged(name, text, code, where, message) for code, where, message in problems])
    return data


#: at most this many problems of one damaged report are listed
_MAX_LISTED = 8


def _damaged(name: str, text: str, code: str, where: tuple, message: str) -> Diagnostic:
    from chain.report.locate import json_position

    line, column, shown = json_position(text, where)
    return Diagnostic(code, "error", f"damaged report: {_pointer(where)}: {message}", Span(name, line, column, shown),
                      hint="write the report again with 'chain report --format json', or compare the netlists")


def _pointer(where: tuple) -> str:
    """``("stages", 0, "gain_db")`` → ``stages[0].gain_db``."""
    out = ""
    for part in where:
        out += f"[{part}]" if isinstance(part, int) else (f".{part}" if out else str(part))
    return out or "the document"


def _non_numbers(name: str, text: str) -> list[Diagnostic]:
    """E611 at each NaN, Infinity or -Infinity outside strings (JSON has no such numbers)."""
    import re

    found = []
    for m in re.finditer(r'"(?:[^"\\]|\\.)*"|(-?Infinity|NaN)', text):
        if m.group(1) is None:
            continue
        line = text.count("\n", 0, m.start()) + 1
        column = m.start() - (text.rfind("\n", 0, m.start()) + 1) + 1
        shown = text.splitlines()[line - 1] if text.splitlines() else ""
        found.append(Diagnostic("E611", "error", f"damaged report: '{m.group(1)}' is not a JSON number "
                                "(a report written by chain holds null for a value that is not finite)",
                                Span(name, line, column, shown),
                                hint="write the report again with 'chain report --format json'"))
        if len(found) == _MAX_LISTED:
            break
    return found


def _schema_problems(data: dict[str, Any]) -> list[tuple[str, tuple, str]]:
    """(code, path, message) for each place ``data`` breaks ``schema.json`` (E610)."""
    from jsonschema import Draft202012Validator

    validator = Draft202012Validator(schema())
    errors = sorted(validator.iter_errors(data), key=lambda e: [str(p) for p in e.absolute_path])
    out = []
    for err in errors[:_MAX_LISTED]:
        out.append(("E610", tuple(err.absolute_path), _schema_message(err)))
    return out


def _schema_message(err) -> str:
    """A plain sentence for one jsonschema error."""
    value = err.instance
    shown = json.dumps(value) if not isinstance(value, (dict, list)) else type(value).__name__
    if len(shown) > 40:
        shown = shown[:37] + "..."
    if err.validator == "type":
        wanted: list[str] = err.validator_value if isinstance(err.validator_value, list) else [err.validator_value]
        words = {"number": "a number", "integer": "a whole number", "string": "a text", "null": "null",
                 "object": "an object", "array": "an array", "boolean": "true or false"}
        return f"{shown} where {' or '.join(words.get(w, w) for w in wanted)} is expected"
    if err.validator == "required":
        return err.message.replace("is a required property", "is missing")
    if err.validator == "additionalProperties":
        return err.message.replace("Additional properties are not allowed", "unknown key(s)")
    if err.validator in ("anyOf", "oneOf"):
        return f"{shown} is neither of the forms allowed here"
    return err.message


def _grid_problems(data: dict[str, Any]) -> list[tuple[str, tuple, str]]:
    """E612: response arrays of another length than ``f_hz``; frequencies not increasing."""
    resp = data["response"]
    f = resp["f_hz"]
    out: list[tuple[str, tuple, str]] = []
    if any(not b > a for a, b in zip(f, f[1:])) or (f and not f[0] > 0):
        out.append(("E612", ("response", "f_hz"), "the frequencies must be positive and increasing"))
    for key in ("magnitude_db", "phase_deg", "zin_ohm_mag", "zout_ohm_mag"):
        values = resp.get(key)
        if values is not None and len(values) != len(f):
            out.append(("E612", ("response", key), f"{len(values)} values for {len(f)} frequencies"))
        elif key in ("magnitude_db", "phase_deg") and values and None in values and \
                any(v is not None for v in values):
            # chain writes null only for a value that is not finite; a response that is
            # finite on both sides of a point is finite at it
            k = values.index(None)
            out.append(("E612", ("response", key, k), f"null among numbers ({values.count(None)} of {len(values)} "
                        "points)"))
    return out


def schema() -> dict[str, Any]:
    """The JSON Schema (draft 2020-12) of ``chain-report/1`` documents: the
    core layout of ``schema.json`` and each study's section
    (:mod:`chain.report.sections`) as an optional key of its own."""
    from chain.report.sections import sections

    doc = json.loads((Path(__file__).with_name("schema.json")).read_text(encoding="utf-8"))
    for sec in sections():
        doc["properties"][sec.key] = {"anyOf": [{"type": "null"}, dict(sec.schema)]}
    return doc
