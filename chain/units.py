"""Engineering numbers in and out: SI prefixes and the RKM code.

This is the only place where text such as ``100k``, ``4k7``, ``22nF`` or
``1.5M`` becomes a float and where floats become such text again.  Everything
else in `chain` works in SI base units (ohm, F, H, V, A, W, Hz, s).

Accepted input (:func:`parse_quantity`)
---------------------------------------
``[sign] number [prefix] [unit]``
    ``100``, ``-2``, ``+3.3``, ``.5``, ``2.2e-9``, ``100k``, ``4.7µ``,
    ``22nF``, ``100kΩ``, ``1kHz``, ``10mA``, ``5%``.
``[sign] digits letter digits [unit]`` -- the RKM code of IEC 60062
    The letter stands where the decimal point would be: ``4k7`` = 4700,
    ``R47`` = 0.47, ``2n2`` = 2.2e-9, ``47R`` = 47, ``k47`` = 470.

Design decisions
----------------
* Prefixes are case-sensitive SI prefixes: ``p n u µ μ m k M G T``
  (``u`` and both micro signs, U+00B5 and U+03BC, mean 1e-6).  ``m`` is milli,
  ``M`` is mega; ``meg`` is refused because it reads as milli to some tools
  and as mega to others.
* ``R`` is the RKM ohm marker (multiplier 1), never a unit and never the SI
  prefix ronna; it is refused where a quantity other than resistance is
  expected.  IEC 60062 writes the kilo letter of the RKM code as ``K``, so
  ``K`` is accepted in RKM form (``4K7``, ``47K``) but not after a decimal
  point or an exponent (``4.7K``), where SI spelling ``k`` is required.
  ``E`` is *not* an RKM marker: ``4E7`` is the scientific-notation number
  4e7, and ``47E`` is refused with a hint.
* An exponent and a prefix together (``1e3k``) are refused.
* Unit symbols: ``Ω`` (U+03A9 or U+2126), ``ohm``, ``ohms``, ``F``, ``H``,
  ``V``, ``A``, ``W``, ``Hz``, ``s``, ``%``.  ``%`` scales by 1/100 and takes
  no prefix and no exponent.  When the caller names the expected unit, a
  written symbol must match it; a bare number is then read in that unit (so
  ``5`` in a ``"%"`` field is 0.05).
* Numbers are converted by building one decimal literal and calling
  :func:`float` on it, so ``4k7`` gives exactly ``float("4.7e3")`` (correctly
  rounded), and :func:`format_rkm` with ``digits=None`` round-trips exactly.
"""

from __future__ import annotations

import math
from types import MappingProxyType

__all__ = [
    "PREFIXES",
    "QuantityError",
    "parse_quantity",
    "parse_level",
    "DBU_REF_V_RMS",
    "format_si",
    "format_rkm",
]

#: power-of-ten exponent of each accepted SI prefix symbol
_PREFIX_EXP = {
    "p": -12, "n": -9, "u": -6, "\u00b5": -6, "\u03bc": -6, "m": -3,
    "k": 3, "M": 6, "G": 9, "T": 12,
}
#: SI prefix symbol -> factor (SI Brochure, 9th edition, 2019, table of prefixes)
PREFIXES = MappingProxyType({p: float(f"1e{e}") for p, e in _PREFIX_EXP.items()})

#: letters that may stand for the decimal point in RKM form, with their exponent
_RKM_EXP = {**_PREFIX_EXP, "R": 0, "K": 3}

#: written unit symbol -> canonical unit
_SYMBOLS = {
    "\u03a9": "ohm", "\u2126": "ohm", "ohm": "ohm", "ohms": "ohm",
    "F": "F", "H": "H", "V": "V", "A": "A", "W": "W", "Hz": "Hz", "s": "s", "%": "%",
}
#: canonical unit -> what it measures (for messages)
_QUANTITY = {
    "ohm": "a resistance (Ω)", "F": "a capacitance (F)", "H": "an inductance (H)",
    "V": "a voltage (V)", "A": "a current (A)", "W": "a power (W)",
    "Hz": "a frequency (Hz)", "s": "a time (s)", "%": "a percentage (%)",
}
_DIGITS = "0123456789"

