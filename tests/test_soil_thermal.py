"""Thermal time: cardinal-temperature responses, degree-days, and growth on a thermal clock."""

import numpy as np
import pytest

import rootsim
from rootsim.cli import main
from rootsim.soil import read_weather_table
from rootsim.soil.thermal import (beta_temperature_response, broken_linear_temperature_response,
                                  calendar_days_from_effective_days, cumulative_effective_days, degree_days,
                                  grow_for_spec)
from rootsim.spec import parse_spec

CARDINAL = dict(base_c=8.0, optimum_c=30.0, maximum_c=42.0)


def test_degree_days_against_a_hand_computed_table(tmp_path):
    # Hand-computed, broken-linear response with base 8, optimum 30, maximum 42 degC:
    # T:            5    8    13    30    36    45
    # degree-days:  0    0     5    22    11     0   (below the optimum: max(0, T - base), McMaster & Wilhelm 1997)
    # cumulative:   0    0     5    27    38    38
    path = tmp_path / "w.csv"
    path.write_text("day,mean_air_temperature_c\n0,5\n1,8\n2,13\n3,30\n4,36\n5,45\n")
    table = read_weather_table(path)
    daily = degree_days(table, shape="broken_linear", **CARDINAL)
    np.testing.assert_allclose(daily, [0, 0, 5, 22, 11, 0], atol=1e-12)
    np.testing.assert_allclose(np.cumsum(daily), [0, 0, 5, 27, 38, 38], atol=1e-12)


def test_beta_response_hand_computed_values():
    # Yan & Hunt 1999: r = ((Tmax - T)/(Tmax - Topt)) ((T - Tb)/(Topt - Tb))^((Topt - Tb)/(Tmax - Topt));
    # hand-computed: T = 19 -> 1.916667 * 0.5^1.833333 = 0.537847;
    #                T = 36 -> 0.5 * (28/22)^1.833333 = 0.5 * exp(1.833333 * 0.2411621) = 0.778009
    r = beta_temperature_response([8.0, 19.0, 30.0, 36.0, 42.0, 50.0], **CARDINAL)
    np.testing.assert_allclose(r, [0.0, 0.537847, 1.0, 0.778009, 0.0, 0.0], atol=2e-6)
    # its maximum is at the optimum (derivative zero there)
    t = np.linspace(8.5, 41.5, 3301)
    assert t[np.argmax(beta_temperature_response(t, **CARDINAL))] == pytest.approx(30.0, abs=0.01)


def test_broken_linear_response_shape():
    np.testing.assert_allclose(broken_linear_temperature_response([0, 19, 30, 36, 42], **CARDINAL),
                               [0, 0.5, 1, 0.5, 0])


def test_effective_time_and_its_inverse():
    # days accrue uniformly within each day; a day with no development is skipped by the inverse (hand-computed)
    daily = np.array([0.0, 0.5, 1.0, 0.0, 0.25])
    np.testing.assert_allclose(cumulative_effective_days(daily, [0, 1.5, 2.5, 3.5, 4.4, 5]),
                               [0, 0.25, 1.0, 1.5, 1.6, 1.75])
    np.testing.assert_allclose(calendar_days_from_effective_days(daily, [0, 0.25, 0.5, 1.5, 1.6, 1.75]),
                               [0, 1.5, 2.0, 3.0, 4.4, 5.0])


def _classes(scale: float) -> dict:
    """Two branching classes with random turning and a lifespan; times divided, rates multiplied by ``scale``."""
    return {
        "main": {"elongation_rate_cm_per_day": 2.0 * scale, "max_length_cm": 60.0, "gravitropism_per_cm": 0.05,
                 "random_turning_deg_per_sqrt_cm": 8.0, "initial_angle_from_vertical_deg": 20.0,
                 "basal_zone_cm": 1.0, "apical_zone_cm": 3.0, "interbranch_distance_cm": 1.5,
                 "branches": [{"root_class": "side"}]},
        "side": {"elongation_law": "negative_exponential", "elongation_rate_cm_per_day": 0.8 * scale,
                 "max_length_cm": 6.0, "random_turning_deg_per_sqrt_cm": 12.0,
                 "insertion_angle_deg": {"low": 50.0, "high": 80.0}, "lifespan_days": 6.0 / scale},
    }


def _emergence(scale: float) -> list:
    return [{"root_class": "main", "first_day": 1.0 / scale, "event_count": 3, "interval_days": 2.0 / scale,
             "roots_per_event": 2}]


