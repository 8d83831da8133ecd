"""Growth of single roots checked against analytic laws: elongation curves, Sachs' sine law,
plagiotropism, exotropism and spherical Brownian turning."""

import numpy as np
import pytest
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

from growth_specs import angle_from_vertical_deg, directions, grow_frame, make_spec, root_class, root_matrix


# -- elongation laws -----------------------------------------------------------------------------

def _linear_length(t, rate, max_length):
    # Linear growth to a maximum length: L = min(r t, L_max) (common practice).
    return np.minimum(rate * t, max_length)


def _negexp_length(t, rate, max_length):
    # Negative-exponential growth: L = L_max (1 - exp(-r t / L_max)), initial rate r (common practice;
    # the monomolecular growth curve, from memory).
    return max_length * (1.0 - np.exp(-rate * t / max_length))


@pytest.mark.parametrize("step_days", [0.5, 0.3, 1.0])
def test_linear_root_length_at_several_times(step_days):
    rate, max_length, first_day = 2.0, 30.0, 1.3
    spec = make_spec({"main": root_class(elongation_rate_cm_per_day=rate, max_length_cm=max_length)},
                     emergence=[{"root_class": "main", "first_day": first_day}], step_days=step_days)
    for days in (1.5, 4.0, 7.7, 12.0, 15.8, 20.0, 31.0):
        df = grow_frame(spec, days=days)
        expected = _linear_length(days - first_day, rate, max_length)
        assert df["length_cm"].sum() == pytest.approx(expected, rel=1e-12, abs=1e-12), days


@pytest.mark.parametrize("step_days", [0.5, 0.25, 2.0])
def test_negative_exponential_root_length_at_several_times(step_days):
    rate, max_length, first_day = 3.0, 20.0, 2.2
    spec = make_spec({"main": root_class(elongation_law="negative_exponential", elongation_rate_cm_per_day=rate,
                                         max_length_cm=max_length)},
                     emergence=[{"root_class": "main", "first_day": first_day}], step_days=step_days)
    # Up to r t / L_max = 7.2 the tip is further than 1e-4 L_max from its maximum and still growing.
    for days in (2.5, 3.0, 6.1, 10.0, 20.0, 50.2):
        df = grow_frame(spec, days=days)
        expected = _negexp_length(days - first_day, rate, max_length)
        assert df["length_cm"].sum() == pytest.approx(expected, rel=1e-10), days
    # Long after, the root has (nearly) reached L_max and never passes it.
    total = grow_frame(spec, days=400.0)["length_cm"].sum()
    assert max_length * (1 - 1e-3) <= total <= max_length * (1 + 1e-12)


@pytest.mark.parametrize("law", ["linear", "negative_exponential"])
def test_cumulative_length_along_the_root_follows_the_law_at_each_step(law):
    # Every segment ends at a step boundary; its birth day lies inside that step, so the end time is
    # the first step boundary at or after the birth day. Cumulative length there = the analytic curve.
    rate, max_length, first_day, step = 1.5, 25.0, 0.7, 0.4
    spec = make_spec({"main": root_class(elongation_law=law, elongation_rate_cm_per_day=rate,
                                         max_length_cm=max_length)},
                     emergence=[{"root_class": "main", "first_day": first_day}], days=30.0, step_days=step)
    df = grow_frame(spec).sort_values("segment_id")
    np.testing.assert_array_equal(df["parent_id"].to_numpy()[1:], df["segment_id"].to_numpy()[:-1])
    end_time = np.ceil(df["birth_day"].to_numpy() / step - 1e-9) * step
    cumulative = np.cumsum(df["length_cm"].to_numpy())
    curve = _linear_length if law == "linear" else _negexp_length
    np.testing.assert_allclose(cumulative, curve(end_time - first_day, rate, max_length), rtol=1e-9)


# -- Sachs' sine law ----------------------------------------------------------------------------

def _sine_law_angle(s, theta0, k, preferred=0.0):
    # Analytic solution of dθ/ds = -k sin(θ - θp): tan((θ-θp)/2) = tan((θ0-θp)/2) exp(-k s)
    # (separation of variables; Sachs' sine law of gravitropism for θp = 0, e.g. Bastien et al. 2013,
    # PNAS 110:755-760, doi:10.1073/pnas.1214301109).
    return preferred + 2.0 * np.arctan(np.tan((theta0 - preferred) / 2.0) * np.exp(-k * s))