#: output: exponent -> SI prefix symbol (micro as U+00B5)
_SI_OUT = {-12: "p", -9: "n", -6: "\u00b5", -3: "m", 0: "", 3: "k", 6: "M", 9: "G", 12: "T"}
#: output: RKM letters by kind (resistors; capacitors and inductors)
_RKM_OUT = {
    "R": {0: "R", 3: "k", 6: "M", 9: "G", 12: "T"},
    "C": {-12: "p", -9: "n", -6: "u", -3: "m"},
    "L": {-12: "p", -9: "n", -6: "u", -3: "m"},
}


class QuantityError(ValueError):
    """A quantity could not be read.

    Attributes
    ----------
    text : str
        The text that was given.
    column : int
        0-based offset into `text` where the problem starts.
    message : str
        What is wrong.
    hint : str
        A suggestion ("write 1M for mega"), or ``""``.  ``str(err)`` is
        ``message`` followed by ``"; " + hint`` when there is one.
    """

    def __init__(self, text: str, column: int, message: str, hint: str = ""):
        self.text = text
        self.column = column
        self.message = message
        self.hint = hint
        super().__init__(f"{message}; {hint}" if hint else message)

    def __reduce__(self):
        return (type(self), (self.text, self.column, self.message, self.hint))


def _canonical_unit(unit: str | None) -> str | None:
    if unit is None:
        return None
    if unit in _QUANTITY:
        return unit
    if unit in _SYMBOLS:
        return _SYMBOLS[unit]
    raise ValueError(f"unknown unit {unit!r}; expected one of {sorted(_QUANTITY)}")


def _scan_digits(text: str, i: int) -> int:
    while i < len(text) and text[i] in _DIGITS:
        i += 1
    return i


def _suffix_hint(text: str, i: int) -> tuple[str, str]:
    """Message and hint for an unreadable suffix ``text[i:]``."""
    head, rest = text[:i], text[i:]
    if rest[:3].lower() == "meg":
        return "'meg' is ambiguous (m is milli, M is mega)", f"write {head}M for mega"
    for symbol in _SYMBOLS:
        if rest.lower() == symbol.lower():
            return (f"unknown unit {rest!r} (unit symbols are case-sensitive)",
                    f"write {head}{symbol}")
    return f"unexpected {rest[0]!r}", ""


def _vintage_farads(text: str) -> tuple[int, str, str] | None:
    """``(column, message, hint)`` for the capacitance units of old schematics
    (``mfd``/``MFD`` for microfarad, ``mmfd`` for picofarad), else None."""
    low = text.lower()
    for old, prefix, what in (("mmfd", "p", "micro-microfarad, i.e. picofarad"), ("mfd", "u", "microfarad")):
        if low.endswith(old) and len(low) > len(old):
            number = text[: -len(old)]
            return (len(number), f"'{text[len(number):]}' ({what} on old schematics) is not a unit symbol here",
                    f"write {number}{prefix} (or {number}{prefix}F)")
    return None


