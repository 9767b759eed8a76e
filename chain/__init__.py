"""chain — analyse tube (valve) preamps written as a stage-level netlist.

House plan (imports flow one way; a module imports only rooms to its left)::

    errors, units, fileio → tubes → language → circuit → build → dc → smallsignal
        → formulas → headroom → transient → analysis → report | plot → changes → cli

* ``language`` turns text into frozen :class:`~chain.language.Design` objects
  and knows nothing of analysis;
* ``build`` is the only place that knows how a stage expands into parts;
* ``dc`` solves the nonlinear operating point (Koren triode model);
* ``smallsignal`` linearises each triode and computes the response numerically;
* ``formulas`` is the only room that imports lcapy and sympy;
* ``report``, ``plot`` and ``changes`` (diff, compare) read results and compute no new physics.

The one entry point for the API is :func:`analyze`.
"""

from chain.about import SAFETY, __version__

__all__ = ["__version__", "SAFETY", "analyze", "diff", "table", "bode"]


def analyze(source, *, headroom=True, options=None, level_v=None):
    """Analyse a netlist file (path) or a parsed Design; returns an
    :class:`~chain.analysis.Analysis`.  See :func:`chain.analysis.analyze`."""
    from chain.analysis import analyze as _analyze
    from chain.dc import SolveOptions

    return _analyze(source, headroom=headroom, options=options or SolveOptions(), level_v=level_v)


def diff(a, b, *, tol_db=0.05, tol_pct=0.5):
    """What changed between two analyses (or JSON reports); see :func:`chain.changes.diff`."""
    from chain.changes import diff as _diff

    return _diff(a, b, tol_db=tol_db, tol_pct=tol_pct)


def table(analysis) -> str:
    """The per-stage table of an :class:`~chain.analysis.Analysis` as plain text."""
    from chain.report import render

    return render(analysis, fmt="text", sections=("stages",))


def bode(analysis, *, nodes=None, ax=None):
    """The Bode plot of an analysis (see :func:`chain.plot.bode.bode`); ``.figure`` is the Figure."""
    from chain.plot.bode import bode as _bode

    shape = analysis.overall.shape
    extrema = () if shape is None else tuple(sorted(shape.peaks + shape.dips, key=lambda e: e.f_hz))
    return _bode(analysis.freq, nodes=nodes, corners=(analysis.overall.f_low_hz, analysis.overall.f_high_hz),
                 extrema=extrema, ax=ax, title=analysis.design.title,
                 unstable=analysis.unstable_note(), f_ref_hz=analysis.design.settings.reference_hz)
