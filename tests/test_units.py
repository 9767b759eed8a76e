"""Tests for chain.units: SI prefixes, the RKM code, and display formatting."""

from __future__ import annotations

import ast
import doctest
import math
import pickle
import sys
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import chain.units
from chain.units import PREFIXES, QuantityError, format_rkm, format_si, parse_quantity

REL = 1e-12  # exact decimal conversions: only float rounding may differ
PROPERTY = settings(max_examples=300, derandomize=True, deadline=None)
UNITS = [None, "ohm", "Ω", "F", "H", "V", "A", "W", "Hz", "s", "%"]


# --- RKM code --------------------------------------------------------------
# IEC 60062:2016, clause 4 (RKM code), from memory of its table: the letter
# stands where the decimal point would be; R = 1 (ohms), k/K = 1e3, M = 1e6,
# G = 1e9, T = 1e12; p = 1e-12, n = 1e-9, µ/u = 1e-6, m = 1e-3 (capacitance).
RKM_TABLE = [
    ("R47", 0.47), ("4R7", 4.7), ("47R", 47.0), ("0R1", 0.1),
    ("4k7", 4.7e3), ("47k", 47e3), ("470k", 470e3), ("k47", 470.0), ("4K7", 4.7e3),
    ("4M7", 4.7e6), ("1M5", 1.5e6), ("M1", 1e5), ("1G0", 1e9), ("2T2", 2.2e12),
    ("p68", 0.68e-12), ("6p8", 6.8e-12), ("68p", 68e-12), ("680p", 680e-12), ("4p7", 4.7e-12),
    ("6n8", 6.8e-9), ("68n", 68e-9), ("680n", 680e-9), ("2n2", 2.2e-9),
    ("6µ8", 6.8e-6), ("6u8", 6.8e-6), ("6μ8", 6.8e-6), ("1u5", 1.5e-6),
    ("6m8", 6.8e-3), ("2m2", 2.2e-3),
]


@pytest.mark.parametrize(("text", "expected"), RKM_TABLE, ids=[t for t, _ in RKM_TABLE])
def test_rkm_code_iec60062(text, expected):
    # IEC 60062:2016, clause 4 (RKM code), from memory of its table
    assert parse_quantity(text) == pytest.approx(expected, rel=REL)


RKM_WITH_UNIT = [("4R7", "ohm", 4.7), ("4k7Ω", "ohm", 4.7e3), ("2n2F", "F", 2.2e-9),
                 ("2n2", "F", 2.2e-9), ("6m8H", "H", 6.8e-3), ("47K", "Ω", 47e3)]


@pytest.mark.parametrize(("text", "unit", "expected"), RKM_WITH_UNIT,
                         ids=[t for t, _, _ in RKM_WITH_UNIT])
def test_rkm_with_expected_unit(text, unit, expected):
    # IEC 60062:2016, clause 4 (RKM code), from memory of its table; unit symbol is our extension
    assert parse_quantity(text, unit) == pytest.approx(expected, rel=REL)


# --- SI prefixes -----------------------------------------------------------
# SI Brochure (BIPM, 9th edition, 2019), table of SI prefixes, from memory.
SI_PREFIX_FACTORS = {"p": 1e-12, "n": 1e-9, "µ": 1e-6, "m": 1e-3,
                     "k": 1e3, "M": 1e6, "G": 1e9, "T": 1e12}


@pytest.mark.parametrize("prefix", sorted(SI_PREFIX_FACTORS))
def test_si_prefix_factor(prefix):
    # SI Brochure (BIPM, 9th edition, 2019), table of SI prefixes, from memory
    factor = SI_PREFIX_FACTORS[prefix]
    assert PREFIXES[prefix] == pytest.approx(factor, rel=REL)
    assert parse_quantity(f"1{prefix}") == pytest.approx(factor, rel=REL)
    assert parse_quantity(f"2.5{prefix}") == pytest.approx(2.5 * factor, rel=REL)


def test_micro_spellings_agree():
    # SI Brochure 9th ed.: micro is the Greek mu; "u" is common practice in plain ASCII
    assert PREFIXES["u"] == PREFIXES["\u00b5"] == PREFIXES["\u03bc"] == pytest.approx(1e-6, rel=REL)


