"""Built-in tube library against published handbook figures, and lookup."""

from __future__ import annotations

import pickle

import pytest

from chain.tubes import LIBRARY, UnknownTubeError, lookup, names, plate_current, small_signal

# (type, Vpk V, Vgk V, Ip A, gm S, rp ohm, source) — handbook typical
# class-A1 operating points, one section.
MAIN_POINTS = [
    ("12AX7", 250.0, -2.0, 1.2e-3, 1.6e-3, 62.5e3, "from memory of RCA Receiving Tube Manual RC-30"),
    ("12AT7", 250.0, -2.0, 10e-3, 5.5e-3, 10.9e3, "from memory of RCA Receiving Tube Manual RC-30"),
    ("12AU7", 250.0, -8.5, 10.5e-3, 2.2e-3, 7.7e3, "from memory of RCA Receiving Tube Manual RC-30"),
    ("12AY7", 250.0, -4.0, 3.0e-3, 1.75e-3, 25e3, "from memory of RCA Receiving Tube Manual RC-30"),
    ("5751", 250.0, -3.0, 1.0e-3, 1.2e-3, 58e3, "from memory of GE 5751 data sheet"),
    ("6SN7", 250.0, -8.0, 9e-3, 2.6e-3, 7.7e3, "from memory of RCA Receiving Tube Manual RC-30 (6SN7GTB)"),
]

# Second handbook points: the Koren form cannot meet both points of a type
# within the main tolerance (see docs/models.md); checked at ±35 %.
SECOND_POINTS = [
    ("12AX7", 100.0, -1.0, 0.5e-3, 1.25e-3, 80e3, "from memory of RCA Receiving Tube Manual RC-30"),
    ("12AT7", 100.0, -1.0, 3.7e-3, 4.0e-3, 15e3, "from memory of RCA Receiving Tube Manual RC-30 (Rk 270 ohm)"),
    ("12AU7", 100.0, 0.0, 11.8e-3, 3.1e-3, 6.25e3, "from memory of RCA Receiving Tube Manual RC-30"),
    ("6SN7", 90.0, 0.0, 10e-3, 3.0e-3, 6.7e3, "from memory of RCA Receiving Tube Manual RC-30 (6SN7GTB)"),
]


def _deviations(name, vpk, vgk, ip, gm, rp):
    model = lookup(name)
    got_ip = plate_current(model, vpk, vgk)
    ss = small_signal(model, vpk, vgk)
    return got_ip / ip - 1.0, ss.gm_s / gm - 1.0, ss.rp_ohm / rp - 1.0


@pytest.mark.parametrize("point", MAIN_POINTS, ids=[p[0] for p in MAIN_POINTS])
def test_handbook_typical_operating_point(point):
    """The model at each type's handbook typical point.

    These points are the ones the library's parameters were fitted to
    (docs/models.md), so this is a check that the fit and its transcription
    hold, not an independent test of the model; the independent comparison
    is :func:`test_handbook_second_operating_point` (12AY7 and 5751 have no
    second point in the library yet).  Tolerance: ±20 % on plate current,
    ±15 % on gm and rp.
    """
    name, vpk, vgk, ip, gm, rp, source = point
    d_ip, d_gm, d_rp = _deviations(name, vpk, vgk, ip, gm, rp)
    print(f"{name} {vpk:g} V/{vgk:g} V ({source}): Ip {d_ip:+.1%}, gm {d_gm:+.1%}, rp {d_rp:+.1%}")
    assert abs(d_ip) <= 0.20
    assert abs(d_gm) <= 0.15
    assert abs(d_rp) <= 0.15


@pytest.mark.parametrize("point", SECOND_POINTS, ids=[p[0] for p in SECOND_POINTS])
def test_handbook_second_operating_point(point):
    name, vpk, vgk, ip, gm, rp, source = point
    d_ip, d_gm, d_rp = _deviations(name, vpk, vgk, ip, gm, rp)
    print(f"{name} {vpk:g} V/{vgk:g} V ({source}): Ip {d_ip:+.1%}, gm {d_gm:+.1%}, rp {d_rp:+.1%}")
    assert max(abs(d_ip), abs(d_gm), abs(d_rp)) <= 0.35


@pytest.mark.parametrize("point", MAIN_POINTS, ids=[p[0] for p in MAIN_POINTS])
def test_handbook_point_lies_within_the_ratings(point):
    # A data sheet's own typical operating point respects its maximum ratings
    # (consistency of the typed-in ratings with the handbook point).
    name, vpk, _vgk, ip, _gm, _rp, _source = point
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
    assert "Koren" in model.source and "from memory" in model.source
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
