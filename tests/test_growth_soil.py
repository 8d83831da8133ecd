"""Soil and containers: walls and the surface are never crossed, strong layers deflect and slow roots,
and elongation in a uniform layer follows the documented impedance law exactly."""

import numpy as np
import pytest

from growth_specs import grow_frame, length_below, make_spec, root_class

#: Wandering, branching roots that press against every boundary: spread initial angles (some upward),
#: strong random turning, plagiotropic laterals.
_WANDERING = {
    "axis": root_class(initial_angle_from_vertical_deg={"low": 0.0, "high": 150.0}, elongation_rate_cm_per_day=3.0,
                       max_length_cm=200.0, random_turning_deg_per_sqrt_cm=25.0, gravitropism_per_cm=0.02,
                       basal_zone_cm=1.0, apical_zone_cm=2.0, interbranch_distance_cm=2.0,
                       branches=[{"root_class": "lateral", "probability": 0.8}]),
    "lateral": root_class(insertion_angle_deg=80.0, elongation_rate_cm_per_day=1.0, max_length_cm=15.0,
                          plagiotropism_per_cm=0.1, preferred_angle_from_vertical_deg=110.0,
                          random_turning_deg_per_sqrt_cm=30.0),
}


def _end_points(df):
    return np.concatenate([df[["x0", "y0", "z0"]].to_numpy(), df[["x1", "y1", "z1"]].to_numpy()])


def _wandering(container, *, days=40.0, seed=0):
    spec = make_spec(_WANDERING, emergence=[{"root_class": "axis", "roots_per_event": 12}], days=days,
                     step_days=0.5, container=container, seed=seed, sowing_depth_cm=2.0)
    return grow_frame(spec)


@pytest.mark.parametrize("seed", [0, 1])
def test_pot_walls_bottom_and_surface_are_never_crossed(seed):
    radius, depth = 10.0, 25.0
    df = _wandering({"kind": "pot", "diameter_cm": 2 * radius, "depth_cm": depth}, seed=seed)
    p = _end_points(df)
    r = np.hypot(p[:, 0], p[:, 1])
    assert np.all(r <= radius + 1e-9)
    assert np.all(p[:, 2] <= 1e-12) and np.all(p[:, 2] >= -depth - 1e-9)
    # The roots do reach every boundary, so the check is not empty.
    assert r.max() > 0.999 * radius and p[:, 2].min() < -0.999 * depth and p[:, 2].max() > -1e-6


@pytest.mark.parametrize("seed", [0, 1])
def test_rhizobox_walls_bottom_and_surface_are_never_crossed(seed):
    width, thickness, depth = 30.0, 2.0, 40.0
    df = _wandering({"kind": "rhizobox", "width_cm": width, "thickness_cm": thickness, "depth_cm": depth},
                    seed=seed, days=50.0)
    p = _end_points(df)
    assert np.all(np.abs(p[:, 0]) <= width / 2 + 1e-9)
    assert np.all(np.abs(p[:, 1]) <= thickness / 2 + 1e-9)
    assert np.all(p[:, 2] <= 1e-12) and np.all(p[:, 2] >= -depth - 1e-9)
    assert np.abs(p[:, 0]).max() > 0.999 * width / 2 and np.abs(p[:, 1]).max() > 0.999 * thickness / 2
    assert p[:, 2].min() < -0.999 * depth


@pytest.mark.parametrize("container", [{"kind": "pot", "diameter_cm": 20.0, "depth_cm": 25.0},
                                       {"kind": "rhizobox", "width_cm": 30.0, "thickness_cm": 2.0, "depth_cm": 40.0}])
def test_sliding_along_container_walls_keeps_the_elongation_law(container):
    # Walls change where a tip goes, not how much it elongates: every axis (linear law, 3 cm/day, not yet at its
    # 200 cm maximum) has length r T = 120 cm after 40 days, however often it met a wall, a corner or the surface.
    df = _wandering(container)
    axes = df[df["order"] == 0].groupby("root_id")["length_cm"].sum().to_numpy()
    np.testing.assert_allclose(axes, 3.0 * 40.0, rtol=1e-9)