def test_prefixes_are_case_sensitive():
    # SI Brochure 9th ed., from memory: m (milli, 1e-3) and M (mega, 1e6) differ by case
    assert parse_quantity("1m") == pytest.approx(1e-3, rel=REL)
    assert parse_quantity("1M") == pytest.approx(1e6, rel=REL)
    assert parse_quantity("1mA", "A") == pytest.approx(1e-3, rel=REL)
    assert parse_quantity("1MHz", "Hz") == pytest.approx(1e6, rel=REL)


def test_prefixes_mapping_is_read_only():
    with pytest.raises(TypeError):
        PREFIXES["x"] = 1.0  # type: ignore[index]


# --- plain numbers and units ----------------------------------------------
PLAIN = [("100", 100.0), ("0.5", 0.5), ("1e3", 1e3), ("-2", -2.0), ("+3.3", 3.3),
         ("2.2e-9", 2.2e-9), (".5", 0.5), ("5.", 5.0), ("1E+3", 1e3), ("-4k7", -4.7e3),
         ("100k", 100e3), ("22n", 22e-9), ("2.2u", 2.2e-6), ("4.7µ", 4.7e-6),
         ("1.5M", 1.5e6), ("470p", 470e-12)]


@pytest.mark.parametrize(("text", "expected"), PLAIN, ids=[t for t, _ in PLAIN])
def test_plain_and_prefixed_numbers(text, expected):
    # decimal notation; value equals Python's own reading of the literal (reference: float())
    assert parse_quantity(text) == pytest.approx(expected, rel=REL)


WITH_UNIT = [("100kΩ", "ohm", 100e3), ("100k\u2126", "ohm", 100e3), ("100kohm", "ohm", 100e3),
             ("2ohms", "Ω", 2.0), ("22nF", "F", 22e-9), ("2.5H", "H", 2.5), ("300V", "V", 300.0),
             ("1kHz", "Hz", 1e3), ("1W", "W", 1.0), ("10mA", "A", 10e-3), ("2ms", "s", 2e-3),
             ("5%", "%", 0.05), ("5", "%", 0.05), ("22nF", None, 22e-9), ("300", "V", 300.0)]


@pytest.mark.parametrize(("text", "unit", "expected"), WITH_UNIT,
                         ids=[f"{t}-{u}" for t, u, _ in WITH_UNIT])
def test_units_accepted(text, unit, expected):
    # SI symbols (SI Brochure 9th ed., from memory); "%" = 1/100 (common practice)
    assert parse_quantity(text, unit) == pytest.approx(expected, rel=REL)


def test_percent_only_scales_percent():
    # a bare number means the expected unit; only "%" divides by 100 (design choice)
    assert parse_quantity("5") == 5.0
    assert parse_quantity("5", "%") == pytest.approx(0.05, rel=REL)


def test_unknown_expected_unit_is_a_programming_error():
    with pytest.raises(ValueError, match="unknown unit") as info:
        parse_quantity("1", "furlong")
    assert not isinstance(info.value, QuantityError)


