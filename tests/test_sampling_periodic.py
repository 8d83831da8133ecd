"""Periodic field stands: samplers and voxel RLD see the roots of neighbouring cells; stand-relative positions."""

import math
from pathlib import Path

import numpy as np
import pytest

import rootsim
from rootsim.analysis import layer_profile, rld_voxel_grid
from rootsim.errors import SamplingError
from rootsim.periodic_stand import segment_images, stand_cell
from rootsim.sampling import Core, parse_core, parse_wall, sample_cores, sample_tube, sample_wall
from rootsim.sampling.stand_positions import stand_position
from rootsim.sampling.synthetic import lines_system
from rootsim.segment_table import with_stand_convention


CEREAL = Path(__file__).resolve().parents[1] / "params" / "cereal_fibrous.toml"

# Two rows 50 cm apart (x = -25, 25), one plant per row, plant spacing 20 cm: the cell is x -50..50, y -10..10.
META = {"stand": {"n_plants": 2, "rows": 2, "plants_per_row": 1, "row_spacing_cm": 50.0, "plant_spacing_cm": 20.0,
                  "ground_area_cm2": 2000.0, "plant_positions_cm": [[-25.0, 0.0, -5.0], [25.0, 0.0, -5.0]]},
        "container": {"kind": "field"}}


def crossing_root():
    # A straight horizontal root along y at x = 5, 10 cm deep, from y = 2 to y = 16: it leaves the cell at y = 10.
    return lines_system(np.array([[5.0, 2.0, -10.0]]), np.array([[5.0, 16.0, -10.0]]), metadata=META)


def test_cell_is_the_stand_footprint():
    # Layout arithmetic: rows x plants_per_row cells of row spacing x plant spacing, centred on the plants.
    cell = stand_cell(META)
    assert cell.as_list() == [-50.0, 50.0, -10.0, 10.0]
    assert cell.period_x_cm * cell.period_y_cm == META["stand"]["ground_area_cm2"]
    assert stand_cell({**META, "container": {"kind": "pot", "diameter_cm": 20}}) is None
    assert stand_cell({**META, "stand": {**META["stand"], "boundary": "bordered"}}) is None
    assert with_stand_convention(META)["stand"]["cell_cm"] == [-50.0, 50.0, -10.0, 10.0]


def test_a_root_crossing_the_cell_edge_is_counted_once_in_profile_and_in_a_core_on_the_far_side():
    # Analytic: the image of the root shifted by one plant spacing (-20 cm) runs from y = -18 to -4, so a
    # 2-cm core at (5, -8) cuts a 2-cm chord through it; a core at (5, 5) cuts the original once (its image
    # does not reach y = 5); the profile holds the root's 14 cm once.
    system = crossing_root()
    assert layer_profile(system, layer_cm=20)["root_length_cm"].sum() == pytest.approx(14.0)
    far = sample_cores(system, cores=[Core(x_cm=5, y_cm=-8, diameter_cm=2, depth_cm=20, increment_cm=20)])
    near = sample_cores(system, cores=[Core(x_cm=5, y_cm=5, diameter_cm=2, depth_cm=20, increment_cm=20)])
    assert far["root_length_cm"].tolist() == pytest.approx([2.0])
    assert near["root_length_cm"].tolist() == pytest.approx([2.0])
    # A bordered plot (periodic=False) sees only the table's roots: nothing on the far side.
    bordered = sample_cores(system, cores=[Core(x_cm=5, y_cm=-8, diameter_cm=2, depth_cm=20, increment_cm=20)],
                            periodic=False)
    assert bordered["root_length_cm"].tolist() == [0.0]
    # The voxel grid over the cell holds the root once (14 cm), the part past y = 10 wrapped to y = -10..-4.
    rld, origin, spacing = rld_voxel_grid(system, voxel_cm=2.0)
    assert origin[:2].tolist() == [-50.0, -10.0]
    assert rld.sum() * np.prod(spacing) == pytest.approx(14.0)


def test_wall_and_tube_see_the_image_past_the_cell():
    # Analytic: a face on y = -6 crosses the image (y -18..-4) once at x = 5, depth 10; a vertical tube
    # at (5 + 2.9, -8) has the image root 2.9 cm from its axis, inside the seen shell 2.8..3.0 cm: the
    # visible chord is 2 sqrt(3.0^2 - 2.9^2) (annulus geometry).
    system = crossing_root()
    wall = sample_wall(system, walls=["-6,-20,20,20,20"])
    assert int(wall["intersections"].sum()) == 1
    tube = sample_tube(system, tubes=["7.9,-8,0,20,5.6,0.2"])
    assert tube["visible_length_cm"].sum() == pytest.approx(2 * math.sqrt(3.0 ** 2 - 2.9 ** 2))
    assert sample_wall(system, walls=["-6,-20,20,20,20"], periodic=False)["intersections"].sum() == 0


def test_images_cover_a_box_larger_than_the_cell():
    # An infinite field: a box two periods long holds two images of every root.
    p0 = np.array([[0.0, 0.0, -1.0]])
    p1 = np.array([[1.0, 0.0, -1.0]])
    q0, _, source = segment_images(p0, p1, stand_cell(META), (-100.0, 100.0, -5.0, 5.0))
    assert sorted(q0[:, 0].tolist()) == [-100.0, 0.0, 100.0]
    assert source.tolist() == [0, 0, 0]


@pytest.fixture(scope="module")
def cereal_stand():
    spec = rootsim.load_spec(CEREAL)
    return rootsim.grow(spec, days=25, progress=False)