@pytest.mark.parametrize("time_unit, per_unit", [("day_at_optimum", 1.0), ("degree_day", 22.0)])
def test_constant_temperature_equals_a_calendar_run_with_scaled_rates(tmp_path, time_unit, per_unit):
    # At a constant 19 degC the broken-linear response is 0.5 (base 8, optimum 30): 16 calendar days are 8 days at
    # the optimum (= 8 x 22 = 176 degree-days). The same system must come from a calendar run with every rate
    # x 0.5 and every time / 0.5 (rates per degree-day: x 11 degree-days per calendar day).
    weather = tmp_path / "constant.csv"
    weather.write_text("day,mean_air_temperature_c\n" + "".join(f"{d},19\n" for d in range(16)))
    stand = {"rows": 1, "plants_per_row": 2}
    thermal = parse_spec({
        "run": {"duration_days": 16, "time_step_days": 0.5 * per_unit, "seed": 11}, "stand": stand,
        "weather": {"file": str(weather)},
        "development": {"clock": "thermal", "temperature_response": "broken_linear", "base_temperature_c": 8,
                        "optimum_temperature_c": 30, "maximum_temperature_c": 42, "time_unit": time_unit},
        "emergence": _emergence(1.0 / per_unit), "root_classes": _classes(1.0 / per_unit)},
        source=str(tmp_path / "t.toml"))
    calendar = parse_spec({"run": {"duration_days": 16, "time_step_days": 1.0, "seed": 11}, "stand": stand,
                           "emergence": _emergence(0.5), "root_classes": _classes(0.5)})
    a = grow_for_spec(thermal, progress=False).to_dataframe()
    b = rootsim.grow(calendar, progress=False).to_dataframe()
    assert len(a) == len(b) > 100
    assert a["root_class"].tolist() == b["root_class"].tolist()
    for column in ("x0", "y0", "z0", "x1", "y1", "z1", "length_cm", "birth_day"):
        np.testing.assert_allclose(a[column], b[column], rtol=1e-9, atol=1e-9, err_msg=column)
    assert a["birth_day"].max() > 8.5  # birth days are calendar days, not effective days


def test_grow_command_on_a_thermal_clock_and_a_weather_gap(tmp_path, capsys):
    weather = tmp_path / "season.csv"
    weather.write_text("day,mean_air_temperature_c\n" + "".join(f"{d},{14 + d}\n" for d in range(10)))
    spec = tmp_path / "spec.toml"
    spec.write_text('[run]\nduration_days = 10\nseed = 3\n[weather]\nfile = "season.csv"\n'
                    '[development]\nclock = "thermal"\n[[emergence]]\nroot_class = "main"\n'
                    '[root_classes.main]\nelongation_rate_cm_per_day = 2.0\n')
    out = tmp_path / "out"
    assert main(["grow", str(spec), "--out", str(out), "--quiet"]) == 0
    system = rootsim.RootSystem.read(out / "segments.parquet")
    dev = system.metadata["development"]
    # beta response (Yan & Hunt 1999) at 14..23 degC, the formula evaluated here with numpy
    t = np.arange(14, 24, dtype=float)
    expected = np.sum((42 - t) / 12 * ((t - 8) / 22) ** (22 / 12))
    assert dev["effective_days"] == pytest.approx(expected, rel=1e-12)
    # the single root grows 2 cm per effective day: its length is 2 x effective days (analytic)
    assert system["length_cm"].sum() == pytest.approx(2.0 * expected, rel=1e-9)
    assert system["birth_day"].max() <= 10.0 + 1e-9 and system["birth_day"].max() > expected
    # a gap in the weather: one error line naming the parameter file and key, nothing written
    weather.write_text("day,mean_air_temperature_c\n0,15\n1,16\n3,17\n")
    out2 = tmp_path / "out2"
    assert main(["grow", str(spec), "--out", str(out2), "--quiet"]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("error: ") and str(spec) in err and "weather.file" in err and "days 2..2 are missing" in err
    assert not (out2 / "segments.parquet").exists()


def test_a_season_shorter_than_the_run_is_refused(tmp_path, capsys):
    weather = tmp_path / "season.csv"
    weather.write_text("day,mean_air_temperature_c\n" + "".join(f"{d},20\n" for d in range(5)))
    spec = tmp_path / "spec.toml"
    spec.write_text('[run]\nduration_days = 10\n[weather]\nfile = "season.csv"\n[development]\nclock = "thermal"\n'
                    '[[emergence]]\nroot_class = "main"\n[root_classes.main]\n')
    assert main(["check", str(spec)]) == 2
    err = capsys.readouterr().err
    assert "weather.file" in err and "needs days 0..9" in err