# --- errors ---------------------------------------------------------------
# (text, unit, column, words in the message or hint)
ERRORS = [
    ("", None, 0, "empty"),
    ("1.2.3", None, 3, "second decimal point"),
    ("1kk", None, 2, "two prefixes"),
    ("4k7k", None, 3, "two prefixes"),
    ("k", None, 0, "needs a number"),
    ("-k", None, 1, "needs a number"),
    ("R", None, 0, "needs a number"),
    ("1 k", None, 1, "whitespace"),
    (" 1k", None, 0, "whitespace"),
    ("1k\t", None, 2, "whitespace"),
    ("4x7", None, 1, "unexpected 'x'"),
    ("1kΩx", None, 3, "after the unit"),
    ("1meg", None, 1, "write 1M for mega"),
    ("1MEG", None, 1, "ambiguous"),
    ("1Meg", None, 1, "ambiguous"),
    ("22nf", None, 3, "write 22nF"),
    ("1khz", None, 2, "write 1kHz"),
    ("1e3k", None, 3, "exponent and a prefix"),
    ("4.7K", None, 3, "write 4.7k"),
    ("4.7R", None, 3, "RKM letter"),
    ("4k7.5", None, 3, "decimal point in an RKM value"),
    ("47E", None, 2, "write 47R"),
    ("1e", None, 1, "exponent without digits"),
    ("1.5E", None, 3, "exponent without digits"),
    ("22nH", "F", 3, "an inductance (H) where a capacitance (F) is expected"),
    ("100kΩ", "F", 4, "a resistance (Ω) where a capacitance (F) is expected"),
    ("10mA", "V", 3, "a current (A) where a voltage (V) is expected"),
    ("4R7", "F", 1, "R (the RKM ohm marker)"),
    ("4R7F", None, 1, "R (the RKM ohm marker)"),
    ("5k%", None, 1, "percentage takes no prefix"),
    ("5e1%", None, 1, "percentage takes no exponent"),
    ("-", None, 1, "sign without a number"),
    ("+-1", None, 1, "expected a number"),
    (".", None, 0, "decimal point needs digits"),
    ("nan", None, 0, "not a finite number"),
    ("-inf", None, 0, "not a finite number"),
    ("1e999", None, 0, "out of range"),
    ("\u0661", None, 0, "expected a number"),  # Arabic-Indic digit one
    # vintage schematics: mfd (MFD) is microfarad, mmfd picofarad (common practice)
    ("10mfd", "F", 2, "write 10u"),
    (".022MFD", None, 4, "write .022u"),
    ("100MMFD", "F", 3, "write 100p"),
    # a decimal comma, as written in much of Europe
    ("1,5k", "ohm", 1, "write 1.5k or 1k5"),
    ("2,2", None, 1, "write 2.2"),
]


@pytest.mark.parametrize(("text", "unit", "column", "words"), ERRORS,
                         ids=[f"{t!r}-{u}" for t, u, _, _ in ERRORS])
def test_errors_located(text, unit, column, words):
    with pytest.raises(QuantityError) as info:
        parse_quantity(text, unit)
    err = info.value
    assert err.text == text
    assert err.column == column
    assert words in str(err)
    assert 0 <= err.column <= len(text)


def test_error_is_value_error_and_pickles():
    with pytest.raises(ValueError) as info:
        parse_quantity("1meg")
    err = info.value
    assert isinstance(err, QuantityError)
    back = pickle.loads(pickle.dumps(err))
    assert (back.text, back.column, back.message, back.hint) == \
        (err.text, err.column, err.message, err.hint)
    assert str(back) == str(err) == f"{err.message}; {err.hint}"


# --- format_si -------------------------------------------------------------
FORMAT_SI = [
    (1.52e-3, "A", 3, "1.52 mA"), (4700, "Ω", 3, "4.7 kΩ"), (0, "V", 3, "0 V"),
    (-0.0, "V", 3, "0 V"), (-3.3, "V", 3, "-3.3 V"), (4.7e-6, "F", 3, "4.7 µF"),
    (100e-12, "F", 3, "100 pF"), (1e6, "Ω", 3, "1 MΩ"), (2.5e12, "Hz", 3, "2.5 THz"),
    (999.96, "V", 3, "1 kV"), (123456, "", 3, "123k"), (476, "V", 1, "500 V"),
    (476, "V", 2, "480 V"), (0.5, "W", 3, "500 mW"), (1e-15, "F", 3, "1e-15 F"),
    (5e17, "V", 3, "5e17 V"), (float("nan"), "V", 3, "n/a"), (float("inf"), "Ω", 3, "∞ Ω"),
    (float("-inf"), "V", 3, "-∞ V"),
]


@pytest.mark.parametrize(("value", "unit", "digits", "expected"), FORMAT_SI,
                         ids=[e for *_, e in FORMAT_SI])
def test_format_si(value, unit, digits, expected):
    # engineering notation, mantissa in [1, 1000), space before the unit
    # (SI Brochure 9th ed., from memory: a space separates number and unit)
    assert format_si(value, unit, digits) == expected


def test_format_si_rejects_bad_digits():
    with pytest.raises(ValueError):
        format_si(1.0, "V", 0)


