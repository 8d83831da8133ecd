"""Reference ET by Hargreaves & Samani (1985) as given in FAO-56 (Allen et al. 1998), and its use for potential
transpiration when the weather table carries no ET column."""

from __future__ import annotations

import json
import tomllib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from rootsim.capture.errors import CaptureError
from rootsim.capture.reference_et import (extraterrestrial_radiation_mj_per_m2,
                                          hargreaves_reference_evapotranspiration_mm)
from rootsim.capture.season import potential_transpiration_mm
from rootsim.capture.soil_file import soil_water_from_mapping
from rootsim.cli import main
from rootsim.sampling.synthetic import lines_system
from rootsim.soil.weather import weather_table_from_frame

PARAMS = Path(__file__).resolve().parents[1] / "params" / "capture"

# Hand computation (FAO-56 eq. 52 with eq. 9 mean): Tmin 16, Tmax 30 deg C at 20 deg S on 3 September, Ra = 32.2
# (FAO-56 Example 8): 0.0023 * (23 + 17.8) * sqrt(14) * 0.408 * 32.2 = 4.6128 mm/day.
HAND_HARGREAVES_MM = 0.0023 * (23.0 + 17.8) * np.sqrt(14.0) * 0.408 * 32.2


def test_extraterrestrial_radiation_matches_fao56_example_8():
    # FAO-56 (Allen et al. 1998) Example 8: 20 deg S, 3 September (day 246): Ra = 32.2 MJ m-2 day-1 (printed to 0.1)
    assert extraterrestrial_radiation_mj_per_m2(-20.0, 246) == pytest.approx(32.2, abs=0.05)


def test_extraterrestrial_radiation_polar_night_and_equator_table():
    # Analytic: no sun at 80 deg N at the winter solstice (tan(phi) tan(delta) < -1, so ws = 0, eq. 25)
    assert extraterrestrial_radiation_mj_per_m2(80.0, 355) == pytest.approx(0.0, abs=1e-12)
    # FAO-56 Annex 2 Table 2.6, equator, mid-January .. mid-June (from memory): 36.2 37.5 37.9 36.8 34.8 33.4
    table = [36.2, 37.5, 37.9, 36.8, 34.8, 33.4]
    np.testing.assert_allclose(extraterrestrial_radiation_mj_per_m2(0.0, [15, 46, 74, 105, 135, 166]), table,
                               atol=0.06)


def test_hargreaves_matches_hand_computation():
    value = hargreaves_reference_evapotranspiration_mm([16.0], [30.0], latitude_deg=-20.0, day_of_year=[246])
    # Ra rounded to 32.2 in the hand value: relative rounding at most 0.05 / 32.2 = 0.16 %
    assert value[0] == pytest.approx(HAND_HARGREAVES_MM, rel=0.002)
    # no temperature range, no evaporation (eq. 52 has sqrt(Tmax - Tmin)); inverted range clipped to 0
    assert hargreaves_reference_evapotranspiration_mm([20.0, 25.0], [20.0, 20.0], latitude_deg=-20.0,
                                                      day_of_year=[246, 246]).tolist() == [0.0, 0.0]


def _weather(columns):
    return weather_table_from_frame(pd.DataFrame(columns), source="w.csv")


def test_potential_transpiration_is_crop_coefficient_times_hargreaves():
    weather = _weather({"day": [0, 1], "min_air_temperature_c": [16.0, 16.0],
                        "max_air_temperature_c": [30.0, 30.0]})
    potential = potential_transpiration_mm(weather, crop_coefficient=0.8, latitude_deg=-20.0, first_day_of_year=246)
    assert potential[0] == pytest.approx(0.8 * HAND_HARGREAVES_MM, rel=0.002)
    # the second row is 4 September: day of year 247, Ra from eqs. 21-25 for that day
    expected = 0.8 * 0.0023 * 40.8 * np.sqrt(14.0) * 0.408 * extraterrestrial_radiation_mj_per_m2(-20.0, 247)
    assert potential[1] == pytest.approx(expected, rel=1e-12)


