"""FFT harmonics and THD of a sampled period (chain.headroom.harmonics)."""

from __future__ import annotations

import numpy as np
import pytest

from chain.headroom.harmonics import harmonic_amplitudes, harmonic_phases, relative_db, sine_phases, thd


@pytest.mark.parametrize("amplitude, a2, a3", [(1.0, 0.1, 0.05), (0.3, -0.8, 0.4), (2.0, 0.02, -0.01)])
def test_polynomial_curve_matches_power_reduction_identities(amplitude, a2, a3):
    # y = x + a2 x² + a3 x³ with x = A sin θ.  Power-reduction identities
    # sin²θ = (1 − cos 2θ)/2 and sin³θ = (3 sin θ − sin 3θ)/4 (standard
    # trigonometric identities) give the harmonics in closed form:
    #   h1 = A + 3 a3 A³/4,  h2 = |a2| A²/2,  h3 = |a3| A³/4,  mean = a2 A²/2
    theta = sine_phases(256)
    x = amplitude * np.sin(theta)
    y = x + a2 * x**2 + a3 * x**3
    h = harmonic_amplitudes(y)
    h1 = abs(amplitude + 0.75 * a3 * amplitude**3)
    h2 = abs(a2) * amplitude**2 / 2.0
    h3 = abs(a3) * amplitude**3 / 4.0
    np.testing.assert_allclose(h[:3], [h1, h2, h3], rtol=1e-6, atol=1e-12)
    np.testing.assert_allclose(h[3:], 0.0, atol=1e-9)
    assert thd(h) == pytest.approx(np.hypot(h2, h3) / h1, rel=1e-6)
    assert np.mean(y) == pytest.approx(a2 * amplitude**2 / 2.0, rel=1e-9)
    # dB relative to the fundamental
    assert relative_db(h)[0] == pytest.approx(20 * np.log10(h2 / h1), abs=1e-6)


def test_phases_of_sine_and_cosine_components():
    # y = sin θ + 0.5 cos 2θ: the second harmonic is 0.5·sin(2θ + π/2) (cos = sin shifted by π/2)
    theta = sine_phases(64)
    y = np.sin(theta) + 0.5 * np.cos(2 * theta)
    ph = harmonic_phases(y, n_max=2)
    assert ph[0] == pytest.approx(0.0, abs=1e-12)
    assert ph[1] == pytest.approx(np.pi / 2, abs=1e-12)


def test_vectorised_over_leading_axes():
    theta = sine_phases(64)
    rows = np.array([np.sin(theta), 0.1 * np.sin(theta) + 0.01 * np.sin(3 * theta)])
    h = harmonic_amplitudes(rows)
    assert h.shape == (2, 9)
    np.testing.assert_allclose(thd(h), [0.0, 0.1], atol=1e-12)


def test_too_few_samples_for_the_ninth_harmonic_are_refused():
    with pytest.raises(ValueError, match="harmonic 9"):
        harmonic_amplitudes(np.zeros(16))
