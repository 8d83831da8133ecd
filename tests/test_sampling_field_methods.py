"""Sampling methods as done in the field: tube images, gaps, wall growth, prepared walls, core-break,
washing recovery, detection limits and Tennant's error range for oriented roots."""

import math

import numpy as np
import pytest

from rootsim.errors import SamplingError
from rootsim.sampling import Core, Tube, Wall, sample_cores, sample_projection, sample_tube, sample_wall
from rootsim.sampling.cores import fit_core_break_ratio
from rootsim.sampling.synthetic import isotropic_lines, lines_system

R, F = 2.8, 0.2  # tube outer radius and depth of field, cm


def tube(**extra):
    return Tube(x_cm=0, y_cm=0, angle_from_vertical_deg=0, length_cm=50, outer_diameter_cm=2 * R,
                depth_of_field_cm=F, window_cm=50, **extra)


def two_radii(p0, p1, radii):
    """A system of straight roots with their own radii."""
    system = lines_system(p0, p1)
    system = system.to_dataframe()
    system["radius_cm"] = np.asarray(radii, dtype=np.float64)
    return system


# ---- minirhizotron as an image sees it ----------------------------------------------------------------

def test_root_parallel_to_the_tube_appears_at_full_length():
    # Analytic: an axial root in the seen shell projects onto the tube surface with its full length.
    system = lines_system(np.array([[R + 0.1, 0, -10.0]]), np.array([[R + 0.1, 0, -30.0]]))
    df = sample_tube(system, tubes=[tube()])
    assert df["image_length_cm"].iloc[0] == pytest.approx(20.0, rel=1e-12)
    assert df["visible_length_cm"].iloc[0] == pytest.approx(20.0, rel=1e-12)


def test_root_pointing_away_from_the_tube_is_a_dot_in_the_image():
    # Analytic: a radial root is seen end-on; its 3D length in the shell is F, its image length 0.
    system = lines_system(np.array([[R - 1.0, 0, -10.0]]), np.array([[R + 1.0, 0, -10.0]]))
    df = sample_tube(system, tubes=[tube()])
    assert df["visible_length_cm"].iloc[0] == pytest.approx(F)
    assert df["image_length_cm"].iloc[0] == pytest.approx(0.0, abs=1e-12)


@pytest.mark.parametrize("d", [2.85, 2.9, 2.99])
def test_horizontal_chord_projects_to_an_arc(d):
    # Analytic: a horizontal line at distance d from the axis meets the outer shell radius R + F over
    # polar angles +-atan(sqrt((R+F)^2 - d^2) / d); projected radially onto the tube surface it is an arc
    # of length 2 R atan(...), while its 3D length is the chord 2 sqrt((R+F)^2 - d^2).
    half = math.sqrt((R + F) ** 2 - d * d)
    system = lines_system(np.array([[d, -5.0, -20.0]]), np.array([[d, 5.0, -20.0]]))
    df = sample_tube(system, tubes=[tube()])
    assert df["visible_length_cm"].iloc[0] == pytest.approx(2 * half, rel=1e-12)
    assert df["image_length_cm"].iloc[0] == pytest.approx(2 * R * math.atan(half / d), rel=1e-9)


def test_gap_in_the_topsoil_hides_roots_close_to_the_tube():
    # Analytic: with a 0.1 cm gap down to 20 cm the soil starts at R + 0.1 in windows above 20 cm; an axial
    # root at R + 0.05 is then in the gap (unseen), one at R + 0.15 stays in view; below 20 cm both are seen.
    p0 = np.array([[R + 0.05, 0, -1.0], [-(R + 0.15), 0, -1.0], [R + 0.05, 0, -21.0]])
    p1 = np.array([[R + 0.05, 0, -9.0], [-(R + 0.15), 0, -9.0], [R + 0.05, 0, -29.0]])
    t = Tube(x_cm=0, y_cm=0, angle_from_vertical_deg=0, length_cm=30, outer_diameter_cm=2 * R, depth_of_field_cm=F,
             window_cm=10, gap_cm=0.1, gap_depth_cm=20)
    df = sample_tube(lines_system(p0, p1), tubes=[t])
    assert df["image_length_cm"].tolist() == pytest.approx([8.0, 0.0, 8.0])
    assert df["gap_cm"].tolist() == [0.1, 0.1, 0.0]