def test_footprint_rld_equals_stand_rld_at_every_depth(cereal_stand):
    # Exact: with periodic images the voxel grid over the cell holds all root length, so its mean RLD per
    # depth layer equals the profile's RLD over the stand's ground area (both exact clippings).
    rld, _, _ = rld_voxel_grid(cereal_stand, voxel_cm=(5.0, 5.0, 10.0))
    profile = layer_profile(cereal_stand, layer_cm=10)
    footprint = rld.mean(axis=(0, 1))[::-1][: len(profile)]
    assert footprint == pytest.approx(profile["rld_cm_per_cm3"].to_numpy(), rel=1e-9, abs=1e-12)


def test_core_lattice_over_the_cell_matches_stand_rld(cereal_plant):
    # Systematic sampling: a regular 16 x 6 lattice of cores over the cell of the shipped plant (60 days, a
    # periodic field of one plant per 75 x 20 cm) estimates the stand RLD (common practice); with periodic
    # images the 0-10 and 10-20 cm means lie within 3 % of the exact profile, while the same lattice in a
    # bordered plot (no images) misses the roots that grew past the cell edge (the edge loss of a finite plot).
    cereal_stand = cereal_plant
    cell = stand_cell(cereal_stand.metadata)
    xs = cell.x_min_cm + (np.arange(16) + 0.5) * cell.period_x_cm / 16
    ys = cell.y_min_cm + (np.arange(6) + 0.5) * cell.period_y_cm / 6
    cores = [Core(x_cm=x, y_cm=y, diameter_cm=5.0, depth_cm=20.0, increment_cm=10.0) for x in xs for y in ys]
    df = sample_cores(cereal_stand, cores=cores)
    mean = df.groupby("depth_top_cm")["rld_cm_per_cm3"].mean().to_numpy()
    truth = layer_profile(cereal_stand, layer_cm=10)["rld_cm_per_cm3"].to_numpy()[:2]
    assert mean == pytest.approx(truth, rel=0.03)
    bordered = sample_cores(cereal_stand, cores=cores, periodic=False).groupby("depth_top_cm")["rld_cm_per_cm3"].mean()
    assert np.all(bordered.to_numpy() < 0.9 * truth)


def test_stand_relative_positions_on_the_shipped_layout(cereal_stand):
    # Layout of the shipped cereal stand: rows along y at x = -37.5 and 37.5, plants at y = -20, 0, 20 (plant 3 is
    # at (37.5, -20): its neighbour toward the stand centre is at y = 0, so "between" is y = -10).
    meta = cereal_stand.metadata
    assert stand_position(meta, "in_row_at_plant") == (-37.5, 0.0, 1)
    assert stand_position(meta, "in_row_between_plants") == (-37.5, 10.0, 1)
    assert stand_position(meta, "mid_row") == (0.0, 0.0, 1)
    assert stand_position(meta, "mid_row", 5) == (0.0, 20.0, 5)
    df = sample_cores(cereal_stand, cores=["between_plants:3,4,30", "mid_row,4,30"])
    assert df.groupby("core_id")[["x_cm", "y_cm"]].first().to_numpy().tolist() == [[37.5, -10.0], [0.0, 0.0]]
    assert set(df["placement"]) == {"in_row_between_plants", "mid_row"}
    wall = sample_wall(cereal_stand, walls=[parse_wall("in_row_between_plants,20,10")])
    assert wall["y_cm"].iloc[0] == 10.0 and wall["x_left_cm"].min() == -75.0 and wall["x_right_cm"].max() == 75.0


@pytest.mark.parametrize("text, fragment", [
    ("under_the_hedge,4,30", "is not known"),
    ("mid_row:x,4,30", "whole number"),
    ("mid_row,4", "expected POSITION,DIAMETER,DEPTH"),
])
def test_bad_positions(text, fragment):
    with pytest.raises(SamplingError, match=fragment):
        parse_core(text)


def test_positions_need_a_stand_layout():
    system = lines_system(np.array([[0.0, 0.0, -1.0]]), np.array([[0.0, 0.0, -2.0]]))
    with pytest.raises(SamplingError, match="stand layout"):
        sample_cores(system, cores=["mid_row,4,30"])
    with pytest.raises(SamplingError, match="plant 9 does not exist"):
        sample_cores(lines_system(np.zeros((1, 3)), np.ones((1, 3)) * -1, metadata=META), cores=["mid_row:9,4,30"])


def test_wall_across_rows_that_run_along_x():
    # Rows along x (plants 20 cm apart in x, rows 50 cm apart in y): a face across the rows through the point
    # between plants is the plane x = 10 spanning y -50..50. A root along x at y = 3, 12 cm deep, from x = 0 to
    # 18 crosses it once; a root along y never does (it runs in the face's direction).
    meta = {"stand": {"n_plants": 4, "rows": 2, "plants_per_row": 2, "row_spacing_cm": 50.0, "plant_spacing_cm": 20.0,
                      "plant_positions_cm": [[0.0, -25.0, -5.0], [20.0, -25.0, -5.0], [0.0, 25.0, -5.0],
                                             [20.0, 25.0, -5.0]]}, "container": {"kind": "field"}}
    p0 = np.array([[0.0, 3.0, -12.0], [5.0, -20.0, -12.0]])
    p1 = np.array([[18.0, 3.0, -12.0], [5.0, 20.0, -12.0]])
    df = sample_wall(lines_system(p0, p1, metadata=meta), walls=["between_plants,20,10"])
    assert set(df["normal_axis"]) == {"x"} and df["y_cm"].iloc[0] == 10.0
    assert df["x_left_cm"].min() == -50.0 and df["x_right_cm"].max() == 50.0
    hit = df[df["intersections"] > 0]
    assert hit[["x_left_cm", "depth_top_cm", "intersections"]].values.tolist() == [[0.0, 10.0, 1]]
