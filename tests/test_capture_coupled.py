"""Growth coupled with the soil-water season (rootsim.capture.coupled): resumable growth, equality with the
one-way path, daily balances, a drying topsoil pushing roots down through Busscher's law, hydrotropism,
determinism and command-line errors."""

from __future__ import annotations

import copy
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from growth_specs import column_digests
from rootsim import grow
from rootsim.capture.coupled import KPA_PER_CM_OF_WATER, run_coupled_season
from rootsim.capture.season import run_water_season
from rootsim.capture.soil_file import read_soil_water_file
from rootsim.soil.strength import busscher_penetration_resistance_mpa
from rootsim.soil.weather import read_weather_table, weather_table_from_frame
from rootsim.spec import load_spec_layers, parse_spec

ROOT = Path(__file__).resolve().parents[1]
SPEC = ROOT / "params" / "capture" / "cereal_drying_topsoil.toml"
SOIL = ROOT / "params" / "capture" / "soil_water_loam_evaporating.toml"
WEATHER = ROOT / "params" / "capture" / "weather_dry_spell_120_days.csv"
DAYS = 50  # on the example's thermal clock: the first three showery weeks are slow (cool) growth


def _spec(days: int = DAYS, *, edit=None, clock: str = "thermal"):
    """The shipped example, one plant, ``days`` long; on its own (the cereal file's) thermal clock, or with
    ``clock="calendar"`` on calendar days (then the season's days and the growth steps line up, which the exact
    day-by-day comparisons with the one-way path need)."""
    data = copy.deepcopy(load_spec_layers(SPEC)[0])
    data["run"]["duration_days"] = days
    data["stand"]["plants_per_row"] = 1
    if clock == "calendar":
        data["development"] = {"clock": "calendar"}
    if edit is not None:
        edit(data)
    return parse_spec(data, source=str(SPEC))


def _wet_weather(days: int = DAYS):
    """Held wet: 6 mm of irrigation every day against a reference ET of 1.5 mm/day (invented)."""
    day = np.arange(days + 1)
    return weather_table_from_frame(pd.DataFrame({"day": day, "mean_air_temperature_c": 18.0, "rain_mm": 0.0,
                                                  "irrigation_mm": 6.0,
                                                  "reference_evapotranspiration_mm": 1.5}), source="wet.csv")


def _depth_centre(system) -> float:
    depth = -0.5 * (np.asarray(system["z0"]) + np.asarray(system["z1"]))
    length = np.asarray(system["length_cm"])
    return float((depth * length).sum() / length.sum())


@pytest.fixture(scope="module")
def setup():
    return read_soil_water_file(SOIL)


@pytest.fixture(scope="module")
def dry_weather():
    return read_weather_table(WEATHER)


@pytest.fixture(scope="module")
def dry_coupled(setup, dry_weather):
    return run_coupled_season(_spec(), setup, dry_weather, couple=True, last_day=DAYS, progress=False)


@pytest.fixture(scope="module")
def wet_coupled(setup):
    return run_coupled_season(_spec(), setup, _wet_weather(), couple=True, last_day=DAYS, progress=False)


def test_uncoupled_run_grows_the_same_bytes_as_grow_and_the_same_season_as_the_one_way_path(setup, dry_weather):
    spec = _spec(days=20, clock="calendar")
    result = run_coupled_season(spec, setup, dry_weather, couple=False, last_day=20, progress=False)
    grown = grow(spec, progress=False)
    # the resumable (paused every day) growth gives grow()'s table byte for byte
    assert column_digests(result["system"]) == column_digests(grown)
    assert result["system"].metadata == grown.metadata
    # the root length per cell counted inside the compiled step as segments are made equals the exact clipping
    # of the final table by birth day (rootsim.analysis.profile.depth_layer_lengths, an independent path), so the
    # one-way season on the grown table is the same season
    one_way = run_water_season(grown, setup, dry_weather, last_day=20)
    np.testing.assert_allclose(result["layers"]["root_length_cm"], one_way["layers"]["root_length_cm"],
                               rtol=1e-10, atol=1e-8)
    for column in ("actual_transpiration_mm", "soil_evaporation_mm", "drainage_mm", "soil_water_storage_mm"):
        np.testing.assert_allclose(result["daily"][column], one_way["daily"][column], rtol=1e-8, atol=1e-8)