def _grow_single(cls, *, days, step_days, depth_cm=20.0):
    spec = make_spec({"main": cls}, days=days, step_days=step_days, sowing_depth_cm=depth_cm)
    df = grow_frame(spec).sort_values("segment_id")
    np.testing.assert_array_equal(df["parent_id"].to_numpy()[1:], df["segment_id"].to_numpy()[:-1])
    return df


def _chord_angles_expected(df, angle_of_s):
    # The engine keeps headings at segment midpoints: each segment runs along the exact heading at the
    # middle of its arc (the tangent at the midpoint; for a circular arc it is also the chord direction).
    length = df["length_cm"].to_numpy()
    s_mid = np.cumsum(length) - 0.5 * length
    return np.degrees(angle_of_s(s_mid))


def _assert_single_azimuth(df):
    d = directions(df)
    horizontal = np.hypot(d[:, 0], d[:, 1])
    azimuth = np.arctan2(d[:, 1], d[:, 0])
    keep = horizontal > 1e-6
    assert np.ptp(np.unwrap(azimuth[keep])) < 1e-9


@pytest.mark.parametrize("theta0_deg", [30.0, 80.0, 120.0])
@pytest.mark.parametrize("k_per_cm", [0.05, 0.2, 1.0])
def test_gravitropism_follows_sachs_sine_law(theta0_deg, k_per_cm):
    theta0 = np.radians(theta0_deg)
    cls = root_class(gravitropism_per_cm=k_per_cm, initial_angle_from_vertical_deg=theta0_deg)
    df = _grow_single(cls, days=30.0, step_days=0.5)
    measured = angle_from_vertical_deg(directions(df))
    expected = _chord_angles_expected(df, lambda s: _sine_law_angle(s, theta0, k_per_cm))
    np.testing.assert_allclose(measured, expected, atol=1e-9)
    _assert_single_azimuth(df)


@pytest.mark.parametrize("theta0_deg,k_per_cm", [(30.0, 0.2), (80.0, 0.05), (120.0, 0.5)])
def test_gravitropic_tip_position_matches_the_integrated_sine_law(theta0_deg, k_per_cm):
    # Integrating dx/ds = sin θ, d(depth)/ds = cos θ along tan(θ/2) = u0 exp(-k s) gives the closed forms
    # horizontal offset = (θ0 - θ(s)) / k and depth gain = ln(sin θ0 / sin θ(s)) / k (substitute u = tan(θ/2),
    # ds = -du / (k u)). The chord polyline approximates the arc to second order in the step.
    theta0 = np.radians(theta0_deg)
    cls = root_class(gravitropism_per_cm=k_per_cm, initial_angle_from_vertical_deg=theta0_deg)
    df = _grow_single(cls, days=25.0, step_days=0.05)
    s_total = df["length_cm"].sum()
    theta = _sine_law_angle(s_total, theta0, k_per_cm)
    tip = df[["x1", "y1", "z1"]].to_numpy()[-1]
    base = df[["x0", "y0", "z0"]].to_numpy()[0]
    assert np.hypot(*(tip - base)[:2]) == pytest.approx((theta0 - theta) / k_per_cm, abs=2e-4)
    assert base[2] - tip[2] == pytest.approx(np.log(np.sin(theta0) / np.sin(theta)) / k_per_cm, abs=2e-4)


@pytest.mark.parametrize("theta0_deg", [10.0, 100.0, 150.0])
def test_plagiotropism_follows_the_sine_law_toward_the_preferred_angle(theta0_deg):
    preferred, k = np.radians(60.0), 0.3
    cls = root_class(plagiotropism_per_cm=k, preferred_angle_from_vertical_deg=60.0,
                     initial_angle_from_vertical_deg=theta0_deg)
    df = _grow_single(cls, days=40.0, step_days=0.5, depth_cm=30.0)
    measured = angle_from_vertical_deg(directions(df))
    expected = _chord_angles_expected(df, lambda s: _sine_law_angle(s, np.radians(theta0_deg), k, preferred))
    np.testing.assert_allclose(measured, expected, atol=1e-9)
    # After 40 cm (12 decay lengths) the root runs at the preferred angle.
    assert measured[-1] == pytest.approx(60.0, abs=1e-3)
    _assert_single_azimuth(df)


