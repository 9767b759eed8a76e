"""Triode model: the Koren plate-current equation, a grid-conduction
approximation, and the small-signal parameters derived from them.

Everything here is plain numpy and vectorised: voltages may be Python floats
or numpy arrays (broadcast against each other); results come back as
``numpy.float64`` for scalar input and as arrays otherwise.

Units: volt, ampere, siemens, ohm, farad, watt — SI base units throughout.
``vpk_v`` is the plate-to-cathode voltage, ``vgk_v`` the grid-to-cathode
voltage.

Cathode current
---------------
With the grid positive the cathode supplies both the plate current and the
grid current: ``ik = ip + ig`` (:func:`plate_current` + :func:`grid_current`).
In this model the two are independent — the plate current does not drop when
the grid starts to take current (no current division), which is part of the
approximation documented on :func:`grid_current`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

__all__ = [
    "FORMS",
    "FORM_FIELDS",
    "form_parameters",
    "V_LIMIT_V",
    "Ratings",
    "TriodeModel",
    "SmallSignal",
    "plate_current",
    "plate_current_and_derivatives",
    "small_signal",
    "grid_current",
    "grid_current_and_derivative",
]

#: Model forms a :class:`TriodeModel` can use for its plate and grid current:
#: ``"koren"`` (Koren 1996 with the contact-potential term of Cohen and Hélie
#: 2010, and the grid-current approximation of :func:`grid_current_and_derivative`)
#: and ``"dempwolf"`` (Dempwolf and Zölzer 2011, plate and grid current).
FORMS = ("koren", "dempwolf")

#: Netlist tube-line key → :class:`TriodeModel` field of each form's
#: parameters (capacitances and ratings are common to all forms).
FORM_FIELDS = {
    "koren": (("mu", "mu"), ("ex", "ex"), ("kg1", "kg1"), ("kp", "kp"), ("kvb", "kvb"), ("vct", "vct"),
              ("ig-k", "grid_perveance_a_v15"), ("ig-onset", "grid_onset_v"), ("ig-knee", "grid_knee_v")),
    "dempwolf": (("mu", "dz_mu"), ("g", "dz_g"), ("gamma", "dz_gamma"), ("c", "dz_c"), ("vct", "dz_vct"), ("gg", "dz_gg"),
                 ("xi", "dz_xi"), ("cg", "dz_cg"), ("ig0", "dz_ig0")),
}

#: Electrode voltages are clipped to ±V_LIMIT_V (1 MV) before evaluation, far
#: beyond any receiving tube; past the clip the current is constant and its
#: derivative with respect to the clipped voltage is zero.  This keeps every
#: result finite for every finite input.
V_LIMIT_V = 1.0e6

# Below this softplus argument exp(u) is used for softplus(u) / logistic(u)
# ratios (their ratio is 1 + O(exp(u)) there, exactly 1 in double precision).
_U_TAIL = -40.0


@dataclass(frozen=True, slots=True)
class Ratings:
    """Maximum ratings of one triode section.

    ``None`` means the rating is not known (no check is possible).

    Attributes
    ----------
    vp_max_v : float or None
        Maximum DC plate voltage (V).
    pd_max_w : float or None
        Maximum plate dissipation of one section (W).
    ik_max_a : float or None
        Maximum DC cathode current (A).
    vhk_max_v : float or None
        Maximum heater-to-cathode voltage, magnitude (V).
    rg_max_ohm : float or None
        Maximum grid-circuit (grid-leak) resistance with cathode bias (ohm).
    source : str
        Where the numbers come from.
    vp_cold_max_v : float or None
        Maximum plate voltage with the tube cold, no plate current yet
        (the supply voltage at switch-on), V.  Data sheets give it
        separately from, and higher than, the running rating.
    """

    vp_max_v: float | None
    pd_max_w: float | None
    ik_max_a: float | None
    vhk_max_v: float | None
    rg_max_ohm: float | None
    source: str
    vp_cold_max_v: float | None = None

    def __post_init__(self) -> None:
        for name in ("vp_max_v", "pd_max_w", "ik_max_a", "vhk_max_v", "rg_max_ohm", "vp_cold_max_v"):
            value = getattr(self, name)
            if value is not None and not (math.isfinite(value) and value > 0):
                raise ValueError(f"Ratings.{name} must be a positive finite number or None, got {value!r}")


@dataclass(frozen=True, slots=True, kw_only=True)
class TriodeModel:
    """Parameters of one triode section (keyword-only construction).

    Plate current follows the Koren equation (see :func:`plate_current`) with
    parameters ``mu, ex, kg1, kp, kvb``.  These are *fit* parameters:
    ``mu`` is the asymptotic amplification factor of the equation, not
    necessarily the handbook amplification factor — use :func:`small_signal`
    for the amplification factor at an operating point.

    Grid current follows the approximation of :func:`grid_current` with
    ``grid_perveance_a_v15``, ``grid_onset_v`` and ``grid_knee_v``; the
    defaults give a conductance of about 1/(1.5 kΩ) at ``vgk = +1 V``, an
    order of magnitude typical of a small signal triode such as the 12AX7
    (engineering approximation, not a data-sheet value).

    Use :func:`dataclasses.replace` for user overrides, e.g.
    ``replace(lookup("12AX7"), mu=95.0)``; the new values are validated.

    Attributes
    ----------
    name : str
        Type designation, e.g. ``"12AX7"``.
    mu, ex, kg1, kp, kvb : float
        Koren parameters: ``mu`` (dimensionless, > 0), ``ex`` (exponent,
        1 < ex <= 3), ``kg1`` (V^ex/A, > 0), ``kp`` (dimensionless, > 0),
        ``kvb`` (V², > 0).
    cgk_f, cgp_f, cpk_f : float
        Grid–cathode, grid–plate and plate–cathode capacitance (F).
        Data-sheet "input" and "output" capacitances (to cathode plus heater)
        are used for ``cgk_f`` and ``cpk_f``.
    ratings : Ratings
        Maximum ratings.
    grid_perveance_a_v15 : float
        Grid-conduction perveance k (A/V^1.5, >= 0).
    grid_onset_v : float
        Grid voltage where grid conduction starts (V).
    grid_knee_v : float
        Width of the smooth onset (V, > 0).
    source : str
        Where the parameters come from.
    aliases : tuple of str
        Other designations of the same tube.
    """

    name: str
    mu: float
    ex: float
    kg1: float
    kp: float
    kvb: float
    cgk_f: float
    cgp_f: float
    cpk_f: float
    ratings: Ratings
    grid_perveance_a_v15: float = 4.4e-4
    grid_onset_v: float = 0.0
    grid_knee_v: float = 0.05
    source: str
    aliases: tuple[str, ...] = field(default=())
    form: str = "koren"
    vct: float = 0.0
    dz_mu: float = 103.2
    dz_g: float = 2.242e-3
    dz_gamma: float = 1.26
    dz_c: float = 3.4
    dz_vct: float = 0.0
    dz_gg: float = 6.177e-4
    dz_xi: float = 1.314
    dz_cg: float = 9.901
    dz_ig0: float = 0.0

    def __post_init__(self) -> None:
        if self.form not in FORMS:
            raise ValueError(f"{self.name}: form must be one of {', '.join(FORMS)}, got {self.form!r}")
        positive = ("mu", "kg1", "kp", "kvb", "grid_knee_v", "dz_mu", "dz_g", "dz_c", "dz_gg", "dz_cg")
        for name in positive:
            value = getattr(self, name)
            if not (math.isfinite(value) and value > 0):
                raise ValueError(f"{self.name}: {name} must be positive and finite, got {value!r}")
        for name in ("ex", "dz_gamma", "dz_xi"):
            # an exponent > 1 keeps the derivative continuous (zero) at the cutoff edge
            value = getattr(self, name)
            if not (math.isfinite(value) and 1.0 < value <= 3.0):
                raise ValueError(f"{self.name}: {name} must lie in (1, 3], got {value!r}")
        for name in ("cgk_f", "cgp_f", "cpk_f", "grid_perveance_a_v15", "dz_ig0"):
            value = getattr(self, name)
            if not (math.isfinite(value) and value >= 0):
                raise ValueError(f"{self.name}: {name} must be >= 0 and finite, got {value!r}")
        for name in ("grid_onset_v", "vct", "dz_vct"):
            if not math.isfinite(getattr(self, name)):
                raise ValueError(f"{self.name}: {name} must be finite, got {getattr(self, name)!r}")
        for name in ("vct", "dz_vct"):
            if abs(getattr(self, name)) > 5.0:
                raise ValueError(f"{self.name}: {name} (contact potential) must lie within ±5 V, "
                                 f"got {getattr(self, name)!r}")
        if not isinstance(self.ratings, Ratings):
            raise TypeError(f"{self.name}: ratings must be a Ratings, got {type(self.ratings).__name__}")
        if not isinstance(self.aliases, tuple):
            object.__setattr__(self, "aliases", tuple(self.aliases))


def form_parameters(model: "TriodeModel") -> tuple[tuple[str, float], ...]:
    """``(tube-line key, value)`` of every parameter of the model's own form."""
    return tuple((key, float(getattr(model, attr))) for key, attr in FORM_FIELDS[model.form])


