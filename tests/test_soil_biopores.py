"""Biopores: point-in-channel lookup against geometry, seeded Poisson draws."""

import numpy as np
import pytest

from rootsim.soil.biopores import biopore_at, biopores_from_list, draw_biopores


def test_vertical_and_inclined_channels_analytic_points():
    pores = biopores_from_list([[0, 0, -10], [20, 0, -10]], [[0, 0, -50], [30, 0, -20]], [1.0, 0.5])
    c = pores.compiled
    assert biopore_at(c, 0.5, 0.5, -20.0) == 0          # 0.71 cm from the axis
    assert biopore_at(c, 0.8, 0.8, -20.0) == -1         # 1.13 cm from the axis
    assert biopore_at(c, 0.0, 0.0, -5.0) == -1          # above the top
    assert biopore_at(c, 0.0, 0.0, -50.5) == -1         # below the bottom
    # inclined 45 degrees: the axis passes (25, 0, -15); a point 0.4 cm off it along y is inside
    assert biopore_at(c, 25.0, 0.4, -15.0) == 1 and biopore_at(c, 25.0, 0.6, -15.0) == -1
    index, axis = pores.lookup([25.0, 0.0], [0.0, 0.0], [-15.0, -30.0])
    assert index.tolist() == [1, 0]
    np.testing.assert_allclose(axis, [[np.sqrt(0.5), 0, -np.sqrt(0.5)], [0, 0, -1]], atol=1e-12)


def test_lookup_agrees_with_a_direct_distance_computation():
    # independent check: brute-force point-to-axis distances over every pore with numpy
    pores = draw_biopores(seed=3, density_per_m2=400, x_range_cm=(-40, 40), y_range_cm=(-30, 30), depth_top_cm=15,
                          depth_bottom_cm=90, radius_cm=(0.5, 2.0), inclination_from_vertical_deg=(0, 35))
    rng = np.random.default_rng(9)
    pts = np.stack([rng.uniform(-50, 50, 4000), rng.uniform(-40, 40, 4000), rng.uniform(-100, -5, 4000)], axis=1)
    index, _ = pores.lookup(*pts.T)
    axis = pores.bottom_cm - pores.top_cm
    length = np.linalg.norm(axis, axis=1)
    axis /= length[:, None]
    rel = pts[:, None, :] - pores.top_cm[None]
    t = np.einsum("pkc,kc->pk", rel, axis)
    dist2 = np.einsum("pkc,pkc->pk", rel, rel) - t ** 2
    inside = (t >= 0) & (t <= length) & (dist2 <= pores.radius_cm ** 2)
    expected = np.where(inside.any(axis=1), inside.argmax(axis=1), -1)
    np.testing.assert_array_equal(index, expected)
    assert 0.05 < (index >= 0).mean() < 0.95  # the check exercises both answers


def test_points_at_the_sides_of_pores_are_found_as_by_a_direct_computation():
    # Points just inside the sides of vertical pores lie on the faces of the pores' boxes, where the bin index
    # (a product by the inverse bin size) is most likely to round across a bin face: every lookup must still
    # equal the brute-force point-to-axis test (independent numpy computation).
    pores = draw_biopores(seed=11, density_per_m2=2000, x_range_cm=(-30, 30), y_range_cm=(-20, 20), depth_top_cm=10,
                          depth_bottom_cm=60, radius_cm=(0.2, 1.5), inclination_from_vertical_deg=(0, 0))
    top, radius = pores.top_cm, pores.radius_cm
    inward = 1 - 1e-12
    sides = [(dx, dy) for dx, dy in ((1, 0), (-1, 0), (0, 1), (0, -1))]
    pts = np.concatenate([np.stack([top[:, 0] + dx * radius * inward, top[:, 1] + dy * radius * inward,
                                    np.full(len(top), -30.0)], axis=1) for dx, dy in sides])
    index, _ = pores.lookup(*pts.T)
    rel = pts[:, None, :2] - top[None, :, :2]
    inside = np.einsum("pkc,pkc->pk", rel, rel) <= radius ** 2
    expected = np.where(inside.any(axis=1), inside.argmax(axis=1), -1)
    np.testing.assert_array_equal(index, expected)
    assert (index >= 0).all()


def test_drawn_counts_are_poisson_with_the_density_times_area():
    # Poisson count with mean density * area (common practice); 0.5 m^2 at 200 per m^2 -> mean 100, s.d. 10
    counts = [draw_biopores(seed=s, density_per_m2=200, x_range_cm=(0, 100), y_range_cm=(0, 50), depth_top_cm=10,
                            depth_bottom_cm=60, radius_cm=0.2).count for s in range(40)]
    assert abs(np.mean(counts) - 100) < 3 * 10 / np.sqrt(40)
    assert 0.4 < np.var(counts, ddof=1) / 100 < 1.8  # Poisson: variance = mean (chi-square 99.9 % band, 39 d.o.f.)


def test_same_seed_same_pores_other_seed_other_pores():
    kw = dict(density_per_m2=100, x_range_cm=(-50, 50), y_range_cm=(-50, 50), depth_top_cm=10, depth_bottom_cm=60,
              radius_cm=(0.1, 0.3), inclination_from_vertical_deg=(0, 20))
    a, b, c = draw_biopores(seed=5, **kw), draw_biopores(seed=5, **kw), draw_biopores(seed=6, **kw)
    np.testing.assert_array_equal(a.top_cm, b.top_cm)
    assert a.count != c.count or not np.array_equal(a.top_cm, c.top_cm)
    # tops uniform over the area at the stated depth, bottoms at the stated depth within the inclination
    assert np.all(a.top_cm[:, 2] == -10) and np.all(a.bottom_cm[:, 2] == -60)
    reach = np.hypot(*(a.bottom_cm[:, :2] - a.top_cm[:, :2]).T)
    assert np.all(reach <= 50 * np.tan(np.radians(20)) + 1e-9)


def test_a_channel_that_does_not_go_down_is_refused():
    from rootsim.errors import RootsimError

    with pytest.raises(RootsimError, match="channel 0 does not go down"):
        biopores_from_list([[0, 0, -20]], [[0, 0, -10]], 0.2)
