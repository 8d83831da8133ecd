"""Soil cores: analytic lengths, increments, spatial index vs brute force, core grid placement, bad input."""

import math
import re

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rootsim.errors import SamplingError
from rootsim.sampling import Core, core_grid, parse_core, sample_cores
from rootsim.sampling.cores import CORE_COLUMNS
from rootsim.sampling.cylinder import segment_cylinder_length
from rootsim.sampling.synthetic import isotropic_lines, lines_system, random_walk_roots


def test_columns_come_first_in_the_documented_order():
    system = lines_system([[0, 0, 0]], [[0, 0, -30]])
    df = sample_cores(system, cores=["0,0,5,30"])
    assert tuple(df.columns[: len(CORE_COLUMNS)]) == CORE_COLUMNS


def test_vertical_root_on_axis_gives_increment_lengths_and_rld():
    # Analytic: a vertical root from 0 to 25 cm lies 10, 10 and 5 cm in the increments 0-10, 10-20,
    # 20-30; RLD = length / (pi r^2 thickness) with r = 2.5 cm.
    system = lines_system([[0.3, -0.2, 0.0]], [[0.3, -0.2, -25.0]])
    df = sample_cores(system, cores=[Core(x_cm=0, y_cm=0, diameter_cm=5, depth_cm=30, increment_cm=10)])
    assert df["root_length_cm"].tolist() == pytest.approx([10.0, 10.0, 5.0])
    assert df["rld_cm_per_cm3"].tolist() == pytest.approx([10 / (math.pi * 6.25 * 10), 10 / (math.pi * 62.5), 5 / (math.pi * 62.5)])


def test_last_increment_is_shorter():
    # Analytic: a 25 cm core cut in 10 cm increments ends with a 5 cm increment of volume pi r^2 5.
    system = lines_system([[0, 0, 0.0]], [[0, 0, -40.0]])
    df = sample_cores(system, cores=["0,0,4,25,10"])
    assert df["depth_bottom_cm"].tolist() == [10.0, 20.0, 25.0]
    assert df["volume_cm3"].iloc[-1] == pytest.approx(math.pi * 4 * 5)
    assert df["root_length_cm"].tolist() == pytest.approx([10.0, 10.0, 5.0])


def test_horizontal_chords_at_known_offsets():
    # Analytic chord lengths 2 sqrt(r^2 - d^2) for horizontal roots at depth 15 (second increment).
    offsets = np.array([0.0, 1.0, 2.0, 2.4, 2.6])
    p0 = np.column_stack([np.full(5, -20.0), offsets, np.full(5, -15.0)])
    p1 = np.column_stack([np.full(5, 20.0), offsets, np.full(5, -15.0)])
    df = sample_cores(lines_system(p0, p1), cores=["0,0,5,30,10"])
    expected = sum(2 * math.sqrt(max(6.25 - d * d, 0.0)) for d in offsets)
    assert df["root_length_cm"].tolist() == pytest.approx([0.0, expected, 0.0])


def test_increments_sum_to_the_full_core():
    # Additivity of length over a partition of the depth range (analytic identity).
    rng = np.random.default_rng(3)
    p0, p1 = isotropic_lines(3000, box_lo=[-6, -6, -45], box_hi=[6, 6, -2], length_cm=3.0, rng=rng)
    system = lines_system(p0, p1)
    fine = sample_cores(system, cores=["1,-1,6,40,2.5", "1,-1,6,40,40"])
    parts = fine[fine["core_id"] == 0]["root_length_cm"].sum()
    whole = fine[fine["core_id"] == 1]["root_length_cm"].sum()
    assert parts == pytest.approx(whole, rel=1e-12)


def test_spatial_index_equals_brute_force_full_scan():
    # Brute force: every segment of the table clipped against every core (no index), summed per increment.
    rng = np.random.default_rng(11)
    system = random_walk_roots(20_000, n_roots=40, segment_cm=0.7, rng=rng, spread_cm=15)
    p0 = np.column_stack([system["x0"], system["y0"], system["z0"]])
    p1 = np.column_stack([system["x1"], system["y1"], system["z1"]])
    cores = [Core(x_cm=float(x), y_cm=float(y), diameter_cm=float(d), depth_cm=60, increment_cm=7.5)
             for x, y, d in zip(rng.uniform(-15, 15, 12), rng.uniform(-15, 15, 12), rng.uniform(2, 9, 12))]
    df = sample_cores(system, cores=cores)
    for core_id, core in enumerate(cores):
        got = df[df["core_id"] == core_id]
        for _, row in got.iterrows():
            brute = segment_cylinder_length(p0, p1, axis_point=[core.x_cm, core.y_cm, 0], axis_direction=[0, 0, -1],
                                            radius_cm=core.radius_cm, axial_min_cm=row["depth_top_cm"],
                                            axial_max_cm=row["depth_bottom_cm"]).sum()
            assert row["root_length_cm"] == pytest.approx(brute, rel=1e-10, abs=1e-10)


