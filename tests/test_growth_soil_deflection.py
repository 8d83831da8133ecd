"""Deflection of tips by strong regions of a 3D resistance field (rootsim.growth.soil.deflect_by_field).

Roots meeting a hard layer at a shallow angle grow along its surface instead of entering it (Dexter 1986,
"Mechanics of root growth", Plant and Soil 98: 303-312, from memory; common practice). ``[[soil.layers]]`` do
this through their tops; a field given in 3D must do the same wherever its resistance reaches
``deflection_threshold_mpa``, whatever its shape: a pan given as a grid, a stone given as a patch.
"""

import numpy as np
import pytest
from scipy import stats

from growth_specs import grow_frame, length_below, make_spec, root_class

_PAN_TOP_CM, _PAN_BOTTOM_CM, _PAN_MPA = 15.0, 25.0, 3.0
_AXIS = {"axis": root_class(initial_angle_from_vertical_deg={"low": 0.0, "high": 70.0},
                            elongation_rate_cm_per_day=3.0, max_length_cm=200.0,
                            random_turning_deg_per_sqrt_cm=12.0, gravitropism_per_cm=0.05)}
_STAND = {"rows": 3, "plants_per_row": 3, "row_spacing_cm": 20.0, "plant_spacing_cm": 20.0}
# both forms read resistance through the 3D field kernels (a non-default response), factor 1 - R / 4
_COMMON = {"elongation_response": "linear_to_limit", "limiting_resistance_mpa": 4.0,
           "deflection_max_incidence_deg": 45.0}


def _pan_as_grid(tmp_path):
    # 5 cm cells in depth (the pan's top and bottom on cell faces), one wide cell across
    depth_centres = (np.arange(40) + 0.5) * 5.0
    column = np.where((depth_centres > _PAN_TOP_CM) & (depth_centres < _PAN_BOTTOM_CM), _PAN_MPA, 0.0)
    path = tmp_path / "pan.npy"
    np.save(path, np.broadcast_to(column, (2, 2, column.size)).copy())
    return {"penetration_resistance_mpa": {"grid": {"file": str(path), "origin_cm": [-400.0, -400.0, 0.0],
                                                    "spacing_cm": [400.0, 400.0, 5.0], "values_at": "cells"}}}


def _pan_stand(tmp_path, *, form, seed, threshold_mpa=2.5):
    soil = {**_COMMON, "deflection_threshold_mpa": threshold_mpa}
    if form == "layers":
        soil["layers"] = [{"depth_top_cm": _PAN_TOP_CM, "depth_bottom_cm": _PAN_BOTTOM_CM,
                           "penetration_resistance_mpa": _PAN_MPA}]
    else:
        soil["fields"] = _pan_as_grid(tmp_path)
    spec = make_spec(_AXIS, emergence=[{"root_class": "axis", "roots_per_event": 6}], days=20.0, stand=_STAND,
                     soil=soil, seed=seed)
    return grow_frame(spec)


def _deflection_measures(df):
    """(fraction of axes that slid along the pan's top, length below the pan)."""
    z0, z1 = df["z0"].to_numpy(), df["z1"].to_numpy()
    # a deflected tip runs exactly level (z unchanged) above the pan, within a step of its top
    sliding = (z0 == z1) & (-z0 > _PAN_TOP_CM - 2.0) & (-z0 <= _PAN_TOP_CM)
    axes = df.groupby(["plant_id", "root_id"]).ngroups
    slid = df[sliding].groupby(["plant_id", "root_id"]).ngroups
    return slid / axes, length_below(df, _PAN_BOTTOM_CM)


def test_a_pan_given_as_a_grid_deflects_like_the_same_pan_given_as_layers(tmp_path):
    # Same pan (3 MPa at 15-25 cm, threshold 2.5 MPa, tips within 45 degrees of the pan's plane slide along it)
    # as [[soil.layers]] (the layer rule) and as a .npy cell grid (the 3D rule): over 4 seeds x 9 plants the
    # fraction of axes deflected and the length below the pan agree within sampling error (Welch's t test,
    # scipy), while without deflection (threshold above the pan) no axis slides.
    seeds = range(4)
    layers = np.array([_deflection_measures(_pan_stand(tmp_path, form="layers", seed=s)) for s in seeds])
    grid = np.array([_deflection_measures(_pan_stand(tmp_path, form="grid", seed=s)) for s in seeds])
    free = np.array([_deflection_measures(_pan_stand(tmp_path, form="grid", seed=s, threshold_mpa=5.0))
                     for s in seeds])
    assert layers[:, 0].min() > 0.1 and grid[:, 0].min() > 0.1  # the check is not empty: many axes slide
    assert free[:, 0].max() == 0.0
    for column in range(2):
        if np.array_equal(layers[:, column], grid[:, column]):
            continue  # identical per seed (the two rules slide a level pan's tips the same way)
        assert stats.ttest_ind(layers[:, column], grid[:, column], equal_var=False).pvalue > 0.01, (layers, grid)


def _stone_stand(*, threshold_mpa):
    # a spherical stone (10 MPa, radius 6 cm, centre 14 cm deep) under one plant, in a 0.5 MPa soil; elongation
    # stops at 3 MPa (Taylor & Ratliff 1969; Bengough et al. 2011), every incidence deflects (90 degrees)
    soil = {"elongation_response": "linear_to_limit", "limiting_resistance_mpa": 3.0,
            "deflection_threshold_mpa": threshold_mpa, "deflection_max_incidence_deg": 90.0,
            "fields": {"penetration_resistance_mpa": {
                "value": 0.5,
                "patches": [{"shape": "sphere", "center_cm": [0.0, 0.0, 14.0], "radius_cm": 6.0, "value": 10.0,
                             "mode": "replace"}]}}}
    classes = {"axis": root_class(initial_angle_from_vertical_deg={"low": 0.0, "high": 30.0},
                                  elongation_rate_cm_per_day=2.0, max_length_cm=80.0,
                                  random_turning_deg_per_sqrt_cm=5.0, gravitropism_per_cm=0.08)}
    spec = make_spec(classes, emergence=[{"root_class": "axis", "roots_per_event": 12}], days=20.0, soil=soil,
                     seed=5)
    return grow_frame(spec)


def _distance_from_stone_centre(df):
    return np.hypot(np.hypot(df["x1"].to_numpy(), df["y1"].to_numpy()), df["z1"].to_numpy() + 14.0)


def test_roots_go_around_a_stone_patch_when_deflection_is_on():
    # analytic geometry: a step slid along the tangent plane of a ball, from a point outside it, stays outside
    # (the ball lies on one side of its tangent plane), so no segment ends inside the stone
    deflected = _stone_stand(threshold_mpa=2.5)
    entering = _stone_stand(threshold_mpa=20.0)  # threshold above the stone: no deflection
    assert (_distance_from_stone_centre(entering) < 6.0 - 1e-6).sum() > 0  # without deflection, tips enter it
    assert (_distance_from_stone_centre(deflected) < 6.0 - 1e-6).sum() == 0
    # they went around it: length below the stone's bottom (20 cm) returns
    assert length_below(deflected, 20.0) > 2.0 * length_below(entering, 20.0) + 10.0
