"""Per-step heading maps: the Brownian step variance and the sine-law maps at their edges."""

from __future__ import annotations

import numpy as np
from scipy.special import dawsn

from rootsim.growth.tropisms import tangent_variance, vertical_sine_law_step


def test_tangent_variance_gives_the_brownian_mean_cosine_in_both_regimes():
    # For v ~ N(0, τ I₂), |v| is Rayleigh and E[cos |v|] = 1 - sqrt(2τ) F(sqrt(τ/2)), F Dawson's integral
    # (term-by-term integration of the Rayleigh density); spherical Brownian motion over σ² Δs = x has
    # E[cos] = exp(-x). Check the forward formula on the returned τ, small x (series) and large x (table).
    # (Above x of about 5 the heading is fully randomized within the step and only the absolute error of the
    # mean cosine matters.)
    for x in (np.geomspace(1e-7, 0.049, 40), np.geomspace(0.05, 20.0, 40)):
        tau = tangent_variance(x)
        mean_cos = 1.0 - np.sqrt(2 * tau) * dawsn(np.sqrt(tau / 2))
        np.testing.assert_allclose(mean_cos, np.exp(-x), rtol=2e-5, atol=1e-6)


def test_tangent_variance_matches_a_monte_carlo_rayleigh_mean_cosine():
    # Independent of the formula: draw the tangent Gaussian and average cos |v| (Monte Carlo, 4.5 s.e.).
    rng = np.random.default_rng(0)
    for x in (0.02, 0.3, 1.5):
        tau = float(tangent_variance(np.array([x]))[0])
        v = rng.standard_normal((400_000, 2)) * np.sqrt(tau)
        c = np.cos(np.hypot(v[:, 0], v[:, 1]))
        assert abs(c.mean() - np.exp(-x)) < 4.5 * c.std() / np.sqrt(c.size)


def test_sine_law_map_is_exact_and_finite_at_the_edges():
    # tan(θ/2) = tan(θ0/2) exp(-k s) (Sachs' sine law, separation of variables) for θ0 from 0 to 180 degrees;
    # θ0 = 180 is the unstable equilibrium and must stay put with finite numbers.
    theta0 = np.radians(np.array([0.0, 1e-9, 30.0, 90.0, 179.0, 180.0]))
    h = np.stack([np.sin(theta0), np.zeros_like(theta0), -np.cos(theta0)])
    k, s = 0.3, 2.0
    out = vertical_sine_law_step(h, np.full(theta0.size, s), np.full(theta0.size, k), np.ones(theta0.size),
                                 np.zeros(theta0.size))
    assert np.isfinite(out).all()
    theta = np.arctan2(np.hypot(out[0], out[1]), -out[2])  # well conditioned near 0 and 180 degrees
    expected = 2 * np.arctan(np.tan(theta0 / 2) * np.exp(-k * s))
    np.testing.assert_allclose(theta[:-1], expected[:-1], atol=1e-12)
    assert theta[-1] == np.pi or abs(theta[-1] - np.pi) < 1e-6


def test_brownian_turn_has_the_spherical_brownian_mean_cosine_and_no_preferred_direction():
    # Spherical Brownian motion over σ² Δs = x: E[h·h'] = exp(-x) (Perrin 1928, rotational diffusion, from
    # memory); the turn must also be isotropic around h: its component along any fixed
    # tangent direction has mean zero (symmetry). Monte Carlo, 4.5 standard errors.
    from rootsim.growth.tropisms import random_deviation_step

    rng = np.random.default_rng(4)
    n = 200_000
    for h0 in ([0.0, 0.0, -1.0], [0.6, 0.0, 0.8], [0.0, 1.0, 0.0]):
        heading = np.repeat(np.array(h0)[:, None], n, axis=1)
        for sigma, step in ((0.2, 0.5), (1.0, 1.2)):
            out = random_deviation_step(heading, rng.standard_normal((3, n)), np.full(n, step), np.full(n, sigma))
            np.testing.assert_allclose(np.linalg.norm(out, axis=0), 1.0, atol=1e-12)
            cos = h0 @ out
            assert abs(cos.mean() - np.exp(-sigma**2 * step)) < 4.5 * cos.std() / np.sqrt(n)
            ortho = np.cross(h0, [0.3, -0.5, 0.81])
            ortho /= np.linalg.norm(ortho)
            along = ortho @ out
            assert abs(along.mean()) < 4.5 * along.std() / np.sqrt(n)


def test_shrink_factor_is_exp_to_the_last_bit_or_one_ulp():
    # exp(-x) (analytic): the inline series below its limit and math.exp above it agree with numpy's exp to
    # within one unit in the last place, on both sides of the limit and at 0.
    from rootsim.growth.tropisms import SHRINK_SERIES_LIMIT, shrink_factor

    x = np.concatenate([[0.0, 1e-300, 1e-12, SHRINK_SERIES_LIMIT * (1 - 1e-15), SHRINK_SERIES_LIMIT],
                        np.random.default_rng(4).uniform(0, 2 * SHRINK_SERIES_LIMIT, 20000),
                        np.geomspace(1e-9, 50, 2000)])
    got = np.array([shrink_factor(v) for v in x])
    expected = np.exp(-x)
    assert np.all(np.abs(got - expected) <= np.spacing(expected)), np.max(np.abs(got - expected) / np.spacing(expected))
    assert shrink_factor(0.0) == 1.0
