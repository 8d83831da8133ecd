"""Soil water in pots and rhizoboxes: the 3D voxel Richards solver against the 1D column, its mass balance and its
no-flow container walls."""

from __future__ import annotations

import numpy as np
import pytest

from rootsim.capture.errors import CaptureError
from rootsim.capture.hydraulics import VanGenuchtenMualem
from rootsim.capture.richards import water_step
from rootsim.capture.richards3d import (advance_voxel_water, container_grid, soil_on_grid, voxel_water_step)
from rootsim.spec import Container

LAYER_CM = 2.0


def _rhizobox(depth=30.0):
    return container_grid(Container(kind="rhizobox", width_cm=6.0, thickness_cm=4.0, depth_cm=depth), cell_cm=2.0,
                          layer_cm=LAYER_CM)


def _layered_soil(n_layers):
    # a loam over a sandy loam (Carsel & Parrish 1988 class means, from memory), air entry -2 cm (Vogel et al. 2001)
    column = VanGenuchtenMualem.texture("loam", n_layers, air_entry=-2.0)
    sandy = VanGenuchtenMualem.texture("sandy_loam", n_layers, air_entry=-2.0)
    deep = np.arange(n_layers) >= n_layers // 2
    pick = lambda a, b: np.where(deep, b, a)  # noqa: E731
    return VanGenuchtenMualem(pick(column.residual, sandy.residual), pick(column.saturated, sandy.saturated),
                              pick(column.alpha, sandy.alpha), pick(column.n, sandy.n), pick(column.ks, sandy.ks),
                              column.pore_connectivity, column.air_entry)


def test_laterally_uniform_box_equals_the_1d_column_cell_for_cell():
    # With the same state in every column and no-flow side walls no water crosses a vertical face, so each column
    # of the box is the 1D mixed-form column (Celia et al. 1990): same heads step by step, to solver round-off.
    grid = _rhizobox()
    nz = grid.shape[2]
    column_soil = _layered_soil(nz)
    soil3 = soil_on_grid(column_soil, grid)
    head1 = np.linspace(-60.0, -150.0, nz)
    head3 = head1[grid.layer_of_active()]
    sink1 = np.where(np.arange(nz) < 6, 0.004, 0.0)                    # roots in the top 12 cm, 1/day
    sink3 = sink1[grid.layer_of_active()]
    for step in range(30):
        supply = 0.8 if step < 10 else 0.0                              # 8 mm/day of rain for half a day
        one = water_step(head1, 0.05, soil=column_soil, cell_cm=LAYER_CM, supply_cm_per_day=supply,
                         sink_per_day=sink1)
        three = voxel_water_step(head3, 0.05, grid=grid, soil=soil3, supply_cm_per_day=supply, sink_per_day=sink3)
        assert one.converged and three.converged
        head1, head3 = one.head_cm, three.head_cm
        np.testing.assert_allclose(head3, head1[grid.layer_of_active()], rtol=1e-9, atol=1e-9)
        # the box drains like the column times its surface area (free drainage, K of the bottom cell)
        assert three.drainage_cm3_per_day == pytest.approx(one.face_flux_cm_per_day[-1] * grid.surface_area_cm2(),
                                                           rel=1e-9)


def _pot():
    return container_grid(Container(kind="pot", diameter_cm=12.0, depth_cm=16.0), cell_cm=1.0, layer_cm=LAYER_CM)


def test_pot_water_balance_closes_to_round_off_with_roots_on_one_side():
    # Mass balance (in - out - change in storage) of every step, for a pot watered at the top, drained at the
    # bottom and emptied by roots on one side only, so water flows sideways too.
    grid = _pot()
    soil = soil_on_grid(_layered_soil(grid.shape[2]), grid)
    x = grid.origin_cm[0] + (np.nonzero(grid.active)[0] + 0.5) * grid.cell_cm[0]
    sink = np.where((x > 2.0) & (grid.layer_of_active() < 4), 0.01, 0.0)
    head = np.full(grid.n_active, -120.0)
    for supply in (0.6, 0.0):
        head, totals, _, uptake = advance_voxel_water(head, 1.0, grid=grid, soil=soil, supply_cm_per_day=supply,
                                                      sink=lambda h: sink, head_tolerance_cm=1e-6)
        stored = totals.infiltration_cm3 - totals.drainage_cm3 - totals.uptake_cm3
        assert abs(totals.balance_error_cm3) < 1e-6 * max(abs(stored), 1.0)
        assert totals.uptake_cm3 == pytest.approx(uptake.sum(), rel=1e-12)
        assert (uptake[sink == 0.0] == 0.0).all()                        # no uptake where no roots are
    # the rooted side dried more than the other: water content differs across the pot at the same depth
    theta = soil.water_content(head)
    top = grid.layer_of_active() < 4
    assert theta[top & (x > 2.0)].mean() < theta[top & (x < -2.0)].mean()