def test_long_segment_far_from_its_midpoint_is_found():
    # A 200 cm horizontal root whose midpoint is 90 cm from the core still crosses it: chord 2 r.
    p0 = [[-10.0, 0.0, -5.0], [40.0, 40.0, -5.0]]
    p1 = [[190.0, 0.0, -5.0], [41.0, 40.0, -5.0]]
    df = sample_cores(lines_system(p0, p1), cores=["0,0,3,10"])
    assert df["root_length_cm"].iloc[0] == pytest.approx(3.0)


def test_lattice_of_vertical_roots_matches_point_count():
    # Independent count: vertical roots on a 1 cm lattice; the length in a core equals the number of
    # lattice points inside the disc (counted by plain distance tests) times the depth.
    xs, ys = np.meshgrid(np.arange(-10, 10.5, 1.0) + 0.25, np.arange(-10, 10.5, 1.0) + 0.4)
    n = xs.size
    p0 = np.column_stack([xs.ravel(), ys.ravel(), np.zeros(n)])
    p1 = np.column_stack([xs.ravel(), ys.ravel(), np.full(n, -50.0)])
    df = sample_cores(lines_system(p0, p1), cores=["0.1,0.2,7.3,30,30"])
    inside = np.count_nonzero(np.hypot(xs - 0.1, ys - 0.2) <= 3.65)
    assert df["root_length_cm"].iloc[0] == pytest.approx(inside * 30.0)


def test_empty_root_system_gives_zero():
    system = lines_system(np.zeros((0, 3)), np.zeros((0, 3)))
    df = sample_cores(system, cores=["0,0,5,20"])
    assert df["root_length_cm"].tolist() == [0.0, 0.0]


@pytest.mark.parametrize("text, fragment", [
    ("0,0,0,30", "diameter must be > 0"),
    ("0,0,-5,30", "diameter must be > 0"),
    ("0,0,5,0", "depth must be > 0"),
    ("0,0,5,30,0", "increment must be > 0"),
    ("0,0,5", "expected X,Y,DIAMETER,DEPTH[,INCREMENT]"),
    ("0,0,five,30", "DIAMETER must be a number"),
    ("0,0,5,nan", "must be finite"),
])
def test_bad_core_strings(text, fragment):
    with pytest.raises(SamplingError, match=re.escape(fragment)):
        parse_core(text)


def test_core_top_above_surface_is_refused():
    system = lines_system([[0, 0, 0]], [[0, 0, -30]])
    with pytest.raises(SamplingError, match="above the soil surface"):
        sample_cores(system, cores=[Core(x_cm=0, y_cm=0, diameter_cm=5, depth_cm=30, top_cm=-2)])


def test_cores_outside_containers_are_refused():
    pot = {"container": {"kind": "pot", "diameter_cm": 20, "depth_cm": 30}}
    system = lines_system([[0, 0, 0]], [[0, 0, -10]], metadata=pot)
    sample_cores(system, cores=["7,0,6,30"])  # reaches exactly the wall: allowed
    with pytest.raises(SamplingError, match="outside the pot"):
        sample_cores(system, cores=["7.5,0,6,20"])
    with pytest.raises(SamplingError, match="below the pot bottom"):
        sample_cores(system, cores=["0,0,5,31"])
    box = {"container": {"kind": "rhizobox", "width_cm": 30, "thickness_cm": 3, "depth_cm": 50}}
    system = lines_system([[0, 0, 0]], [[0, 0, -10]], metadata=box)
    sample_cores(system, cores=["10,0,3,40"])
    with pytest.raises(SamplingError, match="outside the rhizobox"):
        sample_cores(system, cores=["0,0,4,40"])
    with pytest.raises(SamplingError, match="outside the rhizobox"):
        sample_cores(system, cores=["14,0,3,40"])


def _stand(positions, **extra):
    return {"stand": {"n_plants": len(positions), "plant_positions_cm": [[x, y, 0.0] for x, y in positions], **extra}}


def test_core_grid_two_rows_along_x():
    # Layout arithmetic: rows along x at y = 0 and y = 75 (row spacing 75), plants 25 cm apart.
    meta = _stand([(0, 0), (25, 0), (50, 0), (0, 75), (25, 75), (50, 75)], row_spacing_cm=75, plant_spacing_cm=25)
    cores = core_grid(lines_system([[0, 0, 0]], [[0, 0, -1]], metadata=meta), diameter_cm=4, depth_cm=60)
    by_kind = {}
    for c in cores:
        by_kind.setdefault(c.placement, set()).add((c.x_cm, c.y_cm))
    assert by_kind["in_row_at_plant"] == {(0, 0), (25, 0), (50, 0), (0, 75), (25, 75), (50, 75)}
    assert by_kind["in_row_between_plants"] == {(12.5, 0), (37.5, 0), (12.5, 75), (37.5, 75)}
    assert by_kind["mid_row"] == {(0, 37.5), (25, 37.5), (50, 37.5)}
    assert all(c.diameter_cm == 4 and c.depth_cm == 60 and c.increment_cm == 10 for c in cores)


