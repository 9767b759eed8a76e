"""Report sections of the studies (:mod:`chain.studies`), found by looking in this package.

Each module here that defines ``SECTION`` (a :class:`Section`) turns the
result of the study with the same key into

* its part of the report document (``data``: JSON-ready, SI units, with a
  JSON Schema fragment ``schema`` that :func:`chain.report.schema` merges in),
* what the text and Markdown reports print (``facts`` and ``tables``: the
  renderers give them their look, after the built-in section ``after``),
* the numbers ``diff`` and ``compare`` set side by side (``figures``).

Sections read the document only; they compute no new physics.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Callable, Mapping

from chain.discover import modules_defining

__all__ = ["Figure", "Table", "Section", "sections", "FIGURE_UNITS"]

#: units a figure may carry, and how a change of it is measured in diff:
#: a level in volts as a ratio in dB, dB as a difference, Hz in octaves,
#: ohms and plain numbers in per cent, text as "changed"
FIGURE_UNITS = ("V", "dB", "Hz", "ohm", "", "text")


@dataclass(frozen=True, slots=True)
class Figure:
    """One number (or word) of a section, for ``diff`` and ``compare``.

    ``subject`` is what it is about (``"output"``, a stage name, a supply),
    ``quantity`` which figure (``"hum at 100 Hz"``); together they match the
    same figure in two voicings.  ``unit`` is one of :data:`FIGURE_UNITS`."""

    subject: str
    quantity: str
    value: float | str | None
    unit: str


@dataclass(frozen=True, slots=True)
class Table:
    """A table of a section: column heads, rows of printed cells, and the
    columns to right-align (numbers)."""

    head: tuple[str, ...]
    rows: tuple[tuple[str, ...], ...]
    right: frozenset[int] = frozenset()


def _no_tables(doc: Mapping[str, Any]) -> list[Table]:
    return []


@dataclass(frozen=True, slots=True)
class Section:
    """The report side of one study (see the module docstring)."""

    #: the study's key: ``Analysis.studies[key]`` and ``document[key]``
    key: str
    #: the heading printed above it
    title: str
    #: the built-in section (:data:`chain.report.base.SECTIONS`) it follows
    after: str
    #: the study's result (None when it had nothing to say) → JSON-ready value or None
    data: Callable[[Any], Any]
    #: JSON Schema of ``data``'s output (``null`` is always allowed besides)
    schema: Mapping[str, Any]
    #: the section's document part → ``(label, printed value)`` lines
    facts: Callable[[Mapping[str, Any]], list[tuple[str, str]]]
    #: the section's document part → the figures diff and compare match up
    figures: Callable[[Mapping[str, Any]], list[Figure]]
    #: the section's document part → tables printed after the facts
    tables: Callable[[Mapping[str, Any]], list[Table]] = field(default=_no_tables)


def sections() -> tuple[Section, ...]:
    """Every section of this package, in the order of their keys."""
    found = [m.SECTION for m in modules_defining(__name__, __path__, "SECTION") if isinstance(m.SECTION, Section)]
    return tuple(sorted(found, key=lambda s: s.key))
