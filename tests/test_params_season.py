"""The shipped cereal-like file over the whole invented 2031 season (thermal clock from
params/season_2031_weather.csv): slow establishment, field-rate rooting front, an end of deepening at a plausible
depth, and root length per ground area that levels off near maturity. Its values are illustrative; these checks
put it in published field ranges (sources beside each check). The 60-day checks are in test_params_ranges.py.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

import rootsim
from rootsim.soil.weather import read_weather_table

PARAMS = Path(__file__).resolve().parents[1] / "params"
SEASON_DAYS = 120.0  # the weather table covers days 0-120 after sowing
GROUND_CM2 = 75.0 * 20.0  # one plant's share of the stand (row x plant spacing)
ANTHESIS_DAY = 70.0  # the invented season's anthesis: the file's axes stop deepening by then


@pytest.fixture(scope="module")
def season_plant():
    """One plant of the shipped stand at its spacing, grown over the whole season (about 2 million segments)."""
    spec = rootsim.load_spec(PARAMS / "cereal_fibrous.toml")
    assert spec.development.clock == "thermal"
    spec = spec.model_copy(update={"stand": spec.stand.model_copy(update={"rows": 1, "plants_per_row": 1})})
    system = rootsim.grow(spec, days=SEASON_DAYS, progress=False)
    depth = -np.minimum(system["z0"], system["z1"])
    return {"depth": depth, "born": np.asarray(system["birth_day"]), "length": np.asarray(system["length_cm"])}


def _front(plant, day):
    return plant["depth"][plant["born"] <= day].max(initial=5.0)  # the sowing depth before any root


def _length_per_ground_cm_per_cm2(plant, day):
    return plant["length"][plant["born"] <= day].sum() / GROUND_CM2


def test_front_is_slow_at_establishment_then_advances_at_field_rates(season_plant):
    # Field rooting fronts of maize and other cereals advance about 1-3 cm per day once established (common
    # practice; 2.5-3 cm/day for maize in extension sources, from memory) and more slowly while the seedling
    # establishes in cool soil. Over days 15-55 the front must move 1-3 cm/day; over days 0-15 at most 60 % of that.
    field_rate = (_front(season_plant, 55.0) - _front(season_plant, 15.0)) / 40.0
    early_rate = (_front(season_plant, 15.0) - _front(season_plant, 0.0)) / 15.0
    assert 1.0 < field_rate < 3.0
    assert early_rate < 0.6 * field_rate


def test_front_velocity_per_degree_day_is_cereal_like(season_plant):
    # Rooting fronts of cereals advance about 0.1 cm per degree-day above 0 °C (Kirkegaard & Lilley 2007, Aust. J.
    # Exp. Agric. 47:590-602; Thorup-Kristensen et al. 2009, Plant Soil 322:101-114; from memory): 0.07-0.16 here,
    # degree-days summed from the weather table's daily mean air temperature over days 15-55.
    weather = read_weather_table(PARAMS / "season_2031_weather.csv")
    mean_c = weather.column("mean_air_temperature_c")[15:55]
    velocity = (_front(season_plant, 55.0) - _front(season_plant, 15.0)) / np.maximum(mean_c, 0.0).sum()
    assert 0.07 < velocity < 0.16


def test_deepening_stops_at_a_plausible_maximum_depth(season_plant):
    # Maximum rooting depths of field cereals are mostly 1-2 m (Fan et al. 2016, Field Crops Res. 189:68-74;
    # Canadell et al. 1996, Oecologia 108:583-595, doi:10.1007/BF00329030; from memory), and maize roots stop
    # deepening around silking (Mengel & Barber 1974, Agron. J. 66:341-344; from memory).
    deepest = _front(season_plant, SEASON_DAYS)
    assert 100.0 < deepest < 200.0
    assert deepest - _front(season_plant, ANTHESIS_DAY + 10.0) < 2.0  # at most 2 cm deeper in the last 40 days
    assert _front(season_plant, ANTHESIS_DAY) - _front(season_plant, 50.0) > 20.0  # still deepening before


def test_root_length_per_ground_area_at_anthesis_and_levelling_off(season_plant):
    # Root length per ground area of cereals at anthesis is about 5-20 km/m² = 50-200 cm/cm² (Mengel & Barber 1974
    # for maize; Gregory et al. 1978, J. Agric. Sci. 91:91-102 for wheat; from memory), and it changes little
    # after anthesis (Mengel & Barber 1974; from memory): here at most 2 % over the last 20 days of the season,
    # while it still doubled (or more) over the 20 days before anthesis.
    at_anthesis = _length_per_ground_cm_per_cm2(season_plant, ANTHESIS_DAY)
    assert 50.0 < at_anthesis < 200.0
    end = _length_per_ground_cm_per_cm2(season_plant, SEASON_DAYS)
    assert end - _length_per_ground_cm_per_cm2(season_plant, SEASON_DAYS - 20.0) <= 0.02 * end
    assert at_anthesis > 2.0 * _length_per_ground_cm_per_cm2(season_plant, ANTHESIS_DAY - 20.0)
