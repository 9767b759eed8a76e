"""Built-in tube library against published handbook figures, and lookup."""

from __future__ import annotations

import pickle

import pytest

from chain.tubes import LIBRARY, UnknownTubeError, lookup, names

# (type, Vpk V, Vgk V, Ip A) — handbook typical class-A1 operating points,
# one section (the same points as the data files' "typical" rows).
MAIN_POINTS = [
    ("12AX7", 250.0, -2.0, 1.2e-3, "from memory of RCA Receiving Tube Manual RC-30"),
    ("12AT7", 250.0, -2.0, 10e-3, "from memory of RCA Receiving Tube Manual RC-30"),
    ("12AU7", 250.0, -8.5, 10.5e-3, "from memory of RCA Receiving Tube Manual RC-30"),
    ("12AY7", 250.0, -4.0, 3.0e-3, "from memory of RCA Receiving Tube Manual RC-30"),
    ("5751", 250.0, -3.0, 1.0e-3, "from memory of GE 5751 data sheet"),
    ("6SN7", 250.0, -8.0, 9e-3, "from memory of RCA Receiving Tube Manual RC-30 (6SN7GTB)"),
]

# Interelectrode capacitances (Cgk input, Cgp grid–plate, Cpk output; F),
# section 1.  A change of 10 % in any of them fails
# test_capacitances_are_the_handbook_values.
HANDBOOK_CAPACITANCES = {
    "12AX7": ((1.6e-12, 1.7e-12, 0.46e-12), "from memory of RCA Receiving Tube Manual RC-30"),
    "12AT7": ((2.2e-12, 1.5e-12, 0.5e-12), "from memory of RCA Receiving Tube Manual RC-30"),
    "12AU7": ((1.6e-12, 1.5e-12, 0.5e-12), "from memory of RCA Receiving Tube Manual RC-30"),
    "12AY7": ((1.3e-12, 1.3e-12, 0.6e-12), "from memory of RCA Receiving Tube Manual RC-30 (uncertain)"),
    "5751": ((1.6e-12, 1.7e-12, 0.46e-12), "taken equal to the 12AX7 (same construction), not from a 5751 sheet"),
    "6SN7": ((3.0e-12, 4.0e-12, 1.2e-12), "from memory of RCA Receiving Tube Manual RC-30 (uncertain)"),
}


def capacitance_deviation(model) -> float:
    """Largest relative deviation of a model's capacitances from the handbook table."""
    (cgk, cgp, cpk), _source = HANDBOOK_CAPACITANCES[model.name]
    return max(abs(model.cgk_f / cgk - 1.0), abs(model.cgp_f / cgp - 1.0), abs(model.cpk_f / cpk - 1.0))


@pytest.mark.parametrize("name", list(LIBRARY))
def test_capacitances_are_the_handbook_values(name):
    # Sources in HANDBOOK_CAPACITANCES; tolerance 2 % (transcription only).
    assert capacitance_deviation(LIBRARY[name]) <= 0.02


def test_a_ten_percent_capacitance_change_is_caught():
    # The check above must fail for a 10 % change of any one capacitance.
    from dataclasses import replace

    model = LIBRARY["12AX7"]
    for field in ("cgk_f", "cgp_f", "cpk_f"):
        assert capacitance_deviation(replace(model, **{field: getattr(model, field) * 1.1})) > 0.02


@pytest.mark.parametrize("point", MAIN_POINTS, ids=[p[0] for p in MAIN_POINTS])
def test_handbook_point_lies_within_the_ratings(point):
    # A data sheet's own typical operating point respects its maximum ratings
    # (consistency of the typed-in ratings with the handbook point).
    name, vpk, _vgk, ip, _source = point
    ratings = lookup(name).ratings
    assert vpk <= ratings.vp_max_v
    assert vpk * ip <= ratings.pd_max_w
    if ratings.ik_max_a is not None:
        assert ip <= ratings.ik_max_a


@pytest.mark.parametrize("name", list(LIBRARY))
def test_capacitances_are_picofarads_and_sources_are_stated(name):
    # Common practice: interelectrode capacitances of small-signal triodes are
    # a few pF (0.1–10 pF); this catches unit slips.
    model = LIBRARY[name]
    for c in (model.cgk_f, model.cgp_f, model.cpk_f):
        assert 0.1e-12 <= c <= 10e-12
    assert "chain/tubes/data/" in model.source and "from memory" in model.source
    assert "from memory" in model.ratings.source


def test_lookup_is_case_insensitive_and_knows_aliases():
    # Standard equivalents (common practice): ECC83 = 12AX7, ECC81 = 12AT7,
    # ECC82 = 12AU7.
    assert lookup("12ax7") is LIBRARY["12AX7"]
    assert lookup("ECC83") is LIBRARY["12AX7"]
    assert lookup(" ecc-83 ") is LIBRARY["12AX7"]
    assert lookup("ECC81") is LIBRARY["12AT7"]
    assert lookup("ecc82") is LIBRARY["12AU7"]
    assert lookup("6sn7gtb") is LIBRARY["6SN7"]
    assert lookup("5751").name == "5751"


def test_lookup_suggests_close_matches_for_a_misspelling():
    with pytest.raises(KeyError) as info:
        lookup("12AX8")
    assert "12AX7" in str(info.value)
    assert info.value.suggestions[0] == "12AX7"
    with pytest.raises(UnknownTubeError) as info:
        lookup("ECC88")
    assert "12AX7" in str(info.value) or "12AU7" in str(info.value)
    err = pickle.loads(pickle.dumps(info.value))
    assert str(err) == str(info.value)


def test_library_is_read_only_and_names_are_canonical():
    assert names() == tuple(LIBRARY)
    assert set(names()) == {"12AX7", "12AT7", "12AU7", "12AY7", "5751", "6SN7"}
    with pytest.raises(TypeError):
        LIBRARY["X"] = LIBRARY["12AX7"]  # type: ignore[index]
    for name, model in LIBRARY.items():
        assert model.name == name