def parse_quantity(text: str, unit: str | None = None) -> float:
    """Read an engineering number such as ``100k``, ``4k7`` or ``22nF``.

    Parameters
    ----------
    text : str
        One token, without surrounding or inner whitespace.
    unit : str or None
        Expected unit: ``"ohm"`` (or ``"Ω"``), ``"F"``, ``"H"``, ``"V"``,
        ``"A"``, ``"W"``, ``"Hz"``, ``"s"`` or ``"%"``.  A unit symbol in
        `text` must then match it.  ``None`` accepts any known symbol.

    Returns
    -------
    float
        The value in SI base units (ohm, F, H, V, A, W, Hz, s; ``%`` as a
        fraction, so ``5%`` is 0.05).

    Raises
    ------
    QuantityError
        The text is not a quantity, or names another unit; ``column`` says
        where (0-based).
    ValueError
        `unit` is not one of the names above (a programming error).

    Examples
    --------
    >>> parse_quantity("4k7")
    4700.0
    >>> parse_quantity("22nF", "F")
    2.2e-08
    >>> parse_quantity("R47", "ohm")
    0.47
    """
    want = _canonical_unit(unit)

    def fail(column: int, message: str, hint: str = "") -> QuantityError:
        return QuantityError(text, column, message, hint)

    if text == "":
        raise fail(0, "empty quantity")
    for col, ch in enumerate(text):
        if ch.isspace():
            raise fail(col, "whitespace in a quantity",
                       f"write {''.join(text.split())} without spaces")
    if text.lower().lstrip("+-") in ("inf", "infinity", "nan"):
        raise fail(0, f"{text!r} is not a finite number")
    vintage = _vintage_farads(text)
    if vintage is not None:
        raise fail(*vintage)
    comma = text.find(",")
    if comma > 0 and text[comma - 1] in _DIGITS and text[comma + 1:comma + 2] in tuple(_DIGITS):
        fixed = text[:comma] + "." + text[comma + 1:]
        whole, digits = text[:comma], text[comma + 1:]
        stop = _scan_digits(digits, 0)
        letter: str | None = digits[stop:stop + 1]
        rkm = f" or {whole}{letter}{digits[:stop]}{digits[stop + 1:]}" if letter and letter in _RKM_EXP else ""
        raise fail(comma, "a comma in a number (the decimal point is '.')", f"write {fixed}{rkm}")

    n = len(text)
    sign = "-" if text[0] == "-" else ""
    i = _scan_digits(text, 1 if text[0] in "+-" else 0)
    int_digits = text[1 if text[0] in "+-" else 0:i]
    frac_digits = ""
    exponent, exponent_col = None, -1  # written exponent, as text
    letter, letter_col = None, -1  # prefix or RKM letter
    c = text[i] if i < n else ""

    if c in _RKM_EXP and i + 1 < n and text[i + 1] in _DIGITS:  # RKM: 4k7, R47
        letter, letter_col = c, i
        j = _scan_digits(text, i + 1)
        frac_digits, i = text[i + 1:j], j
        if i < n and text[i] == ".":
            raise fail(i, "decimal point in an RKM value (the letter is the decimal point)")
    else:
        if c == ".":
            j = _scan_digits(text, i + 1)
            frac_digits = text[i + 1:j]
            if not int_digits and not frac_digits:
                raise fail(i, "a decimal point needs digits")
            i = j
            if i < n and text[i] == ".":
                raise fail(i, "second decimal point")
        elif not int_digits:
            if c in _RKM_EXP:
                raise fail(i, f"{c!r} needs a number before it", f"write {text[:i]}1{text[i:]}")
            if c == "":
                raise fail(i, "sign without a number")
            raise fail(i, f"expected a number, found {c!r}")
        if i < n and text[i] in "eE":
            k = i + 1 + (i + 1 < n and text[i + 1] in "+-")
            j = _scan_digits(text, k)
            if j == k:
                rkm_like = text[i] == "E" and "." not in text[:i]
                hint = f"E is not an RKM marker: write {text[:i]}R" if rkm_like else ""
                raise fail(i, "exponent without digits", hint)
            exponent, exponent_col, i = text[i + 1:j], i, j
        c = text[i] if i < n else ""
        if c in _RKM_EXP:
            if c in "RK" and (exponent is not None or "." in text[:i]):
                fix = f"write {text[:i]}k" if c == "K" else f"write {text[:i]}"
                raise fail(i, f"{c!r} is an RKM letter and cannot follow a decimal point "
                              "or an exponent", fix)
            if text[i:i + 3].lower() == "meg":
                raise fail(i, *_suffix_hint(text, i))
            if exponent is not None:
                raise fail(i, "an exponent and a prefix together", "use one of them")
            letter, letter_col, i = c, i, i + 1
    if i < n and text[i] in _RKM_EXP:
        raise fail(i, "two prefixes", "keep one prefix")

    symbol_col, symbol = i, text[i:]
    if symbol and symbol not in _SYMBOLS:
        for length in range(len(symbol) - 1, 0, -1):  # a known symbol, then junk
            if symbol[:length] in _SYMBOLS:
                raise fail(i + length, f"unexpected {symbol[length:]!r} after the unit")
        raise fail(i, *_suffix_hint(text, i))
    got = _SYMBOLS.get(symbol)

    if got is not None and want is not None and got != want:
        raise fail(symbol_col, f"{text!r} is {_QUANTITY[got]} where {_QUANTITY[want]} is expected")
    if letter == "R" and (want or got or "ohm") != "ohm":
        raise fail(letter_col, f"R (the RKM ohm marker) where {_QUANTITY[want or got or 'ohm']} is expected",
                   "write the value with a prefix or a decimal point")
    scale = _RKM_EXP[letter] if letter is not None else 0
    if (got or want) == "%":
        if letter is not None:
            raise fail(letter_col, "a percentage takes no prefix")
        if exponent is not None:
            raise fail(exponent_col, "a percentage takes no exponent")
        scale = -2

    mantissa = f"{sign}{int_digits or '0'}.{frac_digits or '0'}"
    value = float(f"{mantissa}e{exponent if exponent is not None else scale}")
    if math.isinf(value):
        raise fail(0, f"{text!r} is out of range")
    return value