def test_field_surface_is_never_crossed_by_upward_plagiotropic_roots():
    # Plagiotropic roots aimed upward at 120 deg from the vertical and held there: they meet the surface
    # within a few cm and must slide along it.
    cls = root_class(initial_angle_from_vertical_deg=120.0, plagiotropism_per_cm=0.5,
                     preferred_angle_from_vertical_deg=120.0, random_turning_deg_per_sqrt_cm=10.0,
                     elongation_rate_cm_per_day=2.0, max_length_cm=100.0)
    spec = make_spec({"up": cls}, emergence=[{"root_class": "up", "roots_per_event": 20}], days=20.0,
                     sowing_depth_cm=3.0)
    df = grow_frame(spec)
    p = _end_points(df)
    assert np.all(p[:, 2] <= 0.0)
    # They did reach it: a tip that would cross slides on at its depth, within one step (1 cm) of z = 0.
    assert p[:, 2].max() > -1.0
    # Sliding along the surface keeps the elongation: each root still has its full length r t.
    per_root = df.groupby("root_id")["length_cm"].sum().to_numpy()
    np.testing.assert_allclose(per_root, 2.0 * 20.0, rtol=1e-9)


def _layer_soil(top, bottom, resistance, *, halving=1.0, threshold=2.5, incidence=45.0):
    return {"elongation_halving_resistance_mpa": halving, "deflection_threshold_mpa": threshold,
            "deflection_max_incidence_deg": incidence,
            "layers": [{"depth_top_cm": top, "depth_bottom_cm": bottom, "penetration_resistance_mpa": resistance}]}


def test_strong_layer_reduces_root_length_below_its_top():
    # A layer of 5 MPa (above the 2.5 MPa deflection threshold) from 15 to 40 cm: shallow tips are deflected
    # along its top and steep ones slowed by 2^-5; far less length is found below 15 cm than without it.
    classes = {
        "axis": root_class(initial_angle_from_vertical_deg={"low": 0.0, "high": 75.0}, elongation_rate_cm_per_day=2.0,
                           max_length_cm=80.0, gravitropism_per_cm=0.03, random_turning_deg_per_sqrt_cm=8.0,
                           interbranch_distance_cm=2.0, branches=[{"root_class": "lateral"}]),
        "lateral": root_class(insertion_angle_deg=70.0, max_length_cm=8.0, random_turning_deg_per_sqrt_cm=15.0),
    }
    emergence = [{"root_class": "axis", "roots_per_event": 10}]
    kwargs = dict(emergence=emergence, days=40.0, step_days=0.5, seed=3)
    with_layer = grow_frame(make_spec(classes, soil=_layer_soil(15.0, 40.0, 5.0), **kwargs))
    without = grow_frame(make_spec(classes, **kwargs))
    below_with, below_without = length_below(with_layer, 15.0), length_below(without, 15.0)
    assert below_without > 200.0
    assert below_with < 0.25 * below_without


@pytest.mark.parametrize("gravitropism,sowing_depth_cm", [(0.0, 3.1), (0.01, 3.0), (0.0, 3.0)])
def test_shallow_tip_is_deflected_along_the_top_of_a_strong_layer(gravitropism, sowing_depth_cm):
    # 60 deg from the vertical = 30 deg from the layer plane, below the 45 deg limit: deflected, the root
    # then runs along the layer top and never enters. From 3.0 cm with 0.25 cm steps (depth gain 0.125 cm a
    # step) the straight tip lands exactly on the top at 15 cm before it is deflected.
    cls = root_class(initial_angle_from_vertical_deg=60.0, gravitropism_per_cm=gravitropism,
                     elongation_rate_cm_per_day=1.0, max_length_cm=60.0)
    df = grow_frame(make_spec({"main": cls}, soil=_layer_soil(15.0, 40.0, 5.0), days=50.0, step_days=0.25,
                              sowing_depth_cm=sowing_depth_cm))
    assert df[["z0", "z1"]].to_numpy().min() >= -15.0 - 1e-9
    assert df["z1"].to_numpy()[-1] == pytest.approx(-15.0, abs=0.25)
    # Deflection does not slow the root: above the layer it keeps the unimpeded length r t.
    assert df["length_cm"].sum() == pytest.approx(50.0, rel=1e-9)


@pytest.mark.parametrize("law", ["linear", "negative_exponential"])
def test_steep_tip_enters_a_strong_layer_and_slows_by_the_impedance_factor(law):
    # 20 deg from the vertical = 70 deg from the layer plane: enters. Straight root from 3 cm depth reaches
    # the 15 cm top after s_c = 12 / cos 20 cm; beyond it the rate is r 2^(-R/R_half). The engine takes the
    # factor at the start of each step, so the root may overshoot by at most one unimpeded step.
    rate, max_length, resistance, halving, step = 1.0, 60.0, 5.0, 2.0, 0.05
    cls = root_class(initial_angle_from_vertical_deg=20.0, elongation_rate_cm_per_day=rate, max_length_cm=max_length,
                     elongation_law=law)
    days = 30.0
    df = grow_frame(make_spec({"main": cls}, soil=_layer_soil(15.0, 40.0, resistance, halving=halving), days=days,
                              step_days=step))
    factor = 2.0 ** (-resistance / halving)  # the documented impedance law
    s_c = 12.0 / np.cos(np.radians(20.0))
    if law == "linear":
        t_c = s_c / rate
        expected = s_c + factor * rate * (days - t_c)
    else:
        # L = L_max (1 - exp(-r t / L_max)) up to s_c, then the same law with rate factor r from there.
        t_c = -max_length / rate * np.log(1 - s_c / max_length)
        expected = max_length - (max_length - s_c) * np.exp(-factor * rate * (days - t_c) / max_length)
    total = df["length_cm"].sum()
    assert expected - 1e-9 <= total <= expected + rate * step
    assert df[["z0", "z1"]].to_numpy().min() < -15.0 - 0.1  # it did enter


