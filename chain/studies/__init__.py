"""Studies: analysis steps beyond the core, found by looking in this package.

The core of an analysis — DC solve, linearisation, response, stage table,
stability, sensitivity, noise, headroom — is run by :mod:`chain.analysis` in a
fixed order.  A *study* is any further question asked of the same results.
Each module in this package that defines ``STEP`` (a :class:`Study`) is one;
:func:`chain.analysis.analyze` runs every study after the core steps and keeps
its result under ``Analysis.studies[STEP.key]``.  A study's report section
lives in :mod:`chain.report.sections` under the same key, and from there
reaches the text, Markdown and JSON reports, ``diff`` and ``compare``.

So a new study is two files: ``chain/studies/NAME.py`` and
``chain/report/sections/NAME.py`` (plus its tests and docs); nothing else
changes.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable

from chain.circuit import Circuit
from chain.discover import modules_defining
from chain.dc import DcSolution
from chain.language.design import Design
from chain.smallsignal import OverallResult, Response, SmallSignalCircuit, StageRow

__all__ = ["Context", "Study", "studies"]


@dataclass(frozen=True, slots=True)
class Context:
    """What the core steps found, handed to every study (read only)."""

    design: Design
    circuit: Circuit
    dc: DcSolution
    #: the linearised circuit at the operating point
    ss: SmallSignalCircuit
    #: the frequency response over the design's band
    freq: Response
    stages: tuple[StageRow, ...]
    overall: OverallResult


@dataclass(frozen=True, slots=True)
class Study:
    """One study: ``run(context)`` returns its frozen result (or None when
    the study has nothing to say about this circuit)."""

    #: the key of its result in ``Analysis.studies`` and of its report section
    key: str
    #: what it answers, in a few words (for ``--help`` texts and docs)
    summary: str
    run: Callable[[Context], Any]


def studies() -> tuple[Study, ...]:
    """Every study of this package, in the order of their keys."""
    found = [m.STEP for m in modules_defining(__name__, __path__, "STEP") if isinstance(m.STEP, Study)]
    return tuple(sorted(found, key=lambda s: s.key))