@pytest.mark.parametrize("theta0_deg,tropism", [
    (180.0, {"gravitropism_per_cm": 0.1}),
    (0.0, {"plagiotropism_per_cm": 0.3, "preferred_angle_from_vertical_deg": 180.0}),
])
def test_root_started_at_the_unstable_equilibrium_of_the_sine_law_keeps_growing(theta0_deg, tropism):
    # θ - θp = 180 deg is the unstable equilibrium of dθ/ds = -k sin(θ - θp): the exact solution stays there
    # (tan((θ - θp)/2) is infinite for all s), so the root grows straight on, r T cm, with finite coordinates.
    cls = root_class(initial_angle_from_vertical_deg=theta0_deg, **tropism)
    df = _grow_single(cls, days=30.0, step_days=0.5, depth_cm=50.0)
    coords = df[["x0", "y0", "z0", "x1", "y1", "z1"]].to_numpy()
    assert np.isfinite(coords).all()
    assert df["length_cm"].sum() == pytest.approx(30.0, rel=1e-12)
    expected_tip_z = -50.0 + 30.0 * (1 if theta0_deg == 180.0 else -1)
    assert df["z1"].to_numpy()[-1] == pytest.approx(expected_tip_z, abs=1e-3)


def test_gravitropism_plus_plagiotropism_matches_a_numerical_ode_solution():
    # Independent check with scipy: integrate dθ/ds = -kg sin θ - kp sin(θ - θp) with solve_ivp, and find
    # the equilibrium angle with brentq.
    kg, kp, preferred, theta0 = 0.08, 0.25, np.radians(80.0), np.radians(5.0)
    cls = root_class(gravitropism_per_cm=kg, plagiotropism_per_cm=kp, preferred_angle_from_vertical_deg=80.0,
                     initial_angle_from_vertical_deg=5.0)
    df = _grow_single(cls, days=60.0, step_days=0.5, depth_cm=30.0)

    def rhs(_s, theta):
        return -kg * np.sin(theta) - kp * np.sin(theta - preferred)

    length = df["length_cm"].to_numpy()
    mids = np.cumsum(length) - 0.5 * length  # segments run along the heading at their arc midpoints
    sol = solve_ivp(rhs, (0.0, mids[-1]), [theta0], t_eval=mids, rtol=1e-12, atol=1e-13, method="DOP853")
    expected = np.degrees(sol.y[0])
    np.testing.assert_allclose(angle_from_vertical_deg(directions(df)), expected, atol=1e-7)
    equilibrium = brentq(lambda t: rhs(0.0, t), 0.0, preferred)
    assert np.radians(angle_from_vertical_deg(directions(df))[-1]) == pytest.approx(equilibrium, abs=1e-5)


# -- random turning and exotropism ----------------------------------------------------------------

def _headings(d: np.ndarray) -> np.ndarray:
    """Headings at the segment midpoints, shape (roots, segments, 3): the engine grows each segment along
    the heading at the middle of its arc, so they are the chord directions themselves."""
    return d


def _vertical_roots_with_turning(sigma_deg, *, step_days, n_roots, days, seed, **extra):
    cls = root_class(random_turning_deg_per_sqrt_cm=sigma_deg, **extra)
    spec = make_spec({"main": cls}, emergence=[{"root_class": "main", "roots_per_event": n_roots}],
                     days=days, step_days=step_days, sowing_depth_cm=100.0, seed=seed)
    df = grow_frame(spec)
    d = root_matrix(df, directions(df))
    length = root_matrix(df, df["length_cm"].to_numpy())
    s = length.cumsum(axis=1) - 0.5 * length  # arc length at each segment's midpoint
    return _headings(d), s


