"""Normalised sensitivities (adjoint and DC-Jacobian) against finite differences
of the whole analysis with one part changed (central differences, relative step 1e-5)."""

from __future__ import annotations

import functools
import math
from dataclasses import replace
from pathlib import Path

import pytest

from chain.dc import solve
from chain.smallsignal import linearize, response_corners
from chain.smallsignal.response import transfer_function
from chain.smallsignal.sensitivity import rankings

ROOT = Path(__file__).resolve().parents[2]
CLEAN = ROOT / "netlists" / "clean_two_stage.chain"
H = 1e-5


@functools.lru_cache(maxsize=None)
def base(path):
    from chain.analysis import analyze

    a = analyze(path, headroom=False)
    ss = linearize(a.circuit, a.dc)
    ranks = rankings(ss, a.dc, ref_hz=a.design.settings.reference_hz,
                     f_low_hz=a.overall.f_low_hz, f_high_hz=a.overall.f_high_hz)
    return a, {r.quantity: r for r in ranks}


def scaled(circuit, name, factor):
    def one(items, attr):
        return tuple(replace(p, **{attr: getattr(p, attr) * factor}) if p.name == name else p for p in items)

    return replace(circuit, resistors=one(circuit.resistors, "ohms"), capacitors=one(circuit.capacitors, "farads"),
                   inductors=one(circuit.inductors, "henries"), sources=one(circuit.sources, "volts"))


def fd(a, name, measure):
    vals = []
    for sign in (1.0, -1.0):
        c = scaled(a.circuit, name, 1.0 + sign * H)
        vals.append(measure(c))
    return (math.log(vals[0]) - math.log(vals[1])) / (math.log1p(H) - math.log1p(-H))


def test_gain_sensitivities_match_finite_differences():
    a, ranks = base(CLEAN)
    ref = a.design.settings.reference_hz

    def gain(c):
        ss = linearize(c, a.dc)  # capacitors and resistors at the same operating point
        return abs(complex(transfer_function(ss, ss.output_node)(ref)))

    for name, s in ranks["overall gain"].top(4):
        assert abs(fd(a, name, gain) - s) < 1e-5 + 1e-4 * abs(s), name


@pytest.mark.parametrize("which", ["low corner", "high corner"])
def test_corner_sensitivities_match_finite_differences(which):
    a, ranks = base(CLEAN)
    ref = a.design.settings.reference_hz
    from chain.analysis import sweep_frequencies
    from chain.smallsignal import response

    f = sweep_frequencies(a.design)

    def corner(c):
        ss = linearize(c, a.dc)
        low, high = response_corners(response(ss, f, stage_impedances=False), ref_hz=ref)
        return low if which == "low corner" else high

    checked = 0
    for name, s in ranks[which].top(3):
        assert abs(fd(a, name, corner) - s) < 1e-4 + 1e-3 * abs(s), name
        checked += 1
    assert checked == 3


def test_bias_current_sensitivities_match_finite_differences():
    """d ln Ip / d ln x from the DC Jacobian against two DC solves per part."""
    a, ranks = base(CLEAN)
    r = ranks["V1 plate current"]

    def ip(c):
        return solve(c).points["V1"].ip_a

    for name, s in r.top(4):
        assert abs(fd(a, name, ip) - s) < 1e-5 + 1e-4 * abs(s), name
    # the plate current of a cathode-biased stage rises with the supply and falls
    # with a larger cathode resistor (common practice)
    parts = dict(r.parts)
    assert parts["supply.HT"] > 0 and parts["V1.Rk"] < 0
