"""Numbers as the JSON report writes them (a leaf of the report room).

Every number of the document keeps :data:`DIGITS` significant digits, so
that a report changes only where a value changed; absent and non-finite
values are ``null``; complex values are ``{"re": …, "im": …}``.
"""

from __future__ import annotations

import math

__all__ = ["DIGITS", "num", "cx"]

#: significant digits kept for every number of the document
DIGITS = 12


def num(value: float | None) -> float | None:
    """A JSON number: ``value`` rounded to :data:`DIGITS` significant digits,
    ``None`` for absent or non-finite values, ``0.0`` for ``-0.0``."""
    if value is None:
        return None
    x = float(value)
    if not math.isfinite(x):
        return None
    x = float(f"{x:.{DIGITS - 1}e}")
    return 0.0 if x == 0.0 else x


def cx(value: complex | None) -> dict[str, float | None] | None:
    """A complex number as ``{"re": …, "im": …}`` (each :func:`num`), or ``None``."""
    if value is None:
        return None
    z = complex(value)
    return {"re": num(z.real), "im": num(z.imag)}
