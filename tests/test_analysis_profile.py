"""Layer profile: exact clipping at layer boundaries checked against trigonometry and Liang-Barsky."""

import numpy as np
import pandas as pd
import pytest

from rootsim.analysis import layer_profile
from rootsim.errors import RootsimError
from rootsim.geometry import segment_box_length
from test_analysis_support import random_walk_system, straight_segments


def test_vertical_root_splits_by_layer_thickness():
    # Analytic: a vertical root from 0 to 12 cm in 5 cm layers has 5, 5 and 2 cm per layer.
    system = straight_segments([0, 0, 0], [0, 0, -12])
    prof = layer_profile(system, layer_cm=5, area_cm2=10.0)
    np.testing.assert_allclose(prof["depth_top_cm"], [0, 5, 10])
    np.testing.assert_allclose(prof["depth_bottom_cm"], [5, 10, 15])
    np.testing.assert_allclose(prof["root_length_cm"], [5, 5, 2])
    # RLD = length / (thickness x area), common practice.
    np.testing.assert_allclose(prof["rld_cm_per_cm3"], np.array([5, 5, 2]) / (5 * 10.0))
    assert prof.attrs["ground_area_cm2"] == 10.0


@pytest.mark.parametrize("angle_deg", [0.0, 20.0, 45.0, 70.0])
def test_inclined_segment_gets_thickness_over_cosine(angle_deg):
    # Trigonometry: a straight segment at angle a from the vertical has thickness / cos(a) of length in
    # every layer it crosses completely, and the remainder in the partial layers.
    a = np.radians(angle_deg)
    start_depth, end_depth = 3.0, 17.0
    direction = np.array([np.sin(a), 0.0, -np.cos(a)])
    p0 = np.array([0.0, 0.0, -start_depth])
    p1 = p0 + direction * (end_depth - start_depth) / np.cos(a)
    prof = layer_profile(straight_segments(p0, p1), layer_cm=5, area_cm2=1.0)
    expected = np.array([2.0, 5.0, 5.0, 2.0]) / np.cos(a)  # depth 3-5, 5-10, 10-15, 15-17
    np.testing.assert_allclose(prof["root_length_cm"], expected, rtol=1e-12)


def test_random_segments_match_liang_barsky_per_layer_and_sum():
    # Independent method: clip every segment against each layer slab with Liang-Barsky
    # (rootsim.geometry, Liang & Barsky 1984) and compare per layer; lengths must sum to the total.
    rng = np.random.default_rng(7)
    n = 2000
    p0 = np.column_stack([rng.uniform(-10, 10, n), rng.uniform(-10, 10, n), -rng.uniform(0, 40, n)])
    p1 = p0 + rng.normal(scale=3.0, size=(n, 3))
    p1[:, 2] = np.minimum(p1[:, 2], 0.0)
    order = rng.integers(0, 3, n)
    system = straight_segments(p0, p1, order=order)
    prof = layer_profile(system, layer_cm=2.5, area_cm2=1.0)
    big = 1e6
    for i, (top, bottom) in enumerate(zip(prof["depth_top_cm"], prof["depth_bottom_cm"])):
        inside = segment_box_length(p0, p1, np.array([-big, -big, -bottom]), np.array([big, big, -top]))
        assert prof["root_length_cm"][i] == pytest.approx(inside.sum(), rel=1e-10, abs=1e-9)
        for k in range(3):
            assert prof[f"root_length_order_{k}_cm"][i] == pytest.approx(inside[order == k].sum(), rel=1e-10, abs=1e-9)
    assert prof["root_length_cm"].sum() == pytest.approx(system["length_cm"].sum(), rel=1e-12)
    assert prof.attrs["root_length_outside_profile_cm"] == pytest.approx(0.0, abs=1e-8)


def test_box_clips_exactly_and_uses_box_area():
    # Analytic: a horizontal root along x from -10 to 10 at depth 2 has 4 cm inside the box |x| <= 2;
    # a vertical root outside the box counts nothing. Area = box area = 4 x 6.
    system = straight_segments([[-10, 0, -2], [5, 0, 0]], [[10, 0, -2], [5, 0, -8]])
    prof = layer_profile(system, layer_cm=5, box=(-2, 2, -3, 3))
    assert prof.attrs["ground_area_cm2"] == pytest.approx(24.0)
    np.testing.assert_allclose(prof["root_length_cm"], [4.0])
    np.testing.assert_allclose(prof["rld_cm_per_cm3"], [4.0 / (5 * 24.0)])


def test_max_depth_makes_thinner_last_layer_and_drops_deeper_roots():
    # Analytic: vertical root 0-20 cm, profile to 12 cm in 5 cm layers -> 5, 5, 2 (last layer 10-12 cm).
    prof = layer_profile(straight_segments([0, 0, 0], [0, 0, -20]), layer_cm=5, area_cm2=2.0, max_depth_cm=12)
    np.testing.assert_allclose(prof["depth_bottom_cm"], [5, 10, 12])
    np.testing.assert_allclose(prof["root_length_cm"], [5, 5, 2])
    np.testing.assert_allclose(prof["rld_cm_per_cm3"], [5 / 10, 5 / 10, 2 / 4])
    assert prof.attrs["root_length_outside_profile_cm"] == pytest.approx(8.0)


