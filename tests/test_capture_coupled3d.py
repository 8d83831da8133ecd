"""Growth coupled with the 3D voxel soil-water column of pots and rhizoboxes (rootsim.capture.coupled with
rootsim.capture.season3d): a one-column box equals the 1D coupled season, daily balances of a pot, the root length
per voxel collected day by day against exact clipping of the final table, the water the roots read, uncoupled runs
against grow() and the one-way season, a side of a pot kept wet, and the command line."""

from __future__ import annotations

import copy
import json
import tomllib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from growth_specs import column_digests
from rootsim import grow
from rootsim.capture.coupled import KPA_PER_CM_OF_WATER, run_coupled_season
from rootsim.capture.errors import CaptureError
from rootsim.capture.season3d import root_length_by_day_on_grid, run_voxel_water_season
from rootsim.capture.soil_file import read_soil_water_file, soil_water_from_mapping
from rootsim.geometry import segment_box_length
from rootsim.soil.fields import values_at
from rootsim.soil.weather import read_weather_table, weather_table_from_frame
from rootsim.spec import load_spec_layers, parse_spec

ROOT = Path(__file__).resolve().parents[1]
CEREAL = ROOT / "params" / "capture" / "cereal_drying_topsoil.toml"
POT = ROOT / "params" / "pot_nutrient_patch.toml"
LOAM = ROOT / "params" / "capture" / "soil_water_loam.toml"
DRYING = ROOT / "params" / "capture" / "weather_drying_season.csv"
POT_DAYS = 21


def _soil(depth_cm: float, *, head_cm: float = -80.0, deep_below_cm: float = 20.0):
    """The shipped loam's soil-water file cut to a container's depth (loam over silt loam below 30 cm)."""
    data = tomllib.loads(LOAM.read_text(encoding="utf-8"))
    data["column"].update(depth_cm=depth_cm, initial_pressure_head_cm=head_cm)
    data["horizons"] = [{"depth_bottom_cm": min(30.0, depth_cm), "texture": "loam"}]
    if depth_cm > 30.0:
        data["horizons"].append({"depth_bottom_cm": depth_cm, "texture": "silt_loam"})
    data["traits"]["deep_water_below_cm"] = deep_below_cm
    return soil_water_from_mapping(data, source=f"loam_{depth_cm:g}_cm")


def _cereal_in_rhizobox(days: int, *, clock: str = "thermal", **container):
    """One plant of the shipped coupled example (Busscher resistance from water, laterals turning toward water;
    its thermal clock, or calendar days where growth steps must line up with the season's days) in a rhizobox
    60 cm deep."""
    data = copy.deepcopy(load_spec_layers(CEREAL)[0])
    data["run"]["duration_days"] = days
    data["stand"]["plants_per_row"] = 1
    if clock == "calendar":
        data["development"] = {"clock": "calendar"}
    data["container"] = {"kind": "rhizobox", "width_cm": 20.0, "thickness_cm": 4.0, "depth_cm": 60.0, **container}
    return parse_spec(data, source=str(CEREAL))


def _pot_spec(tropism_per_cm: float, *, seed: int = 7007):
    """The shipped pot seedling (20 cm pot, 40 cm deep) without its nitrate patch: a water-independent resistance
    and every class turning toward wetter soil at ``tropism_per_cm``."""
    data = copy.deepcopy(load_spec_layers(POT)[0])
    data["run"].update(duration_days=POT_DAYS, seed=seed)
    data["soil"]["fields"].pop("nitrate_mg_per_kg")
    data["soil"]["fields"]["volumetric_water_content"] = {"value": 0.3}   # plain growth; coupled: the column's
    data["soil"]["fields"]["penetration_resistance_mpa"] = {"value": 0.5}
    for root_class in data["root_classes"].values():
        root_class.pop("proliferation", None)
        root_class["field_tropism"] = {"field": "volumetric_water_content", "strength_per_cm": tropism_per_cm}
    return parse_spec(data, source=str(POT))


def _pot_weather():
    """4 mm of irrigation a day against 6 mm of potential transpiration (invented glasshouse schedule)."""
    day = np.arange(POT_DAYS + 1)
    return weather_table_from_frame(pd.DataFrame({"day": day, "mean_air_temperature_c": 20.0, "rain_mm": 0.0,
                                                  "irrigation_mm": 4.0, "potential_transpiration_mm": 6.0,
                                                  "nitrate_fertilizer_kg_n_per_ha": np.where(day == 3, 30.0, 0.0)}),
                                    source="pot_schedule.csv")


