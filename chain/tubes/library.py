"""Built-in triode parameter sets, looked up by type designation.

The model parameters are fitted, reproducibly, to the plate-curve points in
``chain/tubes/data/<TYPE>.csv`` by :mod:`chain.tubes.fit`; the fitted values
live in the generated module :mod:`chain.tubes.fitted` (``python -m
chain.tubes.fit`` rewrites it).  Every type carries a fitted set for each
model form; :data:`LIBRARY_FORM` says which form the library uses.
Capacitances and ratings are typed in here, each with its source beside it.
None of the printed sources could be checked while this table was written,
so each is marked "from memory of <source>"; docs/models.md shows each type's
data against each model form and the residuals.
"""

from __future__ import annotations

import difflib
import re
from types import MappingProxyType
from typing import Mapping

from chain.tubes.fitted import PARAMS
from chain.tubes.model import Ratings, TriodeModel

__all__ = ["LIBRARY", "LIBRARY_FORM", "UnknownTubeError", "lookup", "names"]

_PF = 1e-12

#: The model form each built-in type uses.  The Koren form with its
#: contact-potential term meets the held-out handbook points of every type
#: and keeps mu within ±15 % of the handbook from 50 to 300 V and 0.2 to 2 mA;
#: the Dempwolf–Zölzer form, whose softplus cannot shift the curves by a
#: contact potential, misses the 12AX7's and 12AU7's second handbook gm by
#: 20–26 % (docs/models.md, residual tables).
LIBRARY_FORM = {"12AX7": "koren", "12AT7": "koren", "12AU7": "koren", "12AY7": "koren", "5751": "koren",
                "6SN7": "koren"}

_DATA = "fitted to the points of chain/tubes/data/{name}.csv by chain.tubes.fit ({sources})"


def _fitted(name: str) -> dict:
    """Keyword arguments of one type's fitted parameters, both forms, and its form."""
    out = {}
    for form_params in PARAMS[name].values():
        out.update(form_params)
    return {**out, "form": LIBRARY_FORM[name]}


# --------------------------------------------------------------------------- 12AX7
_12AX7 = TriodeModel(
    name="12AX7",
    aliases=("ECC83", "12AX7A", "7025"),
    cgk_f=1.6 * _PF,  # from memory of RCA RC-30: input capacitance, section 1
    cgp_f=1.7 * _PF,  # from memory of RCA RC-30: grid to plate
    cpk_f=0.46 * _PF,  # from memory of RCA RC-30: output capacitance, section 1 (0.34 pF section 2)
    ratings=Ratings(
        vp_max_v=300.0,  # from memory of Philips ECC83 data sheet (RCA design-max 330 V)
        pd_max_w=1.0,  # from memory of Philips ECC83 data sheet / RCA RC-30
        ik_max_a=8e-3,  # from memory of Philips ECC83 data sheet
        vhk_max_v=180.0,  # from memory of Philips ECC83 data sheet
        rg_max_ohm=2.0e6,  # from memory of Philips ECC83 data sheet, cathode bias (uncertain)
        vp_cold_max_v=550.0,  # from memory of Philips ECC83 data sheet (plate voltage without current)
        source="from memory of Philips ECC83 data sheet and RCA Receiving Tube Manual RC-30 (12AX7)",
    ),
    source=_DATA.format(name="12AX7", sources="from memory of RCA Receiving Tube Manual RC-30, 12AX7 plate characteristics"),
    **_fitted("12AX7"),
)

# --------------------------------------------------------------------------- 12AT7
_12AT7 = TriodeModel(
    name="12AT7",
    aliases=("ECC81",),
    cgk_f=2.2 * _PF,  # from memory of RCA RC-30: input capacitance
    cgp_f=1.5 * _PF,  # from memory of RCA RC-30: grid to plate
    cpk_f=0.5 * _PF,  # from memory of RCA RC-30: output capacitance, section 1 (0.4 pF section 2)
    ratings=Ratings(
        vp_max_v=300.0,  # from memory of Philips ECC81 data sheet
        pd_max_w=2.5,  # from memory of Philips ECC81 data sheet / RCA RC-30
        ik_max_a=15e-3,  # from memory of Philips ECC81 data sheet
        vhk_max_v=90.0,  # from memory of Philips ECC81 data sheet
        rg_max_ohm=1.0e6,  # from memory of Philips ECC81 data sheet, cathode bias (uncertain)
        vp_cold_max_v=550.0,  # from memory of Philips ECC81 data sheet (plate voltage without current)
        source="from memory of Philips ECC81 data sheet and RCA Receiving Tube Manual RC-30 (12AT7)",
    ),
    source=_DATA.format(name="12AT7", sources="from memory of RCA Receiving Tube Manual RC-30, 12AT7 plate characteristics"),
    **_fitted("12AT7"),
)