def test_random_turning_mean_cosine_decays_as_spherical_brownian_motion():
    # Spherical Brownian motion on S^2 with per-axis angular variance σ² per cm of arc length has the
    # generator (σ²/2) Δ_S. cos β = <h0, h> is a degree-1 spherical harmonic (eigenvalue -l(l+1) = -2 of
    # Δ_S), so E[cos β(s)] = exp(-σ² s); cos² β = (1 + 2 P2)/3 with P2 decaying at rate 3σ² gives
    # Var[cos β] = (1 + 2 exp(-3σ² s))/3 - exp(-2σ² s) (spherical harmonics; the rotational-diffusion
    # result for a worm-like chain, persistence length 1/σ², from memory).
    # The roots start vertical (heading known exactly) 100 cm deep, so no boundary is reached in 30 cm.
    sigma_deg, n = 10.0, 3000
    sigma2 = np.radians(sigma_deg) ** 2
    means = {}
    for step_days, seed in ((1.0, 3), (0.1, 4)):
        h, s = _vertical_roots_with_turning(sigma_deg, step_days=step_days, n_roots=n, days=30.0, seed=seed)
        for s_check in (2.0, 5.0, 10.0, 20.0, 30.0):
            col = int(np.argmin(np.abs(s[0] - s_check)))
            assert np.allclose(s[:, col], s[0, col]) and abs(s[0, col] - s_check) <= 1.0
            s_check = s[0, col]  # the midpoint arc length nearest the nominal one (all roots alike)
            cos = -h[:, col, 2]
            expected = np.exp(-sigma2 * s_check)
            var = (1 + 2 * np.exp(-3 * sigma2 * s_check)) / 3 - np.exp(-2 * sigma2 * s_check)
            se = np.sqrt(var / n)
            # 4.5 standard errors; the geodesic random walk's own per-step bias (O(σ⁴ Δs s), below 0.002
            # here) is far smaller.
            assert abs(cos.mean() - expected) < 4.5 * se, (step_days, s_check, cos.mean(), expected)
            means[step_days, s_check] = (cos.mean(), var / n)
    # Resolution independence: the two time steps agree within the error of a difference.
    # (Compared at the same nominal arc lengths, each corrected to exp(-σ² s) at its exact midpoint.)
    coarse = {k[1]: v for k, v in means.items() if k[0] == 1.0}
    fine = {k[1]: v for k, v in means.items() if k[0] == 0.1}
    for (s1, (m1, v1)), (s2, (m2, v2)) in zip(sorted(coarse.items())[1:], sorted(fine.items())[1:]):
        assert abs(m1 * np.exp(sigma2 * s1) - m2 * np.exp(sigma2 * s2)) < 4.5 * np.sqrt(
            v1 * np.exp(2 * sigma2 * s1) + v2 * np.exp(2 * sigma2 * s2)), (s1, s2)


def test_random_turning_step_angle_has_rayleigh_spread():
    # Between consecutive segments the heading is turned over Δs cm of arc by the exponential map of a 2-D
    # tangent Gaussian v of per-axis variance τ, so the turning angle is α = |v| (Rayleigh, common practice)
    # and E[α²] = 2τ. The engine picks τ so that one step has the mean cosine of spherical Brownian motion,
    # E[cos α] = exp(-σ² Δs); τ is found here independently from E[cos α] = 1 - sqrt(2τ) F(sqrt(τ/2))
    # (F Dawson's integral; term-by-term integration of the Rayleigh density), τ ≈ σ² Δs (1 - σ² Δs / 6).
    from scipy.optimize import brentq
    from scipy.special import dawsn

    sigma_deg, n = 20.0, 2000
    h, s = _vertical_roots_with_turning(sigma_deg, step_days=0.5, n_roots=n, days=5.0, seed=11)
    step = 0.5
    cos_alpha = np.clip(np.sum(h[:, 1:] * h[:, :-1], axis=2), -1, 1).ravel()  # consecutive midpoints, Δs apart
    alpha = np.arccos(cos_alpha)
    x = np.radians(sigma_deg) ** 2 * step
    assert abs(cos_alpha.mean() - np.exp(-x)) < 4.5 * cos_alpha.std(ddof=1) / np.sqrt(cos_alpha.size)
    tau = brentq(lambda t: 1 - np.sqrt(2 * t) * dawsn(np.sqrt(t / 2)) - np.exp(-x), 1e-9, 10.0, xtol=1e-14)
    expected = 2 * tau
    # Rayleigh: α² / τ ~ chi-square with 2 degrees of freedom (variance 4), so Var[α²] = 4 τ².
    se = np.sqrt(4 * tau**2 / alpha.size)
    assert abs(np.mean(alpha**2) - expected) < 4.5 * se


