"""Feddes et al. (1978) root water uptake against hand-worked values of the published reduction function.

Source of the function: Feddes, Kowalik & Zaradny (1978), *Simulation of field water use and crop yield*,
Pudoc, Wageningen (alpha(h): 0 wetter than h1, linear to 1 at h2, 1 down to h3, linear to 0 at h4; h3 moves
linearly between h3_low at a demand of 1 mm/day and h3_high at 5 mm/day). Parameter set: the one usually
tabulated for corn (Wesseling, Elbers, Kabat & van den Broek 1991, as quoted in soil-water model manuals;
from memory): h1 = -15, h2 = -30, h3_high = -325, h3_low = -600, h4 = -8000 cm. Every expected number below is
worked by hand from these (arithmetic shown beside each check).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from rootsim.capture.season import run_water_season
from rootsim.capture.soil_file import soil_water_from_mapping
from rootsim.capture.uptake import FeddesParameters, feddes_reduction, uptake_sink
from rootsim.soil.weather import weather_table_from_frame

CORN = FeddesParameters(anaerobiosis_head_cm=-15.0, optimal_wet_head_cm=-30.0,
                        optimal_dry_head_high_demand_cm=-325.0, optimal_dry_head_low_demand_cm=-600.0,
                        wilting_head_cm=-8000.0, high_demand_mm_per_day=5.0, low_demand_mm_per_day=1.0)


def test_alpha_at_the_tabulated_heads_of_the_corn_set():
    # Feddes et al. (1978) trapezoid with the corn heads (Wesseling et al. 1991, from memory), demand 5 mm/day:
    heads = np.array([0.0, -15.0, -22.5, -30.0, -100.0, -325.0, -1000.0, -4162.5, -8000.0, -15000.0])
    expected = [0.0, 0.0,            # wetter than h1: oxygen shortage
                0.5,                 # (-15 - -22.5) / (-15 - -30) = 7.5 / 15
                1.0, 1.0, 1.0,       # h2 .. h3_high
                7000.0 / 7675.0,     # (-1000 + 8000) / (-325 + 8000) = 0.912052...
                0.5,                 # half-way from h3_high to h4: (-325 - 8000) / 2 = -4162.5
                0.0, 0.0]            # at and beyond wilting
    np.testing.assert_allclose(feddes_reduction(heads, CORN, potential_mm_per_day=5.0), expected, rtol=1e-12,
                               atol=1e-15)


@pytest.mark.parametrize("demand, h3", [
    (0.5, -600.0),                   # below the low demand: h3_low
    (1.0, -600.0),
    (3.0, -462.5),                   # -600 + (3 - 1) / (5 - 1) x (-325 - -600) = -600 + 137.5
    (4.0, -393.75),                  # -600 + 0.75 x 275
    (5.0, -325.0),
    (8.0, -325.0),                   # above the high demand: h3_high
])
def test_h3_moves_linearly_with_demand_between_its_low_and_high_values(demand, h3):
    # Feddes et al. (1978): h3 interpolated linearly in the potential transpiration between 1 and 5 mm/day.
    alpha = feddes_reduction(np.array([h3, h3 - 10.0, -1000.0]), CORN, potential_mm_per_day=demand)
    assert alpha[0] == pytest.approx(1.0, abs=1e-12)                       # h3 is the last head without stress
    assert alpha[1] == pytest.approx((h3 - 10.0 + 8000.0) / (h3 + 8000.0), rel=1e-12)   # 10 cm drier: linear
    assert alpha[2] == pytest.approx((-1000.0 + 8000.0) / (h3 + 8000.0), rel=1e-12)


def test_sink_of_a_two_layer_root_distribution_worked_by_hand():
    # Two 10 cm cells under 100 cm² of ground; 300 cm of root in the top cell, 100 cm in the lower one; demand
    # 5 mm/day = 0.5 cm/day. Potential sink per cell (demand spread by root length, rootsim.capture.uptake):
    #   S_max,1 = 0.5 x 300 / (10 x 400) = 0.0375 /day,  S_max,2 = 0.5 x 100 / (10 x 400) = 0.0125 /day.
    # The top cell is dry (h = -1000 cm: alpha = 7000 / 7675), the lower one at h = -100 cm (alpha = 1):
    #   S_1 = 0.0375 x 0.9120521 = 0.0342020 /day, S_2 = 0.0125 /day, T_a = 10 x (S_1 + S_2) = 0.467020 cm/day.
    head = np.array([-1000.0, -100.0])
    roots = np.array([300.0, 100.0])
    sink = uptake_sink(head, roots, parameters=CORN, potential_cm_per_day=0.5, cell_cm=10.0, ground_area_cm2=100.0)
    np.testing.assert_allclose(sink, [0.0375 * 7000.0 / 7675.0, 0.0125], rtol=1e-12)
    assert 10.0 * sink.sum() == pytest.approx(0.46702, abs=1e-5)
    # with a root-length limit of 0.001 cm³ per cm of root per day the top cell is capped at
    # 0.001 x 300 / (100 x 10) = 3e-4 /day and the lower one at 1e-4 /day (hand arithmetic)
    capped = FeddesParameters(**{**CORN.__dict__, "max_uptake_cm3_per_cm_root_per_day": 0.001})
    np.testing.assert_allclose(uptake_sink(head, roots, parameters=capped, potential_cm_per_day=0.5, cell_cm=10.0,
                                           ground_area_cm2=100.0), [3e-4, 1e-4], rtol=1e-12)
    # a cell without roots between rooted cells takes up nothing (no uptake where no roots are)
    sink3 = uptake_sink(np.full(3, -100.0), np.array([300.0, 0.0, 100.0]), parameters=CORN,
                        potential_cm_per_day=0.5, cell_cm=10.0, ground_area_cm2=100.0)
    np.testing.assert_allclose(sink3, [0.0375, 0.0, 0.0125], rtol=1e-12)


def test_no_uptake_over_a_season_in_cells_without_roots():
    # Vertical roots in the top 20 cm only: every cell below takes up nothing on any day (Feddes sink x root
    # length share = 0), while the rooted cells supply the whole demand when the soil is wet (alpha = 1).
    top = np.tile(np.arange(0.0, 20.0), 10)
    roots = {"z0": -top, "z1": -(top + 1.0), "length_cm": np.ones(top.size), "birth_day": np.zeros(top.size)}
    setup = soil_water_from_mapping({
        "column": {"depth_cm": 100.0, "cell_cm": 5.0, "initial_pressure_head_cm": -100.0},
        "horizons": [{"depth_bottom_cm": 100.0, "texture": "loam"}],
        "uptake": {k: v for k, v in CORN.__dict__.items() if v is not None},
    }, source="test.toml")
    weather = weather_table_from_frame(pd.DataFrame({"day": np.arange(5), "mean_air_temperature_c": 20.0,
                                                     "potential_transpiration_mm": 2.0}))
    result = run_water_season(roots, setup, weather, ground_area_cm2=400.0)
    layers = result["layers"]
    assert (layers.loc[layers["depth_top_cm"] >= 20.0, "water_uptake_mm"] == 0.0).all()
    # the soil starts at -100 cm (between h2 and h3): no stress, the whole 2 mm/day is taken up
    np.testing.assert_allclose(result["daily"]["actual_transpiration_mm"], 2.0, rtol=1e-9)