def _decimal_digits(value: float, digits: int | None) -> tuple[str, int]:
    """Significant digits ``ds`` and exponent ``q`` with ``|value| = int(ds) * 10**q``.

    ``digits=None`` gives the shortest digits that read back as `value`
    (Python's ``repr``); otherwise `value` rounded to `digits` significant
    digits.  Trailing zeros are stripped; zero gives ``("0", 0)``.
    """
    if digits is not None and (isinstance(digits, bool) or digits < 1):
        raise ValueError(f"digits must be a positive integer or None, not {digits!r}")
    text = repr(abs(value)) if digits is None else f"{abs(value):.{digits - 1}e}"
    mant, _, exp = text.partition("e")
    whole, _, frac = mant.partition(".")
    ds = (whole + frac).lstrip("0")
    q = int(exp or 0) - len(frac)
    if not ds:
        return "0", 0
    stripped = ds.rstrip("0")
    return stripped, q + len(ds) - len(stripped)


def _split_point(ds: str, shift: int) -> tuple[str, str]:
    """Integer and fraction digit strings of ``int(ds) * 10**shift``."""
    if shift >= 0:
        return ds + "0" * shift, ""
    if len(ds) > -shift:
        return ds[:shift], ds[shift:]
    return "", "0" * (-shift - len(ds)) + ds