def test_coupled_water_and_nitrate_balances_close_every_day(dry_coupled):
    daily = dry_coupled["daily"]
    # in - out - change in storage, every day (common practice: a conservative scheme closes to round-off)
    assert np.abs(daily["water_balance_error_mm"]).max() < 1e-6
    assert np.abs(daily["nitrate_balance_error_kg_n_per_ha"]).max() < 1e-9
    storage = daily["soil_water_storage_mm"].to_numpy()
    change = np.diff(storage)
    flows = (daily["infiltration_mm"] - daily["drainage_mm"] - daily["actual_transpiration_mm"]
             - daily["soil_evaporation_mm"]).to_numpy()[1:]
    np.testing.assert_allclose(change, flows, atol=1e-6)
    # the season's soil evaporation really happened and the roots really took water
    assert daily["soil_evaporation_mm"].sum() > 5.0
    assert daily["actual_transpiration_mm"].sum() > 5.0


def test_water_written_into_the_soil_fields_is_the_columns(dry_coupled, setup):
    # the last day's water content per cell is what the coupled run reported, and the column dried from the top
    layers = dry_coupled["layers"]
    last = layers[layers["day"] == layers["day"].max()]
    theta = last["water_content"].to_numpy()
    assert theta[:5].mean() < theta[30:40].mean()  # drier topsoil than at 60-80 cm
    assert KPA_PER_CM_OF_WATER == pytest.approx(9.80665 / 100.0)  # rho_w g x 1 cm (common practice)


def test_drying_topsoil_pushes_roots_down_through_busscher_resistance(dry_coupled, wet_coupled, setup, dry_weather):
    dry, wet = dry_coupled["system"], wet_coupled["system"]
    # the named mechanism: Busscher (1990) resistance of the top 10 cm computed from the column's own water
    # content on the last day (rootsim.soil.strength, the power law with the spec's a, b, c) is higher when dry
    spec = _spec()
    law = spec.soil.fields["penetration_resistance_mpa"].pedotransfer

    def top_resistance(result):
        layers = result["layers"]
        last = layers[(layers["day"] == layers["day"].max()) & (layers["depth_bottom_cm"] <= 10.0)]
        return busscher_penetration_resistance_mpa(last["water_content"].to_numpy(), 1.45,
                                                   coefficient_mpa=law.coefficient_mpa,
                                                   water_content_exponent=law.water_content_exponent,
                                                   bulk_density_exponent=law.bulk_density_exponent).mean()

    assert top_resistance(dry_coupled) > 2.0 * top_resistance(wet_coupled)
    # ... and the roots: the length-weighted depth centre lies deeper, a smaller share of length in the top 20 cm
    assert _depth_centre(dry) > _depth_centre(wet) + 2.0

    def top_share(system):
        depth = -0.5 * (np.asarray(system["z0"]) + np.asarray(system["z1"]))
        length = np.asarray(system["length_cm"])
        return length[depth < 20.0].sum() / length.sum()

    assert top_share(dry) < top_share(wet) - 0.05

    # control: the same dry and wet seasons with a resistance that ignores water (a constant field) and no
    # tropism grow byte-identical roots, so the shift above comes from the water-dependent resistance
    def constant_resistance(data):
        data["soil"]["fields"]["penetration_resistance_mpa"] = {"value": 0.7}
        data["root_classes"]["lateral_first"].pop("field_tropism", None)

    control = _spec(edit=constant_resistance)
    dry_control = run_coupled_season(control, setup, dry_weather, last_day=DAYS, progress=False)["system"]
    wet_control = run_coupled_season(control, setup, _wet_weather(), last_day=DAYS, progress=False)["system"]
    assert column_digests(dry_control) == column_digests(wet_control)


