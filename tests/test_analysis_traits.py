"""Root traits: rooting-depth quantiles, Gale & Grigal beta, hull volume and width against analytic results."""

import json

import numpy as np
import pytest

from rootsim.analysis import fit_gale_grigal, gale_grigal_fraction, root_traits
from rootsim.analysis.depth_distribution import cumulative_depth
from test_analysis_support import branched_system, random_walk_system, straight_segments


def test_vertical_root_d50_d95():
    # Analytic: one vertical root from the surface to depth L has uniform length per depth, so
    # D50 = L / 2 and D95 = 0.95 L. Uneven segments so layer or segment rounding would show.
    L = 37.0
    cuts = np.array([0.0, 1.3, 2.0, 9.7, 20.2, 33.3, L])
    system = branched_system([{"points": [[0.0, 0.0, -c] for c in cuts]}])
    traits = root_traits(system)
    assert traits["d50_depth_cm"] == pytest.approx(L / 2, rel=1e-12)
    assert traits["d95_depth_cm"] == pytest.approx(0.95 * L, rel=1e-12)
    assert traits["max_depth_cm"] == pytest.approx(L)
    assert traits["total_length_cm"] == pytest.approx(L)


def test_two_uniform_densities_and_inclined_root():
    # Analytic: vertical roots 0-10 and 0-20 cm give density 2 cm/cm above 10 cm and 1 below; of 30 cm,
    # 15 lie above 7.5 cm and 28.5 above 18.5 cm. An inclined straight root has uniform length per depth
    # too (trigonometry), so it moves no quantile when it spans the same depths.
    system = straight_segments([[0, 0, 0], [1, 0, 0]], [[0, 0, -10], [1, 0, -20]])
    traits = root_traits(system)
    assert traits["d50_depth_cm"] == pytest.approx(7.5)
    assert traits["d95_depth_cm"] == pytest.approx(18.5)
    tilted = straight_segments([[0, 0, 0]], [[30, 0, -20]])
    assert root_traits(tilted)["d50_depth_cm"] == pytest.approx(10.0)


def test_horizontal_root_is_a_step_in_the_cumulative_length():
    # Analytic: vertical root 0-10 cm (10 cm) plus a horizontal 10 cm root at 5 cm: cumulative length
    # jumps from 5 to 15 cm at depth 5, so D50 (10 cm of 20) is exactly 5 cm.
    system = straight_segments([[0, 0, 0], [0, 0, -5]], [[0, 0, -10], [10, 0, -5]])
    assert root_traits(system)["d50_depth_cm"] == pytest.approx(5.0)
    cum = cumulative_depth(np.array([0.0, 5.0]), np.array([10.0, 5.0]), np.array([10.0, 10.0]))
    np.testing.assert_allclose(cum.at([-1.0, 2.5, 4.999999, 5.0, 7.5, 10.0, 30.0]), [0, 2.5, 5.0, 15, 17.5, 20, 20],
                               atol=1e-5)


@pytest.mark.parametrize("beta", [0.90, 0.95, 0.961, 0.98])
def test_gale_grigal_recovers_beta_of_exact_profile(beta):
    # Gale & Grigal 1987 (doi:10.1139/x87-131): Y = 1 - beta^d. Data built on the model are fitted exactly.
    depth = np.arange(5.0, 205.0, 5.0)
    fitted, rms = fit_gale_grigal(depth, gale_grigal_fraction(depth, beta))
    assert fitted == pytest.approx(beta, abs=1e-9)
    assert rms < 1e-9


def test_gale_grigal_from_segments_following_the_model():
    # Gale & Grigal 1987: put in each 5 cm layer the root length T (beta^top - beta^bottom) (horizontal roots
    # at mid-layer) down to where beta^d is negligible; the cumulative fraction at each layer bottom is then
    # 1 - beta^d and the fit must return beta.
    beta, h, T = 0.961, 5.0, 1000.0
    tops = np.arange(0.0, 1500.0, h)
    lengths = T * (beta ** tops - beta ** (tops + h))
    mid = tops + h / 2
    p0 = np.column_stack([np.zeros_like(mid), np.zeros_like(mid), -mid])
    p1 = p0 + np.column_stack([lengths, np.zeros_like(mid), np.zeros_like(mid)])
    traits = root_traits(straight_segments(p0, p1), layer_cm=h)
    assert traits["gale_grigal_beta"] == pytest.approx(beta, abs=1e-7)