def _plus_x_wet(x_cm, y_cm):
    return x_cm > 0


def _minus_x_wet(x_cm, y_cm):
    return x_cm < 0


def _pot_run(tropism_per_cm: float, share, *, couple: bool = True):
    return run_coupled_season(_pot_spec(tropism_per_cm), _soil(40.0, head_cm=-300.0), _pot_weather(),
                              last_day=POT_DAYS, progress=False, container_cell_cm=4.0, supply_share=share,
                              couple=couple)


@pytest.fixture(scope="module")
def pot_wet_plus_x():
    return _pot_run(0.2, _plus_x_wet)


def _voxel_centres(grid):
    i, j, k = np.nonzero(grid.active)
    dx, dy, dz = grid.cell_cm
    return grid.origin_cm[0] + (i + 0.5) * dx, grid.origin_cm[1] + (j + 0.5) * dy, -(k + 0.5) * dz


def test_one_column_box_coupled_in_3d_equals_the_1d_coupled_season():
    # A rhizobox whose voxels span its whole width and thickness is one column of voxels: the 3D solver is then
    # the 1D mixed-form scheme cell for cell (Celia et al. 1990), the root length per voxel is the length per
    # depth cell, and the grid fields at the voxel centres (linear between centres) are the 1D depth table. So
    # the coupled seasons agree day by day, roots included, to round-off. Measured at 35 days over seeds 1-8:
    # end points within 2e-13 cm, transpiration within 2e-14 mm.
    spec = _cereal_in_rhizobox(30)
    setup, weather = _soil(60.0, deep_below_cm=30.0), read_weather_table(DRYING)
    one = run_coupled_season(spec, setup, weather, last_day=30, progress=False, column="layers")
    three = run_coupled_season(spec, setup, weather, last_day=30, progress=False, container_cell_cm=20.0)
    assert (one["column"], three["column"]) == ("1d_layers", "3d_voxels_rhizobox")
    assert three["grid"].shape == (1, 1, 30)
    a, b = one["system"], three["system"]
    assert len(a) == len(b) > 1000
    for name in ("x0", "y0", "z0", "x1", "y1", "z1", "length_cm", "birth_day"):
        np.testing.assert_allclose(np.asarray(b[name]), np.asarray(a[name]), rtol=0, atol=1e-9)
    for column in ("actual_transpiration_mm", "infiltration_mm", "drainage_mm", "soil_water_storage_mm",
                   "root_length_cm", "nitrate_uptake_kg_n_per_ha", "nitrate_leached_kg_n_per_ha"):
        np.testing.assert_allclose(three["daily"][column], one["daily"][column], rtol=1e-9, atol=1e-9)
    for column in ("water_content", "pressure_head_cm", "water_uptake_mm", "root_length_cm"):
        np.testing.assert_allclose(three["layers"][column], one["layers"][column], rtol=1e-9, atol=1e-9)
    assert one["daily"]["actual_transpiration_mm"].sum() > 10.0
    # the coupling acts: the same box with the spec's own static soil grows other roots
    static = run_coupled_season(spec, setup, weather, last_day=30, progress=False, container_cell_cm=20.0,
                                couple=False)
    assert len(static["system"]) != len(b)


