"""Phosphorus exploration: depletion volumes against analytic capsule and lens volumes."""

from __future__ import annotations

import numpy as np
import pytest

from rootsim.capture.phosphorus import explored_volume


def _lines(p0, p1, plant, root):
    p0, p1 = np.asarray(p0, float), np.asarray(p1, float)
    return {"x0": p0[:, 0], "y0": p0[:, 1], "z0": p0[:, 2], "x1": p1[:, 0], "y1": p1[:, 1], "z1": p1[:, 2],
            "plant_id": np.asarray(plant), "root_id": np.asarray(root)}


def test_single_straight_root_explores_pi_r2_l_plus_its_end_caps():
    # Analytic: a capsule of radius r around a segment of length L holds pi r^2 L + 4/3 pi r^3.
    r, length = 0.5, 10.0
    system = _lines([[0.1, 0.2, -1.0]], [[0.1 + length * 0.6, 0.2, -1.0 - length * 0.8]], [0], [0])
    result = explored_volume(system, radius_cm=r, voxel_cm=0.04)
    expected = np.pi * r * r * length + 4.0 / 3.0 * np.pi * r ** 3
    assert result["explored_cm3"] == pytest.approx(expected, rel=0.01)
    assert result["overlap_same_plant_cm3"] == 0.0 and result["overlap_between_plants_cm3"] == 0.0


def test_parallel_roots_closer_than_two_radii_overlap_by_the_lens():
    # Analytic: circle-circle lens area A = 2 r^2 acos(d / 2r) - (d / 2) sqrt(4 r^2 - d^2) along the length, plus
    # the ball-ball lens pi (4r + d)(2r - d)^2 / 12 from the two pairs of end caps.
    r, d, length = 0.5, 0.6, 4.0
    p0 = [[0.0, 0.0, -1.0], [d, 0.0, -1.0]]
    p1 = [[0.0, 0.0, -1.0 - length], [d, 0.0, -1.0 - length]]
    lens = 2 * r * r * np.arccos(d / (2 * r)) - d / 2 * np.sqrt(4 * r * r - d * d)
    expected = lens * length + np.pi * (4 * r + d) * (2 * r - d) ** 2 / 12
    same = explored_volume(_lines(p0, p1, [0, 0], [0, 1]), radius_cm=r, voxel_cm=0.04)
    assert same["overlap_same_plant_cm3"] == pytest.approx(expected, rel=0.02)
    assert same["overlap_between_plants_cm3"] == 0.0
    neighbours = explored_volume(_lines(p0, p1, [0, 1], [0, 0]), radius_cm=r, voxel_cm=0.04)
    assert neighbours["overlap_between_plants_cm3"] == pytest.approx(expected, rel=0.02)
    single = np.pi * r * r * length + 4.0 / 3.0 * np.pi * r ** 3
    assert same["explored_cm3"] == pytest.approx(2 * single - expected, rel=0.01)
    # by depth: the layers add up to the total
    assert same["profile"]["explored_cm3"].sum() == pytest.approx(same["explored_cm3"])