def test_missing_columns_and_missing_location_give_one_line_errors():
    weather = _weather({"day": [0, 1], "mean_air_temperature_c": [20.0, 21.0], "min_air_temperature_c": [15, 16]})
    with pytest.raises(CaptureError) as caught:
        potential_transpiration_mm(weather, crop_coefficient=1.0, latitude_deg=10.0, first_day_of_year=100)
    message = str(caught.value)
    assert "\n" not in message and "and 'max_air_temperature_c' for Hargreaves" in message
    assert message.startswith("w.csv: columns:")
    weather = _weather({"day": [0], "min_air_temperature_c": [15.0], "max_air_temperature_c": [25.0]})
    with pytest.raises(CaptureError, match=r"^soil.toml: transpiration.latitude_deg: missing[^\n]*$"):
        potential_transpiration_mm(weather, crop_coefficient=1.0, first_day_of_year=100, soil_source="soil.toml")
    with pytest.raises(CaptureError, match=r"transpiration.first_day_of_year: missing"):
        potential_transpiration_mm(weather, crop_coefficient=1.0, latitude_deg=10.0, soil_source="soil.toml")


def test_soil_file_location_keys_are_checked():
    data = tomllib.loads((PARAMS / "soil_water_loam.toml").read_text())
    data["transpiration"] = {"crop_coefficient": 1.0, "latitude_deg": 95.0, "first_day_of_year": 100}
    with pytest.raises(CaptureError, match=r"^s.toml: transpiration.latitude_deg: 95.0 is out of range"):
        soil_water_from_mapping(data, source="s.toml")
    data["transpiration"] = {"latitude_deg": 45.0, "first_day_of_year": 0}
    with pytest.raises(CaptureError, match=r"^s.toml: transpiration.first_day_of_year: 0 \(allowed: a whole"):
        soil_water_from_mapping(data, source="s.toml")
    data["transpiration"] = {"latitude_deg": -20.0, "first_day_of_year": 246}
    setup = soil_water_from_mapping(data, source="s.toml")
    assert (setup.latitude_deg, setup.first_day_of_year) == (-20.0, 246)


def test_capture_command_uses_hargreaves_when_weather_has_only_temperatures(tmp_path, capsys):
    top = np.arange(0.0, 20.0)
    p0 = np.column_stack([np.zeros_like(top), np.zeros_like(top), -top])
    system = lines_system(p0, p0 - np.array([0.0, 0.0, 1.0]),
                          metadata={"stand": {"ground_area_cm2": 400.0, "n_plants": 1}})
    system.write(tmp_path / "run" / "segments.parquet")
    text = (PARAMS / "soil_water_loam.toml").read_text().replace(
        "crop_coefficient = 1.0", "crop_coefficient = 0.5\nlatitude_deg = -20.0\nfirst_day_of_year = 246")
    (tmp_path / "soil.toml").write_text(text)
    (tmp_path / "w.csv").write_text("day,min_air_temperature_c,max_air_temperature_c,rain_mm\n"
                                    "0,16,30,0\n1,16,30,0\n2,16,30,5\n")
    code = main(["capture", str(tmp_path / "run"), "--soil-water", str(tmp_path / "soil.toml"),
                 "--weather", str(tmp_path / "w.csv"), "--out", str(tmp_path / "out")])
    assert code == 0, capsys.readouterr().err
    daily = pd.read_csv(tmp_path / "out" / "capture_daily.csv")
    assert daily["potential_transpiration_mm"].iloc[0] == pytest.approx(0.5 * HAND_HARGREAVES_MM, rel=0.002)
    traits = json.loads((tmp_path / "out" / "capture_traits.json").read_text())
    assert traits["seasonal_potential_transpiration_mm"] == pytest.approx(
        daily["potential_transpiration_mm"].sum(), rel=1e-9)
    # the soil file without latitude: one line, exit 2
    (tmp_path / "soil2.toml").write_text((PARAMS / "soil_water_loam.toml").read_text())
    code = main(["capture", str(tmp_path / "run"), "--soil-water", str(tmp_path / "soil2.toml"),
                 "--weather", str(tmp_path / "w.csv"), "--out", str(tmp_path / "out2")])
    err = capsys.readouterr().err
    assert code == 2 and err.count("\n") == 1 and "transpiration.latitude_deg" in err