@dataclass(frozen=True, slots=True)
class SmallSignal:
    """Small-signal parameters at one operating point.

    Attributes
    ----------
    gm_s : float or ndarray
        Transconductance ∂Ip/∂Vgk (S).
    rp_ohm : float or ndarray
        Plate resistance 1/(∂Ip/∂Vpk) (ohm); ``inf`` where ∂Ip/∂Vpk = 0
        (cutoff, Vpk <= 0): the plate is then an open circuit.
    mu : float or ndarray
        Amplification factor gm·rp.  Where both gm and 1/rp vanish, the
        limit of their ratio for Vpk > 0 (finite) and 0 for Vpk <= 0.
    """

    gm_s: float | np.ndarray
    rp_ohm: float | np.ndarray
    mu: float | np.ndarray


def _out(x: np.ndarray):
    """numpy.float64 for 0-d arrays, the array otherwise."""
    return x[()] if x.ndim == 0 else x


def _clip(v) -> tuple[np.ndarray, np.ndarray]:
    """Clipped voltage and 1.0/0.0 mask of where the clip is inactive."""
    v = np.asarray(v, dtype=float)
    inside = (np.abs(v) < V_LIMIT_V).astype(float)
    return np.clip(v, -V_LIMIT_V, V_LIMIT_V), inside


