"""Roots that died during the run, kept with their death day, and counted by the capture season while alive."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from rootsim.growth.engine import grow
from rootsim.capture.season import run_water_season
from rootsim.capture.soil_file import soil_water_from_mapping
from rootsim.capture.uptake import root_length_by_day
from rootsim.growth.engine import drop_dead_roots
from rootsim.soil.weather import weather_table_from_frame
from growth_specs import make_spec, root_class


def _axis(**extra):
    values = dict(elongation_rate_cm_per_day=2.0, max_length_cm=60.0, basal_zone_cm=1.0, apical_zone_cm=2.0,
                  interbranch_distance_cm=1.5, branches=[{"root_class": "lateral"}])
    return root_class(**{**values, **extra})


def _lateral(**extra):
    return root_class(**{**dict(elongation_rate_cm_per_day=0.5, max_length_cm=100.0, insertion_angle_deg=60.0),
                         **extra})


def test_kept_dead_laterals_carry_their_analytic_death_day():
    # Linear growth (common practice): lateral j emerges when the axis (2 cm/day from day 0) passes
    # basal + j d + apical = 3 + 1.5 j cm, at t_j = (3 + 1.5 j) / 2; with a 4-day lifespan it dies at t_j + 4.
    days = 20.0
    spec = make_spec({"axis": _axis(), "lateral": _lateral(lifespan_days=4.0)}, days=days, step_days=0.5)
    kept = grow(spec, keep_dead_roots=True)
    frame = kept.to_dataframe()
    j = np.arange(100)
    t_j = (3.0 + 1.5 * j) / 2.0
    t_j = t_j[(3.0 + 1.5 * j <= 60.0) & (t_j < days)]
    dead = np.sort(t_j[t_j + 4.0 <= days] + 4.0)
    laterals = frame[frame["order"] == 1].groupby("root_id")["death_day"].first()
    np.testing.assert_allclose(np.sort(laterals[np.isfinite(laterals)].to_numpy()), dead, rtol=1e-9)
    assert (~np.isfinite(laterals)).sum() == (t_j + 4.0 > days).sum()
    assert not np.isfinite(frame.loc[frame["order"] == 0, "death_day"]).any()     # the axis lives on
    # a dead root grew for its lifespan, up to the end of the time step it died in (deaths take effect at step
    # resolution): 0.5 cm/day x 4 days <= length <= 0.5 cm/day x 4.5 days
    per_root = frame[np.isfinite(frame["death_day"])].groupby("root_id")["length_cm"].sum()
    assert per_root.min() >= 2.0 - 1e-9 and per_root.max() <= 2.25 + 1e-9
    # no segment is born later than the end of the step its root died in
    assert (frame["birth_day"] <= frame["death_day"] + 0.5 + 1e-9).all()
    # dropping the dead rows gives exactly the table grown without keeping them
    pd.testing.assert_frame_equal(drop_dead_roots(kept).to_dataframe(), grow(spec).to_dataframe(),
                                  check_exact=True)


def test_laterals_die_with_their_axis():
    # The axis (emerging on day 0) lives 10 days; every lateral dies with it, whatever its own age.
    spec = make_spec({"axis": _axis(lifespan_days=10.0), "lateral": _lateral()}, days=12.0)
    frame = grow(spec, keep_dead_roots=True).to_dataframe()
    assert len(frame) > 0 and (frame["order"] == 1).any()
    np.testing.assert_allclose(frame["death_day"], 10.0, rtol=1e-12)
    assert len(grow(spec)) == 0


def test_root_length_by_day_counts_segments_between_birth_and_death():
    # Three vertical 20 cm roots (1 cm segments) all born on day 0; the second dies on day 4.5 and the third on
    # day 8: on day d the table holds the roots with death_day > d (hand count).
    top = np.tile(np.arange(0.0, 20.0), 3)
    death = np.repeat([np.inf, 4.5, 8.0], 20)
    roots = {"z0": -top, "z1": -(top + 1.0), "length_cm": np.ones(top.size), "birth_day": np.zeros(top.size),
             "death_day": death}
    table = root_length_by_day(roots, cell_cm=10.0, n_cells=3, first_day=0, n_days=10)
    expected = np.array([[30.0, 30.0, 0.0] if d < 4.5 else [20.0, 20.0, 0.0] if d < 8.0 else [10.0, 10.0, 0.0]
                         for d in range(10)])
    np.testing.assert_allclose(table, expected, atol=1e-12)


def test_season_takes_water_through_roots_only_while_they_live():
    # Roots in two depth bands: a live one at 0-20 cm and one at 40-60 cm that dies on day 3. From day 3 on the
    # deep cells take up nothing (no uptake where no living roots are, Feddes et al. 1978 sink x root share);
    # before, they take up their share of the demand.
    shallow = np.tile(np.arange(0.0, 20.0), 5)
    deep = np.tile(np.arange(40.0, 60.0), 5)
    top = np.concatenate([shallow, deep])
    roots = {"z0": -top, "z1": -(top + 1.0), "length_cm": np.ones(top.size), "birth_day": np.zeros(top.size),
             "death_day": np.concatenate([np.full(shallow.size, np.inf), np.full(deep.size, 3.0)])}
    setup = soil_water_from_mapping({"column": {"depth_cm": 100.0, "cell_cm": 10.0, "initial_pressure_head_cm": -100.0},
                                     "horizons": [{"depth_bottom_cm": 100.0, "texture": "loam"}],
                                     "traits": {"deep_water_below_cm": 40.0}}, source="test.toml")
    weather = weather_table_from_frame(pd.DataFrame({"day": np.arange(6), "mean_air_temperature_c": 20.0,
                                                     "potential_transpiration_mm": 2.0}))
    layers = run_water_season(roots, setup, weather, ground_area_cm2=400.0)["layers"]
    deep_uptake = layers[layers["depth_top_cm"] >= 40.0].groupby("day")["water_uptake_mm"].sum()
    assert (deep_uptake.loc[[0, 1, 2]] > 0.5).all()                 # half the roots: about half of 2 mm/day
    assert (deep_uptake.loc[[3, 4, 5]] == 0.0).all()
    without = {k: v for k, v in roots.items() if k != "death_day"}   # the same roots all alive: deep uptake goes on
    alive = run_water_season(without, setup, weather, ground_area_cm2=400.0)["layers"]
    assert (alive[alive["depth_top_cm"] >= 40.0].groupby("day")["water_uptake_mm"].sum().loc[[3, 4, 5]] > 0.5).all()
