"""Minirhizotron tubes: analytic visible lengths of straight roots, depth-of-field RLD, bad input."""

import math

import numpy as np
import pytest

from rootsim.errors import SamplingError
from rootsim.sampling import Tube, parse_tube, sample_tube
from rootsim.sampling.synthetic import lines_system

R, F = 2.8, 0.2  # outer radius and depth of field, cm


def vertical_tube(**extra):
    return Tube(x_cm=0, y_cm=0, angle_from_vertical_deg=0, length_cm=50, outer_diameter_cm=2 * R,
                depth_of_field_cm=F, window_cm=5, **extra)


def annulus_chord(d, inner, outer):
    # Analytic: length of a straight line at distance d from the axis, perpendicular to it, inside
    # the annulus inner <= radius <= outer.
    def chord(r):
        return 2 * math.sqrt(r * r - d * d) if d < r else 0.0
    return chord(outer) - chord(inner)


def test_vertical_roots_parallel_to_a_vertical_tube():
    # Analytic: roots parallel to the axis are visible over the full window length when their
    # distance from the axis lies between R and R + F, and invisible inside the tube or beyond.
    rho = np.array([2.7, 2.9, 3.1])
    p0 = np.column_stack([rho, np.zeros(3), np.zeros(3)])
    p1 = np.column_stack([rho, np.zeros(3), np.full(3, -50.0)])
    df = sample_tube(lines_system(p0, p1), tubes=[vertical_tube()])
    assert df["visible_length_cm"].to_numpy() == pytest.approx(5.0)
    area = math.pi * 2 * R * 5
    assert df["window_area_cm2"].to_numpy() == pytest.approx(area)
    # depth-of-field conversion: visible length / (window area x depth of field)
    assert df["rld_estimate_cm_per_cm3"].to_numpy() == pytest.approx(5.0 / (area * F))
    # the visible shell holds 5 cm of root in pi ((R+F)^2 - R^2) x 5 cm3
    assert df["rld_shell_true_cm_per_cm3"].to_numpy() == pytest.approx(5.0 / (math.pi * ((R + F) ** 2 - R**2) * 5))
    # reference shell R .. R + 2 holds the roots at 2.9 and 3.1
    assert df["reference_length_cm"].to_numpy() == pytest.approx(10.0)


def test_windows_split_a_root_at_their_boundaries():
    # Analytic: a root at distance 2.9 from 7 to 12 cm deep lies 3 cm in window 5-10 and 2 cm in 10-15.
    df = sample_tube(lines_system([[0, 2.9, -7.0]], [[0, 2.9, -12.0]]), tubes=[vertical_tube()])
    assert df["visible_length_cm"].to_numpy()[:4] == pytest.approx([0.0, 3.0, 2.0, 0.0])
    assert df["depth_top_cm"].tolist()[:3] == [0.0, 5.0, 10.0]


@pytest.mark.parametrize("d", [0.0, 1.5, 2.79, 2.85, 2.99, 3.05])
def test_horizontal_root_across_a_vertical_tube(d):
    df = sample_tube(lines_system([[-10.0, d, -12.0]], [[10.0, d, -12.0]]), tubes=[vertical_tube()])
    assert df["visible_length_cm"].iloc[2] == pytest.approx(annulus_chord(d, R, R + F), abs=1e-12)
    assert df["visible_length_cm"].drop(index=2).sum() == 0.0
    assert df["reference_length_cm"].iloc[2] == pytest.approx(annulus_chord(d, R, R + 2.0), abs=1e-12)


@pytest.mark.parametrize("angle", [15.0, 30.0, 45.0, 60.0])
@pytest.mark.parametrize("d", [0.5, 2.9])
def test_root_perpendicular_to_an_inclined_tube(angle, d):
    # A root along y crossing the tilted axis at 22 cm along the tube, offset d within the x-z plane
    # normal to the axis: its distance from the axis is sqrt(d^2 + t^2), the same chords as above.
    a = math.radians(angle)
    axis = np.array([math.sin(a), 0.0, -math.cos(a)])
    normal = np.array([math.cos(a), 0.0, math.sin(a)])
    centre = np.array([1.0, -2.0, 0.0]) + 22.0 * axis + d * normal
    p0, p1 = centre - [0, 10, 0], centre + [0, 10, 0]
    tube = Tube(x_cm=1, y_cm=-2, angle_from_vertical_deg=angle, length_cm=40, outer_diameter_cm=2 * R,
                depth_of_field_cm=F, window_cm=5)
    df = sample_tube(lines_system([p0], [p1]), tubes=[tube])
    assert df["visible_length_cm"].iloc[4] == pytest.approx(annulus_chord(d, R, R + F), abs=1e-12)
    assert df["visible_length_cm"].sum() == pytest.approx(annulus_chord(d, R, R + F), abs=1e-12)
    assert df["depth_top_cm"].iloc[4] == pytest.approx(20 * math.cos(a))


def test_several_tubes_and_parse():
    tube = parse_tube("5,0,30,100,5.6,0.2", window_cm=2.5)
    assert (tube.angle_from_vertical_deg, tube.radius_cm, tube.window_cm) == (30.0, 2.8, 2.5)
    df = sample_tube(lines_system([[0, 0, 0]], [[0, 0, -1]]), tubes=[tube, "0,0,0,10,5,0.2"])
    assert df.groupby("tube_id").size().tolist() == [40, 2]