def _koren_terms(model: TriodeModel, vpk: np.ndarray, vgk: np.ndarray):
    """Shared intermediate terms of the Koren equation (arrays)."""
    s = np.sqrt(model.kvb + vpk * vpk)
    u = model.kp * (1.0 / model.mu + (vgk + model.vct) / s)
    softplus = np.logaddexp(0.0, u)
    logistic = np.exp(u - softplus)
    e1 = vpk / model.kp * softplus
    return s, u, softplus, logistic, e1


def _dempwolf_grid(model: TriodeModel, vgk: np.ndarray):
    """Dempwolf–Zölzer grid current and its derivative (arrays)."""
    xg = model.dz_cg * vgk
    spg = np.logaddexp(0.0, xg)
    sigg = np.exp(xg - spg)
    base = spg / model.dz_cg
    ig = model.dz_gg * base**model.dz_xi + model.dz_ig0
    dig = model.dz_gg * model.dz_xi * base ** (model.dz_xi - 1.0) * sigg
    return ig, dig


def _dempwolf_plate(model: TriodeModel, vpk: np.ndarray, vgk: np.ndarray):
    """Dempwolf–Zölzer plate current Ik − Ig (clamped at 0) and its partials (arrays)."""
    x = model.dz_c * (vpk / model.dz_mu + vgk + model.dz_vct)
    sp = np.logaddexp(0.0, x)
    sig = np.exp(x - sp)
    base = sp / model.dz_c
    ik = model.dz_g * base**model.dz_gamma
    dik_dx = model.dz_g * model.dz_gamma * base ** (model.dz_gamma - 1.0) * sig
    ig, dig = _dempwolf_grid(model, vgk)
    ip = ik - ig
    on = ip > 0.0
    return (np.where(on, ip, 0.0), np.where(on, dik_dx - dig, 0.0), np.where(on, dik_dx / model.dz_mu, 0.0))