@pytest.mark.parametrize("resistance,halving", [(0.5, 1.0), (1.5, 2.0), (2.0, 1.0), (4.0, 1.5), (0.0, 1.0)])
@pytest.mark.parametrize("law", ["linear", "negative_exponential"])
def test_uniform_layer_scales_elongation_by_two_to_the_minus_r_over_r_half(resistance, halving, law):
    # A layer from the surface to 300 cm holds the whole root: every step grows at r 2^(-R / R_half)
    # (exponential decline of elongation with penetration resistance, Bengough et al. 2011, J. Exp. Bot.
    # 62:59-68, doi:10.1093/jxb/erq350, as documented for the soil table).
    rate, max_length, days = 2.0, 40.0, 15.0
    cls = root_class(elongation_rate_cm_per_day=rate, max_length_cm=max_length, elongation_law=law,
                     gravitropism_per_cm=0.1, initial_angle_from_vertical_deg=40.0)
    impeded = grow_frame(make_spec({"main": cls}, soil=_layer_soil(0.0, 300.0, resistance, halving=halving),
                                   days=days))["length_cm"].sum()
    free = grow_frame(make_spec({"main": cls}, days=days))["length_cm"].sum()
    factor = 2.0 ** (-resistance / halving)
    if law == "linear":
        np.testing.assert_allclose([impeded, free], [factor * rate * days, rate * days], rtol=1e-12)
        assert impeded / free == pytest.approx(factor, rel=1e-12)
    else:
        curve = lambda r: max_length * (1 - np.exp(-r * days / max_length))  # noqa: E731
        np.testing.assert_allclose([impeded, free], [curve(factor * rate), curve(rate)], rtol=1e-10)


def test_weak_layer_below_the_threshold_does_not_deflect():
    # 2 MPa < 2.5 MPa threshold: even a shallow tip enters (slowed, not deflected).
    cls = root_class(initial_angle_from_vertical_deg=60.0, elongation_rate_cm_per_day=1.0, max_length_cm=60.0)
    df = grow_frame(make_spec({"main": cls}, soil=_layer_soil(15.0, 40.0, 2.0), days=60.0, step_days=0.25))
    assert df[["z0", "z1"]].to_numpy().min() < -15.5


@pytest.mark.parametrize("seed", [1, 2, 3])
@pytest.mark.parametrize("container", [{"kind": "pot", "diameter_cm": 5.0, "depth_cm": 8.0},
                                       {"kind": "rhizobox", "width_cm": 10.0, "thickness_cm": 1.0, "depth_cm": 10.0}])
def test_cramped_containers_keep_the_elongation_law_and_the_walls(container, seed):
    # Containers much smaller than the roots: tips are pressed into edges and corners (surface + two walls,
    # bottom + wall) over and over. Lengths still follow r T exactly (the law, not the walls, sets elongation)
    # and no end point leaves the container (its geometry, analytic).
    df = _wandering(container, seed=seed)
    axes = df[df["order"] == 0].groupby("root_id")["length_cm"].sum().to_numpy()
    np.testing.assert_allclose(axes, 3.0 * 40.0, rtol=1e-9)
    p = np.vstack([df[["x0", "y0", "z0"]].to_numpy(), df[["x1", "y1", "z1"]].to_numpy()])
    assert np.all(p[:, 2] <= 1e-9) and np.all(p[:, 2] >= -container["depth_cm"] - 1e-9)
    if container["kind"] == "pot":
        assert np.all(np.hypot(p[:, 0], p[:, 1]) <= container["diameter_cm"] / 2 + 1e-9)
    else:
        assert np.all(np.abs(p[:, 0]) <= container["width_cm"] / 2 + 1e-9)
        assert np.all(np.abs(p[:, 1]) <= container["thickness_cm"] / 2 + 1e-9)
