"""Nitrate in the 3D voxel column: equals the 1D column for a laterally uniform box, closes its balance, and
takes up nothing where there are no roots."""

import numpy as np
import pytest

from rootsim.capture.nitrate import NitrateParameters, nitrate_step
from rootsim.capture.nitrate3d import voxel_nitrate_step
from rootsim.capture.richards3d import VoxelGrid, _faces


def test_laterally_uniform_box_equals_the_1d_column():
    # The 1D column (advection-dispersion, Millington & Quirk tortuosity, Michaelis-Menten uptake) is an
    # independent implementation (banded solve); a box whose layers are uniform has no lateral flow or gradient,
    # so each layer must carry the 1D mass per cm² of ground.
    nx, ny, nz, dx, dy, dz = 3, 2, 12, 4.0, 5.0, 2.0
    grid = VoxelGrid((nx, ny, nz), (dx, dy, dz), (0.0, 0.0), np.ones((nx, ny, nz), dtype=bool))
    ground = nx * ny * dx * dy
    depth = np.arange(nz)
    theta_old = 0.22 + 0.01 * np.sin(depth)
    theta_new = theta_old + 0.004 * np.cos(depth)
    saturated = np.full(nz, 0.43)
    q = 0.3 + 0.05 * np.cos(np.arange(nz + 1))            # cm/day downward across each face (0: surface)
    q[5] = -0.1                                           # one upward face
    roots = np.where(depth < 8, 40.0 / (1 + depth), 0.0)  # cm of root per layer of the whole box
    mass1d = 0.002 * (1 + depth % 3)                      # mg N per cm² of ground per layer
    parameters = NitrateParameters()
    m1, u1, l1 = nitrate_step(mass1d, 1.0, theta_old=theta_old, theta_new=theta_new, face_flux_cm_per_day=q,
                              saturated=saturated, cell_cm=dz, root_length_cm=roots, ground_area_cm2=ground,
                              parameters=parameters)
    faces, _surface, bottom = _faces(grid)
    k = grid.layer_of_active()
    flow = np.where(faces.vertical, q[k[faces.first] + 1] * dx * dy, 0.0)
    m3, u3, l3 = voxel_nitrate_step(mass1d[k] * dx * dy, 1.0, grid=grid, theta_old=theta_old[k],
                                    theta_new=theta_new[k], saturated=saturated[k], face_flow_cm3_per_day=flow,
                                    drainage_cm3_per_day=np.full(bottom.size, q[-1] * dx * dy),
                                    root_length_cm=roots[k] / (nx * ny), parameters=parameters)
    np.testing.assert_allclose(np.bincount(k, weights=m3) / ground, m1, rtol=1e-10)
    np.testing.assert_allclose(np.bincount(k, weights=u3) / ground, u1, rtol=1e-10, atol=1e-18)
    assert abs(l3 / ground - l1) <= 1e-10 * abs(l1)


def _pot():
    nx, ny, nz = 6, 6, 8
    x, y = np.meshgrid(np.arange(nx) - 2.5, np.arange(ny) - 2.5, indexing="ij")
    inside = x ** 2 + y ** 2 <= 9.0
    return VoxelGrid((nx, ny, nz), (2.0, 2.0, 2.5), (0.0, 0.0), np.repeat(inside[:, :, None], nz, axis=2))


def test_balance_closes_every_day_and_no_uptake_without_roots():
    # Conservation (common practice for a finite-volume scheme): stored mass change = -(uptake + leaching).
    grid = _pot()
    geometry = _faces(grid)
    faces, _surface, bottom = geometry
    n = grid.n_active
    rng = np.random.default_rng(11)
    flow = np.where(faces.vertical, 2.0, 0.3) * rng.standard_normal(faces.first.size)
    roots = np.where(rng.random(n) < 0.4, rng.uniform(1.0, 30.0, n), 0.0)
    theta = 0.2 + 0.1 * rng.random(n)
    mass = 0.05 * rng.random(n)
    parameters = NitrateParameters()
    for day in range(10):
        theta_new = np.clip(theta + 0.01 * rng.standard_normal(n), 0.05, 0.42)
        new, uptake, leached = voxel_nitrate_step(
            mass, 1.0, grid=grid, theta_old=theta, theta_new=theta_new, saturated=np.full(n, 0.45),
            face_flow_cm3_per_day=flow, drainage_cm3_per_day=np.full(bottom.size, 1.5), root_length_cm=roots,
            parameters=parameters, _geometry=geometry)
        error = new.sum() - mass.sum() + uptake.sum() + leached
        assert abs(error) <= 1e-12 * mass.sum(), (day, error)
        assert (uptake[roots == 0] == 0).all()
        assert (uptake[roots > 0] > 0).all() and leached > 0
        mass, theta = new, theta_new


def _season_inputs(depth_cm):
    import pandas as pd

    from rootsim.capture.soil_file import soil_water_from_mapping
    from rootsim.soil.weather import weather_table_from_frame

    setup = soil_water_from_mapping({
        "column": {"depth_cm": depth_cm, "cell_cm": 2.0, "initial_pressure_head_cm": -60.0},
        "horizons": [{"depth_bottom_cm": depth_cm / 2, "texture": "loam"},
                     {"depth_bottom_cm": depth_cm, "texture": "sandy_loam"}],
    }, source="pot_soil.toml")
    weather = weather_table_from_frame(pd.DataFrame({
        "day": np.arange(8), "mean_air_temperature_c": 20.0, "rain_mm": [12.0, 0, 0, 20.0, 0, 0, 8.0, 0],
        "potential_transpiration_mm": 3.0, "nitrate_fertilizer_kg_n_per_ha": [0, 60.0, 0, 0, 0, 0, 0, 0]}))
    return setup, weather


