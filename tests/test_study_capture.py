"""Capture outcomes in study tables: the soil-water season of every run joins runs.parquet, compare uses it."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from rootsim.capture.season import run_water_season
from rootsim.capture.soil_file import read_soil_water_file
from rootsim.cli import main
from rootsim.rootsystem import RootSystem
from rootsim.soil.weather import read_weather_table
from study_helpers import PARAMS, write_study

SOIL = '''
name = "test_loam"
[column]
depth_cm = 80.0
cell_cm = 5.0
initial_pressure_head_cm = -150.0
[[horizons]]
depth_bottom_cm = 80.0
texture = "loam"
[traits]
deep_water_below_cm = 40.0
'''

# a drying spell: no rain, 4 mm/day demand, fertilizer on day 0 (invented)
WEATHER = "day,mean_air_temperature_c,rain_mm,potential_transpiration_mm,nitrate_fertilizer_kg_n_per_ha\n" + "".join(
    f"{d},18.0,0.0,4.0,{40.0 if d == 0 else 0.0}\n" for d in range(20))

STUDY = f'''
name = "capture_trial"
base = "{PARAMS / 'taproot_laterals.toml'}"
master_seed = 5
replicates = 2
[run]
duration_days = 20
[design]
kind = "variants"
[[variants]]
name = "shallow"                     # the taproot stops at 20 cm
set = {{ "root_classes.taproot.max_length_cm" = 20.0 }}
[[variants]]
name = "deep"                        # a faster taproot, 3 cm/day
set = {{ "root_classes.taproot.elongation_rate_cm_per_day" = 3.0 }}
[measure]
layer_cm = 10.0
max_depth_cm = 80.0
segments = true
[measure.capture]
soil_water_file = "soil.toml"
weather_file = "weather.csv"
phosphorus_radius_cm = 0.5
phosphorus_voxel_cm = 0.25
'''


def _write(folder, study=STUDY, soil=SOIL, weather=WEATHER):
    (folder / "soil.toml").write_text(soil)
    (folder / "weather.csv").write_text(weather)
    return write_study(folder, study)


@pytest.fixture(scope="module")
def finished(tmp_path_factory):
    folder = tmp_path_factory.mktemp("capture_study")
    study = _write(folder)
    assert main(["study", "run", str(study), "--out", str(folder / "serial")]) == 0
    assert main(["study", "run", str(study), "--out", str(folder / "two"), "--workers", "2"]) == 0
    assert main(["study", "compare", str(folder / "serial"), "--reference", "shallow"]) == 0
    return folder


def test_capture_traits_join_runs_and_equal_a_season_run_on_the_runs_segments(finished):
    runs = pd.read_parquet(finished / "serial" / "runs.parquet")
    for column in ("seasonal_transpiration_mm", "transpiration_fraction_of_potential", "water_uptake_below_40cm_mm",
                   "water_stress_days", "drainage_mm", "nitrate_uptake_kg_n_per_ha", "nitrate_leached_kg_n_per_ha",
                   "nitrate_uptake_fraction_of_applied", "phosphorus_explored_cm3",
                   "phosphorus_overlap_same_plant_cm3", "phosphorus_overlap_between_plants_cm3"):
        assert column in runs and runs[column].notna().all(), column
    # the study's numbers are those of the capture season run directly on each run's kept segments
    setup = read_soil_water_file(finished / "soil.toml")
    weather = read_weather_table(finished / "weather.csv")
    for _, row in runs.iterrows():
        system = RootSystem.read(finished / "serial" / row["folder"])
        direct = run_water_season(system, setup, weather)["traits"]
        assert row["seasonal_transpiration_mm"] == direct["seasonal_transpiration_mm"]
        assert row["water_uptake_below_40cm_mm"] == direct["water_uptake_below_depth_mm"]
        assert row["nitrate_uptake_fraction_of_applied"] == direct["nitrate_uptake_kg_n_per_ha"] / 40.0
    daily = pd.read_parquet(finished / "serial" / "capture_daily.parquet")
    assert len(daily) == 20 * len(runs)
    totals = daily.groupby("run_id", sort=False)["actual_transpiration_mm"].sum()
    np.testing.assert_allclose(totals.loc[runs["run_id"]].to_numpy(), runs["seasonal_transpiration_mm"], rtol=1e-12)
    # water balance of every run and day closes (in - out - change in storage; Celia et al. 1990 mixed form)
    assert daily["water_balance_error_mm"].abs().max() < 1e-5


def test_capture_outcomes_are_identical_on_one_and_two_workers(finished):
    for name in ("runs", "capture_daily"):
        pd.testing.assert_frame_equal(pd.read_parquet(finished / "serial" / f"{name}.parquet"),
                                      pd.read_parquet(finished / "two" / f"{name}.parquet"), check_exact=True)


def test_deeper_variant_takes_more_water_from_below_the_stated_depth(finished):
    # Direction of a known result (deeper roots reach subsoil water in a drying soil; Lynch 2013,
    # doi:10.1093/aob/mcs293): every deep replicate beats every shallow one below 40 cm.
    runs = pd.read_parquet(finished / "serial" / "runs.parquet").set_index("variant")
    deep = runs.loc["deep", "water_uptake_below_40cm_mm"].to_numpy()
    shallow = runs.loc["shallow", "water_uptake_below_40cm_mm"].to_numpy()
    assert deep.min() > shallow.max()


def test_compare_reports_capture_traits_with_their_units(finished):
    summary = pd.read_csv(finished / "serial" / "compare" / "trait_summary.csv")
    runs = pd.read_parquet(finished / "serial" / "runs.parquet")
    units = {"seasonal_transpiration_mm": "mm", "water_uptake_below_40cm_mm": "mm", "water_stress_days": "days",
             "nitrate_uptake_kg_n_per_ha": "kg N ha-1", "phosphorus_explored_cm3": "cm3",
             "nitrate_uptake_fraction_of_applied": "dimensionless"}
    for name, unit in units.items():
        rows = summary[summary["measure"] == name]
        assert list(rows["unit"].unique()) == [unit], name
        # the means are those of the runs table (pandas' own groupby, an independent computation)
        expected = runs.groupby("variant")[name].mean()
        for _, r in rows.iterrows():
            assert r["mean"] == pytest.approx(expected[r["variant"]], rel=1e-12)
    differences = pd.read_csv(finished / "serial" / "compare" / "trait_differences.csv")
    assert "water_uptake_below_40cm_mm" in set(differences["measure"])


@pytest.mark.parametrize("change, soil, weather, words", [
    (("soil.toml", "no_soil.toml"), SOIL, WEATHER, ["measure.capture.soil_water_file", "does not exist"]),
    (("[measure.capture]", "capture = true\n[unused]"), SOIL, WEATHER, ["measure.capture"]),
    (("phosphorus_voxel_cm = 0.25", "phosphorus_voxel_cm = 0.25\nsoil_file = 'x'"), SOIL, WEATHER,
     ["measure.capture.soil_file", "unknown key", "weather_file"]),
    (None, SOIL.replace('texture = "loam"', 'texture = "loam"\nvan_genuchten_n = 0.8'), WEATHER,
     ["measure.capture.soil_water_file", "van_genuchten_n"]),
    (None, SOIL, "day,mean_air_temperature_c,rain_mm\n0,15,0\n1,16,2\n",
     ["measure.capture.weather_file", "potential_transpiration_mm"]),
], ids=["missing_soil_file", "capture_true", "unknown_key", "bad_van_genuchten_n", "weather_without_demand"])
def test_bad_capture_inputs_stop_the_study_with_one_line(tmp_path, capsys, change, soil, weather, words):
    study = STUDY if change is None else STUDY.replace(*change)
    path = _write(tmp_path, study, soil, weather)
    assert main(["study", "run", str(path), "--out", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"error: {path}: ") and err.count("\n") == 1
    for word in words:
        assert word in err
    assert not (tmp_path / "out").exists()


def test_roots_that_died_during_the_run_take_up_water_while_they_lived(tmp_path):
    # Laterals living 5 days: the study's season counts them from birth to death (grown with keep_dead_roots),
    # while profiles and kept segments show the usual table without them.
    from rootsim.growth.engine import drop_dead_roots, grow
    from rootsim.study import plan_study, run_plan

    study = STUDY.replace('set = {{ "root_classes.taproot.elongation_rate_cm_per_day" = 3.0 }}'.replace("{{", "{")
                          .replace("}}", "}"), 'set = { "root_classes.lateral_first.lifespan_days" = 5.0 }')
    path = _write(tmp_path, study)
    plan = plan_study(path, overrides={"replicates": 1})
    task = [t for t in plan.tasks if t.variant == "deep"][0]
    results = run_plan(plan)
    row = results.runs.set_index("run_id").loc[task.run_id]
    kept = grow(task.spec, seed=task.seed, progress=False, keep_dead_roots=True)
    assert np.isfinite(kept["death_day"]).any()                       # some laterals died during the 20 days
    setup = read_soil_water_file(tmp_path / "soil.toml")
    weather = read_weather_table(tmp_path / "weather.csv")
    with_dead = run_water_season(kept, setup, weather)["traits"]
    alive_only = run_water_season(drop_dead_roots(kept), setup, weather)["traits"]
    assert row["seasonal_transpiration_mm"] == with_dead["seasonal_transpiration_mm"]
    assert row["n_segments"] == len(drop_dead_roots(kept))
    # the dead laterals' share of the nitrate uptake was counted (Michaelis-Menten uptake per cm of living root)
    assert with_dead["nitrate_uptake_kg_n_per_ha"] > alive_only["nitrate_uptake_kg_n_per_ha"]


def test_shipped_capture_study_plans_with_its_soil_and_weather():
    from rootsim.study import plan_study

    plan = plan_study(PARAMS / "studies" / "eastmoor_drying_capture.toml")
    assert plan.capture is not None and plan.capture.setup.name == "invented_loam_field"
    assert plan.capture.weather.n_days == 61 and len(plan.tasks) == 6