# --- format_rkm ------------------------------------------------------------
FORMAT_RKM = [
    (4700, "R", "4k7"), (0.47, "R", "R47"), (1e6, "R", "1M"), (47, "R", "47R"),
    (0.047, "R", "R047"), (0, "R", "0R"), (1.5e6, "R", "1M5"), (1e9, "R", "1G"),
    (2.2e-9, "C", "2n2"), (100e-9, "C", "100n"), (6.8e-12, "C", "6p8"), (1.5e-6, "C", "1u5"),
    (2.2e-3, "C", "2m2"), (0.5, "C", "500m"), (10, "L", "10"), (2.5, "L", "2.5"),
    (-4700, "R", "-4k7"),
]


@pytest.mark.parametrize(("value", "kind", "expected"), FORMAT_RKM,
                         ids=[e for *_, e in FORMAT_RKM])
def test_format_rkm(value, kind, expected):
    # IEC 60062:2016, clause 4 (RKM code), from memory of its table
    assert format_rkm(value, kind) == expected


def test_format_rkm_rounds_to_digits():
    # IEC 60062 marks two or three significant digits
    assert format_rkm(4712.3, "R", digits=2) == "4k7"
    assert format_rkm(4712.3, "R", digits=3) == "4k71"
    assert format_rkm(999.7, "R", digits=3) == "1k"


@pytest.mark.parametrize(("value", "kind"), [(float("nan"), "R"), (float("inf"), "C"), (1.0, "X")])
def test_format_rkm_rejects(value, kind):
    with pytest.raises(ValueError):
        format_rkm(value, kind)


# --- properties ------------------------------------------------------------
magnitudes = st.floats(min_value=1e-300, max_value=1e300)
signs = st.sampled_from([1.0, -1.0])


def rounded(x: float, digits: int) -> float:
    """Reference rounding: Python's correctly rounded %e formatting."""
    return float(f"{x:.{digits - 1}e}")


@PROPERTY
@given(magnitudes, signs, st.sampled_from(["R", "C", "L"]))
def test_rkm_round_trip_exact(x, sign, kind):
    value = sign * x
    assert parse_quantity(format_rkm(value, kind)) == value


@PROPERTY
@given(magnitudes, signs, st.sampled_from(["R", "C", "L"]), st.integers(1, 6))
def test_rkm_round_trip_to_digits(x, sign, kind, digits):
    value = sign * x
    back = parse_quantity(format_rkm(value, kind, digits=digits))
    assert back == rounded(value, digits)
    # rounding to d significant digits moves a value by at most 5e-d of itself
    assert math.isclose(back, value, rel_tol=5.0001 * 10.0 ** -digits)


@PROPERTY
@given(magnitudes, signs, st.sampled_from(["", "Ω", "F", "H", "V", "A", "W", "Hz", "s"]),
       st.integers(1, 6))
def test_format_si_round_trip(x, sign, unit, digits):
    value = sign * x
    text = format_si(value, unit, digits)
    back = parse_quantity(text.replace(" ", ""), unit or None)
    assert back == rounded(value, digits)


@PROPERTY
@given(st.floats(allow_nan=False, allow_infinity=False))
def test_plain_repr_reads_back(x):
    # Python's repr is the shortest decimal that reads back (reference: float())
    assert parse_quantity(repr(x)) == x


QUANTITY_CHARS = "0123456789.+-eERKkMmGTpnuµμ%ΩohmsFHVAWHz xé\u0661"


@PROPERTY
@given(st.one_of(st.text(), st.text(alphabet=QUANTITY_CHARS, max_size=8)), st.sampled_from(UNITS))
def test_parse_raises_only_quantity_error(text, unit):
    try:
        value = parse_quantity(text, unit)
    except QuantityError as err:
        assert 0 <= err.column <= len(text)
        assert err.text == text
    else:
        assert math.isfinite(value)


# --- module hygiene -------------------------------------------------------
def test_docstring_examples():
    result = doctest.testmod(chain.units)
    assert result.attempted >= 5
    assert result.failed == 0


def test_imports_only_standard_library():
    # chain.units is imported at CLI start-up: standard library only
    tree = ast.parse(Path(chain.units.__file__).read_text(encoding="utf-8"))
    names = {alias.name.split(".")[0] for node in ast.walk(tree) if isinstance(node, ast.Import)
             for alias in node.names}
    names |= {node.module.split(".")[0] for node in ast.walk(tree)
              if isinstance(node, ast.ImportFrom) and node.module}
    assert names <= set(sys.stdlib_module_names)
    assert names  # the walk found the imports
