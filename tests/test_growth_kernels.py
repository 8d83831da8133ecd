"""Scalar kernels of the compiled growth step against independent libraries (numpy, scipy)."""

from __future__ import annotations

import numpy as np
from scipy.special import ndtri

from rootsim.growth.draws import normal_quantile
from rootsim.growth.tropisms import cos_and_sinc


def test_cos_and_sinc_match_numpy_on_both_sides_of_the_series_limit():
    angles = np.r_[0.0, 1e-300, 1e-8, np.linspace(1e-4, 0.5, 2001), np.nextafter(0.5, 1.0), np.linspace(0.5, 6.0, 500)]
    got = np.array([cos_and_sinc(a) for a in angles])
    np.testing.assert_allclose(got[:, 0], np.cos(angles), rtol=0, atol=2e-16)
    expected_sinc = np.sinc(angles / np.pi)  # numpy's normalized sinc: sin(pi x)/(pi x)
    np.testing.assert_allclose(got[:, 1], expected_sinc, rtol=0, atol=2e-16)


def test_normal_quantile_matches_scipy_ndtri_from_the_far_tail_to_near_one():
    p = np.r_[1e-300, 1e-100, 1e-20, 1e-8, np.linspace(1e-6, 1 - 1e-6, 4001), 1 - 1e-10, 1 - 1e-16]
    got = np.array([normal_quantile(v) for v in p])
    np.testing.assert_allclose(got, ndtri(p), rtol=4e-15, atol=4e-15)