@pytest.mark.parametrize("text, fragment", [
    ("0,0,90,50,5.6,0.2", "ANGLE_FROM_VERTICAL must be from 0 to below 90"),
    ("0,0,-5,50,5.6,0.2", "ANGLE_FROM_VERTICAL"),
    ("0,0,30,0,5.6,0.2", "LENGTH must be > 0"),
    ("0,0,30,50,0,0.2", "OUTER_DIAMETER must be > 0"),
    ("0,0,30,50,5.6,-1", "DEPTH_OF_FIELD must be > 0"),
    ("0,0,30,50,5.6", "expected X,Y,ANGLE_FROM_VERTICAL,LENGTH,OUTER_DIAMETER,DEPTH_OF_FIELD"),
])
def test_bad_tubes(text, fragment):
    with pytest.raises(SamplingError) as info:
        parse_tube(text)
    assert fragment in str(info.value)


def test_tube_leaving_a_pot_is_refused():
    meta = {"container": {"kind": "pot", "diameter_cm": 30, "depth_cm": 40}}
    system = lines_system([[0, 0, 0]], [[0, 0, -10]], metadata=meta)
    sample_tube(system, tubes=["0,0,0,35,5.6,0.2"])
    with pytest.raises(SamplingError, match="below the pot bottom"):
        sample_tube(system, tubes=["0,0,0,45,5.6,0.2"])
    with pytest.raises(SamplingError, match="outside the pot"):
        sample_tube(system, tubes=["0,0,45,30,5.6,0.2"])  # end point 21 cm from the axis


def test_root_on_a_window_boundary_is_counted_once():
    # A horizontal root exactly at 10 cm along a vertical tube, passing at 2.9 cm from the axis:
    # the annulus chord 2 sqrt(3^2 - 2.9^2) appears in one window only (half-open windows).
    df = sample_tube(lines_system([[-10.0, 2.9, -10.0]], [[10.0, 2.9, -10.0]]), tubes=[vertical_tube()])
    assert df["visible_length_cm"].sum() == pytest.approx(annulus_chord(2.9, R, R + F))
    assert (df["visible_length_cm"] > 0).sum() == 1


@pytest.mark.parametrize("view, seen", [(120.0, {0, 30, 59, -45}), (240.0, {0, 30, 59, 100, -45}),
                                         (360.0, {0, 30, 59, 100, 170, -45})])
def test_view_sector_of_a_vertical_tube(view, seen):
    # Analytic: vertical roots at 2.9 cm from the axis, at angles phi around it from the +x side, are
    # seen over the whole window exactly when |phi| <= view / 2.
    angles = [0, 30, 59, 100, 170, -45]
    phi = np.radians(angles)
    xy = 2.9 * np.column_stack([np.cos(phi), np.sin(phi)])
    p0 = np.column_stack([xy, np.zeros(len(phi))])
    p1 = np.column_stack([xy, np.full(len(phi), -50.0)])
    df = sample_tube(lines_system(p0, p1), tubes=[vertical_tube(view_angle_deg=view)])
    assert df["visible_length_cm"].to_numpy() == pytest.approx(5.0 * len(seen))
    assert df["window_area_cm2"].to_numpy() == pytest.approx(view / 360 * math.pi * 2 * R * 5)
    assert df["rld_estimate_cm_per_cm3"].to_numpy() == pytest.approx(5.0 * len(seen) / (view / 360 * math.pi * 2 * R * 5 * F))


def test_half_view_cuts_a_chord_in_half():
    # Analytic: with the +x half in view (180 degrees), a root along x through y = 1.5 shows only the
    # x >= 0 half of its annulus chord; a root along y at x = 1.5 shows all of it.
    tube = vertical_tube(view_angle_deg=180.0)
    along_x = sample_tube(lines_system([[-10.0, 1.5, -12.0]], [[10.0, 1.5, -12.0]]), tubes=[tube])
    along_y = sample_tube(lines_system([[1.5, -10.0, -12.0]], [[1.5, 10.0, -12.0]]), tubes=[tube])
    assert along_x["visible_length_cm"].sum() == pytest.approx(annulus_chord(1.5, R, R + F) / 2)
    assert along_y["visible_length_cm"].sum() == pytest.approx(annulus_chord(1.5, R, R + F))


def test_upper_side_of_an_inclined_tube():
    # A root parallel to a 45-degree tube, 2.9 cm off the axis on its upper side, is seen in a 90-degree
    # view; the same root on the lower side is not.
    a = math.radians(45)
    axis = np.array([math.sin(a), 0.0, -math.cos(a)])
    up = np.array([math.cos(a), 0.0, math.sin(a)])
    tube = Tube(x_cm=0, y_cm=0, angle_from_vertical_deg=45, length_cm=40, outer_diameter_cm=2 * R,
                depth_of_field_cm=F, window_cm=10, view_angle_deg=90)
    for side, expected in ((1.0, 10.0), (-1.0, 0.0)):
        p0, p1 = 10 * axis + side * 2.9 * up, 30 * axis + side * 2.9 * up
        df = sample_tube(lines_system([p0], [p1]), tubes=[tube])
        assert df["visible_length_cm"].tolist() == pytest.approx([0.0, expected, expected, 0.0])


@pytest.mark.parametrize("view", [0.0, -10.0, 361.0])
def test_bad_view_angle(view):
    with pytest.raises(SamplingError, match="view angle"):
        parse_tube("0,0,30,50,5.6,0.2", view_angle_deg=view)
