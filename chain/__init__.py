"""chain — analyse tube (valve) preamps written as a stage-level netlist.

House plan (imports flow one way; a module imports only rooms to its left)::

    errors, units, fileio → tubes → language → circuit → build → dc → smallsignal
        → formulas → headroom → analysis → report | plot → changes → cli

* ``language`` turns text into frozen :class:`~chain.language.Design` objects
  and knows nothing of analysis;
* ``build`` is the only place that knows how a stage expands into parts;
* ``dc`` solves the nonlinear operating point (Koren triode model);
* ``smallsignal`` linearises each triode and computes the response numerically;
* ``formulas`` is the only room that imports lcapy and sympy;
* ``report``, ``plot`` and ``changes`` (diff, compare) read results and compute no new physics.

The one entry point for the API is :func:`analyze`.
"""

__version__ = "0.1.0"

#: the one-line safety reminder printed by every report and the CLI help
SAFETY = ("Safety: tube amplifiers hold lethal voltages, also after switch-off; these numbers are model "
          "estimates, not measurements. Work on live equipment only if qualified, under local electrical codes.")

__all__ = ["__version__", "SAFETY", "analyze", "diff"]


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
