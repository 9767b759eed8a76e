"""Semantic checks: hints for unknown tube types."""

import pytest

from chain.errors import LanguageError
from chain.language import parse_text
from chain.language.validate import same_type

BASE = """supply HT 300V
input into V1 resistance 10k
stage V1 common-cathode {tube}
  plate 100k from HT
  cathode 1k5
  grid leak 1M
couple V1 -> output cap 22n
output load 1M
"""


# later and ruggedised versions carry letter suffixes (12AX7A, 12AT7WC, 6SN7GTB):
# common practice of the American type designations
@pytest.mark.parametrize("written,known", [("12ax7", "12AX7"), ("ECC-83", "12AX7"), ("12AX7WA", "12AX7"),
                                           ("12AT7WC", "12AT7"), ("6SN7GT", "6SN7"), ("12AU7A", "12AU7")])
def test_same_type_accepts_case_punctuation_and_version_suffixes(written, known):
    assert same_type(written, known)


# one changed letter or digit is another tube: 6SL7 (mu ~70) is no 6SN7 (mu ~20),
# 12AT7 no 12AX7 (common practice)
@pytest.mark.parametrize("written,known", [("6SL7", "6SN7"), ("12AT7", "12AX7"), ("12AX9", "12AX7"),
                                           ("12BH7", "12AU7"), ("ECC88", "12AX7")])
def test_same_type_refuses_a_different_designation(written, known):
    assert not same_type(written, known)


def test_an_unknown_type_is_said_not_to_be_in_the_library_with_how_to_define_it():
    with pytest.raises(LanguageError) as info:
        parse_text(BASE.format(tube="6SL7"))
    (d,) = info.value.diagnostics
    assert d.code == "E206" and "did you mean" not in d.hint
    assert "not in the built-in library" in d.hint and "tube 6SL7 like 12AX7" in d.hint


def test_a_version_suffix_is_offered_the_base_type():
    with pytest.raises(LanguageError) as info:
        parse_text(BASE.format(tube="12AX7WA"))
    assert info.value.diagnostics[0].hint == "did you mean '12AX7'?"


def test_a_common_cathode_stage_without_cathode_resistor_is_said_to_bias_by_grid_current():
    # common practice: a grounded cathode with a large grid leak is grid-leak bias
    text = BASE.format(tube="12AX7").replace("  cathode 1k5\n", "").replace("grid leak 1M", "grid leak 10M")
    design = parse_text(text)
    from chain.language.validate import check

    (w,) = [d for d in check(design) if d.code == "W210"]
    assert w.severity == "warning" and "grid current" in w.message and w.span.line == 3
