"""Part and tube spread: tolerances, a batched Monte Carlo over the whole
small-signal analysis, and worst-case corners (see :mod:`chain.spread.montecarlo`)."""

from chain.spread.montecarlo import SpreadResult, spread
from chain.spread.tolerance import DEFAULTS, KINDS, Tolerance, from_design, varied_parts

__all__ = ["spread", "SpreadResult", "Tolerance", "DEFAULTS", "KINDS", "varied_parts", "from_design"]