def plate_current_and_derivatives(model: TriodeModel, vpk_v, vgk_v):
    """Plate current and its analytic partial derivatives.

    Form ``"koren"``: the Koren triode equation (N. Koren, "Improved vacuum
    tube models for SPICE simulations", Glass Audio vol. 8 no. 5, 1996) with
    the contact potential Vct added to the grid voltage as in the improved
    Koren model of I. Cohen and T. Hélie ("Measures and parameter estimation
    of triodes, for the real-time simulation of a multi-stage guitar
    preamplifier", AES 129th Convention, 2010; from memory)::

        E1 = (Vpk/kp) · ln(1 + exp(kp · (1/mu + (Vgk + Vct) / sqrt(kvb + Vpk²))))
        Ip = (E1^ex / kg1) · (1 + sgn(E1))     i.e. 2·E1^ex/kg1 for E1 > 0, else 0

    Form ``"dempwolf"``: K. Dempwolf and U. Zölzer, "A physically-motivated
    triode model for circuit simulations", DAFx-11, Paris 2011 (from
    memory)::

        Ik = G · (ln(1 + exp(C·(Vpk/mu + Vgk + Vct))) / C)^gamma   cathode current
        Ig = Gg · (ln(1 + exp(Cg·Vgk)) / Cg)^xi + Ig0              grid current
        Ip = Ik − Ig,   held at 0 where Ik < Ig (Vpk < 0 with the grid positive)
        ∂Ik/∂Vgk = G·gamma·(ln(1+e^x)/C)^(gamma−1)·σ(x),  x = C·(Vpk/mu + Vgk + Vct)
        ∂Ik/∂Vpk = ∂Ik/∂Vgk / mu
        ∂Ip/∂Vgk = ∂Ik/∂Vgk − dIg/dVgk,   ∂Ip/∂Vpk = ∂Ik/∂Vpk

    (parameters ``dz_mu, dz_g, dz_gamma, dz_c, dz_gg, dz_xi, dz_cg, dz_ig0``).
    The contact potential Vct (``dz_vct``; tube-line key ``vct``) is
    chain's addition to the published form, as Cohen and Hélie added it to
    Koren's: it shifts the plate characteristics along the grid axis without
    moving the grid-current onset; with Vct = 0 the form is as published.
    Unlike Koren's, this Ip is not exactly 0 at Vpk = 0 (0.28 mA at
    Vpk = Vgk = 0 for the published 12AX7 set): the form is meant for
    Vpk well above 0, where every preamp stage works.  The rest of this
    docstring is about the Koren form.

    The softplus ln(1 + exp(u)) is evaluated as ``logaddexp(0, u)``.
    Derivatives, with s = sqrt(kvb + Vpk²), u the softplus argument and
    σ(u) = 1/(1 + exp(-u)) the logistic function::

        ∂E1/∂Vgk = Vpk · σ(u) / s
        ∂E1/∂Vpk = ln(1 + e^u)/kp − σ(u) · Vgk · Vpk² / s³
        ∂Ip/∂E1  = 2 · ex · E1^(ex−1) / kg1            (E1 > 0, else 0)

    Ip and both derivatives are continuous everywhere (ex > 1 makes
    ∂Ip/∂E1 → 0 at E1 → 0⁺, so Vpk → 0⁺ and deep cutoff join Ip = 0
    smoothly).  For Vpk <= 0, E1 <= 0 and everything is exactly 0.  The
    results are finite for every finite input (voltages are clipped to
    ±:data:`V_LIMIT_V`).

    Parameters
    ----------
    model : TriodeModel
        Tube parameters.
    vpk_v : float or array_like
        Plate-to-cathode voltage (V).
    vgk_v : float or array_like
        Grid-to-cathode voltage (V).

    Returns
    -------
    ip_a : float or ndarray
        Plate current (A), >= 0.
    dip_dvgk_s : float or ndarray
        ∂Ip/∂Vgk (S), >= 0.
    dip_dvpk_s : float or ndarray
        ∂Ip/∂Vpk (S), >= 0.
    """
    vpk, in_p = _clip(vpk_v)
    vgk, in_g = _clip(vgk_v)
    vpk, vgk, in_p, in_g = np.broadcast_arrays(vpk, vgk, in_p, in_g)
    if model.form == "dempwolf":
        with np.errstate(under="ignore"):
            ip, gm, gp = _dempwolf_plate(model, vpk, vgk)
        return _out(ip), _out(gm * in_g), _out(gp * in_p)
    with np.errstate(under="ignore"):
        s, _u, softplus, logistic, e1 = _koren_terms(model, vpk, vgk)
        conducting = e1 > 0.0
        e1_pos = np.where(conducting, e1, 0.0)
        ip = 2.0 / model.kg1 * e1_pos**model.ex
        dip_de1 = 2.0 * model.ex / model.kg1 * e1_pos ** (model.ex - 1.0)
        de1_dvgk = vpk * logistic / s
        de1_dvpk = softplus / model.kp - logistic * (vgk + model.vct) * (vpk * vpk) / (s * s * s)
        gm = np.where(conducting, dip_de1 * de1_dvgk, 0.0) * in_g
        gp = np.where(conducting, dip_de1 * de1_dvpk, 0.0) * in_p
    return _out(ip), _out(gm), _out(gp)


