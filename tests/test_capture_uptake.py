"""Root water uptake (Feddes et al. 1978), root length per cell and day, and seasons in a drying soil."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from rootsim.capture.errors import CaptureError
from rootsim.capture.season import run_water_season
from rootsim.capture.soil_file import soil_water_from_mapping
from rootsim.capture.uptake import FeddesParameters, feddes_reduction, root_length_by_day, uptake_sink
from rootsim.soil.weather import weather_table_from_frame


def test_feddes_reduction_has_its_published_trapezoid_shape():
    # Feddes, Kowalik & Zaradny (1978): 0 above h1, linear to 1 at h2, 1 to h3, linear to 0 at h4; h3 moves
    # linearly between h3_low (1 mm/day) and h3_high (5 mm/day) with the demand.
    p = FeddesParameters(anaerobiosis_head_cm=-10, optimal_wet_head_cm=-25, optimal_dry_head_high_demand_cm=-400,
                         optimal_dry_head_low_demand_cm=-1000, wilting_head_cm=-8000)
    heads = np.array([0.0, -10.0, -17.5, -25.0, -200.0, -400.0, -4200.0, -8000.0, -9000.0])
    expected = [0.0, 0.0, 0.5, 1.0, 1.0, 1.0, 0.5, 0.0, 0.0]
    np.testing.assert_allclose(feddes_reduction(heads, p, potential_mm_per_day=5.0), expected, atol=1e-12)
    # at 3 mm/day demand h3 is halfway: -700 cm; at -700 still 1, halfway to wilting (-4350) 0.5
    np.testing.assert_allclose(feddes_reduction(np.array([-700.0, -4350.0]), p, potential_mm_per_day=3.0),
                               [1.0, 0.5], atol=1e-12)
    # low demand: h3 = h3_low
    assert feddes_reduction(np.array([-1000.0]), p, potential_mm_per_day=0.5)[0] == pytest.approx(1.0)
    with pytest.raises(CaptureError):
        FeddesParameters(anaerobiosis_head_cm=-30, optimal_wet_head_cm=-10).check()


def test_sink_follows_root_length_and_is_zero_without_roots():
    roots = np.array([30.0, 10.0, 0.0, 0.0])
    head = np.full(4, -100.0)
    sink = uptake_sink(head, roots, parameters=FeddesParameters(), potential_cm_per_day=0.4, cell_cm=5.0,
                       ground_area_cm2=100.0)
    assert sink[2] == 0.0 and sink[3] == 0.0
    assert sink[0] / sink[1] == pytest.approx(3.0)                 # proportional to root length
    assert (sink * 5.0).sum() == pytest.approx(0.4)                 # whole demand when no stress
    none = uptake_sink(head, np.zeros(4), parameters=FeddesParameters(), potential_cm_per_day=0.4, cell_cm=5.0,
                       ground_area_cm2=100.0)
    assert not none.any()


def _vertical_roots(n_roots: int, depth_cm: float, rate_cm_per_day: float) -> dict:
    """n vertical roots, 1 cm segments, the front advancing at a constant rate (birth day = depth / rate)."""
    top = np.tile(np.arange(0.0, depth_cm), n_roots)
    return {"z0": -top, "z1": -(top + 1.0), "length_cm": np.ones(top.size),
            "birth_day": (top + 1.0) / rate_cm_per_day}


def test_root_length_by_day_counts_segments_born_by_each_day():
    roots = _vertical_roots(3, 20.0, 2.0)   # front at 2 cm/day: at day d, 2d cm of each root
    table = root_length_by_day(roots, cell_cm=5.0, n_cells=6, first_day=0, n_days=12)
    np.testing.assert_allclose(table[5], [15.0, 15.0, 0, 0, 0, 0])     # day 5: 10 cm per root (analytic)
    np.testing.assert_allclose(table[11], [15.0, 15.0, 15.0, 15.0, 0, 0])  # all 20 cm by day 10


def _setup(**traits):
    return soil_water_from_mapping({
        "name": "test_loam",
        "column": {"depth_cm": 150.0, "cell_cm": 5.0, "initial_pressure_head_cm": -100.0},
        "horizons": [{"depth_bottom_cm": 150.0, "texture": "loam"}],
        "traits": {"deep_water_below_cm": 40.0, **traits},
    }, source="test.toml")


def _weather(days: int, *, rain=0.0, transpiration=5.0):
    return weather_table_from_frame(pd.DataFrame({"day": np.arange(days), "mean_air_temperature_c": 20.0,
                                                  "rain_mm": rain, "potential_transpiration_mm": transpiration}))


def test_deeper_roots_take_more_deep_water_and_are_stressed_fewer_days_in_a_drying_season():
    # Direction of a known result (e.g. Lynch 2013, doi:10.1093/aob/mcs293): in a drying soil a deeper
    # root system takes up more water from depth and keeps transpiring longer.
    setup, weather = _setup(), _weather(40)
    shallow = run_water_season(_vertical_roots(40, 30.0, 1.5), setup, weather, ground_area_cm2=1500.0)
    deep = run_water_season(_vertical_roots(40, 90.0, 3.0), setup, weather, ground_area_cm2=1500.0)
    s, d = shallow["traits"], deep["traits"]
    assert d["water_uptake_below_depth_mm"] > s["water_uptake_below_depth_mm"] + 10.0
    assert s["water_uptake_below_depth_mm"] == 0.0            # no roots below 40 cm, no uptake there
    assert d["days_of_water_stress"] < s["days_of_water_stress"]
    assert d["seasonal_transpiration_mm"] > s["seasonal_transpiration_mm"]
    for result in (shallow, deep):
        assert result["traits"]["largest_daily_water_balance_error_mm"] < 1e-5
        assert result["traits"]["seasonal_transpiration_mm"] <= 200.0 + 1e-9    # never above the demand


@pytest.mark.parametrize("bad, fragment", [
    ({"van_genuchten_n": 0.8}, "van_genuchten_n"),
    ({"saturated_conductivity_cm_per_day": -1.0}, "saturated_conductivity_cm_per_day"),
    ({"texture": "moon_dust"}, "texture"),
])
def test_bad_horizon_parameters_name_the_key(bad, fragment):
    horizon = {"depth_bottom_cm": 100.0, "texture": "loam"} | bad
    with pytest.raises(CaptureError) as info:
        soil_water_from_mapping({"column": {"depth_cm": 100.0}, "horizons": [horizon]}, source="s.toml")
    message = str(info.value)
    assert message.startswith("s.toml: horizons[0]") and fragment in message and "\n" not in message


def test_weather_without_transpiration_columns_is_refused():
    weather = weather_table_from_frame(pd.DataFrame({"day": [0, 1], "mean_air_temperature_c": 15.0}), source="w.csv")
    with pytest.raises(CaptureError, match="w.csv: columns: neither 'potential_transpiration_mm'"):
        run_water_season(_vertical_roots(1, 10.0, 1.0), _setup(), weather, ground_area_cm2=100.0)