def test_hydrotropism_follows_the_column_water_toward_depth(setup, dry_weather):
    # no water-dependent resistance: only a field tropism toward volumetric_water_content on every class; the
    # drying topsoil makes water increase with depth, so roots turn down (the gradient of a depth table is
    # -d(theta)/d(depth) along z; rootsim.soil.fields)
    def tropism_only(strength):
        def edit(data):
            data["soil"]["fields"]["penetration_resistance_mpa"] = {"value": 0.7}
            for name in data["root_classes"]:
                data["root_classes"][name]["field_tropism"] = {"field": "volumetric_water_content",
                                                               "strength_per_cm": strength}
        return edit

    toward = run_coupled_season(_spec(edit=tropism_only(0.2)), setup, dry_weather, last_day=DAYS, progress=False)
    without = run_coupled_season(_spec(edit=tropism_only(0.0)), setup, dry_weather, last_day=DAYS, progress=False)
    # the column is wetter below: dried topsoil, and a wetter silt loam below 30 cm
    layers = toward["layers"]
    theta = layers[layers["day"] == layers["day"].max()]["water_content"].to_numpy()
    assert theta[:5].mean() < theta[5:10].mean() < theta[15:20].mean()

    def downward_cosine(system, low_cm, high_cm):
        z0, z1 = np.asarray(system["z0"]), np.asarray(system["z1"])
        length = np.asarray(system["length_cm"])
        depth = -0.5 * (z0 + z1)
        inside = (depth >= low_cm) & (depth < high_cm)
        return (z0[inside] - z1[inside]).sum() / length[inside].sum()  # length-weighted mean cos from vertical

    # roots in 10-40 cm, where the water gradient is, point clearly further down with the tropism; the same
    # length is grown (a tropism turns, it does not speed up), and its centre lies deeper
    assert downward_cosine(toward["system"], 10, 40) > downward_cosine(without["system"], 10, 40) + 0.1
    assert np.asarray(toward["system"]["length_cm"]).sum() == pytest.approx(
        np.asarray(without["system"]["length_cm"]).sum(), rel=1e-9)
    assert _depth_centre(toward["system"]) > _depth_centre(without["system"]) + 0.5


def test_thermal_clock_pauses_at_each_calendar_day(setup, dry_weather):
    # On the thermal clock the plants grow on effective days from the spec's weather and pause at the effective
    # time each calendar day has reached. Uncoupled, the table is grow()'s byte for byte (birth days in calendar
    # days), the root length counted inside the step never falls, and once growth has ended it equals the exact
    # clipping of the final table by depth (depth_layer_lengths, an independent path).
    from rootsim.analysis.profile import depth_layer_lengths

    spec = _spec(days=12, clock="thermal")
    result = run_coupled_season(spec, setup, dry_weather, couple=False, last_day=15, progress=False)
    grown = grow(spec, progress=False)
    assert grown.metadata["development"]["clock"] == "thermal"
    assert column_digests(result["system"]) == column_digests(grown)
    roots = result["layers"]["root_length_cm"].to_numpy().reshape(-1, setup.n_cells)
    assert np.all(np.diff(roots.sum(axis=1)) >= 0)
    expected = depth_layer_lengths(-np.asarray(grown["z0"]), -np.asarray(grown["z1"]), np.asarray(grown["length_cm"]),
                                   layer_cm=setup.cell_cm, n_layers=setup.n_cells)[:, 0]
    np.testing.assert_allclose(roots[-1], expected, rtol=1e-10, atol=1e-8)
    # on a cool start (effective days < calendar days) the first days hold less root than the calendar run's
    calendar = run_coupled_season(_spec(days=12, clock="calendar"), setup, dry_weather, couple=False, last_day=15, progress=False)
    assert roots[5].sum() < calendar["layers"]["root_length_cm"].to_numpy().reshape(-1, setup.n_cells)[5].sum()


def test_same_inputs_give_the_same_bytes(dry_coupled, setup, dry_weather):
    again = run_coupled_season(_spec(), setup, dry_weather, couple=True, last_day=DAYS, progress=False)
    assert column_digests(again["system"]) == column_digests(dry_coupled["system"])
    pd.testing.assert_frame_equal(again["daily"], dry_coupled["daily"], check_exact=True)


