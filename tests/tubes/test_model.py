"""Tests of the triode equations: derivatives, limits and the physical laws
the model must respect.  Each check names its source."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.optimize import brentq

from chain.tubes import (
    LIBRARY,
    Ratings,
    SmallSignal,
    TriodeModel,
    grid_current,
    grid_current_and_derivative,
    lookup,
    plate_current,
    plate_current_and_derivatives,
    small_signal,
)

# The Koren-form tests run on every type's fitted Koren set (the library
# carries fitted sets of both forms; its own form is in LIBRARY_FORM).
MODELS = [dataclasses.replace(m, form="koren") for m in LIBRARY.values()]
IDS = [m.name for m in MODELS]

# Handbook plate voltage and bias of each type (from memory of RCA Receiving
# Tube Manual RC-30 / GE 5751 data sheet; the same points as test_library).
HANDBOOK_BIAS = {"12AX7": -2.0, "12AT7": -2.0, "12AU7": -8.5, "12AY7": -4.0, "5751": -3.0, "6SN7": -8.0}
HANDBOOK_MU = {"12AX7": 100.0, "12AT7": 60.0, "12AU7": 17.0, "12AY7": 44.0, "5751": 70.0, "6SN7": 20.0}


def _central_difference(f, x, h):
    return (f(x + h) - f(x - h)) / (2.0 * h)


# ----------------------------------------------------------------- derivatives

VPK_GRID = np.array([-50.0, -1.0, -1e-3, 1e-3, 0.1, 1.0, 5.0, 20.0, 60.0, 150.0, 250.0, 400.0])
VGK_GRID = np.array([-60.0, -20.0, -8.0, -4.0, -2.0, -1.0, -0.3, 0.0, 0.5, 2.0])


@pytest.mark.parametrize("model", MODELS, ids=IDS)
def test_plate_derivatives_match_central_differences(model):
    # Analytic partials against central finite differences (O(h²) numerical
    # differentiation, independent of the analytic formulas), over a grid that
    # includes deep cutoff, Vpk near 0 and negative Vpk.  rtol 1e-6.
    vpk, vgk = np.meshgrid(VPK_GRID, VGK_GRID, indexing="ij")
    _ip, gm, gp = plate_current_and_derivatives(model, vpk, vgk)
    h_g = 1e-7
    h_p = 1e-7 * np.maximum(np.abs(vpk), 0.1)
    gm_fd = _central_difference(lambda v: plate_current(model, vpk, v), vgk, h_g)
    gp_fd = _central_difference(lambda v: plate_current(model, v, vgk), vpk, h_p)
    np.testing.assert_allclose(gm, gm_fd, rtol=1e-6, atol=1e-20)
    np.testing.assert_allclose(gp, gp_fd, rtol=1e-6, atol=1e-20)
    # the grid must actually exercise conduction, cutoff and zero current
    assert (gm > 1e-4).any() and ((gm > 0) & (gm < 1e-12)).any() and (gm == 0).any()


@pytest.mark.parametrize("model", MODELS, ids=IDS)
def test_plate_current_function_agrees_with_derivative_variant(model):
    vpk, vgk = np.meshgrid(VPK_GRID, VGK_GRID, indexing="ij")
    ip, _gm, _gp = plate_current_and_derivatives(model, vpk, vgk)
    np.testing.assert_array_equal(plate_current(model, vpk, vgk), ip)


finite = st.floats(allow_nan=False, allow_infinity=False)


@settings(max_examples=300, deadline=None)
@given(model=st.sampled_from(MODELS), vpk=finite, vgk=finite)
def test_everything_finite_and_non_negative_for_any_finite_input(model, vpk, vgk):
    # Requirement of a Newton DC solver: no NaN/inf from any finite guess.
    ip, gm, gp = plate_current_and_derivatives(model, vpk, vgk)
    ss = small_signal(model, vpk, vgk)
    ig, dig = grid_current_and_derivative(model, vgk)
    for value in (ip, gm, gp, ss.gm_s, ss.mu, ig, dig):
        assert np.isfinite(value)
        assert value >= 0.0
    assert ss.rp_ohm > 0.0  # may be inf (open plate), never NaN or negative


# ------------------------------------------------------------- physical laws


@pytest.mark.parametrize("model", MODELS, ids=IDS)
def test_child_langmuir_three_halves_power_at_zero_grid(model):
    # Child–Langmuir law (from memory of Langmuir 1913; any valve textbook,
    # e.g. M. Jones, "Valve Amplifiers"): space-charge-limited current grows
    # as the 3/2 power of the effective voltage Vpk/mu + Vgk; fitted triodes
    # show exponents of about 1.3–1.5.  Region: Vgk = 0, Vpk = 50…300 V
    # (moderate to high current).  Local slope d ln Ip / d ln x with
    # x = Vpk/mu + Vgk + Vct (Vct the contact potential) is mu·x·(∂Ip/∂Vpk)/Ip.
    vpk = np.geomspace(50.0, 300.0, 12)
    ip, _gm, gp = plate_current_and_derivatives(model, vpk, 0.0)
    slope = gp * model.mu * (vpk / model.mu + model.vct) / ip
    assert np.all((slope >= 1.3) & (slope <= 1.55)), slope


@pytest.mark.parametrize("model", MODELS, ids=IDS)
def test_langmuir_triode_law_reached_far_from_cutoff_at_fixed_bias(model):
    # Langmuir's triode form of the 3/2 law, Ip ∝ (Vgk + Vpk/mu)^(3/2) (from
    # memory of Langmuir 1913 / M. Jones, "Valve Amplifiers"), holds far from
    # cutoff.  Region: Vgk fixed at the handbook bias, Vpk = 250…2000 V (past
    # the ratings: this checks the shape of the equation, not a real tube).
    # The local exponent d ln Ip / d ln(Vpk/mu + Vgk) must rise steadily,
    # exceed 1.3 by 1000 V and stay below 1.55.
    vgk = HANDBOOK_BIAS[model.name]
    vpk = np.array([250.0, 350.0, 500.0, 700.0, 1000.0, 2000.0])
    ip, _gm, gp = plate_current_and_derivatives(model, vpk, vgk)
    x = vpk / model.mu + vgk + model.vct
    slope = gp * x * model.mu / ip
    assert np.all(np.diff(slope) > 0), slope
    assert slope[4] >= 1.3 and slope.max() <= 1.55, slope


@pytest.mark.parametrize("model", MODELS, ids=IDS)
def test_mu_nearly_constant_over_a_decade_of_current(model):
    # Common practice: the amplification factor is nearly constant over the
    # working range, within ±10 % here.  Region: Vpk = 250 V, plate current
    # over the decade below rated dissipation (Pd_max/250 V ÷ 10 … Pd_max/250 V).
    vpk = 250.0
    i_max = model.ratings.pd_max_w / vpk
    currents = np.geomspace(i_max / 10.0, i_max, 11)
    vgk = [brentq(lambda v, i=i: plate_current(model, vpk, v) - i, -400.0, 20.0, xtol=1e-12) for i in currents]
    mu = np.asarray(small_signal(model, vpk, np.array(vgk)).mu)
    assert np.all(np.abs(mu / mu.mean() - 1.0) <= 0.10), mu


@pytest.mark.parametrize("model", MODELS, ids=IDS)
def test_rp_falls_and_gm_rises_as_current_rises(model):
    # Common practice (any triode data sheet's rp/gm-vs-current curves).
    vgk = np.linspace(HANDBOOK_BIAS[model.name] * 1.5, 0.0, 40)
    ip = plate_current(model, 250.0, vgk)
    ss = small_signal(model, 250.0, vgk)
    assert np.all(np.diff(ip) > 0)
    assert np.all(np.diff(ss.rp_ohm) < 0)
    assert np.all(np.diff(ss.gm_s) > 0)


@pytest.mark.parametrize("model", MODELS, ids=IDS)
def test_plate_current_monotonic_in_both_voltages(model):
    # Common practice: more plate voltage or a less negative grid never
    # reduces plate current.
    vpk, vgk = np.meshgrid(np.linspace(-10.0, 400.0, 83), np.linspace(-30.0, 2.0, 65), indexing="ij")
    ip, gm, gp = plate_current_and_derivatives(model, vpk, vgk)
    assert np.all(np.diff(ip, axis=0) >= 0)
    assert np.all(np.diff(ip, axis=1) >= 0)
    assert np.all(gm >= 0) and np.all(gp >= 0)


@pytest.mark.parametrize("model", MODELS, ids=IDS)
def test_no_plate_current_in_deep_cutoff_or_without_plate_voltage(model):
    # Common practice: a triode biased to three times its cutoff bias
    # (Vgk = -3·Vpk/mu, handbook mu) conducts nothing measurable (< 10 nA);
    # with Vpk <= 0 no electron reaches the plate (Ip exactly 0).
    vpk = 250.0
    assert plate_current(model, vpk, -3.0 * vpk / HANDBOOK_MU[model.name]) < 1e-8
    assert plate_current(model, vpk, -1e4) == 0.0
    ip, gm, gp = plate_current_and_derivatives(model, np.array([-300.0, -1.0, 0.0]), 0.0)
    assert np.all(ip == 0.0) and np.all(gm == 0.0) and np.all(gp == 0.0)


def test_plate_current_joins_zero_smoothly_at_zero_plate_voltage():
    # Continuity of Ip and of ∂Ip/∂Vpk at Vpk = 0 (needed by a Newton solver):
    # both tend to 0 as Vpk -> 0+ (Ip ∝ Vpk^ex there, ex > 1).  Koren form;
    # with the contact potential the grid at 0 V acts as +Vct, so at 1 µV
    # the current is a few pA rather than below 1 pA.
    model = MODELS[0]
    vpk = np.array([1e-2, 1e-4, 1e-6])
    ip, _gm, gp = plate_current_and_derivatives(model, vpk, 0.0)
    assert np.all(np.diff(ip) < 0) and np.all(np.diff(gp) < 0)
    assert ip[-1] < 1e-11 and gp[-1] < 1e-5


# ---------------------------------------------------------------- small signal


def test_small_signal_mu_is_gm_times_rp_and_open_plate_when_off():
    # Standard triode relation mu = gm·rp (M. Jones, "Valve Amplifiers", from memory).
    model = MODELS[2]
    vpk = np.array([50.0, 150.0, 250.0, 300.0])
    vgk = np.array([-1.0, -4.0, -8.5, -12.0])
    ss = small_signal(model, vpk, vgk)
    np.testing.assert_allclose(ss.mu, ss.gm_s * ss.rp_ohm, rtol=1e-9)
    off = small_signal(model, np.array([0.0, -5.0]), -1.0)
    assert np.all(np.isinf(off.rp_ohm)) and np.all(off.gm_s == 0.0) and np.all(off.mu == 0.0)


def test_small_signal_mu_stays_finite_where_the_current_underflows():
    # Cutoff: gm and 1/rp vanish together; mu is the limit of their ratio.
    # From the Koren equation with Vpk² ≫ kvb and Vgk = -c·Vpk/mu in the
    # exponential tail: mu_limit = mu·kp/(mu + c·kp) (derived by hand from
    # the equation in Koren 1996; with a contact potential Vct the grid
    # voltage is Vgk = -c·Vpk/mu - Vct).
    model = MODELS[2]
    vpk = 1000.0
    for c, underflows in ((3.0, False), (30.0, True)):
        ss = small_signal(model, vpk, -c * vpk / model.mu - model.vct)
        expected = model.mu * model.kp / (model.mu + c * model.kp)
        assert ss.mu == pytest.approx(expected, rel=1e-3)
        if underflows:
            assert ss.gm_s == 0.0 and np.isinf(ss.rp_ohm)
        else:
            assert ss.gm_s > 0.0 and ss.mu == pytest.approx(ss.gm_s * ss.rp_ohm, rel=1e-9)


def test_scalar_in_scalar_out_and_arrays_broadcast():
    model = MODELS[0]
    ip = plate_current(model, 250.0, -2.0)
    assert isinstance(ip, float)
    assert isinstance(small_signal(model, 250.0, -2.0), SmallSignal)
    out = plate_current(model, np.array([100.0, 200.0, 300.0])[:, None], np.array([-1.0, -2.0]))
    assert out.shape == (3, 2)
    assert out[2, 1] == pytest.approx(plate_current(model, 300.0, -2.0), rel=1e-15)


# ---------------------------------------------------------------- grid current


@pytest.mark.parametrize("model", MODELS, ids=IDS)
def test_grid_current_negligible_for_negative_grid(model):
    # Common practice: with the grid more than ~0.5 V negative a triode draws
    # no grid current worth modelling (< 1 nA).
    assert np.all(grid_current(model, np.linspace(-100.0, -0.5, 200)) < 1e-9)


@pytest.mark.parametrize("form", ["koren", "dempwolf"])
def test_grid_conductance_of_12ax7_at_plus_one_volt(form):
    # Common practice: a 12AX7 grid in conduction at about +1 V looks like
    # 1–2 kΩ to the driving circuit (both forms' grid-current laws).
    _ig, g = grid_current_and_derivative(dataclasses.replace(lookup("12AX7"), form=form), 1.0)
    assert 1.0 / 2e3 <= g <= 1.0 / 1e3


def test_grid_current_follows_three_halves_power_above_onset():
    # The approximation is a 3/2-power (Child–Langmuir) law once the grid is
    # well past its onset: d ln Ig / d ln(Vgk - V0) -> 1.5.
    model = MODELS[0]
    vgk = np.array([1.0, 2.0, 5.0])
    ig, dig = grid_current_and_derivative(model, vgk)
    slope = (vgk - model.grid_onset_v) * dig / ig
    np.testing.assert_allclose(slope, 1.5, rtol=1e-6)


@pytest.mark.parametrize("model", MODELS, ids=IDS)
def test_grid_current_derivative_matches_central_differences(model):
    vgk = np.array([-3.0, -0.5, -0.1, 0.0, 0.05, 0.3, 1.0, 4.0])
    _ig, dig = grid_current_and_derivative(model, vgk)
    fd = _central_difference(lambda v: grid_current(model, v), vgk, 1e-7)
    np.testing.assert_allclose(dig, fd, rtol=1e-6, atol=1e-20)
    assert np.all(np.diff(grid_current(model, np.linspace(-5, 5, 101))) > 0)


# ------------------------------------------------------------------- dataclass


def test_model_is_frozen_hashable_and_replace_validates():
    model = MODELS[0]
    assert hash(model) == hash(dataclasses.replace(model))
    assert model == dataclasses.replace(model)
    changed = dataclasses.replace(model, mu=95.0)
    assert changed.mu == 95.0 and changed != model
    assert plate_current(changed, 250.0, -2.0) != plate_current(model, 250.0, -2.0)
    with pytest.raises(dataclasses.FrozenInstanceError):
        model.mu = 1.0  # type: ignore[misc]
    for bad in ({"mu": -1.0}, {"ex": 1.0}, {"kvb": 0.0}, {"kg1": float("nan")}, {"cgk_f": -1e-12}):
        with pytest.raises(ValueError):
            dataclasses.replace(model, **bad)


def test_model_is_keyword_only_and_aliases_become_a_tuple():
    ratings = Ratings(vp_max_v=300.0, pd_max_w=1.0, ik_max_a=None, vhk_max_v=None, rg_max_ohm=None, source="test")
    with pytest.raises(TypeError):
        TriodeModel("X", 100.0, 1.4, 1000.0, 600.0, 300.0, 1e-12, 1e-12, 1e-12, ratings, "test")  # type: ignore[misc]
    model = TriodeModel(
        name="X", mu=100.0, ex=1.4, kg1=1000.0, kp=600.0, kvb=300.0,
        cgk_f=1e-12, cgp_f=1e-12, cpk_f=1e-12, ratings=ratings, source="test", aliases=["Y"],  # type: ignore[arg-type]
    )
    assert model.aliases == ("Y",)
    hash(model)
    with pytest.raises(ValueError):
        Ratings(vp_max_v=-1.0, pd_max_w=None, ik_max_a=None, vhk_max_v=None, rg_max_ohm=None, source="test")


# ------------------------------------------------------- Dempwolf–Zölzer form

DZ_MODELS = [dataclasses.replace(m, form="dempwolf") for m in MODELS]
# the published 12AX7 set of Dempwolf and Zölzer, DAFx-11 (2011), from memory
DZ_PUBLISHED = dataclasses.replace(lookup("12AX7"), form="dempwolf", dz_mu=103.2, dz_g=2.242e-3, dz_gamma=1.26,
                                   dz_c=3.4, dz_gg=6.177e-4, dz_xi=1.314, dz_cg=9.901, dz_ig0=8.025e-8,
                                   dz_vct=0.0)


@pytest.mark.parametrize("model", [*DZ_MODELS, DZ_PUBLISHED], ids=[*IDS, "published"])
def test_dempwolf_derivatives_match_central_differences(model):
    # As for the Koren form: analytic partials against O(h²) central
    # differences, rtol 1e-6, over plate voltages 1–400 V and grids -8…+2 V.
    vpk, vgk = np.meshgrid(np.array([1.0, 20.0, 60.0, 150.0, 250.0, 400.0]),
                           np.array([-8.0, -4.0, -2.0, -1.0, -0.3, 0.0, 0.5, 2.0]), indexing="ij")
    _ip, gm, gp = plate_current_and_derivatives(model, vpk, vgk)
    h_p = 1e-7 * np.abs(vpk)
    gm_fd = _central_difference(lambda v: plate_current(model, vpk, v), vgk, 1e-7)
    gp_fd = _central_difference(lambda v: plate_current(model, v, vgk), vpk, h_p)
    np.testing.assert_allclose(gm, gm_fd, rtol=1e-6, atol=1e-12)
    np.testing.assert_allclose(gp, gp_fd, rtol=1e-6, atol=1e-14)
    _ig, dig = grid_current_and_derivative(model, vgk)
    np.testing.assert_allclose(dig, _central_difference(lambda v: grid_current(model, v), vgk, 1e-7),
                               rtol=1e-6, atol=1e-14)


def test_dempwolf_published_12ax7_values_by_hand():
    # Dempwolf and Zölzer (DAFx-11, 2011), equations evaluated by hand for the
    # published 12AX7 set at 250 V/-2 V: x = C·(250/103.2 - 2) = 1.4364,
    # ln(1 + e^x)/C = 0.48507, Ik = G·0.48507^1.26 = 0.9014 mA; the grid
    # current there is Ig0 (8.0e-8 A) plus a negligible term; Ip = Ik - Ig.
    ik = 2.242e-3 * (np.log1p(np.exp(3.4 * (250.0 / 103.2 - 2.0))) / 3.4) ** 1.26
    assert ik == pytest.approx(0.9014e-3, rel=1e-3)
    assert plate_current(DZ_PUBLISHED, 250.0, -2.0) == pytest.approx(ik - grid_current(DZ_PUBLISHED, -2.0), rel=1e-12)
    assert grid_current(DZ_PUBLISHED, -2.0) == pytest.approx(8.025e-8, rel=1e-3)
    # the form's mu is exact: ∂Ik/∂Vgk = mu·∂Ik/∂Vpk (Ik depends on Vpk/mu + Vgk only)
    _ip, gm, gp = plate_current_and_derivatives(dataclasses.replace(DZ_PUBLISHED, dz_ig0=0.0), 250.0, -2.0)
    assert gm / gp == pytest.approx(103.2, rel=1e-4)


@pytest.mark.parametrize("model", DZ_MODELS, ids=IDS)
def test_dempwolf_plate_current_never_negative(model):
    # Ip = Ik - Ig is held at 0 where the grid takes all the cathode current.
    vpk, vgk = np.meshgrid(np.linspace(-300.0, 400.0, 57), np.linspace(-30.0, 20.0, 51), indexing="ij")
    ip, gm, gp = plate_current_and_derivatives(model, vpk, vgk)
    assert np.all(ip >= 0.0) and np.all(np.isfinite(gm)) and np.all(gp >= 0.0)
    assert (ip == 0.0).any()


def test_form_is_validated():
    with pytest.raises(ValueError, match="form"):
        dataclasses.replace(lookup("12AX7"), form="spice")
    with pytest.raises(ValueError, match="dz_gamma"):
        dataclasses.replace(lookup("12AX7"), dz_gamma=1.0)
    with pytest.raises(ValueError, match="vct"):
        dataclasses.replace(lookup("12AX7"), vct=9.0)
