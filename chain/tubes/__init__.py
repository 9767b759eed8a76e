"""Triode models and the built-in tube library.

:mod:`chain.tubes.model` holds the equations (Koren plate current, a
grid-conduction approximation, small-signal parameters);
:mod:`chain.tubes.library` holds the built-in parameter sets by type
designation.  Depends on numpy only.
"""

from chain.tubes.library import LIBRARY, UnknownTubeError, lookup, names
from chain.tubes.model import (
    Ratings,
    SmallSignal,
    TriodeModel,
    grid_current,
    grid_current_and_derivative,
    plate_current,
    plate_current_and_derivatives,
    small_signal,
)

__all__ = [
    "TriodeModel",
    "Ratings",
    "SmallSignal",
    "plate_current",
    "plate_current_and_derivatives",
    "small_signal",
    "grid_current",
    "grid_current_and_derivative",
    "LIBRARY",
    "lookup",
    "names",
    "UnknownTubeError",
]