def test_roots_meeting_the_tube_grow_along_its_wall_in_view():
    # A horizontal root through the axis has 2R of its length where the tube is and 2F in the shell, all
    # radial (image length 0). With half of the meeting length growing along the wall the image gains R.
    system = lines_system(np.array([[-5.0, 0, -10.0]]), np.array([[5.0, 0, -10.0]]))
    df = sample_tube(system, tubes=[tube(wall_growth_fraction=0.5)])
    assert df["image_length_cm"].iloc[0] == pytest.approx(R, rel=1e-12)
    assert sample_tube(system, tubes=[tube()])["image_length_cm"].iloc[0] == pytest.approx(0.0, abs=1e-12)


def test_depth_of_field_conversions_side_by_side():
    # RLD = image length / (window area x assumed depth of field) for each published depth of field.
    system = lines_system(np.array([[R + 0.1, 0, -10.0]]), np.array([[R + 0.1, 0, -30.0]]))
    df = sample_tube(system, tubes=[tube()])
    area = math.pi * 2 * R * 50
    assert df["rld_image_dof_2mm_cm_per_cm3"].iloc[0] == pytest.approx(20 / (area * 0.2))
    assert df["rld_image_dof_3mm_cm_per_cm3"].iloc[0] == pytest.approx(20 / (area * 0.3))


def test_detection_limit_removes_exactly_the_thinner_roots_from_the_tube():
    # Two axial roots in the shell, diameters 0.02 and 0.06 cm; a 0.04 cm limit keeps only the thicker one.
    p0 = np.array([[R + 0.1, 0, -10.0], [-(R + 0.1), 0, -10.0]])
    p1 = np.array([[R + 0.1, 0, -20.0], [-(R + 0.1), 0, -30.0]])
    system = two_radii(p0, p1, [0.01, 0.03])
    df = sample_tube(system, tubes=[tube(detection_limit_cm=0.04)])
    assert df["image_length_cm"].iloc[0] == pytest.approx(20.0)
    assert df["rld_true_cm_per_cm3"].iloc[0] == pytest.approx(30.0 / (math.pi * ((R + 2) ** 2 - R ** 2) * 50))


# ---- trench wall prepared as in the field -------------------------------------------------------------

def test_protruding_length_of_a_root_at_a_known_angle():
    # Analytic: a root crossing the face y = 0 at 60 degrees to its normal protrudes s / cos 60 = 2 s out of
    # a scraped layer s; it is counted when the minimum protruding length is 1.5 s, not when it is 2.5 s.
    angle = math.radians(60)
    p0 = np.array([[-5 * math.sin(angle), -5 * math.cos(angle), -10.0]])
    p1 = np.array([[5 * math.sin(angle), 5 * math.cos(angle), -10.0]])
    system = lines_system(p0, p1)
    wall = Wall(y_cm=0, x_min_cm=-10, x_max_cm=10, depth_cm=20, cell_cm=20, scraped_cm=0.5)
    assert sample_wall(system, walls=[wall])["intersections"].sum() == 1
    from dataclasses import replace

    assert sample_wall(system, walls=[replace(wall, min_protruding_cm=0.75)])["intersections"].sum() == 1
    assert sample_wall(system, walls=[replace(wall, min_protruding_cm=1.25)])["intersections"].sum() == 0


def test_minimum_protruding_length_on_isotropic_roots():
    # Stereology (common practice): isotropic lines cross a plane with |cos| to its normal of density 2c on
    # [0, 1]; a root protrudes s / |cos|, so requiring L counts the fraction (s / L)^2 = 0.25 for s = 0.5,
    # L = 1. Counts are binomial: tolerance 4 standard errors.
    rng = np.random.default_rng(31)
    p0, p1 = isotropic_lines(40_000, box_lo=[-16, -3, -31], box_hi=[16, 3, 1], length_cm=2.0, rng=rng)
    system = lines_system(p0, p1)
    base = Wall(y_cm=0, x_min_cm=-15, x_max_cm=15, depth_cm=30, cell_cm=30)
    all_crossings = int(sample_wall(system, walls=[base])["intersections"].sum())
    from dataclasses import replace

    counted = int(sample_wall(system, walls=[replace(base, scraped_cm=0.5, min_protruding_cm=1.0)])["intersections"].sum())
    share = counted / all_crossings
    assert abs(share - 0.25) < 4 * math.sqrt(0.25 * 0.75 / all_crossings)