# --------------------------------------------------------------------------- 12AU7
_12AU7 = TriodeModel(
    name="12AU7",
    aliases=("ECC82", "12AU7A", "5814A"),
    cgk_f=1.6 * _PF,  # from memory of RCA RC-30: input capacitance
    cgp_f=1.5 * _PF,  # from memory of RCA RC-30: grid to plate
    cpk_f=0.5 * _PF,  # from memory of RCA RC-30: output capacitance, section 1 (0.35 pF section 2)
    ratings=Ratings(
        vp_max_v=300.0,  # from memory of Philips ECC82 data sheet
        pd_max_w=2.75,  # from memory of Philips ECC82 data sheet / RCA RC-30
        ik_max_a=20e-3,  # from memory of Philips ECC82 data sheet
        vhk_max_v=180.0,  # from memory of Philips ECC82 data sheet
        rg_max_ohm=1.0e6,  # from memory of Philips ECC82 data sheet, cathode bias (uncertain)
        vp_cold_max_v=550.0,  # from memory of Philips ECC82 data sheet (plate voltage without current)
        source="from memory of Philips ECC82 data sheet and RCA Receiving Tube Manual RC-30 (12AU7)",
    ),
    source=_DATA.format(name="12AU7", sources="from memory of RCA Receiving Tube Manual RC-30, 12AU7 plate characteristics"),
    **_fitted("12AU7"),
)

# --------------------------------------------------------------------------- 12AY7
_12AY7 = TriodeModel(
    name="12AY7",
    aliases=("6072", "6072A"),
    cgk_f=1.3 * _PF,  # from memory of RCA RC-30: input capacitance (uncertain)
    cgp_f=1.3 * _PF,  # from memory of RCA RC-30: grid to plate (uncertain)
    cpk_f=0.6 * _PF,  # from memory of RCA RC-30: output capacitance (uncertain)
    ratings=Ratings(
        vp_max_v=300.0,  # from memory of RCA RC-30 (12AY7)
        pd_max_w=1.5,  # from memory of RCA RC-30 (12AY7)
        ik_max_a=None,  # not known
        vhk_max_v=90.0,  # from memory of RCA RC-30 (12AY7) (uncertain)
        rg_max_ohm=None,  # not known
        source="from memory of RCA Receiving Tube Manual RC-30 (12AY7)",
    ),
    source=_DATA.format(name="12AY7", sources="from memory of RCA Receiving Tube Manual RC-30, 12AY7 plate characteristics"),
    **_fitted("12AY7"),
)

# --------------------------------------------------------------------------- 5751
_5751 = TriodeModel(
    name="5751",
    aliases=(),
    cgk_f=1.6 * _PF,  # taken equal to the 12AX7 (same construction family), not from a 5751 sheet
    cgp_f=1.7 * _PF,  # taken equal to the 12AX7, not from a 5751 sheet
    cpk_f=0.46 * _PF,  # taken equal to the 12AX7, not from a 5751 sheet
    ratings=Ratings(
        vp_max_v=300.0,  # from memory of GE 5751 data sheet (uncertain; 330 V also quoted)
        pd_max_w=0.8,  # from memory of GE 5751 data sheet
        ik_max_a=None,  # not known
        vhk_max_v=None,  # not known
        rg_max_ohm=None,  # not known
        source="from memory of GE 5751 data sheet",
    ),
    source=_DATA.format(name="5751", sources="from memory of the GE 5751 data sheet, plate characteristics"),
    **_fitted("5751"),
)