def test_closed_container_keeps_its_water_and_walls_pass_none():
    # No-flow walls and bottom, no rain, no roots: a wet half and a dry half even out sideways while the total
    # volume of water stays what it was (to round-off), and the pot's round wall lets nothing through.
    grid = container_grid(Container(kind="pot", diameter_cm=8.0, depth_cm=8.0), cell_cm=1.0, layer_cm=LAYER_CM)
    soil = soil_on_grid(VanGenuchtenMualem.texture("loam", grid.shape[2], air_entry=-2.0), grid)
    x = grid.origin_cm[0] + (np.nonzero(grid.active)[0] + 0.5) * grid.cell_cm[0]
    head = np.where(x < 0.0, -40.0, -400.0)
    volume = grid.cell_volume_cm3
    before = soil.water_content(head).sum() * volume
    spread_before = np.ptp(head)
    head, totals, _, _ = advance_voxel_water(head, 1.0, grid=grid, soil=soil, supply_cm_per_day=0.0,
                                             sink=lambda h: np.zeros(h.size), bottom="no_flow",
                                             head_tolerance_cm=1e-6)
    after = soil.water_content(head).sum() * volume
    assert totals.infiltration_cm3 == 0.0 and totals.drainage_cm3 == 0.0
    assert after == pytest.approx(before, rel=1e-10)
    assert np.ptp(head) < 0.5 * spread_before                            # lateral redistribution happened


def test_container_grid_follows_the_pot_and_refuses_a_field():
    grid = _pot()
    # 12 cm pot on 1 cm cells: the cells whose centres lie in the circle (counted by hand: 112 of 144 per layer)
    centres = np.arange(-5.5, 6.0, 1.0)
    expected = int(((centres[:, None] ** 2 + centres[None, :] ** 2) <= 36.0).sum())
    assert grid.active[:, :, 0].sum() == expected and grid.n_active == expected * 8
    assert grid.surface_area_cm2() == pytest.approx(expected * 1.0)
    with pytest.raises(CaptureError, match="pot or a rhizobox"):
        container_grid(Container(kind="field"), cell_cm=1.0, layer_cm=2.0)
    with pytest.raises(CaptureError, match="divide"):
        container_grid(Container(kind="pot", diameter_cm=10.0, depth_cm=15.0), cell_cm=1.0, layer_cm=2.0)


def _season_inputs(depth_cm):
    import pandas as pd

    from rootsim.capture.soil_file import soil_water_from_mapping
    from rootsim.soil.weather import weather_table_from_frame

    setup = soil_water_from_mapping({
        "column": {"depth_cm": depth_cm, "cell_cm": 2.0, "initial_pressure_head_cm": -120.0},
        "horizons": [{"depth_bottom_cm": depth_cm / 2, "texture": "loam"},
                     {"depth_bottom_cm": depth_cm, "texture": "sandy_loam"}],
        "traits": {"deep_water_below_cm": 10.0},
    }, source="pot_soil.toml")
    weather = weather_table_from_frame(pd.DataFrame({"day": np.arange(6), "mean_air_temperature_c": 20.0,
                                                     "rain_mm": [6.0, 0, 0, 3.0, 0, 0],
                                                     "potential_transpiration_mm": 3.0}))
    return setup, weather


def _vertical_roots(xs, depth_cm):
    top = np.tile(np.arange(0.0, depth_cm), len(xs))
    x = np.repeat(xs, int(depth_cm))
    return {"x0": x, "y0": np.zeros_like(x), "z0": -top, "x1": x, "y1": np.zeros_like(x), "z1": -(top + 1.0),
            "length_cm": np.ones(top.size), "birth_day": top / 4.0}


def test_a_one_cell_wide_rhizobox_season_equals_the_1d_season():
    # One voxel across the box: the 3D season is the 1D season over the box's area (same solver rules, same
    # Feddes sink by root length per layer), day by day.
    from rootsim.capture.season import run_water_season
    from rootsim.capture.season3d import run_voxel_water_season

    setup, weather = _season_inputs(20.0)
    box = Container(kind="rhizobox", width_cm=6.0, thickness_cm=2.0, depth_cm=20.0)
    roots = _vertical_roots([-1.0, 1.5], 14.0)
    three = run_voxel_water_season(roots, setup, weather, box, cell_cm=6.0)
    one = run_water_season(roots, setup, weather, ground_area_cm2=12.0)
    assert three["grid"].shape == (1, 1, 10)
    for column in ("actual_transpiration_mm", "drainage_mm", "soil_water_storage_mm", "infiltration_mm"):
        np.testing.assert_allclose(three["daily"][column], one["daily"][column], rtol=1e-7, atol=1e-9)
    np.testing.assert_allclose(three["layers"]["water_uptake_mm"], one["layers"]["water_uptake_mm"], rtol=1e-7,
                               atol=1e-9)
    np.testing.assert_allclose(three["layers"]["root_length_cm"], one["layers"]["root_length_cm"], atol=1e-9)


def test_pot_season_closes_its_water_balance_and_takes_up_only_where_roots_are():
    # Roots at x = +3 cm only, down to 8 cm: layers below 8 cm take up nothing (no uptake where no roots are) and
    # the rooted half of the pot ends drier than the other half; every day's balance closes.
    from rootsim.capture.season3d import run_voxel_water_season

    setup, weather = _season_inputs(16.0)
    pot = Container(kind="pot", diameter_cm=12.0, depth_cm=16.0)
    result = run_voxel_water_season(_vertical_roots([3.0], 8.0), setup, weather, pot, cell_cm=1.0)
    daily, layers = result["daily"], result["layers"]
    assert daily["water_balance_error_mm"].abs().max() < 1e-5
    assert (layers.loc[layers["depth_top_cm"] >= 8.0, "water_uptake_mm"] == 0.0).all()
    assert daily["actual_transpiration_mm"].sum() > 0
    assert result["traits"]["seasonal_transpiration_mm"] == pytest.approx(daily["actual_transpiration_mm"].sum())
    with pytest.raises(CaptureError, match="column.depth_cm"):
        run_voxel_water_season(_vertical_roots([3.0], 8.0), setup, weather,
                               Container(kind="pot", diameter_cm=12.0, depth_cm=20.0))
