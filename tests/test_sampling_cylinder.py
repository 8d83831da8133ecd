"""Exact segment/cylinder clipping against analytic lengths and an independent point-sampling estimate."""

import math

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from rootsim.sampling.cylinder import segment_cylinder_length

DOWN = np.array([0.0, 0.0, -1.0])


def core_length(p0, p1, *, x=0.0, y=0.0, radius=2.0, top=0.0, bottom=100.0):
    return segment_cylinder_length(np.asarray(p0, float), np.asarray(p1, float), axis_point=[x, y, 0.0],
                                   axis_direction=DOWN, radius_cm=radius, axial_min_cm=top, axial_max_cm=bottom)


def test_vertical_segment_on_axis_is_clipped_to_depth_range():
    # Analytic: a vertical line on the axis lies inside the cylinder over its whole depth overlap.
    assert core_length([0, 0, -5], [0, 0, -50], top=10, bottom=30) == pytest.approx(20.0)
    assert core_length([0, 0, 0], [0, 0, -8], top=10, bottom=30) == 0.0


def test_vertical_segment_outside_radius_misses():
    assert core_length([2.5, 0, -5], [2.5, 0, -50]) == 0.0
    # Exactly on the wall counts as inside (closed cylinder); analytic length 45.
    assert core_length([2.0, 0, -5], [2.0, 0, -50]) == pytest.approx(45.0)


@pytest.mark.parametrize("offset", [0.0, 0.5, 1.0, 1.5, 1.99])
def test_horizontal_chord_length(offset):
    # Analytic chord of a circle: 2 sqrt(r^2 - d^2) (r = 2).
    length = core_length([-10, offset, -20], [10, offset, -20])
    assert length == pytest.approx(2 * math.sqrt(4 - offset**2), rel=1e-12, abs=1e-12)


def test_horizontal_line_beyond_radius_and_tangent():
    assert core_length([-10, 2.01, -20], [10, 2.01, -20]) == 0.0
    assert core_length([-10, 2.0, -20], [10, 2.0, -20]) == pytest.approx(0.0, abs=1e-6)


@pytest.mark.parametrize("phi_deg", [10.0, 30.0, 45.0, 60.0, 80.0])
@pytest.mark.parametrize("offset", [0.0, 1.2])
def test_slanted_line_through_cylinder(phi_deg, offset):
    # Analytic: a line at angle phi from the vertical whose horizontal projection passes at distance d
    # from the axis crosses the disc over a horizontal chord 2 sqrt(r^2 - d^2), so its 3D length inside
    # is that chord / sin(phi); it spans depth chord / tan(phi), centred at depth 50 (inside 0..100).
    phi = math.radians(phi_deg)
    direction = np.array([math.sin(phi), 0.0, -math.cos(phi)])
    centre = np.array([0.0, offset, -50.0])
    p0, p1 = centre - 200 * direction, centre + 200 * direction
    chord = 2 * math.sqrt(4 - offset**2)
    assert core_length(p0, p1) == pytest.approx(chord / math.sin(phi), rel=1e-10)


def test_slanted_line_clipped_by_depth_increment():
    # Analytic: a 45-degree line through the axis at depth 50 is inside r = 2 for depths 48..52; an
    # increment 50..60 keeps the half 50..52, of 3D length 2 * sqrt(2).
    p0, p1 = np.array([-50.0, 0, 0]), np.array([50.0, 0, -100])
    assert core_length(p0, p1, top=50, bottom=60) == pytest.approx(2 * math.sqrt(2), rel=1e-12)


def test_segment_ending_inside():
    # Analytic: from the axis out to x = 10 on a horizontal line: inside over x in [0, 2].
    assert core_length([0, 0, -5], [10, 0, -5]) == pytest.approx(2.0)
    assert core_length([0.5, 0, -5], [1.0, 0, -5]) == pytest.approx(0.5)


def test_nearly_axis_parallel_segment_is_stable():
    # Analytic: a segment tilted by 1e-9 rad at distance 1 from the axis stays inside: full length 40.
    tilt = 1e-9
    assert core_length([1.0, 0, -10], [1.0 + 40 * tilt, 0, -50]) == pytest.approx(40.0, rel=1e-12)


def test_rotated_configuration_gives_the_same_length():
    # Rotation invariance of Euclidean length (scipy's Rotation as an independent rotation source):
    # a tilted cylinder with the rotated chord configuration gives the analytic chord 2 sqrt(r^2 - d^2).
    rot = Rotation.from_euler("xyz", [23.0, -41.0, 67.0], degrees=True)
    axis = rot.apply([0.0, 0.0, -1.0])
    origin = np.array([3.0, -2.0, 1.0])
    d = 1.3
    p0 = origin + rot.apply([-10.0, d, -20.0])
    p1 = origin + rot.apply([10.0, d, -20.0])
    length = segment_cylinder_length(p0, p1, axis_point=origin, axis_direction=axis, radius_cm=2.0,
                                     axial_min_cm=0.0, axial_max_cm=100.0)
    assert length == pytest.approx(2 * math.sqrt(4 - d * d), rel=1e-10)


def test_random_segments_match_point_sampling():
    # Independent estimate: the fraction of 200001 evenly spaced points of each segment that fall
    # inside the finite cylinder (plain distance tests), times its length. Midpoint-rule error is at
    # most two sample spacings per segment.
    rng = np.random.default_rng(7)
    p0 = rng.uniform([-4, -4, -30], [4, 4, 0], (60, 3))
    p1 = p0 + rng.normal(0, 4, (60, 3))
    exact = core_length(p0, p1, x=0.5, y=-0.3, radius=2.0, top=5.0, bottom=20.0)
    k = 200_001
    t = (np.arange(k) + 0.5) / k
    for i in range(len(p0)):
        pts = p0[i] + t[:, None] * (p1[i] - p0[i])
        inside = (np.hypot(pts[:, 0] - 0.5, pts[:, 1] + 0.3) <= 2.0) & (-pts[:, 2] >= 5.0) & (-pts[:, 2] <= 20.0)
        seg = np.linalg.norm(p1[i] - p0[i])
        assert exact[i] == pytest.approx(inside.mean() * seg, abs=4 * seg / k)