def test_one_column_box_with_soil_evaporation_equals_the_1d_coupled_season():
    # FAO-56 two-stage soil evaporation (Allen et al. 1998, ch. 7) from the top voxels as from the 1D column's top
    # cells: the shipped evaporating loam and dry spell, one voxel wide. Measured at 30 days over seeds 1-8: daily
    # columns within 2.3e-13 mm, end points within 1.1e-13 cm.
    data = tomllib.loads((ROOT / "params" / "capture" / "soil_water_loam_evaporating.toml").read_text(encoding="utf-8"))
    data["column"]["depth_cm"] = 60.0
    data["horizons"] = [{"depth_bottom_cm": 30.0, "texture": "loam"},
                        {"depth_bottom_cm": 60.0, "texture": "silt_loam"}]
    data["traits"]["deep_water_below_cm"] = 30.0
    setup = soil_water_from_mapping(data, source="loam_evaporating_60_cm")
    weather = read_weather_table(ROOT / "params" / "capture" / "weather_dry_spell_120_days.csv")
    spec = _cereal_in_rhizobox(30)
    one = run_coupled_season(spec, setup, weather, last_day=30, progress=False, column="layers")
    three = run_coupled_season(spec, setup, weather, last_day=30, progress=False, container_cell_cm=20.0)
    assert len(one["system"]) == len(three["system"]) > 1000
    for column in ("soil_evaporation_mm", "evaporation_reduction_coefficient", "evaporable_water_depletion_mm",
                   "actual_transpiration_mm", "soil_water_storage_mm"):
        np.testing.assert_allclose(three["daily"][column], one["daily"][column], rtol=1e-9, atol=1e-9)
    np.testing.assert_allclose(three["layers"]["water_uptake_mm"], one["layers"]["water_uptake_mm"], atol=1e-9)
    daily = three["daily"]
    assert daily["soil_evaporation_mm"].sum() > 10.0
    assert three["traits"]["seasonal_soil_evaporation_mm"] == pytest.approx(daily["soil_evaporation_mm"].sum())
    # in - out - change in storage with evaporation as an outflow (common practice), every day
    change = np.diff(daily["soil_water_storage_mm"].to_numpy())
    flows = (daily["infiltration_mm"] - daily["drainage_mm"] - daily["actual_transpiration_mm"]
             - daily["soil_evaporation_mm"]).to_numpy()[1:]
    np.testing.assert_allclose(change, flows, atol=1e-6)


def test_pot_balances_close_every_day(pot_wet_plus_x):
    daily = pot_wet_plus_x["daily"]
    assert pot_wet_plus_x["column"] == "3d_voxels_pot"
    # in - out - change in storage, every day (common practice: a conservative scheme closes to round-off)
    assert np.abs(daily["water_balance_error_mm"]).max() < 1e-6
    assert np.abs(daily["nitrate_balance_error_kg_n_per_ha"]).max() < 1e-9
    change = np.diff(daily["soil_water_storage_mm"].to_numpy())
    flows = (daily["infiltration_mm"] - daily["drainage_mm"] - daily["actual_transpiration_mm"]).to_numpy()[1:]
    np.testing.assert_allclose(change, flows, atol=1e-6)
    # all the irrigation entered (no ponding in 3D), and the roots took water every day once they had grown
    np.testing.assert_allclose(daily["infiltration_mm"], 4.0, rtol=1e-12)
    assert (daily["actual_transpiration_mm"].to_numpy()[5:] > 0.5).all()


def test_root_length_per_voxel_collected_day_by_day_equals_exact_clipping_of_the_final_table(pot_wet_plus_x):
    system, grid = pot_wet_plus_x["system"], pot_wet_plus_x["grid"]
    collected = pot_wet_plus_x["voxel_root_length_cm"]
    days = pot_wet_plus_x["daily"]["day"].to_numpy()
    assert collected.shape == (days.size, grid.n_active)
    # the one-way path: the final table cut at the voxel planes in one pass, grouped by birth day
    expected = root_length_by_day_on_grid(system, grid, first_day=int(days[0]), n_days=days.size)
    np.testing.assert_allclose(collected, expected, rtol=1e-10, atol=1e-9)
    # and every day all the length born so far is in some soil voxel (the roots stay inside the pot)
    birth, length = np.asarray(system["birth_day"]), np.asarray(system["length_cm"])
    born = np.array([length[birth <= day + 1e-9].sum() for day in days])
    np.testing.assert_allclose(collected.sum(axis=1), born, rtol=1e-10)
    assert born[-1] > 200.0


