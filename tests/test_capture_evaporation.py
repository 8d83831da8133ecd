"""Soil evaporation by FAO-56's two stages (Allen et al. 1998, ch. 7): coefficients, the daily season against the
method's closed form, the water balance with evaporation, and bad input."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from rootsim.capture.errors import CaptureError
from rootsim.capture.evaporation import (depletion_after_day, evaporation_coefficient, evaporation_reduction,
                                         evaporation_weights)
from rootsim.capture.season import run_water_season
from rootsim.capture.soil_file import soil_water_from_mapping
from rootsim.cli import main
from rootsim.soil.weather import weather_table_from_frame

PARAMS = Path(__file__).resolve().parents[1] / "params" / "capture"


def _setup(**evaporation):
    table = {"readily_evaporable_water_mm": 9.0, "total_evaporable_water_mm": 22.0, "evaporating_layer_cm": 10.0,
             "crop_cover_fraction": 0.0, "maximum_crop_coefficient": 1.2}
    table.update(evaporation)
    return soil_water_from_mapping({
        "column": {"depth_cm": 100.0, "cell_cm": 2.0, "initial_pressure_head_cm": -30.0},
        "horizons": [{"depth_bottom_cm": 100.0, "texture": "loam"}],
        "transpiration": {"crop_coefficient": 0.15},
        "evaporation": table}, source="evaporating.toml")


def _weather(days, reference_mm, rain_mm=0.0):
    return weather_table_from_frame(pd.DataFrame({"day": np.arange(days), "mean_air_temperature_c": 20.0,
                                                  "rain_mm": rain_mm, "irrigation_mm": 0.0,
                                                  "reference_evapotranspiration_mm": reference_mm}), source="w.csv")


def _no_roots():
    return {"z0": np.zeros(0), "z1": np.zeros(0), "length_cm": np.zeros(0), "birth_day": np.zeros(0)}


def test_coefficients_follow_fao56_equations():
    # eq. 74: K_r = 1 up to REW, then (TEW - D_e) / (TEW - REW), 0 at TEW
    np.testing.assert_allclose(evaporation_reduction([0.0, 9.0, 15.5, 22.0, 30.0], readily_mm=9.0, total_mm=22.0),
                               [1.0, 1.0, 0.5, 0.0, 0.0], atol=1e-15)
    # eq. 71: K_e = min(K_r (K_c,max - K_cb), f_ew K_c,max): the energy limit ...
    assert float(evaporation_coefficient(1.0, basal_crop_coefficient=0.15, maximum_crop_coefficient=1.2,
                                         cover_fraction=0.0)) == pytest.approx(1.05)
    # ... or the exposed fraction's limit, f_ew = 1 - f_c (eq. 75 with f_w = 1): 0.4 x 1.2
    assert float(evaporation_coefficient(1.0, basal_crop_coefficient=0.15, maximum_crop_coefficient=1.2,
                                         cover_fraction=0.6)) == pytest.approx(0.48)
    # eq. 72's lower bound K_c,max >= K_cb + 0.05: a full-cover-like K_cb of 1.2 still leaves 0.05
    assert float(evaporation_coefficient(1.0, basal_crop_coefficient=1.2, maximum_crop_coefficient=1.2,
                                         cover_fraction=0.0)) == pytest.approx(0.05)
    # eq. 77: D_e,i = D_e,i-1 - (P - RO) + E / f_ew, within [0, TEW]
    assert depletion_after_day(5.0, infiltration_mm=2.0, evaporation_mm=1.2, cover_fraction=0.4,
                               total_mm=22.0) == pytest.approx(5.0 - 2.0 + 2.0)
    assert depletion_after_day(5.0, infiltration_mm=20.0, evaporation_mm=1.0, cover_fraction=0.0,
                               total_mm=22.0) == 0.0
    # the evaporating layer's share per cell (10 cm over 4 cm cells: 4, 4, 2 cm)
    np.testing.assert_allclose(evaporation_weights(cell_cm=4.0, n_cells=5, layer_cm=10.0), [0.4, 0.4, 0.2, 0, 0])


def test_daily_evaporation_follows_the_two_stages_in_closed_form():
    # Bare, wet loam, no rain, constant ET_o = 4 mm/day, K_cb = 0.15, K_c,max = 1.2, f_c = 0 (FAO-56 ch. 7):
    # stage 1 while D_e <= REW: E = K_e,max ET_o = 1.05 x 4 = 4.2 mm/day; stage 2: TEW - D_e shrinks by the factor
    # 1 - 4.2 / (TEW - REW) each day, E_i = 4.2 (TEW - D_e,i-1) / (TEW - REW) (eqs. 71, 74, 77; analytic)
    days, reference, rew, tew = 12, 4.0, 9.0, 22.0
    daily = run_water_season(_no_roots(), _setup(), _weather(days, reference), ground_area_cm2=100.0)["daily"]
    e_max = 1.05 * reference
    depletion, expected = 0.0, []
    for _ in range(days):
        reduction = 1.0 if depletion <= rew else (tew - depletion) / (tew - rew)
        expected.append(reduction * e_max)
        depletion = min(depletion + expected[-1], tew)
    np.testing.assert_allclose(daily["soil_evaporation_mm"], expected, rtol=1e-7, atol=1e-9)
    assert list(daily["soil_evaporation_mm"][:3]) == pytest.approx([4.2, 4.2, 4.2])      # stage 1: 3 days
    assert daily["evaporation_reduction_coefficient"][3] == pytest.approx((22.0 - 12.6) / 13.0)
    # no roots: no transpiration; the column lost exactly what evaporated and drained
    assert np.abs(daily["actual_transpiration_mm"]).max() < 1e-9
    assert np.abs(daily["water_balance_error_mm"]).max() < 1e-6
    storage = daily["soil_water_storage_mm"].to_numpy()
    np.testing.assert_allclose(np.diff(storage), -(daily["soil_evaporation_mm"] + daily["drainage_mm"])[1:],
                               atol=1e-6)


def test_rain_refills_the_surface_layer_and_restarts_stage_one():
    # eq. 77: infiltration lowers D_e (to 0 after a soaking), so evaporation is back at the energy limit
    rain = np.zeros(10)
    rain[6] = 30.0
    daily = run_water_season(_no_roots(), _setup(), _weather(10, 4.0, rain), ground_area_cm2=100.0)["daily"]
    assert daily["evaporation_reduction_coefficient"][5] < 1.0
    assert daily["evaporable_water_depletion_mm"][7] == 0.0
    assert daily["soil_evaporation_mm"][7] == pytest.approx(4.2, rel=1e-7)


def test_without_an_evaporation_table_nothing_evaporates():
    setup = soil_water_from_mapping({"column": {"depth_cm": 50.0, "cell_cm": 2.0},
                                     "horizons": [{"depth_bottom_cm": 50.0, "texture": "loam"}]}, source="s.toml")
    daily = run_water_season(_no_roots(), setup, _weather(3, 4.0), ground_area_cm2=100.0)["daily"]
    assert (daily["soil_evaporation_mm"] == 0.0).all()


@pytest.mark.parametrize("table, key", [
    ({"readily_evaporable_water_mm": 25.0}, "readily_evaporable_water_mm"),
    ({"crop_cover_fraction": 1.0}, "crop_cover_fraction"),
    ({"evaporating_layer_cm": 0.0}, "evaporating_layer_cm"),
    ({"surface_crust_mm": 1.0}, "surface_crust_mm"),
])
def test_bad_evaporation_input_is_one_line_error_and_exit_2(tmp_path, capsys, table, key):
    with pytest.raises(CaptureError, match=key):
        _setup(**table)
    text = (PARAMS / "soil_water_loam_evaporating.toml").read_text()
    body = "".join(f"{k} = {v}\n" for k, v in table.items())
    bad = tmp_path / "bad.toml"
    bad.write_text(text.replace("[evaporation]\n", "[evaporation]\n" + body, 1).replace(
        "readily_evaporable_water_mm = 9.0\n", "" if "readily_evaporable_water_mm" in table else
        "readily_evaporable_water_mm = 9.0\n").replace(
        "crop_cover_fraction = 0.3\n", "" if "crop_cover_fraction" in table else "crop_cover_fraction = 0.3\n").replace(
        "evaporating_layer_cm = 10.0\n", "" if "evaporating_layer_cm" in table else "evaporating_layer_cm = 10.0\n"))
    code = main(["capture", str(tmp_path / "run"), "--soil-water", str(bad), "--weather",
                 str(PARAMS / "weather_dry_spell_120_days.csv"), "--out", str(tmp_path / "out")])
    err = capsys.readouterr().err
    assert code == 2 and err.count("\n") == 1 and err.startswith(f"error: {bad}: evaporation") and key in err
    assert not (tmp_path / "out").exists()
