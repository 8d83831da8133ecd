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
    path = _write(tmp_path, "day,mean_air_temperature_c,rain_mm\n1,12.5,0\n2,14.0,3.2\n3,15.5,0\n")
    table = read_weather_table(path)
    assert table.day.tolist() == [1, 2, 3]
    assert table.column("rain_mm").tolist() == [0.0, 3.2, 0.0]
    assert table.column("irrigation_mm", default=0.0).tolist() == [0.0, 0.0, 0.0]


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
