"""Reading a sampled response between its samples."""

import numpy as np

from chain.smallsignal.resample import on_log_grid


def test_exact_for_data_linear_in_log_frequency():
    # a first-order slope far from its corner: -20 dB per decade (a straight line in log f)
    f = np.geomspace(10.0, 1e5, 37)
    mag = -20.0 * np.log10(f / 10.0)
    at = np.array([15.0, 333.0, 9999.0])
    np.testing.assert_allclose(on_log_grid(f, mag, at), -20.0 * np.log10(at / 10.0), rtol=0, atol=1e-12)


def test_outside_the_band_and_without_data_is_nan():
    f = np.array([10.0, 100.0, 1000.0])
    got = on_log_grid(f, [0.0, 1.0, 2.0], [5.0, 100.0, 2000.0])
    assert np.isnan(got[0]) and got[1] == 1.0 and np.isnan(got[2])
    assert np.isnan(on_log_grid(f, [np.nan, np.nan, 1.0], [50.0])).all()


def test_same_grid_returns_the_samples():
    f = np.geomspace(1.0, 1e3, 5)
    v = np.array([1.0, np.nan, 3.0, 4.0, 5.0])
    np.testing.assert_array_equal(on_log_grid(f, v, f), v)
