"""Number formatting shared by the text and Markdown renderers.

Every number is written with :data:`DIGITS` significant digits and an SI
prefix (:func:`chain.units.format_si`), dB with two decimals and angles with
one, so that a report changes only where a value changed at that precision.
Values read from a report document (:mod:`chain.report.data`) are SI floats
or ``None``; ``None`` is written :data:`NONE`.
"""

from __future__ import annotations

import math
from collections.abc import Set as AbstractSet

from chain.units import format_si

__all__ = ["DIGITS", "NONE", "ZERO_V", "ZERO_A", "si", "volts", "amps", "siemens", "plain", "db", "deg", "mag", "angle",
           "polar", "gain", "pct", "node_list", "markdown_escape", "markdown_table"]

#: significant digits of every printed quantity
DIGITS = 4
#: what an absent value prints as
NONE = "n/a"
#: voltages smaller than this print as 0 V (numerical zeros of the DC solve), V
ZERO_V = 1e-9
#: currents smaller than this print as 0 A (numerical zeros of the DC solve), A
ZERO_A = 1e-12


def si(value: float | None, unit: str = "") -> str:
    """``value`` with an SI prefix and ``unit`` (``"1.038 mA"``)."""
    if value is None:
        return NONE
    return format_si(float(value), unit, DIGITS)


def volts(value: float | None) -> str:
    """A voltage; magnitudes below :data:`ZERO_V` print as ``0 V``."""
    if value is not None and abs(value) < ZERO_V:
        value = 0.0
    return si(value, "V")


def amps(value: float | None) -> str:
    """A current; magnitudes below :data:`ZERO_A` print as ``0 A``."""
    if value is not None and abs(value) < ZERO_A:
        value = 0.0
    return si(value, "A")


def siemens(value: float | None) -> str:
    """A transconductance, always in mS (the unit tube data gives it in), to
    :data:`DIGITS` significant digits: ``0.8539 mS``, ``1.379 mS``."""
    if value is None:
        return NONE
    return f"{plain(float(value) * 1e3)} mS"


def plain(value: float | None, digits: int = DIGITS) -> str:
    """A dimensionless number to ``digits`` significant digits, positional,
    trailing zeros dropped (``103.4``, ``0.4151``, ``59.4``, ``33980``), no prefix."""
    if value is None:
        return NONE
    x = float(value)
    if not math.isfinite(x):
        return NONE if math.isnan(x) else ("-∞" if x < 0 else "∞")
    if x == 0.0:
        return "0"
    rounded = float(f"{x:.{digits - 1}e}")
    exp10 = int(f"{rounded:e}".split("e")[1])
    decimals = max(digits - 1 - exp10, 0)
    text = f"{rounded:.{decimals}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return "0" if float(text) == 0.0 else text


def db(value: float | None) -> str:
    """``"35.48 dB"``: two decimals, no negative zero."""
    if value is None:
        return NONE
    text = f"{float(value):.2f}"
    return ("0.00" if text == "-0.00" else text) + " dB"


def deg(value: float | None) -> str:
    """``"177.8°"``: one decimal, no negative zero."""
    if value is None:
        return NONE
    text = f"{float(value):.1f}"
    return ("0.0" if text == "-0.0" else text) + "°"


def mag(z: dict | None) -> float | None:
    """Magnitude of a ``{"re", "im"}`` complex value (``None`` if absent)."""
    if z is None or z["re"] is None or z["im"] is None:
        return None
    return math.hypot(z["re"], z["im"])


def angle(z: dict | None) -> float | None:
    """Angle of a ``{"re", "im"}`` complex value in degrees, (−180, 180]."""
    m = mag(z)
    if m is None or m == 0.0 or z is None:
        return None
    return math.degrees(math.atan2(z["im"], z["re"]))


def polar(z: dict | None, unit: str) -> str:
    """An impedance as ``"822.1 kΩ, phase -32.6°"``."""
    if mag(z) is None:
        return NONE
    return f"{si(mag(z), unit)}, phase {deg(angle(z))}"


def gain(z: dict | None, gain_db: float | None) -> str:
    """A complex gain as ``"59.41 V/V, 35.48 dB, phase 177.8°"``."""
    if mag(z) is None:
        return NONE
    return f"{plain(mag(z))} V/V, {db(gain_db)}, phase {deg(angle(z))}"


def pct(value: float | None) -> str:
    """A fraction as a percentage with one decimal (``0.666`` → ``"66.6 %"``)."""
    if value is None:
        return NONE
    text = f"{100.0 * float(value):.1f}"
    return ("0.0" if text == "-0.0" else text) + " %"


def node_list(nodes) -> str:
    """Nodes joined by an en dash: ``"B1 – V1.plate"``."""
    return " – ".join(nodes)


def markdown_escape(text: str) -> str:
    """Escape the characters that would break a table cell."""
    return str(text).replace("\\", "\\\\").replace("|", "\\|")


def markdown_table(head: list[str], rows: list[list[str]], right: AbstractSet[int] = frozenset()) -> list[str]:
    """A GitHub-flavoured Markdown pipe table; columns in ``right`` are right-aligned."""
    align = ["---:" if i in right else "---" for i in range(len(head))]
    out = ["| " + " | ".join(markdown_escape(h) for h in head) + " |", "| " + " | ".join(align) + " |"]
    out += ["| " + " | ".join(markdown_escape(c) for c in row) + " |" for row in rows]
    return out