def test_rhizobox_voxel_length_equals_liang_barsky_clipping_per_voxel():
    # Independent path: each voxel's box clipped against every segment (Liang & Barsky 1984,
    # rootsim.geometry.segment_box_length), for the segments born by each day.
    # (calendar clock: the length collected by day d is that of the segments born by day d; voxel planes at
    # x = -2.5 and 2.5 cm, not through the seed)
    spec = _cereal_in_rhizobox(20, clock="calendar", width_cm=15.0)
    result = run_coupled_season(spec, _soil(60.0), read_weather_table(DRYING), last_day=20, progress=False,
                                container_cell_cm=5.0)
    grid, system = result["grid"], result["system"]
    assert grid.shape == (3, 1, 30) and grid.n_active == 90
    p0 = np.column_stack([np.asarray(system[c]) for c in ("x0", "y0", "z0")])
    p1 = np.column_stack([np.asarray(system[c]) for c in ("x1", "y1", "z1")])
    birth = np.asarray(system["birth_day"])
    i, j, k = np.nonzero(grid.active)
    dx, dy, dz = grid.cell_cm
    low = np.column_stack([grid.origin_cm[0] + i * dx, grid.origin_cm[1] + j * dy, -(k + 1) * dz])
    for d in (10, 15, 20):
        born = birth <= d + 1e-9
        expected = np.array([segment_box_length(p0[born], p1[born], lo, lo + np.array([dx, dy, dz])).sum()
                             for lo in low])
        np.testing.assert_allclose(result["voxel_root_length_cm"][d], expected, rtol=1e-10, atol=1e-9)
    assert result["voxel_root_length_cm"][20].sum() > 500.0


def test_the_roots_read_the_water_of_their_voxels(pot_wet_plus_x):
    # The coupled fields after the season hold the last day's water: at every voxel centre the field is the
    # voxel's water content, and the matric potential its head x 0.0980665 kPa/cm (rho_w g; common practice);
    # half-way between two voxel centres along x the trilinear field is their mean.
    fields, grid = pot_wet_plus_x["soil_fields"], pot_wet_plus_x["grid"]
    theta, head = pot_wet_plus_x["voxel_water_content"], pot_wet_plus_x["voxel_pressure_head_cm"]
    x, y, z = _voxel_centres(grid)
    water = fields.names.index("volumetric_water_content")
    np.testing.assert_allclose(values_at(fields.compiled, water, x, y, z), theta, rtol=1e-12)
    potential = fields.names.index("matric_potential_kpa")
    np.testing.assert_allclose(values_at(fields.compiled, potential, x, y, z), KPA_PER_CM_OF_WATER * head,
                               rtol=1e-12)
    index = {(a, b, c): n for n, (a, b, c) in enumerate(zip(*np.nonzero(grid.active)))}
    pairs = [(index[key], index[(key[0] + 1, key[1], key[2])]) for key in index if (key[0] + 1, *key[1:]) in index]
    first, second = np.array(pairs).T
    mid = values_at(fields.compiled, water, 0.5 * (x[first] + x[second]), y[first], z[first])
    np.testing.assert_allclose(mid, 0.5 * (theta[first] + theta[second]), rtol=1e-12)
    # the layers table reports the same water: each layer's mean over its voxels
    last = pot_wet_plus_x["layers"].query("day == day.max()")["water_content"].to_numpy()
    layer = grid.layer_of_active()
    np.testing.assert_allclose(last, np.bincount(layer, theta) / np.bincount(layer), rtol=1e-12)


def test_uncoupled_pot_grows_grow_bytes_and_runs_the_one_way_voxel_season():
    spec, setup, weather = _pot_spec(0.2), _soil(40.0, head_cm=-300.0), _pot_weather()
    result = _pot_run(0.2, _plus_x_wet, couple=False)
    grown = grow(spec, progress=False)
    assert column_digests(result["system"]) == column_digests(grown)
    one_way = run_voxel_water_season(grown, setup, weather, spec.container, cell_cm=4.0, last_day=POT_DAYS,
                                     supply_share=_plus_x_wet)
    for column in ("actual_transpiration_mm", "drainage_mm", "soil_water_storage_mm", "root_length_cm",
                   "nitrate_uptake_kg_n_per_ha"):
        np.testing.assert_allclose(result["daily"][column], one_way["daily"][column], rtol=1e-9, atol=1e-9)


def test_a_pot_side_kept_wet_grows_more_roots_there_through_hydrotropism(pot_wet_plus_x):
    # Irrigation on one half of the pot only: the watered half stays wetter, the water gradient points to it and
    # roots turning toward wetter soil (field_tropism) put most of their length there. The same seed watered on
    # the other half mirrors it. Measured over seeds 1-10, both halves: the wet half holds 73-81 % of the length.
    def half_share(result):
        system = result["system"]
        x = 0.5 * (np.asarray(system["x0"]) + np.asarray(system["x1"]))
        length = np.asarray(system["length_cm"])
        return length[x > 0].sum() / length.sum()

    minus_x = _pot_run(0.2, _minus_x_wet)
    assert half_share(pot_wet_plus_x) > 0.6
    assert half_share(minus_x) < 0.4
    # the mechanism: the column is wetter on the watered half
    x, _, _ = _voxel_centres(pot_wet_plus_x["grid"])
    theta = pot_wet_plus_x["voxel_water_content"]
    assert theta[x > 0].mean() > theta[x < 0].mean()
    # control: without the tropism the roots do not read the water, so the two watering plans grow the same bytes
    assert column_digests(_pot_run(0.0, _plus_x_wet)["system"]) == column_digests(_pot_run(0.0, _minus_x_wet)["system"])