def test_convex_hull_volume_of_known_solids():
    # Analytic: a root system whose end points are the 8 corners of a 2 x 3 x 4 cm box has hull volume 24 cm³;
    # the unit right tetrahedron has 1/6 cm³. A vertical single root spans no volume (0).
    corners = np.array([[x, y, -z] for x in (0, 2) for y in (0, 3) for z in (0, 4)], dtype=float)
    box = branched_system([{"points": corners}])
    assert root_traits(box)["convex_hull_volume_cm3"] == pytest.approx(24.0)
    tetra = branched_system([{"points": [[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, -1]]}])
    assert root_traits(tetra)["convex_hull_volume_cm3"] == pytest.approx(1.0 / 6.0)
    assert root_traits(straight_segments([0, 0, 0], [0, 0, -5]))["convex_hull_volume_cm3"] == 0.0


def test_convex_hull_volume_matches_trimesh():
    # Independent library: trimesh's convex hull volume of the same end points.
    import trimesh

    system = random_walk_system(6, 40, seed=11)
    pts = np.concatenate([np.column_stack([system[f"{a}1"] for a in "xyz"]),
                          np.column_stack([system[f"{a}0"] for a in "xyz"])])
    expected = trimesh.convex.convex_hull(pts).volume
    assert root_traits(system)["convex_hull_volume_cm3"] == pytest.approx(expected, rel=1e-9)


def test_width_is_the_horizontal_diameter():
    # Analytic: end points at (+-3, 0) and (0, +-2) (and the base at the origin): the largest horizontal
    # distance is 6 cm; a collinear (flat, one-direction) system of horizontal length 7 cm gives 7 cm.
    system = straight_segments([[0, 0, 0]] * 4, [[3, 0, -1], [-3, 0, -2], [0, 2, -3], [0, -2, -1]])
    assert root_traits(system)["width_cm"] == pytest.approx(6.0)
    line = straight_segments([[0, 0, 0], [4, 0, -1]], [[4, 0, -1], [7, 0, -9]])
    assert root_traits(line)["width_cm"] == pytest.approx(7.0)


def test_per_plant_traits_area_and_json():
    # Two plants; ground area from the stand (plant spacing x row spacing x plants, common practice).
    a = {"points": [[0, 0, 0], [0, 0, -10]], "plant": 0}
    b = {"points": [[20, 0, 0], [20, 0, -4], [24, 0, -4]], "plant": 1}
    meta = {"stand": {"n_plants": 2, "plant_spacing_cm": 5.0, "row_spacing_cm": 20.0}}
    traits = root_traits(branched_system([a, b], meta))
    assert traits["n_plants"] == 2
    assert traits["ground_area_cm2"] == pytest.approx(200.0)
    assert traits["root_length_per_ground_area_cm_per_cm2"] == pytest.approx(18.0 / 200.0)
    assert [p["total_length_cm"] for p in traits["plants"]] == pytest.approx([10.0, 8.0])
    assert [p["width_cm"] for p in traits["plants"]] == pytest.approx([0.0, 4.0])
    assert traits["width_cm"] == pytest.approx(2.0)
    json.dumps(traits, allow_nan=False)  # JSON-ready: no NaN
    no_area = root_traits(branched_system([a]))
    assert no_area["ground_area_cm2"] is None and no_area["root_length_per_ground_area_cm_per_cm2"] is None
    assert root_traits(branched_system([a]), area_cm2=50.0)["ground_area_cm2"] == 50.0
    assert root_traits(branched_system([a]), box=(0, 2, 0, 5))["ground_area_cm2"] == 10.0


def test_rootsystem_traits_forwarding_method():
    system = straight_segments([0, 0, 0], [0, 0, -8])
    assert system.traits()["n_tips"] == 1


@pytest.mark.parametrize("seed", range(4))
def test_fast_quantiles_match_full_cumulative_and_quadrature(seed):
    # The two-pass quantile search must give the full sorted cumulative function's answer; both are checked
    # against an independent midpoint quadrature (each segment cut into 2000 equal pieces).
    from rootsim.analysis.depth_distribution import quantile_depths

    rng = np.random.default_rng(seed)
    n = 400
    d0 = rng.uniform(-2, 60, n)
    d1 = d0 + rng.normal(scale=5, size=n)
    d1[: n // 10] = d0[: n // 10]  # some horizontal segments
    length = rng.uniform(0.1, 3.0, n)
    full = cumulative_depth(d0, d1, length)
    fractions = (0.1, 0.5, 0.95, 0.999)
    fast = quantile_depths(d0, d1, length, fractions, n_bins=64)
    pieces = 2000
    t = (np.arange(pieces) + 0.5) / pieces
    sample = (d0[:, None] + t[None, :] * (d1 - d0)[:, None]).ravel()
    weight = np.repeat(length / pieces, pieces)
    order = np.argsort(sample)
    cum = np.cumsum(weight[order])
    for q, value in zip(fractions, fast):
        assert value == pytest.approx(full.quantile_depth(q), rel=1e-9, abs=1e-9)
        quad = sample[order][np.searchsorted(cum, q * cum[-1])]
        assert value == pytest.approx(quad, abs=0.05)