def test_core_grid_rows_along_y_and_single_plant():
    # Rows along y (x = 0 and x = 70), plants 20 cm apart along y: spacings identify the orientation.
    meta = _stand([(0, 0), (0, 20), (70, 0), (70, 20)], row_spacing_cm=70, plant_spacing_cm=20)
    cores = core_grid(lines_system([[0, 0, 0]], [[0, 0, -1]], metadata=meta), diameter_cm=4, depth_cm=60)
    between = {(c.x_cm, c.y_cm) for c in cores if c.placement == "in_row_between_plants"}
    mid = {(c.x_cm, c.y_cm) for c in cores if c.placement == "mid_row"}
    assert between == {(0, 10), (70, 10)}
    assert mid == {(35, 0), (35, 20)}
    # One plant: cores half a spacing along (x) and across (y) the row.
    meta = _stand([(5, 5)], row_spacing_cm=60, plant_spacing_cm=10)
    cores = core_grid(lines_system([[0, 0, 0]], [[0, 0, -1]], metadata=meta), diameter_cm=4, depth_cm=60)
    assert [(c.placement, c.x_cm, c.y_cm) for c in cores] == [
        ("in_row_at_plant", 5, 5), ("in_row_between_plants", 10, 5), ("mid_row", 5, 35)]


def test_core_grid_without_layout_is_an_error():
    with pytest.raises(SamplingError, match="stand layout"):
        core_grid(lines_system([[0, 0, 0]], [[0, 0, -1]]), diameter_cm=4, depth_cm=60)
    with pytest.raises(SamplingError, match="row_spacing_cm"):
        core_grid(lines_system([[0, 0, 0]], [[0, 0, -1]], metadata=_stand([(0, 0), (20, 0)])), diameter_cm=4, depth_cm=60)


def test_root_lying_on_an_increment_boundary_is_counted_once():
    # Additivity over a partition: a horizontal root exactly at 10 cm deep belongs to one increment
    # (the deeper one, half-open increments); its chord through the axis is the diameter, 5 cm.
    system = lines_system([[-10.0, 0.0, -10.0]], [[10.0, 0.0, -10.0]])
    df = sample_cores(system, cores=["0,0,5,30,10"])
    assert df["root_length_cm"].tolist() == pytest.approx([0.0, 5.0, 0.0])


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(0, 60), long_share=st.floats(0, 1),
       x=st.floats(-20, 20), y=st.floats(-20, 20), diameter=st.floats(0.5, 15), increment=st.floats(1, 40))
def test_index_never_misses_a_segment(seed, n, long_share, x, y, diameter, increment):
    # Brute force over all segments (no index) on random short and long segments, any core position.
    rng = np.random.default_rng(seed)
    p0 = rng.uniform([-25, -25, -60], [25, 25, 0], (n, 3))
    scale = np.where(rng.random(n) < long_share, 40.0, 2.0)[:, None]
    p1 = p0 + rng.normal(0, 1, (n, 3)) * scale
    core = Core(x_cm=x, y_cm=y, diameter_cm=diameter, depth_cm=50, increment_cm=increment)
    df = sample_cores(lines_system(p0, p1), cores=[core])
    brute = segment_cylinder_length(p0, p1, axis_point=[x, y, 0], axis_direction=[0, 0, -1], radius_cm=diameter / 2,
                                    axial_min_cm=0.0, axial_max_cm=50.0).sum()
    assert df["root_length_cm"].sum() == pytest.approx(brute, rel=1e-9, abs=1e-9)


def test_dataframe_input_and_its_metadata_are_used():
    # A DataFrame in the segment-table layout works like the RootSystem (analytic 10 + 10 + 5 cm), and
    # its attrs carry the container: a core outside the pot is refused.
    pot = {"container": {"kind": "pot", "diameter_cm": 20, "depth_cm": 40}}
    df = lines_system([[0.0, 0.0, 0.0]], [[0.0, 0.0, -25.0]], metadata=pot).to_dataframe()
    out = sample_cores(df, cores=["0,0,5,30"])
    assert out["root_length_cm"].tolist() == pytest.approx([10.0, 10.0, 5.0])
    with pytest.raises(SamplingError, match="outside the pot"):
        sample_cores(df, cores=["9,0,5,30"])