def test_supply_share_and_column_errors():
    setup, weather = _soil(60.0), read_weather_table(DRYING)
    with pytest.raises(CaptureError, match="supply share"):
        run_coupled_season(_cereal_in_rhizobox(3), setup, weather, last_day=3, progress=False,
                           supply_share=lambda x, y: -1.0 * np.ones_like(x))
    with pytest.raises(CaptureError, match="allowed: auto, layers"):
        run_coupled_season(_cereal_in_rhizobox(3), setup, weather, last_day=3, progress=False, column="voxel")
    with pytest.raises(CaptureError, match="depth"):
        run_coupled_season(_cereal_in_rhizobox(3, depth_cm=50.0), setup, weather, last_day=3, progress=False)


def test_cli_grow_in_a_pot_uses_the_3d_column(tmp_path, capsys):
    from rootsim.cli import main

    spec_file = tmp_path / "pot.toml"
    spec_file.write_text(f'based_on = "{POT}"\n[run]\nduration_days = 6\n', encoding="utf-8")
    soil_file = tmp_path / "pot_soil.toml"
    soil_text = LOAM.read_text(encoding="utf-8").replace("depth_cm = 150.0", "depth_cm = 40.0")
    soil_text = soil_text.replace("depth_bottom_cm = 80.0", "depth_bottom_cm = 40.0")
    soil_text = soil_text.replace("[[horizons]]\ndepth_bottom_cm = 150.0\ntexture = \"sandy_clay_loam\"\n", "")
    soil_file.write_text(soil_text.replace("deep_water_below_cm = 60.0", "deep_water_below_cm = 20.0"),
                         encoding="utf-8")
    assert read_soil_water_file(soil_file).depth_cm == 40.0
    out = tmp_path / "season"
    code = main(["capture", "--grow", str(spec_file), "--soil-water", str(soil_file), "--weather", str(DRYING),
                 "--out", str(out), "--no-figures", "--container-cell-cm", "5"])
    assert code == 0, capsys.readouterr().err
    traits = json.loads((out / "capture_traits.json").read_text())
    assert traits["soil_column"] == "3d_voxels_pot" and traits["coupled"] is True
    daily = pd.read_csv(out / "capture_daily.csv")
    assert np.abs(daily["water_balance_error_mm"]).max() < 1e-6
    layers = pd.read_csv(out / "capture_layers.csv")
    assert len(layers) == len(daily) * 20  # 2 cm layers of the 40 cm pot


def test_a_coupled_run_refuses_coarse_pot_cells_and_growth_past_the_season(tmp_path, capsys):
    # A pot one cell across is a square column (400 instead of 314 cm² of surface for a 20 cm pot: the area of a
    # circle, common practice), and roots growing past the weather table's last day would grow with no soil
    # water: both are one-line errors, exit 2, nothing written.
    from rootsim.cli import main

    soil_file = tmp_path / "loam40.toml"
    text = LOAM.read_text(encoding="utf-8").replace("depth_cm = 150.0", "depth_cm = 40.0")
    soil_file.write_text(text.replace("deep_water_below_cm = 60.0", "deep_water_below_cm = 20.0"), encoding="utf-8")
    for extra, words in ((["--days", "3", "--container-cell-cm", "1000"], "cells across"),
                         (["--days", "400"], "past the end of the 61-day season")):
        out = tmp_path / "out"
        code = main(["capture", "--grow", str(POT), "--soil-water", str(soil_file), "--weather", str(DRYING),
                     "--out", str(out), "--no-figures", *extra])
        err = capsys.readouterr().err.strip().splitlines()
        assert code == 2 and len(err) == 1 and err[0].startswith("error:") and words in err[0], err
        assert not out.exists()
