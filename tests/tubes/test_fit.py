"""The library against its data files: reproducible fit, held-out points,
the amplification factor over the working range, and bad data for a fit.

The data files (chain/tubes/data/*.csv) name their source on every row; the
held-out rows never enter the fit (chain.tubes.fit uses split = fit only)."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from scipy.optimize import brentq

from chain.errors import ChainError
from chain.tubes import LIBRARY, plate_current, small_signal
from chain.tubes.fit import (
    FIT_PARAMS,
    FitDataError,
    fit_library,
    fit_points,
    library_data,
    read_points,
    render_fitted_module,
    tube_line,
)
from chain.tubes.fitted import PARAMS

NAMES = list(LIBRARY)

# Handbook amplification factor of each type (from memory of RCA Receiving
# Tube Manual RC-30, typical operation; 5751 from memory of the GE 5751 data
# sheet; 12AU7: 17 at 250 V, 19.5 at 100 V — checked against 17 here).
HANDBOOK_MU = {"12AX7": 100.0, "12AT7": 60.0, "12AU7": 17.0, "12AY7": 44.0, "5751": 70.0, "6SN7": 20.0}


@pytest.fixture(scope="module")
def fresh_fit():
    return fit_library()


# ------------------------------------------------------------------ the data


@pytest.mark.parametrize("name", NAMES)
def test_data_file_has_curves_typical_points_sources_and_a_split(name):
    data = library_data(name)
    curves = data.subset(kind="curve")
    assert len(curves) >= 12
    assert len({p.vgk_v for p in curves}) >= 4
    vpk = [p.vpk_v for p in curves]
    assert min(vpk) <= 50.0 and max(vpk) >= 250.0 and all(50.0 <= v <= 300.0 for v in vpk)
    assert data.subset(kind="typical"), "handbook typical operating points"
    assert all(p.split == "hold" for p in data.subset(kind="typical"))
    assert data.subset(kind="curve", split="fit") and data.subset(kind="curve", split="hold")
    assert all(p.source.startswith("from memory of ") for p in data.points)


# -------------------------------------------------------- reproducible fit


def test_shipped_parameters_are_what_the_fit_command_produces(fresh_fit):
    # chain/tubes/fitted.py must be exactly the output of `python -m chain.tubes.fit`.
    from pathlib import Path

    import chain.tubes.fitted as fitted

    # Parameters are printed to 4 significant figures; a different numpy/scipy/BLAS
    # build may land the optimum on the other side of a rounding boundary, so each
    # value must agree to one unit in its 4th significant figure, no more.
    assert fresh_fit.keys() == PARAMS.keys()
    for tube, forms in PARAMS.items():
        assert fresh_fit[tube].keys() == forms.keys(), tube
        for form, params in forms.items():
            assert fresh_fit[tube][form].keys() == params.keys(), (tube, form)
            for name, shipped in params.items():
                fresh = fresh_fit[tube][form][name]
                assert abs(fresh - shipped) <= _last_digit(shipped), (tube, form, name, fresh, shipped)
    assert Path(fitted.__file__).read_text(encoding="utf-8") == render_fitted_module(PARAMS)


def _last_digit(x: float) -> float:
    """One unit in the 4th significant figure of ``x`` (plus a hair for float noise)."""
    if x == 0.0:
        return 0.0
    return 1.0001 * 10.0 ** (math.floor(math.log10(abs(x))) - 3)


def _matches_fit(model, params) -> float:
    """Largest relative difference in plate current, over the data points,
    between ``model`` and the model made of freshly fitted ``params``."""
    refit = replace(model, **params[model.form])
    data = library_data(model.name)
    vpk = np.array([p.vpk_v for p in data.points])
    vgk = np.array([p.vgk_v for p in data.points])
    return float(np.max(np.abs(plate_current(model, vpk, vgk) / plate_current(refit, vpk, vgk) - 1.0)))


@pytest.mark.parametrize("name", NAMES)
def test_library_models_are_the_fitted_models(name, fresh_fit):
    assert _matches_fit(LIBRARY[name], fresh_fit[name]) < 1e-9


@pytest.mark.parametrize("name", NAMES)
def test_a_ten_percent_current_change_is_caught(name, fresh_fit):
    # A type whose current is 10 % off what its data give fails the check above.
    model = LIBRARY[name]
    scaled = replace(model, kg1=model.kg1 / 1.1, dz_g=model.dz_g * 1.1)
    assert _matches_fit(scaled, fresh_fit[name]) > 0.05


# ------------------------------------------------------------ held-out points


@pytest.mark.parametrize("name", NAMES)
def test_held_out_curve_points_within_15_percent(name):
    # Sources: each row's source column (plate characteristics, from memory).
    model = LIBRARY[name]
    held = library_data(name).subset(kind="curve", split="hold")
    for p in held:
        got = float(plate_current(model, p.vpk_v, p.vgk_v))
        assert abs(got / p.ip_a - 1.0) <= 0.15, (p, got)


_TYPICAL = [(name, i) for name in NAMES for i, _ in enumerate(library_data(name).subset(kind="typical"))]


@pytest.mark.parametrize("name,index", _TYPICAL, ids=[f"{n}-{i}" for n, i in _TYPICAL])
def test_held_out_handbook_points_current_15_and_gm_20_percent(name, index):
    # Sources: the handbook typical operating points in the data file (RCA
    # RC-30 / GE 5751 data sheet, from memory).  Never fitted.
    model = LIBRARY[name]
    p = library_data(name).subset(kind="typical")[index]
    ip = float(plate_current(model, p.vpk_v, p.vgk_v))
    gm = float(small_signal(model, p.vpk_v, p.vgk_v).gm_s)
    print(f"{name} {p.vpk_v:g} V/{p.vgk_v:g} V: Ip {ip / p.ip_a - 1:+.1%}, gm {gm / p.gm_s - 1:+.1%} ({p.source})")
    assert abs(ip / p.ip_a - 1.0) <= 0.15
    if name == "12AU7" and p.vpk_v == 250.0:
        # No form in which Ip = f(Vgk + Vct + Vpk/mu) with f increasing can meet both remembered
        # RC-30 points: gm/Ip = f'/f falls as the effective voltage rises for any power-law-like f,
        # so the point with the smaller gm/Ip (250 V: 0.210/V against 0.263/V at 100 V) must carry
        # the larger current, but it carries less (10.5 mA against 11.8 mA).  Either the recalled
        # data are off or the tube departs from the form; a checked copy of the data would settle it.
        pytest.xfail("the remembered 12AU7 typical points are inconsistent with any Ip = f(Vgk + Vpk/mu); "
                     "the fit meets the 100 V point and misses this gm by +23 %")
    assert abs(gm / p.gm_s - 1.0) <= 0.20


# -------------------------------------------------------- mu over the range


@pytest.mark.parametrize("name", NAMES)
def test_mu_within_15_percent_of_handbook_from_50_to_300_v_and_02_to_2_ma(name):
    # Handbook mu (HANDBOOK_MU, sources above) holds over the class-A1 working
    # range (common practice: a triode's amplification factor is nearly
    # constant); checked from 50 to 300 V plate and 0.2 to 2 mA, wherever that
    # current flows with the grid at or below 0 V.
    model = LIBRARY[name]
    checked = 0
    for vpk in np.linspace(50.0, 300.0, 11):
        for ip in (0.2e-3, 0.5e-3, 1e-3, 2e-3):
            if plate_current(model, vpk, 0.0) < ip:
                continue
            vgk = brentq(lambda v: float(plate_current(model, vpk, v)) - ip, -vpk, 0.0, xtol=1e-9)
            mu = float(small_signal(model, vpk, vgk).mu)
            assert abs(mu / HANDBOOK_MU[name] - 1.0) <= 0.15, (vpk, ip, mu)
            checked += 1
    assert checked >= 20


def test_koren_form_without_contact_potential_fails_the_mu_range():
    # The check above is not vacuous: the library's previous 12AX7 set (Koren
    # form without contact potential, fitted to two handbook points: mu 113.4,
    # ex 1.4, kg1 911.4, kp 536.9, kvb 24840) lets mu fall to about 54 at
    # 75 V and 1 mA.
    old = replace(LIBRARY["12AX7"], form="koren", mu=113.4, ex=1.4, kg1=911.4, kp=536.9, kvb=24840.0, vct=0.0)
    vgk = brentq(lambda v: float(plate_current(old, 75.0, v)) - 1e-3, -75.0, 0.0)
    assert float(small_signal(old, 75.0, vgk).mu) < 60.0


# ---------------------------------------------------------------- user data


def _read(text):
    return read_points("meas.csv", text=text)


GOOD = "vpk_v,vgk_v,ip_ma\n" + "\n".join(
    f"{vp},{vg},{1.0e3 * float(plate_current(LIBRARY['12AX7'], vp, vg)):.4f}"
    for vg in (0.0, -0.5, -1.0) for vp in (100.0, 200.0, 300.0))


def test_fit_recovers_a_model_from_its_own_points_and_writes_a_tube_line():
    # Points computed from the library 12AX7: a fit of the same form must
    # give them back (self-consistency of the fitting code, 2 %).
    data = _read(GOOD)
    result = fit_points(data, "koren", base=LIBRARY["12AX7"])
    assert max(abs(r.error) for r in result.residuals) < 0.02
    line = tube_line("MY12AX7", result, like="12AX7")
    assert line.startswith("tube MY12AX7 like 12AX7 model koren mu ")
    assert all(f" {k} " in line for k in ("ex", "kg1", "kp", "kvb", "vct"))
    assert set(result.params) == set(FIT_PARAMS["koren"]) | {"kvb"}  # kvb held, but part of the set


@pytest.mark.parametrize("text,code,line", [
    ("vpk_v,vgk_v,ip_ma\n100,0,1\n200,0,2\n300,0,3\n100,0,1\n200,0,2\n300,0,3\n", "E705", 1),
    ("vpk_v,vgk_v,ip_ma\n100,0,1\n200,-1,2\n", "E704", 1),
    ("vpk_v,vgk_v,ip_ma\n100,0,1\n200,-1,-2\n", "E703", 3),
    ("vpk_v,vgk_v,ip_ma\n100,0,1\n200,-1,x\n", "E702", 3),
    ("vpk_v,vgk_v,ip_a\n" + "\n".join(f"{vp},{vg},{vp / 50}" for vg in (0, -1) for vp in (100, 200, 300)), "E706", 4),
    ("vpk_v,vgk_v,ip_ma\n" + "\n".join(f"{vp},{vg},{vp / 5e7}" for vg in (0, -1) for vp in (100, 200, 300)), "E706", 4),
    ("vpk,vgk_v,ip_ma\n100,0,1\n", "E701", 1),
])
def test_bad_data_is_located_and_explained(text, code, line):
    with pytest.raises(FitDataError) as info:
        _read(text)
    assert isinstance(info.value, ChainError)
    d = info.value.diagnostics[0]
    assert d.code == code and d.span.path == "meas.csv" and d.span.line == line, d
