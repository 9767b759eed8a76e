"""The netlist language: text → frozen :class:`Design` objects, with located errors.

Entry points: :func:`parse_file` and :func:`parse_text` (syntax, names,
references and value ranges).  The topology checks that need the expanded
circuit live in :mod:`chain.build`.  The full reference of the language is
``docs/language.md``.
"""

from chain.language.design import (
    ANALYSED_KINDS,
    STAGE_KINDS,
    Cathode,
    Coupling,
    Design,
    Network,
    Output,
    Part,
    Pot,
    Rail,
    Section,
    Settings,
    Source,
    Stage,
    Stray,
    Supply,
    TubeDef,
)
from chain.language.parser import parse_file, parse_syntax, parse_text

__all__ = [
    "ANALYSED_KINDS", "STAGE_KINDS", "Cathode", "Coupling", "Design", "Network", "Output", "Part", "Pot",
    "Rail", "Section", "Settings", "Source", "Stage", "Stray", "Supply", "TubeDef",
    "parse_file", "parse_syntax", "parse_text",
]