def _exotropism_roots(exotropism, *, n, seed):
    # Horizontal start; the first step lasts 1e-4 day (emergence just before a step boundary), so the
    # first chord gives the initial heading to within 3e-3 rad.
    step = 0.025
    cls = root_class(exotropism_per_cm=exotropism, random_turning_deg_per_sqrt_cm=30.0,
                     initial_angle_from_vertical_deg=90.0)
    spec = make_spec({"main": cls}, emergence=[{"root_class": "main", "roots_per_event": n, "first_day": step - 1e-4}],
                     days=30.0 + step, step_days=step, sowing_depth_cm=60.0, seed=seed)
    df = grow_frame(spec)
    d = root_matrix(df, directions(df))
    h = _headings(d)
    return np.sum(h[:, -1] * d[:, 0], axis=1)


def test_exotropism_holds_the_initial_heading_against_random_turning():
    # With exotropism k (sine law toward the initial heading t) the drift k (t - (h.t) h) is the surface
    # gradient of U = k cos β; with spherical Brownian noise of generator (σ²/2) Δ_S the stationary density is
    # exp(2U/σ²): a von Mises-Fisher distribution with κ = 2k/σ², whose mean cosine is the Langevin function
    # coth κ - 1/κ (Fokker-Planck on the sphere; Fisher 1953, Proc. R. Soc. A 217:295-305,
    # doi:10.1098/rspa.1953.0064). Without exotropism the mean cosine decays as exp(-σ² s) (see above).
    k, sigma2, n, s = 0.5, np.radians(30.0) ** 2, 2000, 30.0
    kappa = 2 * k / sigma2
    with_exo = _exotropism_roots(k, n=n, seed=5)
    without = _exotropism_roots(0.0, n=n, seed=6)
    se_with = with_exo.std(ddof=1) / np.sqrt(n)
    # 0.005 allows for the first chord (3e-3 rad off the initial heading) and the O(Δs) bias of applying the
    # drift and the noise one after the other per 0.025 cm step (about 0.003 here, scaling from coarser steps).
    assert abs(with_exo.mean() - (1 / np.tanh(kappa) - 1 / kappa)) < 4.5 * se_with + 0.005
    se_without = without.std(ddof=1) / np.sqrt(n)
    assert abs(without.mean() - np.exp(-sigma2 * s)) < 4.5 * se_without + 0.005
    assert with_exo.mean() > without.mean() + 0.5


@pytest.mark.parametrize("step_days", [0.05, 1.0])
def test_random_turning_root_has_worm_like_chain_end_to_end_statistics(step_days):
    # A path whose unit tangent is spherical Brownian motion has tangent correlation
    # E[h(s) . h(s')] = exp(-|s - s'| / P) with persistence length P = 1/σ² (see the mean-cosine test), so
    # the tip displacement R over arc length S obeys E[R . h0] = P (1 - exp(-S/P)) and
    # E[|R|²] = 2 P S - 2 P² (1 - exp(-S/P)) (Kratky-Porod worm-like chain; Kratky & Porod 1949,
    # Recl. Trav. Chim. Pays-Bas 68:1106-1122, doi:10.1002/recl.19490681203). The roots start vertical,
    # 100 cm deep, and grow 20 cm (no boundary is reachable); 8000 roots, 4.5 standard errors.
    sigma_deg, days = 30.0, 20.0
    persistence = 1.0 / np.radians(sigma_deg) ** 2
    cls = root_class(random_turning_deg_per_sqrt_cm=sigma_deg)
    spec = make_spec({"main": cls}, emergence=[{"root_class": "main", "roots_per_event": 8000}],
                     days=days, step_days=step_days, seed=8, sowing_depth_cm=100.0)
    per_root = grow_frame(spec).groupby("root_id")
    end_to_end = per_root[["x1", "y1", "z1"]].last().to_numpy() - per_root[["x0", "y0", "z0"]].first().to_numpy()
    along = -end_to_end[:, 2]
    square = np.sum(end_to_end**2, axis=1)
    expected_along = persistence * (1 - np.exp(-days / persistence))
    expected_square = 2 * persistence * days - 2 * persistence**2 * (1 - np.exp(-days / persistence))
    assert abs(along.mean() - expected_along) < 4.5 * along.std(ddof=1) / np.sqrt(along.size)
    assert abs(square.mean() - expected_square) < 4.5 * square.std(ddof=1) / np.sqrt(square.size), square.mean()