def _vertical_roots(xs, depth_cm):
    top = np.tile(np.arange(0.0, depth_cm), len(xs))
    x = np.repeat(xs, int(depth_cm))
    return {"x0": x, "y0": np.zeros_like(x), "z0": -top, "x1": x, "y1": np.zeros_like(x), "z1": -(top + 1.0),
            "length_cm": np.ones(top.size), "birth_day": top / 4.0}


NITRATE_DAILY = ("nitrate_fertilizer_kg_n_per_ha", "nitrate_uptake_kg_n_per_ha", "nitrate_leached_kg_n_per_ha",
                 "nitrate_storage_kg_n_per_ha")
NITRATE_LAYERS = ("nitrate_n_kg_per_ha", "nitrate_n_mg_per_l", "nitrate_uptake_kg_n_per_ha")


def test_uniform_box_season_nitrate_equals_the_1d_season_day_by_day():
    # A box three voxels wide whose roots are spread evenly over its columns stays laterally uniform, so each of
    # its columns is the 1D season's column (an independent implementation: banded solve, per cm² of ground);
    # the nitrate columns must agree day by day, fertilizer, uptake, leaching and per-layer amounts alike.
    from rootsim.capture.season import run_water_season
    from rootsim.capture.season3d import run_voxel_water_season
    from rootsim.spec import Container

    setup, weather = _season_inputs(20.0)
    box = Container(kind="rhizobox", width_cm=6.0, thickness_cm=2.0, depth_cm=20.0)
    roots = _vertical_roots([-2.0, 0.0, 2.0], 14.0)   # one root down the middle of each 2 cm voxel column
    three = run_voxel_water_season(roots, setup, weather, box, cell_cm=2.0)
    one = run_water_season(roots, setup, weather, ground_area_cm2=12.0)
    assert three["grid"].shape == (3, 1, 10)
    assert one["daily"]["nitrate_leached_kg_n_per_ha"].sum() > 0 and one["daily"]["nitrate_uptake_kg_n_per_ha"].sum() > 0
    for column in NITRATE_DAILY:
        np.testing.assert_allclose(three["daily"][column], one["daily"][column], rtol=1e-9, atol=1e-12, err_msg=column)
    for column in NITRATE_LAYERS:
        np.testing.assert_allclose(three["layers"][column], one["layers"][column], rtol=1e-9, atol=1e-12,
                                   err_msg=column)
    assert three["daily"].attrs["initial_nitrate_kg_n_per_ha"] == pytest.approx(
        one["daily"].attrs["initial_nitrate_kg_n_per_ha"], rel=1e-12)
    for trait in ("nitrate_uptake_kg_n_per_ha", "nitrate_leached_kg_n_per_ha", "nitrate_uptake_fraction_of_applied"):
        assert three["traits"][trait] == pytest.approx(one["traits"][trait], rel=1e-9)


def test_pot_season_nitrate_balance_closes_every_day_and_no_uptake_without_roots():
    # Conservation (common practice for a finite-volume scheme): each day storage change = fertilizer - uptake -
    # leaching, here checked from the table's own columns; roots only at x = +3 cm down to 8 cm take up no
    # nitrate in the layers below 8 cm.
    from rootsim.capture.season3d import run_voxel_water_season
    from rootsim.spec import Container

    setup, weather = _season_inputs(16.0)
    pot = Container(kind="pot", diameter_cm=12.0, depth_cm=16.0)
    result = run_voxel_water_season(_vertical_roots([3.0], 8.0), setup, weather, pot, cell_cm=2.0)
    daily, layers = result["daily"], result["layers"]
    storage = daily["nitrate_storage_kg_n_per_ha"].to_numpy()
    previous = np.concatenate([[daily.attrs["initial_nitrate_kg_n_per_ha"]], storage[:-1]])
    error = (storage - previous) - (daily["nitrate_fertilizer_kg_n_per_ha"] - daily["nitrate_uptake_kg_n_per_ha"]
                                    - daily["nitrate_leached_kg_n_per_ha"]).to_numpy()
    assert np.abs(error).max() <= 1e-10 * storage.max()
    assert daily["nitrate_balance_error_kg_n_per_ha"].abs().max() <= 1e-10 * storage.max()
    for day, group in layers.groupby("day"):
        assert group["nitrate_n_kg_per_ha"].sum() == pytest.approx(
            daily.loc[daily["day"] == day, "nitrate_storage_kg_n_per_ha"].item(), rel=1e-12)
    assert daily["nitrate_uptake_kg_n_per_ha"].sum() > 0
    assert (layers.loc[layers["depth_top_cm"] >= 8.0, "nitrate_uptake_kg_n_per_ha"] == 0.0).all()
    assert result["traits"]["nitrate_applied_kg_n_per_ha"] == pytest.approx(60.0, rel=1e-12)