def test_horizontal_segment_on_boundary_and_above_surface():
    # A horizontal segment exactly at depth 5 belongs to the layer starting there; a segment above the
    # surface (z > 0) is not soil and is left out.
    system = straight_segments([[0, 0, -5], [0, 0, 1], [0, 0, -9]], [[3, 0, -5], [0, 0, 2], [0, 0, -10]])
    prof = layer_profile(system, layer_cm=5, area_cm2=1.0)
    np.testing.assert_allclose(prof["root_length_cm"], [0.0, 4.0])
    assert prof.attrs["root_length_outside_profile_cm"] == pytest.approx(1.0)


def test_area_from_stand_metadata_and_dataframe_input():
    # Ground area from the stand: plant spacing x row spacing x plants (common practice).
    meta = {"stand": {"n_plants": 2, "plant_spacing_cm": 5.0, "row_spacing_cm": 20.0}}
    system = random_walk_system(5, 30, seed=3)
    system.metadata = meta
    prof = layer_profile(system, layer_cm=10)
    assert prof.attrs["ground_area_cm2"] == pytest.approx(200.0)
    frame = system.to_dataframe()
    pd.testing.assert_frame_equal(layer_profile(frame, layer_cm=10), prof)
    system.metadata = {"stand": {"ground_area_cm2": 50.0}}
    assert layer_profile(system).attrs["ground_area_cm2"] == 50.0


def test_user_errors_are_one_line():
    system = straight_segments([0, 0, 0], [0, 0, -3])
    with pytest.raises(RootsimError, match="--area-cm2"):
        layer_profile(system)
    with pytest.raises(RootsimError, match="not both"):
        layer_profile(system, area_cm2=1.0, box=(0, 1, 0, 1))
    with pytest.raises(RootsimError, match="layer thickness"):
        layer_profile(system, layer_cm=0, area_cm2=1.0)
    with pytest.raises(RootsimError, match="box"):
        layer_profile(system, box=(1, 0, 0, 1))
    with pytest.raises(RootsimError, match="box"):
        layer_profile(system, box=(0, 1, 0))
    with pytest.raises(RootsimError, match="maximum depth"):
        layer_profile(system, area_cm2=1.0, max_depth_cm=-2)


def test_rootsystem_forwarding_method():
    system = straight_segments([0, 0, 0], [0, 0, -7])
    np.testing.assert_allclose(system.profile(layer_cm=5, area_cm2=1.0)["root_length_cm"], [5, 2])


def test_empty_system_gives_one_empty_layer():
    from rootsim.rootsystem import RootSystem, empty_columns

    prof = layer_profile(RootSystem(empty_columns()), area_cm2=1.0)
    assert len(prof) == 1 and prof["root_length_cm"].dtype == float and prof["root_length_cm"].sum() == 0.0


from hypothesis import given, settings, strategies as st  # noqa: E402

_coordinate = st.integers(min_value=-8, max_value=60).map(lambda k: k * 0.5)  # often exactly on layer boundaries


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(_coordinate, _coordinate, _coordinate, _coordinate), min_size=1, max_size=25),
       st.sampled_from([0.5, 1.0, 2.5, 5.0]))
def test_property_layers_match_liang_barsky(rows, layer):
    # Property (hypothesis): for any segments, including ones lying on boundaries or above the surface, each
    # layer holds what Liang-Barsky clipping against that layer's slab gives (rootsim.geometry).
    data = np.array(rows, dtype=float)
    p0 = np.column_stack([data[:, 0], np.zeros(len(data)), -data[:, 1]])
    p1 = np.column_stack([data[:, 2], np.zeros(len(data)), -data[:, 3]])
    prof = layer_profile(straight_segments(p0, p1), layer_cm=layer, area_cm2=1.0)
    big = 1e6
    for i, (top, bottom) in enumerate(zip(prof["depth_top_cm"], prof["depth_bottom_cm"])):
        inside = segment_box_length(p0, p1, np.array([-big, -big, -bottom]), np.array([big, big, -top]))
        # A horizontal segment lying exactly on a boundary belongs to the layer below it (half-open layers);
        # the slab clip counts it in both neighbours, so take it off the layer above.
        horizontal_on_bottom = (p0[:, 2] == p1[:, 2]) & (p0[:, 2] == -bottom) & (bottom < prof["depth_bottom_cm"].iloc[-1])
        expected = inside.sum() - inside[horizontal_on_bottom].sum()
        assert prof["root_length_cm"][i] == pytest.approx(expected, abs=1e-9), (i, top, bottom)
    # Conservation: everything below the surface is in some layer.
    above = segment_box_length(p0, p1, np.array([-big, -big, 0.0]), np.array([big, big, big]))
    above_flat_at_surface = (p0[:, 2] == 0) & (p1[:, 2] == 0)  # lies in the first layer, not above
    below = np.linalg.norm(p1 - p0, axis=1).sum() - above.sum() + above[above_flat_at_surface].sum()
    assert prof["root_length_cm"].sum() == pytest.approx(below, abs=1e-9)