def test_growth_longer_than_the_season_and_season_longer_than_growth(setup, dry_weather):
    # growth continues after the last day of the season, and the season continues after growth ends: both end
    # with the same roots grow() makes when the soil is not coupled
    spec = _spec(days=12, clock="calendar")
    short_season = run_coupled_season(spec, setup, dry_weather, couple=False, last_day=5, progress=False)
    long_season = run_coupled_season(spec, setup, dry_weather, couple=False, last_day=20, progress=False)
    grown = column_digests(grow(spec, progress=False))
    assert column_digests(short_season["system"]) == grown == column_digests(long_season["system"])
    roots = long_season["daily"]["root_length_cm"].to_numpy()
    assert np.all(roots[13:] == roots[13])  # no growth after the run's 12 days


def _capture(*args, cwd, capsys):
    """Run ``rootsim capture`` in this process from ``cwd``; (exit code, stderr)."""
    import os

    from rootsim.cli import main

    before = os.getcwd()
    os.chdir(cwd)
    try:
        code = main(["capture", *map(str, args)])
    finally:
        os.chdir(before)
    return code, capsys.readouterr().err


def test_cli_grow_writes_one_committed_folder(tmp_path, capsys):
    out = tmp_path / "season"
    code, err = _capture("--grow", SPEC, "--soil-water", SOIL, "--weather", WEATHER, "--out", out, "--days", 8,
                         "--no-figures", cwd=tmp_path, capsys=capsys)
    assert code == 0, err
    manifest = json.loads((out / "manifest.json").read_text())
    assert set(manifest["files"]) == {"segments.parquet", "summary.json", "capture_daily.csv", "capture_layers.csv",
                                      "capture_traits.json"}
    traits = json.loads((out / "capture_traits.json").read_text())
    assert traits["coupled"] is True and traits["growth_days"] == 8.0
    daily_evaporation = pd.read_csv(out / "capture_daily.csv")["soil_evaporation_mm"].sum()
    assert traits["seasonal_soil_evaporation_mm"] == pytest.approx(daily_evaporation, rel=1e-6)
    daily = pd.read_csv(out / "capture_daily.csv")
    assert len(daily) == 121 and "soil_evaporation_mm" in daily


@pytest.mark.parametrize("args, expected", [
    (["--grow", SPEC, "--soil-water", SOIL, "--weather", WEATHER], "--out is missing"),
    (["somewhere", "--grow", SPEC, "--soil-water", SOIL, "--weather", WEATHER, "--out", "x"], "not both"),
    (["--soil-water", SOIL, "--weather", WEATHER], "RESULT_DIR is missing"),
    (["--grow", "nothing.toml", "--soil-water", SOIL, "--weather", WEATHER, "--out", "x"], "nothing.toml"),
    (["--grow", SPEC, "--soil-water", SOIL, "--weather", ROOT / "params" / "capture" / "weather_drying_season.csv",
      "--out", "x", "--no-coupling", "--days", "-3"], "duration_days"),
])
def test_cli_bad_input_one_line_exit_2(tmp_path, args, expected, capsys):
    code, err = _capture(*args, cwd=tmp_path, capsys=capsys)
    assert code == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: ") and expected in lines[0]
    assert not (tmp_path / "x").exists()


def test_segment_budget_stops_a_coupled_run_with_a_one_line_error(setup, dry_weather, tmp_path, capsys):
    from rootsim.errors import SegmentBudgetError

    def small_budget(data):
        data["run"]["max_segments"] = 2000

    with pytest.raises(SegmentBudgetError, match="2,?000"):
        run_coupled_season(_spec(edit=small_budget), setup, dry_weather, last_day=DAYS, progress=False)
    spec_file = tmp_path / "tight.toml"
    spec_file.write_text(f'based_on = "{SPEC}"\n[run]\nmax_segments = 2000\n')
    code, err = _capture("--grow", spec_file, "--soil-water", SOIL, "--weather", WEATHER, "--out", tmp_path / "y",
                         cwd=tmp_path, capsys=capsys)
    assert code == 2 and err.count("\n") == 1 and err.startswith("error: ")
    assert not (tmp_path / "y").exists()