# --------------------------------------------------------------------------- 6SN7
_6SN7 = TriodeModel(
    name="6SN7",
    aliases=("6SN7GTB", "6SN7GTA"),
    cgk_f=3.0 * _PF,  # from memory of RCA RC-30: input capacitance (uncertain)
    cgp_f=4.0 * _PF,  # from memory of RCA RC-30: grid to plate (uncertain)
    cpk_f=1.2 * _PF,  # from memory of RCA RC-30: output capacitance (uncertain)
    ratings=Ratings(
        vp_max_v=450.0,  # from memory of RCA RC-30, 6SN7GTB design maximum
        pd_max_w=5.0,  # from memory of RCA RC-30, 6SN7GTB, each section (7.5 W both)
        ik_max_a=None,  # not known
        vhk_max_v=200.0,  # from memory of RCA RC-30, 6SN7GTB
        rg_max_ohm=None,  # not known
        source="from memory of RCA Receiving Tube Manual RC-30 (6SN7GTB); the older 6SN7GT "
        "has lower ratings and is deliberately not an alias",
    ),
    source=_DATA.format(name="6SN7", sources="from memory of RCA Receiving Tube Manual RC-30, 6SN7GTB plate characteristics"),
    **_fitted("6SN7"),
)

_ALL = (_12AX7, _12AT7, _12AU7, _12AY7, _5751, _6SN7)

#: Built-in models by canonical type name (read-only).  Aliases are resolved
#: by :func:`lookup`, not by this mapping.
LIBRARY: Mapping[str, TriodeModel] = MappingProxyType({m.name: m for m in _ALL})


def _normalise(name: str) -> str:
    """Upper case without spaces, hyphens, underscores or dots."""
    return re.sub(r"[\s\-_.]", "", name).upper()


def _build_index() -> Mapping[str, TriodeModel]:
    index: dict[str, TriodeModel] = {}
    for model in _ALL:
        for key in (model.name, *model.aliases):
            norm = _normalise(key)
            if norm in index:
                raise RuntimeError(f"duplicate tube name {key!r} in the built-in library")
            index[norm] = model
    return MappingProxyType(index)


_INDEX = _build_index()
_DISPLAY = {_normalise(k): k for m in _ALL for k in (m.name, *m.aliases)}


class UnknownTubeError(KeyError):
    """A tube name that is neither a built-in type nor an alias.

    Attributes
    ----------
    name : str
        The name asked for.
    suggestions : tuple of str
        Close matches, best first, one per model; an alias is shown with its
        canonical name, e.g. ``"ECC83 (= 12AX7)"``.
    """

    def __init__(self, name: str, suggestions: tuple[str, ...]):
        self.name = name
        self.suggestions = suggestions
        message = f"unknown tube type {name!r}"
        if suggestions:
            message += "; did you mean " + " or ".join(suggestions) + "?"
        else:
            message += "; known types: " + ", ".join(LIBRARY)
        super().__init__(message)

    def __str__(self) -> str:
        return str(self.args[0])

    def __reduce__(self):
        return (type(self), (self.name, self.suggestions))


def lookup(name: str) -> TriodeModel:
    """Built-in model by type designation or alias.

    Case, spaces, hyphens, underscores and dots are ignored
    (``"ecc-83"`` finds the 12AX7).

    Parameters
    ----------
    name : str
        Type designation, e.g. ``"12AX7"`` or ``"ECC83"``.

    Returns
    -------
    TriodeModel
        The built-in model (its ``name`` is the canonical designation).

    Raises
    ------
    UnknownTubeError
        (a ``KeyError``) if the name is unknown; the message suggests close
        matches found with :func:`difflib.get_close_matches`.
    """
    norm = _normalise(name)
    try:
        return _INDEX[norm]
    except KeyError:
        close = difflib.get_close_matches(norm, list(_INDEX), n=5, cutoff=0.6)
        seen: list[str] = []
        suggestions: list[str] = []
        for key in close:
            model = _INDEX[key]
            if model.name in seen:
                continue
            seen.append(model.name)
            shown = _DISPLAY[key]
            suggestions.append(shown if shown == model.name else f"{shown} (= {model.name})")
        raise UnknownTubeError(name, tuple(suggestions[:3])) from None


def names() -> tuple[str, ...]:
    """Canonical names of the built-in models, in library order."""
    return tuple(LIBRARY)