def format_si(value: float, unit: str = "", digits: int = 3) -> str:
    """Engineering notation with an SI prefix, for display.

    The prefix is chosen so that the mantissa lies in [1, 1000) after
    rounding to `digits` significant digits; trailing zeros are dropped.
    Values beyond the prefixes p..T are written with an exponent.

    Parameters
    ----------
    value : float
        Value in SI base units.
    unit : str
        Unit symbol appended after a space (``"Ω"``, ``"A"``, ...); with
        ``""`` the prefix follows the number directly (``"4.7k"``).
    digits : int
        Significant digits (>= 1).

    Returns
    -------
    str
        ``"1.52 mA"``, ``"4.7 kΩ"``, ``"0 V"``, ``"-3.3 V"``; ``"n/a"`` for
        NaN; ``"∞ Ω"`` / ``"-∞ Ω"`` for infinities.  Micro is written ``µ``.

    Examples
    --------
    >>> format_si(1.52e-3, "A")
    '1.52 mA'
    >>> format_si(4700, "Ω")
    '4.7 kΩ'
    """
    if math.isnan(value):
        return "n/a"
    sign = "-" if value < 0 else ""
    if math.isinf(value):
        return f"{sign}\u221e {unit}" if unit else f"{sign}\u221e"
    ds, q = _decimal_digits(value, digits)
    if ds == "0":
        number, prefix = "0", ""
    else:
        exp10 = q + len(ds) - 1
        eng = 3 * (exp10 // 3)
        if eng in _SI_OUT:
            whole, frac = _split_point(ds, q - eng)
            number = sign + (whole or "0") + ("." + frac if frac else "")
            prefix = _SI_OUT[eng]
        else:
            frac = ds[1:]
            number = f"{sign}{ds[0]}{'.' + frac if frac else ''}e{exp10}"
            prefix = ""
    return f"{number} {prefix}{unit}" if unit else f"{number}{prefix}"


def format_rkm(value: float, kind: str = "R", *, digits: int | None = None) -> str:
    """Write a part value in the RKM code of IEC 60062 (``4k7``, ``R47``, ``2n2``).

    The letter replaces the decimal point.  Resistors (``kind="R"``) use
    ``R k M G T``; values below 1 ohm are written ``R47``, ``R047``.
    Capacitors and inductors (``kind="C"`` or ``"L"``; farads, henries) use
    ``p n u m``; values of 1 F/H or more have no prefix letter and are
    written as plain decimals (``2.5`` for a 2.5 H choke).  The letter is
    chosen so that the part before it lies in [1, 1000) where possible.

    Parameters
    ----------
    value : float
        Value in ohm, F or H (finite).
    kind : {"R", "C", "L"}
        Part kind, which selects the letters.
    digits : int or None
        Significant digits; ``None`` (default) writes the shortest digits that
        read back exactly, so ``parse_quantity(format_rkm(x)) == x``.

    Returns
    -------
    str
        ``"4k7"``, ``"R47"``, ``"1M"``, ``"47R"``, ``"0R"``, ``"2n2"``, ``"100n"``.

    Raises
    ------
    ValueError
        Unknown `kind`, non-finite `value` or bad `digits`.

    Examples
    --------
    >>> format_rkm(4700)
    '4k7'
    >>> format_rkm(2.2e-9, "C")
    '2n2'
    """
    if kind not in _RKM_OUT:
        raise ValueError(f"kind must be one of {sorted(_RKM_OUT)}, not {kind!r}")
    if not math.isfinite(value):
        raise ValueError(f"cannot write {value!r} in RKM code")
    letters = _RKM_OUT[kind]
    sign = "-" if value < 0 else ""
    ds, q = _decimal_digits(value, digits)
    if ds == "0":
        return "0R" if kind == "R" else "0"
    exp10 = q + len(ds) - 1
    eng = min(max(3 * (exp10 // 3), min(letters)), max(letters))
    if kind != "R" and exp10 >= 0:
        whole, frac = _split_point(ds, q)
        return sign + whole + ("." + frac if frac else "")
    whole, frac = _split_point(ds, q - eng)
    return sign + whole + letters[eng] + frac


#: 0 dBu in volts rms: 1 mW into 600 ohm, sqrt(0.6) V (the audio-engineering reference)
DBU_REF_V_RMS = math.sqrt(0.6)


def parse_level(text: str, form: str | None = None) -> float:
    """A signal level as its peak voltage, V.

    ``text`` is a voltage (``150m``, ``0.15V``; ``100mVrms`` says rms in the
    value itself) or a level in dB: ``-20dBV`` (dB re 1 V rms) or ``-10dBu``
    (dB re :data:`DBU_REF_V_RMS`, 0.7746 V rms).  ``form`` is ``"peak"``
    (the default for voltages) or ``"rms"``.  A sine's peak is √2 times its
    rms value; dB levels are rms by definition.

    Raises
    ------
    QuantityError
        for a malformed number, or a dB level said to be a peak.
    """
    t = text.strip()
    low = t.lower()
    for suffix, ref in (("dbv", 1.0), ("dbu", DBU_REF_V_RMS)):
        if low.endswith(suffix):
            number = t[:-len(suffix)]
            try:
                db = float(number)
            except ValueError:
                raise QuantityError(text, 0, f"'{number}' is not a number of dB",
                                    "write a level such as -20dBV or -10dBu") from None
            if form == "peak":
                raise QuantityError(text, 0, f"a level in {t[-3:]} is an rms level, not a peak",
                                    f"write '{t}' alone, or give the peak voltage")
            if not math.isfinite(db):
                raise QuantityError(text, 0, "the level must be finite")
            return ref * 10.0 ** (db / 20.0) * math.sqrt(2.0)
    if low.endswith("rms"):
        if form == "peak":
            raise QuantityError(text, len(t) - 3, "the value says rms and the line says peak")
        t, form = t[:-3], "rms"
    volts = parse_quantity(t, "V")
    return volts * math.sqrt(2.0) if form == "rms" else volts
