"""Profile walls: stereology on isotropic lines, orientation bias, exact slab RLD, bad input."""

import math

import numpy as np
import pytest

from rootsim.errors import SamplingError
from rootsim.sampling import Wall, parse_wall, sample_wall
from rootsim.sampling.synthetic import isotropic_lines, lines_system
from rootsim.sampling.wall import WALL_COLUMNS


def test_isotropic_lines_give_twice_intersections_per_area():
    # Smith & Guttman 1953: for isotropic uniform random lines, L_V = 2 Q_A. Midpoints fill a box that
    # extends half a segment length beyond the counted face, so the length density there is
    # n * length / box volume. Counts are Poisson-like: tolerance 4 / sqrt(N) (relative).
    rng = np.random.default_rng(2024)
    lo, hi, length = np.array([-16.0, -3.0, -31.0]), np.array([16.0, 3.0, 1.0]), 2.0
    n = 27_000
    p0, p1 = isotropic_lines(n, box_lo=lo, box_hi=hi, length_cm=length, rng=rng)
    length_density = n * length / np.prod(hi - lo)
    df = sample_wall(lines_system(p0, p1), walls=[Wall(y_cm=0.0, x_min_cm=-15, x_max_cm=15, depth_cm=30, cell_cm=30,
                                                       slab_thickness_cm=4.0)])
    count = int(df["intersections"].sum())
    assert count > 3000
    estimate = df["rld_estimate_cm_per_cm3"].iloc[0]
    assert estimate == pytest.approx(2 * count / 900.0)
    assert abs(estimate - length_density) / length_density < 4 / math.sqrt(count)
    # The exact slab RLD is an unbiased sample of the same density (length in 3600 cm3).
    assert df["rld_true_cm_per_cm3"].iloc[0] == pytest.approx(length_density, rel=0.05)


def _lattice_lines(direction):
    """Parallel 100 cm lines on a 1 cm lattice (offset from whole cm): vertical ("z") from the surface
    down, or horizontal along y ("y") at depths 0.6, 1.6, ... cm."""
    a, b = np.meshgrid(np.arange(-40, 40) + 0.3, np.arange(80) + 0.6)
    a, b = a.ravel(), b.ravel()
    if direction == "z":
        return np.column_stack([a, b - 40, np.zeros(a.size)]), np.column_stack([a, b - 40, np.full(a.size, -100.0)])
    return np.column_stack([a, np.full(a.size, -50.0), -b]), np.column_stack([a, np.full(a.size, 50.0), -b])


def test_roots_parallel_to_the_wall_are_never_counted():
    # Orientation bias (Smith & Guttman 1953 assume isotropy): vertical roots run parallel to a
    # vertical wall, so Q_A = 0 although the slab holds 1 cm of root per cm2 of lattice: L_V = 1 cm/cm3.
    p0, p1 = _lattice_lines("z")
    df = sample_wall(lines_system(p0, p1), walls=["0.5,-20,20,40,10"])
    assert df["intersections"].sum() == 0
    assert df["rld_true_cm_per_cm3"].to_numpy() == pytest.approx(1.0)


def test_roots_normal_to_the_wall_are_counted_twice_over():
    # Lines normal to the plane: each lattice line crosses once, Q_A = L_V = 1 per cm2, so the
    # isotropic formula 2 Q_A gives twice the true density (analytic).
    p0, p1 = _lattice_lines("y")
    df = sample_wall(lines_system(p0, p1), walls=["0,-20,20,40,10"])
    assert df["intersections"].tolist() == [100] * len(df)
    assert df["rld_estimate_cm_per_cm3"].to_numpy() == pytest.approx(2.0)
    assert df["rld_true_cm_per_cm3"].to_numpy() == pytest.approx(1.0)


