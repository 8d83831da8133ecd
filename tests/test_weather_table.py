"""Weather tables: consecutive days, units in column names, one-line errors for bad rows."""

import numpy as np
import pandas as pd
import pytest

from rootsim.errors import RootsimError
from rootsim.soil import read_weather_table, weather_table_from_frame


def _write(tmp_path, text):
    path = tmp_path / "weather.csv"
    path.write_text(text)
    return path


def test_reads_days_and_columns(tmp_path):
    # A table starting on day 1 covers a run over days 1..3 and no run that needs day 0; an absent optional
    # column reads as its default on every day of the table.
    path = _write(tmp_path, "day,mean_air_temperature_c,rain_mm\n1,12.5,0\n2,14.0,3.2\n3,15.5,0\n")
    table = read_weather_table(path)
    assert table.covering(1, 4) is table
    with pytest.raises(RootsimError, match="needs days 0..3"):
        table.covering(0, 4)
    assert table.column("irrigation_mm", default=0.0).tolist() == [0.0, 0.0, 0.0]


def test_dates_become_days_since_the_first_across_a_leap_day(tmp_path):
    # Gregorian calendar (common practice): 2032 is a leap year, so 2032-02-28, 02-29 and 03-01 are consecutive
    # days 0, 1, 2; a table jumping from 02-28 to 03-01 misses day 1 (02-29).
    path = _write(tmp_path, "date,mean_air_temperature_c\n2032-02-28,5\n2032-02-29,6\n2032-03-01,7\n")
    assert read_weather_table(path).day.tolist() == [0, 1, 2]
    path = _write(tmp_path, "date,mean_air_temperature_c\n2032-02-28,5\n2032-03-01,7\n")
    with pytest.raises(RootsimError, match="days 1..1 are missing"):
        read_weather_table(path)


def test_mean_from_min_and_max_is_their_average(tmp_path):
    # common practice: daily mean = (Tmin + Tmax) / 2 when no mean is given
    path = _write(tmp_path, "date,min_air_temperature_c,max_air_temperature_c\n2031-05-01,4,16\n2031-05-02,6,20\n")
    table = read_weather_table(path)
    assert table.day.tolist() == [0, 1]
    assert table.column("mean_air_temperature_c").tolist() == [10.0, 13.0]


@pytest.mark.parametrize("text, fragment", [
    ("day,mean_air_temperature_c\n1,10\n3,12\n", "days 2..2 are missing"),
    ("day,mean_air_temperature_c\n2,10\n1,12\n", "unsorted or repeated"),
    ("day,rain_mm\n1,0\n", "mean_air_temperature_c' is missing"),
    ("day,mean_air_temperature_c,rain_mm\n1,10,-1\n", "row 2, column rain_mm"),
    ("day,mean_air_temperature_c\n1,nan\n", "row 2, column mean_air_temperature_c"),
    ("mean_air_temperature_c\n10\n", "neither 'day' nor 'date'"),
    ("day,mean_air_temperature_c\n", "no rows"),
])
def test_bad_tables_give_one_line_errors(tmp_path, text, fragment):
    path = _write(tmp_path, text)
    with pytest.raises(RootsimError) as info:
        read_weather_table(path)
    message = str(info.value)
    assert fragment in message and str(path) in message and "\n" not in message


def test_covering_names_the_missing_days():
    table = weather_table_from_frame(pd.DataFrame({"day": np.arange(0, 10), "mean_air_temperature_c": 15.0}))
    assert table.covering(0, 10) is table
    with pytest.raises(RootsimError, match="needs days 0..11"):
        table.covering(0, 12)