def plate_current(model: TriodeModel, vpk_v, vgk_v):
    """Plate current Ip (A) from the Koren equation.

    See :func:`plate_current_and_derivatives` for the equation, its source
    and its numerical treatment.

    Parameters
    ----------
    model : TriodeModel
        Tube parameters.
    vpk_v, vgk_v : float or array_like
        Plate-to-cathode and grid-to-cathode voltage (V).

    Returns
    -------
    float or ndarray
        Plate current (A), >= 0.

    Examples
    --------
    >>> from chain.tubes import lookup, plate_current
    >>> float(plate_current(lookup("12AX7"), 0.0, -2.0))
    0.0
    """
    vpk, _ = _clip(vpk_v)
    vgk, _ = _clip(vgk_v)
    vpk, vgk = np.broadcast_arrays(vpk, vgk)
    if model.form == "dempwolf":
        with np.errstate(under="ignore"):
            return _out(_dempwolf_plate(model, vpk, vgk)[0])
    with np.errstate(under="ignore"):
        e1 = _koren_terms(model, vpk, vgk)[4]
        ip = 2.0 / model.kg1 * np.where(e1 > 0.0, e1, 0.0) ** model.ex
    return _out(ip)


def small_signal(model: TriodeModel, vpk_v, vgk_v) -> SmallSignal:
    """Transconductance, plate resistance and amplification factor.

    ``gm = ∂Ip/∂Vgk``, ``rp = 1/(∂Ip/∂Vpk)``, ``mu = gm·rp`` (standard
    triode small-signal definitions; derivatives of the Koren equation as in
    :func:`plate_current_and_derivatives`).

    Where ∂Ip/∂Vpk is exactly 0 (Vpk <= 0, or a current that underflows in
    deep cutoff) ``rp`` is ``inf``.  ``mu`` is computed as the ratio
    ``(∂E1/∂Vgk)/(∂E1/∂Vpk)``, which equals gm·rp wherever that is defined
    and stays finite in cutoff (there, with Vpk² ≫ kvb and
    Vgk = −c·Vpk/mu, it is mu·kp/(mu + c·kp)); for Vpk <= 0 it is 0.

    Parameters
    ----------
    model : TriodeModel
        Tube parameters.
    vpk_v, vgk_v : float or array_like
        Plate-to-cathode and grid-to-cathode voltage (V).

    Returns
    -------
    SmallSignal
        ``gm_s`` (S), ``rp_ohm`` (ohm), ``mu`` (dimensionless).
    """
    _ip, gm, gp = plate_current_and_derivatives(model, vpk_v, vgk_v)
    gm = np.asarray(gm)
    gp = np.asarray(gp)
    vpk, _ = _clip(vpk_v)
    vgk, _ = _clip(vgk_v)
    vpk, vgk = np.broadcast_arrays(vpk, vgk)
    if model.form == "dempwolf":
        with np.errstate(divide="ignore", invalid="ignore"):
            rp = np.where(gp > 0.0, 1.0 / np.where(gp > 0.0, gp, 1.0), np.inf)
            mu = np.where(gp > 0.0, gm / np.where(gp > 0.0, gp, 1.0), np.where(vpk > 0.0, model.dz_mu, 0.0))
        return SmallSignal(gm_s=_out(gm), rp_ohm=_out(rp), mu=_out(mu))
    with np.errstate(under="ignore", divide="ignore", over="ignore"):
        s = np.sqrt(model.kvb + vpk * vpk)
        vgk = vgk + model.vct
        u = model.kp * (1.0 / model.mu + vgk / s)
        u_safe = np.maximum(u, _U_TAIL)
        softplus = np.logaddexp(0.0, u_safe)
        # softplus(u)/logistic(u) = softplus · exp(softplus − u); → 1 as u → −∞
        ratio = np.where(u < _U_TAIL, 1.0, softplus * np.exp(softplus - u_safe))
        denom = ratio / model.kp - vgk * (vpk * vpk) / (s * s * s)
        mu = np.where(vpk > 0.0, (vpk / s) / denom, 0.0)
        rp = np.where(gp > 0.0, 1.0 / np.where(gp > 0.0, gp, 1.0), np.inf)
    return SmallSignal(gm_s=_out(gm), rp_ohm=_out(rp), mu=_out(mu))