def test_detection_limit_removes_exactly_the_thinner_roots_from_the_wall():
    p0 = np.array([[0.0, -1, -5.0], [2.0, -1, -5.0], [4.0, -1, -5.0]])
    p1 = np.array([[0.0, 1, -5.0], [2.0, 1, -5.0], [4.0, 1, -5.0]])
    system = two_radii(p0, p1, [0.01, 0.02, 0.05])
    wall = Wall(y_cm=0, x_min_cm=-10, x_max_cm=10, depth_cm=20, cell_cm=20, detection_limit_cm=0.04)
    assert sample_wall(system, walls=[wall])["intersections"].sum() == 2   # diameters 0.04 and 0.1 are seen


# ---- cores: washing recovery and core-break -----------------------------------------------------------

def vertical_lattice():
    a, b = np.meshgrid(np.arange(-10, 10) + 0.3, np.arange(-10, 10) + 0.6)
    p0 = np.column_stack([a.ravel(), b.ravel(), np.zeros(a.size)])
    p1 = np.column_stack([a.ravel(), b.ravel(), np.full(a.size, -40.0)])
    return p0, p1


def test_core_break_of_vertical_roots():
    # Analytic: vertical roots on a 1-cm lattice have L_V = N_A = 1 per cm2, so every broken face shows the
    # lattice points inside the disc and the ratio fitted to washed cores is exactly 1 (Drew & Saker 1980's
    # calibration through the origin); the isotropic default C = 2 doubles the estimate.
    p0, p1 = vertical_lattice()
    df = sample_cores(lines_system(p0, p1), cores=[Core(x_cm=0.1, y_cm=0.2, diameter_cm=5, depth_cm=30)])
    inside = int(np.count_nonzero(np.hypot(p0[:, 0] - 0.1, p0[:, 1] - 0.2) <= 2.5))
    assert df["break_face_roots"].tolist() == [inside] * 3
    assert fit_core_break_ratio(df) == pytest.approx(1.0, rel=1e-12)
    assert df["rld_core_break_cm_per_cm3"].to_numpy() == pytest.approx(2 * inside / (math.pi * 2.5 ** 2))


def test_washing_recovery_of_fine_roots():
    # Washed length = coarse length + recovery x fine length (diameter <= 0.02 cm is fine by default).
    p0 = np.array([[0.0, 0, -1.0], [0.5, 0, -1.0]])
    p1 = np.array([[0.0, 0, -9.0], [0.5, 0, -9.0]])
    system = two_radii(p0, p1, [0.01, 0.05])
    df = sample_cores(system, cores=[Core(x_cm=0, y_cm=0, diameter_cm=4, depth_cm=10)], washing_recovery=0.7)
    assert df["root_length_cm"].iloc[0] == pytest.approx(16.0)
    assert df["root_length_washed_cm"].iloc[0] == pytest.approx(8.0 + 0.7 * 8.0)


def test_detection_limit_on_broken_faces():
    p0 = np.array([[0.0, 0, 0.0], [0.5, 0, 0.0]])
    p1 = np.array([[0.0, 0, -10.0], [0.5, 0, -10.0]])
    system = two_radii(p0, p1, [0.01, 0.05])
    df = sample_cores(system, cores=[Core(x_cm=0, y_cm=0, diameter_cm=4, depth_cm=10)], detection_limit_cm=0.05)
    assert df["break_face_roots"].tolist() == [1]


@pytest.mark.parametrize("options, fragment", [
    ({"washing_recovery": 1.5}, "washing recovery"),
    ({"core_break_ratio": 0.0}, "core-break ratio"),
    ({"detection_limit_cm": -1.0}, "detection limit"),
])
def test_bad_core_method_options(options, fragment):
    with pytest.raises(SamplingError, match=fragment):
        sample_cores(lines_system(np.zeros((1, 3)), -np.ones((1, 3))),
                     cores=[Core(x_cm=0, y_cm=0, diameter_cm=4, depth_cm=10)], **options)


# ---- line intersect: Tennant's known error range for oriented roots ----------------------------------

@pytest.mark.parametrize("angle_deg, expected", [(0.0, 11 / 14), (90.0, 11 / 14), (45.0, 11 * math.sqrt(2) / 14)])
def test_tennant_error_for_oriented_roots(angle_deg, expected):
    # Tennant 1975's R = (11/14) N G assumes random orientation (E|sin| + E|cos| = 4/pi). For roots all
    # parallel to one set of grid lines a line of length L crosses L/G lines, so R/L = 11/14 (-21 %); at 45
    # degrees it crosses L sqrt(2)/G lines, R/L = 11 sqrt(2)/14 (+11 %) (Newman 1966's geometry). Parallel
    # 1.7-cm roots at random positions in a 40 x 40 cm frame, grid 1 cm: tolerance 1.5 %.
    rng = np.random.default_rng(7)
    n = 20_000
    mid = np.column_stack([rng.uniform(-18, 18, n), np.zeros(n), -rng.uniform(2, 38, n)])
    a = math.radians(angle_deg)
    half = 0.85 * np.array([math.cos(a), 0.0, math.sin(a)])
    df = sample_projection(lines_system(mid - half, mid + half), grid_cm=1.0, frame=(-20, 20, 0, 40))
    ratio = df["length_tennant_cm"].sum() / df["projected_length_true_cm"].sum()
    assert ratio == pytest.approx(expected, rel=0.015)


