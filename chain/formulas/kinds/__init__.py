"""One module per stage kind: its quantities, its parts and its small-signal model.

=====================  ===========================================
kind                   module
=====================  ===========================================
``common-cathode``     :mod:`chain.formulas.kinds.common_cathode`
``cathode-follower``   :mod:`chain.formulas.kinds.cathode_follower`
``common-grid``        :mod:`chain.formulas.kinds.common_grid`
``cathodyne``          :mod:`chain.formulas.kinds.cathodyne`
``long-tailed-pair``   :mod:`chain.formulas.kinds.long_tailed_pair`
=====================  ===========================================

What a kind module offers is described in :mod:`chain.formulas.kinds.base`;
:mod:`chain.formulas.stage` solves any of them the same way.  Modules are
imported on first use.
"""

from __future__ import annotations

import importlib
from types import ModuleType

from chain.errors import FormulaError, error

__all__ = ["KIND_MODULES", "KINDS", "kind_module"]

#: stage kind → the module holding its closed forms
KIND_MODULES = {
    "common-cathode": "chain.formulas.kinds.common_cathode",
    "cathode-follower": "chain.formulas.kinds.cathode_follower",
    "common-grid": "chain.formulas.kinds.common_grid",
    "cathodyne": "chain.formulas.kinds.cathodyne",
    "long-tailed-pair": "chain.formulas.kinds.long_tailed_pair",
}
#: the stage kinds with closed forms
KINDS = tuple(KIND_MODULES)


def kind_module(kind: str, subject: str = "") -> ModuleType:
    """The module of a stage kind; E520 for a kind without closed forms."""
    try:
        return importlib.import_module(KIND_MODULES[kind])
    except KeyError:
        raise FormulaError(error("E520", f"stage {subject}: no closed forms for the kind {kind!r} "
                                 f"(kinds with formulas: {', '.join(KINDS)})", subject=subject)) from None
