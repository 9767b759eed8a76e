"""Triode models and the built-in tube library.

:mod:`chain.tubes.model` holds the equations of the model forms (Koren with
a contact potential and a grid-conduction approximation; Dempwolf–Zölzer with
its grid current), their analytic derivatives and small-signal parameters;
:mod:`chain.tubes.library` holds the built-in types, whose parameters
:mod:`chain.tubes.fit` fits to the points in ``chain/tubes/data/`` and writes
into :mod:`chain.tubes.fitted`.  Depends on numpy only (the fit imports scipy
inside its functions).
"""

from chain.tubes.library import LIBRARY, UnknownTubeError, lookup, names
from chain.tubes.model import (
    FORM_FIELDS,
    FORMS,
    Ratings,
    SmallSignal,
    TriodeModel,
    grid_current,
    grid_current_and_derivative,
    plate_current,
    plate_current_and_derivatives,
    form_parameters,
    small_signal,
)

__all__ = [
    "FORMS",
    "FORM_FIELDS",
    "form_parameters",
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
