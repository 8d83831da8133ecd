"""Nitrate: mass balance every day and the direction of a known result."""

from __future__ import annotations

import numpy as np
import pandas as pd

from rootsim.capture.season import run_water_season
from rootsim.soil.weather import weather_table_from_frame
from test_capture_uptake import _setup, _vertical_roots


def _rainy_weather(days: int):
    day = np.arange(days)
    return weather_table_from_frame(pd.DataFrame({
        "day": day, "mean_air_temperature_c": 18.0, "rain_mm": np.where(day % 3 == 0, 20.0, 0.0),
        "potential_transpiration_mm": 3.0, "nitrate_fertilizer_kg_n_per_ha": np.where(day == 0, 120.0, 0.0)}))


def test_nitrate_balance_closes_every_day_and_a_faster_deeper_front_catches_more_before_it_leaches():
    # Direction of a known result (e.g. Dunbabin et al. 2003, doi:10.1016/S1161-0301(03)00047-3; from memory):
    # a root front that reaches depth sooner intercepts more of a nitrate pulse moving down with the rain.
    setup, weather = _setup(), _rainy_weather(40)
    slow = run_water_season(_vertical_roots(40, 40.0, 1.0), setup, weather, ground_area_cm2=1500.0)
    fast = run_water_season(_vertical_roots(40, 120.0, 3.0), setup, weather, ground_area_cm2=1500.0)
    for result in (slow, fast):
        daily = result["daily"]
        # in - out - change in storage, per day (kg N/ha): round-off only
        assert daily["nitrate_balance_error_kg_n_per_ha"].abs().max() < 1e-9
        storage = daily["nitrate_storage_kg_n_per_ha"].to_numpy()
        change = np.diff(np.concatenate([[daily.attrs["initial_nitrate_kg_n_per_ha"]], storage]))
        flows = (daily["nitrate_fertilizer_kg_n_per_ha"] - daily["nitrate_uptake_kg_n_per_ha"]
                 - daily["nitrate_leached_kg_n_per_ha"]).to_numpy()
        np.testing.assert_allclose(change, flows, atol=1e-9)
        assert (daily["nitrate_uptake_kg_n_per_ha"] >= 0).all()
    s, f = slow["traits"], fast["traits"]
    assert f["nitrate_uptake_kg_n_per_ha"] > s["nitrate_uptake_kg_n_per_ha"]
    assert f["nitrate_leached_kg_n_per_ha"] < s["nitrate_leached_kg_n_per_ha"]
    assert f["nitrate_applied_kg_n_per_ha"] == 120.0


def test_without_roots_nitrate_moves_down_with_the_water_and_nothing_is_taken_up():
    setup, weather = _setup(), _rainy_weather(20)
    empty = {"z0": np.zeros(0), "z1": np.zeros(0), "length_cm": np.zeros(0), "birth_day": np.zeros(0)}
    result = run_water_season(empty, setup, weather, ground_area_cm2=1500.0)
    assert result["traits"]["nitrate_uptake_kg_n_per_ha"] == 0.0
    assert result["traits"]["seasonal_transpiration_mm"] == 0.0
