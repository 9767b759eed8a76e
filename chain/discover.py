"""Finding the modules of a package that define a given name (its plug-ins).

Stage kinds (:mod:`chain.kinds`), studies (:mod:`chain.studies`) and their
report sections (:mod:`chain.report.sections`) are found this way, so that a
new one is a new file and nothing else changes.
"""

from __future__ import annotations

import importlib
import pkgutil
from types import ModuleType
from typing import Iterable

__all__ = ["modules_defining"]


def modules_defining(package: str, path: Iterable[str], *names: str) -> list[ModuleType]:
    """Every module of ``package`` (found on ``path``, the package's
    ``__path__``) that defines all of ``names``, in module-name order."""
    out = []
    for info in sorted(pkgutil.iter_modules(list(path)), key=lambda m: m.name):
        module = importlib.import_module(f"{package}.{info.name}")
        if all(hasattr(module, n) for n in names):
            out.append(module)
    return out
