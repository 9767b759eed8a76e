"""Built-in triode parameter sets, looked up by type designation.

Every value carries its source in a comment beside it.  None of the printed
sources could be checked while this table was written, so each is marked
"from memory of <source>"; docs/models.md lists the measured deviations of
each set from its handbook operating points.

How the Koren parameters were obtained (the same procedure for every type):
``ex`` fixed at 1.4 (the exponent of the published 12AX7 set in Koren 1996,
close to the Child–Langmuir 3/2); ``mu, kg1, kp, kvb`` fitted by least
squares to the logarithms of the handbook plate current, transconductance
and plate resistance at the handbook typical operating point(s) (the 250 V
point weighted 4×, a second point 1×), with a weak pull (weight 0.3) of
``mu`` toward the handbook amplification factor and a penalty (weight 2) on
variation of gm·rp over the decade of plate current below rated dissipation
at 250 V; ``kvb`` bounded to 100…30 000 V²; results rounded to 4 significant
figures.  The sets published in Koren 1996 were the starting point; they were
not kept because they miss the handbook points (12AX7: −21 % current at
250 V/−2 V and −80 % at 100 V/−1 V; 12AT7: +28 % current, +31 % gm) or let
gm·rp drift by ±18 % over that decade (12AU7).
"""

from __future__ import annotations

import difflib
import re
from types import MappingProxyType
from typing import Mapping

from chain.tubes.model import Ratings, TriodeModel

__all__ = ["LIBRARY", "UnknownTubeError", "lookup", "names"]

_PF = 1e-12

_FIT = (
    "Koren equation (Koren 1996); mu, kg1, kp, kvb fitted with ex = 1.4 to the handbook "
    "points {points} (procedure in chain/tubes/library.py and docs/models.md), "
    "starting from {start}"
)

# --------------------------------------------------------------------------- 12AX7
_12AX7 = TriodeModel(
    name="12AX7",
    aliases=("ECC83", "12AX7A", "7025"),
    mu=113.4,  # fitted; handbook mu 100 (from memory of RCA RC-30, 12AX7)
    ex=1.4,  # from memory of Koren 1996, 12AX7 set
    kg1=911.4,  # fitted
    kp=536.9,  # fitted
    kvb=24840.0,  # fitted (Koren 1996 used 300)
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
    source=_FIT.format(
        points="250 V/-2 V: 1.2 mA, 1.6 mA/V, 62.5 kOhm and 100 V/-1 V: 0.5 mA, 1.25 mA/V, 80 kOhm "
        "(from memory of RCA Receiving Tube Manual RC-30)",
        start="Koren 1996 12AX7 set mu=100, ex=1.4, kg1=1060, kp=600, kvb=300 (from memory), "
        "which gives -21 % current at 250 V/-2 V",
    ),
)

# --------------------------------------------------------------------------- 12AT7
_12AT7 = TriodeModel(
    name="12AT7",
    aliases=("ECC81",),
    mu=61.15,  # fitted; handbook mu 60 (from memory of RCA RC-30, 12AT7)
    ex=1.4,  # fixed (Koren 1996 used 1.35 for this type)
    kg1=627.8,  # fitted
    kp=642.5,  # fitted
    kvb=13430.0,  # fitted
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
    source=_FIT.format(
        points="250 V/-2 V: 10 mA, 5.5 mA/V, 10.9 kOhm and 100 V/-1 V (270 Ohm cathode resistor): "
        "3.7 mA, 4.0 mA/V, 15 kOhm (from memory of RCA Receiving Tube Manual RC-30)",
        start="Koren 1996 12AT7 set mu=60, ex=1.35, kg1=460, kp=300, kvb=300 (from memory), "
        "which gives +28 % current and +31 % gm at 250 V/-2 V",
    ),
)

# --------------------------------------------------------------------------- 12AU7
_12AU7 = TriodeModel(
    name="12AU7",
    aliases=("ECC82", "12AU7A", "5814A"),
    mu=16.79,  # fitted; handbook mu 17 (from memory of RCA RC-30, 12AU7)
    ex=1.4,  # fixed (Koren 1996 used 1.3 for this type)
    kg1=2599.0,  # fitted
    kp=739.9,  # fitted
    kvb=100.0,  # fitted, at the lower bound of the fit
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
    source=_FIT.format(
        points="250 V/-8.5 V: 10.5 mA, 2.2 mA/V, 7.7 kOhm and 100 V/0 V: 11.8 mA, 3.1 mA/V, "
        "6.25 kOhm (from memory of RCA Receiving Tube Manual RC-30)",
        start="Koren 1996 12AU7 set mu=21.5, ex=1.3, kg1=1180, kp=84, kvb=300 (from memory), "
        "which meets the 250 V point (-1 % current, +13 % gm) but lets gm*rp vary by +-18 % "
        "over 1.1-11 mA at 250 V",
    ),
)

# --------------------------------------------------------------------------- 12AY7
_12AY7 = TriodeModel(
    name="12AY7",
    aliases=("6072", "6072A"),
    mu=43.31,  # fitted; handbook mu 44 (from memory of RCA RC-30, 12AY7)
    ex=1.4,  # fixed
    kg1=1933.0,  # fitted
    kp=440.6,  # fitted
    kvb=12670.0,  # fitted
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
    source=_FIT.format(
        points="250 V/-4 V: 3.0 mA, 1.75 mA/V, 25 kOhm (from memory of RCA Receiving Tube "
        "Manual RC-30); one point only, so the curve away from it is extrapolation",
        start="mu=44 (no Koren 1996 set for this type)",
    ),
)

# --------------------------------------------------------------------------- 5751
_5751 = TriodeModel(
    name="5751",
    aliases=(),
    mu=68.88,  # fitted; handbook mu 70 (from memory of GE 5751 data sheet)
    ex=1.4,  # fixed
    kg1=1897.0,  # fitted
    kp=645.0,  # fitted
    kvb=14630.0,  # fitted
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
    source=_FIT.format(
        points="250 V/-3 V: 1.0 mA, 1.2 mA/V, 58 kOhm (from memory of GE 5751 data sheet); "
        "one point only, so the curve away from it is extrapolation",
        start="mu=70 (no Koren 1996 set for this type)",
    ),
)

# --------------------------------------------------------------------------- 6SN7
_6SN7 = TriodeModel(
    name="6SN7",
    aliases=("6SN7GTB", "6SN7GTA"),
    mu=19.9,  # fitted; handbook mu 20 (from memory of RCA RC-30, 6SN7GTB)
    ex=1.4,  # fixed
    kg1=1910.0,  # fitted
    kp=190.6,  # fitted
    kvb=120.9,  # fitted
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
    source=_FIT.format(
        points="250 V/-8 V: 9 mA, 2.6 mA/V, 7.7 kOhm and 90 V/0 V: 10 mA, 3.0 mA/V, 6.7 kOhm "
        "(from memory of RCA Receiving Tube Manual RC-30, 6SN7GTB)",
        start="mu=20 (no Koren 1996 set remembered for this type)",
    ),
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
