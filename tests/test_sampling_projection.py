"""Projection counting: line-intersect estimates (Newman 1966; Tennant 1975) against known lengths."""

import math

import numpy as np
import pytest

from rootsim.errors import SamplingError
from rootsim.sampling import sample_projection
from rootsim.sampling.synthetic import isotropic_lines, lines_system


def test_horizontal_root_crosses_one_vertical_line_per_grid_unit():
    # Analytic: grid lines sit at 0.5, 1.5, ... (half a unit inside the frame); a horizontal root from
    # x = 0.2 to 10.2 at depth 3.3 crosses the 10 vertical lines 0.5 .. 9.5 and no horizontal one.
    system = lines_system([[0.2, 0.0, -3.3]], [[10.2, 0.0, -3.3]])
    df = sample_projection(system, grid_cm=1.0, frame=(0, 20, 0, 10))
    row = df.iloc[0]
    assert row["intersections"] == 10
    assert row["length_tennant_cm"] == pytest.approx(11 / 14 * 10)  # Tennant 1975: R = 11/14 N G
    assert row["grid_line_length_cm"] == pytest.approx(20 * 10 + 10 * 20)  # 20 vertical, 10 horizontal lines
    assert row["length_newman_cm"] == pytest.approx(math.pi * 10 * 200 / (2 * 400))  # Newman 1966
    assert row["projected_length_true_cm"] == pytest.approx(10.0)


def test_diagonal_root_and_a_joint_on_a_grid_line():
    # Analytic: a 45-degree root from (0.2, 0.2) to (10.2, 10.2) crosses 10 vertical and 10 horizontal
    # lines. Split into two segments meeting exactly on the line x = 5.5 it is still counted 20 times.
    a, m, b = [0.2, 0, -0.2], [5.5, 0, -5.5], [10.2, 0, -10.2]
    for system in (lines_system([a], [b]),
                   lines_system([a, m], [m, b], parent_id=np.array([-1, 0]), root_id=np.array([0, 0]))):
        df = sample_projection(system, grid_cm=1.0, frame=(0, 20, 0, 20))
        assert df["intersections"].iloc[0] == 20
        assert df["projected_length_true_cm"].iloc[0] == pytest.approx(10 * math.sqrt(2))


def test_random_lines_recover_their_length():
    # Newman 1966 / Tennant 1975: for randomly placed, randomly oriented lines the estimates are
    # unbiased; with ~10^4 intersections the error is a few percent (tolerance 3%).
    rng = np.random.default_rng(5)
    p0, p1 = isotropic_lines(3000, box_lo=[-18, 0, -38], box_hi=[18, 0, -2], length_cm=3.0, rng=rng, dimensions=2)
    df = sample_projection(lines_system(p0, p1), grid_cm=1.0, frame=(-20, 20, 0, 40), band_cm=10)
    true = 3000 * 3.0
    assert df["projected_length_true_cm"].sum() == pytest.approx(true, rel=1e-9)
    assert df["intersections"].sum() > 10_000
    assert df["length_newman_cm"].sum() == pytest.approx(true, rel=0.03)
    assert df["length_tennant_cm"].sum() == pytest.approx(true, rel=0.03)
    # a whole number of grid units in each band: H = 2 A / G, so Newman's pi/4 and Tennant's 11/14 agree
    assert (df["grid_line_length_cm"] == 2 * df["area_cm2"]).all()
    assert df["length_newman_cm"].sum() / df["length_tennant_cm"].sum() == pytest.approx((math.pi / 4) / (11 / 14))


def test_projection_of_isotropic_3d_lines_keeps_pi_over_four():
    # Analytic: a unit vector uniform on the sphere projects onto a plane with mean length pi/4.
    rng = np.random.default_rng(8)
    p0, p1 = isotropic_lines(20_000, box_lo=[-10, -5, -30], box_hi=[10, 5, -5], length_cm=1.0, rng=rng)
    for plane in ("xz", "yz", "xy"):
        df = sample_projection(lines_system(p0, p1), grid_cm=0.5, plane=plane)
        assert df["root_length_true_cm"].sum() == pytest.approx(20_000.0)
        assert df["projected_length_true_cm"].sum() / 20_000.0 == pytest.approx(math.pi / 4, rel=0.01)


def test_rhizobox_face_is_the_default_frame():
    meta = {"container": {"kind": "rhizobox", "width_cm": 30, "thickness_cm": 2, "depth_cm": 60}}
    df = sample_projection(lines_system([[0, 0, -1]], [[0, 0, -2]], metadata=meta), grid_cm=2.0, band_cm=20)
    assert df[["frame_left_cm", "frame_right_cm"]].iloc[0].tolist() == [-15.0, 15.0]
    assert df["band_top_cm"].tolist() == [0.0, 20.0, 40.0]
    assert df["band_bottom_cm"].iloc[-1] == 60.0


def test_bad_projection_input():
    system = lines_system([[0, 0, -1]], [[0, 0, -2]])
    with pytest.raises(SamplingError, match="whole multiple"):
        sample_projection(system, grid_cm=2.0, band_cm=5.0)
    with pytest.raises(SamplingError, match="must be > 0"):
        sample_projection(system, grid_cm=0.0)
    with pytest.raises(SamplingError, match="allowed: xz, yz, xy"):
        sample_projection(system, grid_cm=1.0, plane="zz")
    with pytest.raises(SamplingError, match="left < right"):
        sample_projection(system, grid_cm=1.0, frame=(5, 0, 0, 10))