# ---- gap and wall growth on isotropic roots of known length density ------------------------------------

def _isotropic_tube_field(gap_cm, wall_growth_fraction):
    """Isotropic segments (length density L_V) around a vertical tube: 6 windows of 5 cm, a gap above 15 cm."""
    segment_cm, n = 0.2, 400_000
    box_lo, box_hi = np.array([-3.5, -3.5, -31.0]), np.array([3.5, 3.5, 1.0])
    p0, p1 = isotropic_lines(n, box_lo=box_lo, box_hi=box_hi, length_cm=segment_cm, rng=np.random.default_rng(47))
    density = n * segment_cm / np.prod(box_hi - box_lo)  # cm of root per cm3 of soil
    t = Tube(x_cm=0, y_cm=0, angle_from_vertical_deg=0, length_cm=30, outer_diameter_cm=2 * R, depth_of_field_cm=F,
             window_cm=5, gap_cm=gap_cm, gap_depth_cm=15, wall_growth_fraction=wall_growth_fraction)
    return lines_system(p0, p1), t, density, segment_cm


def _four_standard_errors(expected_cm, segment_cm):
    # The length inside a region is a sum of independent per-segment pieces X_i with 0 <= X_i <= segment length
    # l, so its variance is at most sum E[X_i^2] <= l x expected length.
    return 4.0 * math.sqrt(segment_cm * expected_cm)


def test_gap_wider_than_the_depth_of_field_leaves_an_empty_image():
    # Analytic: with a gap of 0.3 cm > F = 0.2 cm the soil starts beyond the seen shell, so the windows above the
    # gap depth see no root at all (and roots cannot grow along a wall they do not touch); below it the shell
    # R..R + F holds L_V x pi ((R + F)^2 - R^2) x window length of isotropic roots in expectation (uniform
    # length density, common practice in stereology).
    from dataclasses import replace

    system, t, density, segment_cm = _isotropic_tube_field(0.3, 0.1)
    df = sample_tube(system, tubes=[t])
    in_gap = df["gap_cm"].to_numpy() > 0
    assert in_gap.tolist() == [True, True, True, False, False, False]
    assert np.all(df.loc[in_gap, "image_length_cm"].to_numpy() == 0.0)
    assert np.all(df.loc[in_gap, "visible_length_cm"].to_numpy() == 0.0)
    expected = density * math.pi * ((R + F) ** 2 - R ** 2) * 15.0
    seen = df.loc[~in_gap, "visible_length_cm"].sum()
    assert abs(seen - expected) < _four_standard_errors(expected, segment_cm)
    # a gap narrower than F leaves the shell R + gap .. R + F in view
    narrow = sample_tube(system, tubes=[replace(t, gap_cm=0.1)])
    expected = density * math.pi * ((R + F) ** 2 - (R + 0.1) ** 2) * 15.0
    seen = narrow.loc[in_gap, "visible_length_cm"].sum()
    assert abs(seen - expected) < _four_standard_errors(expected, segment_cm)


def test_wall_growth_adds_the_stated_fraction_of_the_length_where_the_tube_is():
    # Analytic: where tube and soil touch, wall growth adds wall_growth_fraction x the root length inside radius
    # R, which for roots of length density L_V is L_V x pi R^2 x window length in expectation; in the gap windows
    # it adds nothing.
    from dataclasses import replace

    fraction = 0.1
    system, t, density, segment_cm = _isotropic_tube_field(0.1, fraction)
    with_growth, without = (sample_tube(system, tubes=[tube])["image_length_cm"].to_numpy()
                            for tube in (t, replace(t, wall_growth_fraction=0.0)))
    gain = with_growth - without
    assert np.all(gain[:3] == 0.0)
    inside_tube = density * math.pi * R ** 2 * 15.0
    assert abs(gain[3:].sum() / fraction - inside_tube) < _four_standard_errors(inside_tube, segment_cm)