def grid_current_and_derivative(model: TriodeModel, vgk_v):
    """Grid current and its derivative.

    Form ``"dempwolf"``: the published grid-current law of Dempwolf and
    Zölzer (DAFx-11, 2011; see :func:`plate_current_and_derivatives`)::

        Ig = Gg · (ln(1 + exp(Cg·Vgk)) / Cg)^xi + Ig0
        dIg/dVgk = Gg · xi · (ln(1 + exp(Cg·Vgk)) / Cg)^(xi−1) · σ(Cg·Vgk)

    Form ``"koren"`` uses an ENGINEERING APPROXIMATION, described below.
    Not a published model.  A smooth onset followed by a 3/2-power law
    (the Child–Langmuir form, as for any space-charge-limited electrode)::

        E  = w · ln(1 + exp((Vgk − V0)/w))          smooth ramp, ≈ max(Vgk − V0, 0)
        Ig = k · E^1.5
        dIg/dVgk = 1.5 · k · E^0.5 · σ((Vgk − V0)/w)

    with k = ``grid_perveance_a_v15`` (A/V^1.5), V0 = ``grid_onset_v`` and
    w = ``grid_knee_v``.  With the defaults (k = 4.4e-4 A/V^1.5, V0 = 0 V,
    w = 50 mV) the grid conductance at Vgk = +1 V is about 1/(1.5 kΩ), the
    order usually quoted for a 12AX7 driven into grid conduction, the
    current at Vgk = 0 is about 3 µA and for Vgk < −0.5 V it is below a few
    pA.  What it leaves out: contact potential (real grids draw ~0.1–1 µA
    already at −0.5…−1 V, so grid-leak bias from a very large grid resistor
    is underestimated), the dependence of Ig on plate voltage (current
    division at low Vpk), and variation between tube types (all built-in
    types use the default unless stated).  Cathode current is Ip + Ig.

    Parameters
    ----------
    model : TriodeModel
        Tube parameters.
    vgk_v : float or array_like
        Grid-to-cathode voltage (V).

    Returns
    -------
    ig_a : float or ndarray
        Grid current into the grid (A), >= 0.
    dig_dvgk_s : float or ndarray
        dIg/dVgk (S), >= 0.
    """
    vgk, inside = _clip(vgk_v)
    if model.form == "dempwolf":
        with np.errstate(under="ignore"):
            ig, dig = _dempwolf_grid(model, vgk)
        return _out(ig), _out(dig * inside)
    w = model.grid_knee_v
    x = (vgk - model.grid_onset_v) / w
    with np.errstate(under="ignore"):
        softplus = np.logaddexp(0.0, x)
        ramp = w * softplus
        logistic = np.exp(x - softplus)
        ig = model.grid_perveance_a_v15 * ramp**1.5
        dig = 1.5 * model.grid_perveance_a_v15 * np.sqrt(ramp) * logistic * inside
    return _out(ig), _out(dig)


def grid_current(model: TriodeModel, vgk_v):
    """Grid current Ig (A) — engineering approximation.

    See :func:`grid_current_and_derivative` for the formula and its limits.

    Parameters
    ----------
    model : TriodeModel
        Tube parameters.
    vgk_v : float or array_like
        Grid-to-cathode voltage (V).

    Returns
    -------
    float or ndarray
        Grid current (A), >= 0.
    """
    return grid_current_and_derivative(model, vgk_v)[0]