def test_exact_slab_length_of_a_root_along_the_wall():
    # Analytic: a horizontal root along x at y = 0.2, depth 15, spans every cell of the 10-20 cm row
    # over its 10 cm width; the slab behind a 10 x 10 cell is 10 cm thick: RLD 10 / 1000.
    system = lines_system([[-100.0, 0.2, -15.0]], [[100.0, 0.2, -15.0]])
    df = sample_wall(system, walls=["0,-20,20,30,10"])
    row = df[df["depth_top_cm"] == 10]
    assert row["slab_root_length_cm"].to_numpy() == pytest.approx(10.0)
    assert row["rld_true_cm_per_cm3"].to_numpy() == pytest.approx(0.01)
    assert df[df["depth_top_cm"] != 10]["rld_true_cm_per_cm3"].sum() == 0.0


def test_root_with_a_joint_on_the_wall_is_counted_once_and_binned_by_position():
    # Two segments of one root meet exactly on the plane y = 0 at x = 3, depth 12: one intersection,
    # in the cell x 0..10, depth 10..20.
    p0 = [[3.0, -2.0, -11.0], [3.0, 0.0, -12.0]]
    p1 = [[3.0, 0.0, -12.0], [3.0, 2.0, -13.0]]
    system = lines_system(p0, p1, parent_id=np.array([-1, 0]), root_id=np.array([0, 0]))
    df = sample_wall(system, walls=["0,-10,10,20,10"])
    hit = df[df["intersections"] > 0]
    assert len(hit) == 1 and hit["intersections"].iloc[0] == 1
    assert (hit["x_left_cm"].iloc[0], hit["depth_top_cm"].iloc[0]) == (0.0, 10.0)


def test_cells_at_the_edges_are_cut_short_and_columns_are_ordered():
    system = lines_system([[0, -1, -1]], [[0, 1, -1]])
    df = sample_wall(system, walls=["0,0,25,15,10"])
    assert tuple(df.columns[: len(WALL_COLUMNS)]) == WALL_COLUMNS
    assert sorted(set(zip(df["x_left_cm"], df["x_right_cm"]))) == [(0, 10), (10, 20), (20, 25)]
    assert sorted(set(zip(df["depth_top_cm"], df["depth_bottom_cm"]))) == [(0, 10), (10, 15)]
    assert df["cell_area_cm2"].min() == pytest.approx(25.0)


@pytest.mark.parametrize("text, fragment", [
    ("0,10,5,40,5", "XMIN (10) must be less than XMAX (5)"),
    ("0,5,5,40,5", "must be less than XMAX"),
    ("0,-5,5,0,5", "DEPTH must be > 0"),
    ("0,-5,5,40,0", "CELL must be > 0"),
    ("0,-5,5,40", "expected Y,XMIN,XMAX,DEPTH,CELL"),
])
def test_bad_walls(text, fragment):
    with pytest.raises(SamplingError) as info:
        parse_wall(text)
    assert fragment in str(info.value)


def test_wall_outside_a_rhizobox_is_refused():
    meta = {"container": {"kind": "rhizobox", "width_cm": 30, "thickness_cm": 3, "depth_cm": 50}}
    system = lines_system([[0, 0, 0]], [[0, 0, -10]], metadata=meta)
    sample_wall(system, walls=["0,-15,15,50,5"])
    with pytest.raises(SamplingError, match="outside the rhizobox"):
        sample_wall(system, walls=["0,-20,15,50,5"])
    with pytest.raises(SamplingError, match="below the rhizobox bottom"):
        sample_wall(system, walls=["0,-15,15,60,5"])


def test_roots_on_cell_edges_are_counted_once():
    # Additivity over a partition: a vertical root on the edge x = 0 between two cells and a root
    # along x exactly at the 10 cm row boundary each count once in the slab totals (20 cm and 40 cm).
    system = lines_system([[0.0, 0.1, 0.0], [-20.0, 0.1, -10.0]], [[0.0, 0.1, -20.0], [20.0, 0.1, -10.0]])
    df = sample_wall(system, walls=["0,-20,20,20,10"])
    assert df["slab_root_length_cm"].sum() == pytest.approx(60.0)
    vertical = df[(df["x_left_cm"] == 0)]
    assert vertical["slab_root_length_cm"].tolist() == pytest.approx([10.0, 20.0])
