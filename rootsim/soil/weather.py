"""Daily weather and management tables (CSV): the season a stand grows in.

One row per day. Days are given either as ``day`` (integer days since sowing; the first row may be any day, e.g. 0
or 1) or as ``date`` (ISO dates; the first row is day 0). Days must be consecutive, sorted and unique. Columns (units
in the names):

========================================  ========  ===========================================================
column                                    required  meaning
========================================  ========  ===========================================================
``day`` or ``date``                       yes       day since sowing, or calendar date
``mean_air_temperature_c``                yes*      daily mean air temperature (°C); *or both min and max below
``min_air_temperature_c``                 no        daily minimum air temperature (°C)
``max_air_temperature_c``                 no        daily maximum air temperature (°C)
``rain_mm``                               no        rain (mm = L/m²), >= 0
``irrigation_mm``                         no        irrigation (mm), >= 0
``potential_transpiration_mm``            no        potential crop transpiration (mm/day), >= 0
``reference_evapotranspiration_mm``       no        reference evapotranspiration (mm/day), >= 0
``solar_radiation_mj_per_m2``             no        global radiation (MJ/m²/day), >= 0
``nitrate_fertilizer_kg_n_per_ha``        no        nitrate-N applied that day (kg N/ha), >= 0
``soil_temperature_c``                    no        daily mean soil temperature in the root zone (°C)
========================================  ========  ===========================================================

When only the minimum and maximum are given the mean is their average (common practice). Other columns are kept
as they are (numeric), so users may carry their own series.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import RootsimError

__all__ = ["WEATHER_COLUMNS", "WeatherError", "WeatherTable", "read_weather_table", "weather_table_from_frame"]

#: Known columns: name -> (lowest allowed value, highest allowed value).
WEATHER_COLUMNS: dict[str, tuple[float, float]] = {
    "mean_air_temperature_c": (-60.0, 60.0),
    "min_air_temperature_c": (-60.0, 60.0),
    "max_air_temperature_c": (-60.0, 60.0),
    "rain_mm": (0.0, 1000.0),
    "irrigation_mm": (0.0, 1000.0),
    "potential_transpiration_mm": (0.0, 30.0),
    "reference_evapotranspiration_mm": (0.0, 30.0),
    "solar_radiation_mj_per_m2": (0.0, 50.0),
    "nitrate_fertilizer_kg_n_per_ha": (0.0, 1000.0),
    "soil_temperature_c": (-30.0, 60.0),
}

#: Most rows a weather table may have (about 270 years of days).
MAX_WEATHER_DAYS = 100_000


class WeatherError(RootsimError, ValueError):
    """A weather table is malformed (missing column, gap in days, value out of range...)."""


@dataclass(frozen=True)
class WeatherTable:
    """A validated daily weather table.

    Attributes
    ----------
    source : str
        File the table came from (or ``"<table>"``), for messages.
    day : ndarray of int64, shape (n_days,)
        Consecutive days since sowing.
    columns : dict of str -> ndarray of float64, shape (n_days,)
        Every numeric column other than ``day``/``date``; always holds ``mean_air_temperature_c``.
    """

    source: str
    day: np.ndarray
    columns: dict[str, np.ndarray] = field(default_factory=dict)

    @property
    def n_days(self) -> int:
        """Number of days (rows)."""
        return int(self.day.size)

    @property
    def first_day(self) -> int:
        """Day of the first row."""
        return int(self.day[0])

    @property
    def last_day(self) -> int:
        """Day of the last row."""
        return int(self.day[-1])

    def has(self, name: str) -> bool:
        """Whether the table has column ``name``."""
        return name in self.columns

    def column(self, name: str, *, default: float | None = None) -> np.ndarray:
        """Column ``name`` as float64 (n_days,); ``default`` fills a missing column, else a one-line error."""
        if name in self.columns:
            return self.columns[name]
        if default is None:
            raise WeatherError(f"{self.source}: column '{name}' is missing "
                               f"(allowed columns: {', '.join(sorted(WEATHER_COLUMNS))})")
        return np.full(self.day.size, float(default))

    def covering(self, first_day: float, last_day: float, *, what: str = "the run") -> "WeatherTable":
        """Check that whole days ``floor(first_day)`` .. ``ceil(last_day) - 1`` are in the table; return self."""
        need_first = math.floor(first_day)
        need_last = max(need_first, math.ceil(last_day) - 1)
        if need_first < self.first_day or need_last > self.last_day:
            raise WeatherError(f"{self.source}: day: covers days {self.first_day}..{self.last_day} but {what} needs "
                               f"days {need_first}..{need_last} (allowed: a table covering every day of the run)")
        return self


def _fail(source: str, where: str, problem: str, allowed: str) -> WeatherError:
    return WeatherError(f"{source}: {where}: {problem} (allowed: {allowed})")


def _shown(value) -> str:
    """A cell of the table as the user wrote it: plain numbers and text, not numpy reprs."""
    if isinstance(value, (int, float, np.integer, np.floating)):
        return f"{float(value):g}"
    return repr(str(value))


def weather_table_from_frame(frame, *, source: str = "<table>") -> WeatherTable:
    """Validate a :class:`pandas.DataFrame` in the weather layout and return a :class:`WeatherTable`.

    Parameters
    ----------
    frame : pandas.DataFrame
        One row per day with the columns described in this module's docstring.
    source : str, keyword-only
        Name used in error messages (the file path).

    Raises
    ------
    WeatherError
        One line naming the source, the column (and row) and what is allowed.
    """
    import pandas as pd

    frame = frame.rename(columns=lambda c: str(c).strip())
    if len(frame.columns) == 1 and ";" in str(frame.columns[0]):
        raise _fail(source, "columns", "values are separated by ';'", "comma-separated values (CSV)")
    empty = frame.isna().all(axis=1).to_numpy()
    if empty.size and empty[-1]:  # rows of empty cells a spreadsheet leaves at the end (",,,") are no days
        frame = frame.iloc[: len(empty) - int(np.argmin(empty[::-1])) if not empty.all() else 0]
    if len(frame) == 0:
        raise _fail(source, "rows", "the table has no rows", "one row per day")
    if len(frame) > MAX_WEATHER_DAYS:
        raise _fail(source, "rows", f"{len(frame):,} rows", f"at most {MAX_WEATHER_DAYS:,} days")
    if "day" in frame.columns:
        raw = pd.to_numeric(frame["day"], errors="coerce").to_numpy(dtype=float)
        bad = ~np.isfinite(raw) | (raw != np.round(raw)) | (np.abs(raw) > 1e9)
        if bad.any():
            row = int(np.flatnonzero(bad)[0])
            raise _fail(source, f"row {row + 2}, column day", f"{_shown(frame['day'].iloc[row])} is not a whole day",
                        "integer days since sowing")
        day = raw.astype(np.int64)
    elif "date" in frame.columns:
        dates = pd.to_datetime(frame["date"], errors="coerce", format="ISO8601")
        if dates.isna().any():
            row = int(np.flatnonzero(dates.isna().to_numpy())[0])
            raise _fail(source, f"row {row + 2}, column date", f"{_shown(frame['date'].iloc[row])} is not a date",
                        "ISO dates such as 2031-05-04")
        day = ((dates - dates.iloc[0]).dt.days).to_numpy(dtype=np.int64)
    else:
        found = ", ".join(str(c) for c in frame.columns[:8])
        raise _fail(source, "columns", f"neither 'day' nor 'date' is present (found: {found})",
                    "a 'day' or a 'date' column, lower case")
    steps = np.diff(day)
    if steps.size and (steps != 1).any():
        backward = np.flatnonzero(steps <= 0)  # an unsorted or repeated day is named first: it also opens gaps
        row = int(backward[0] if backward.size else np.flatnonzero(steps != 1)[0]) + 1
        if steps[row - 1] <= 0:
            problem = f"day {day[row]} follows day {day[row - 1]} (unsorted or repeated)"
        else:
            problem = f"days {day[row - 1] + 1}..{day[row] - 1} are missing"
        raise _fail(source, f"row {row + 2}, column day", problem, "consecutive days, sorted, one row per day")
    columns: dict[str, np.ndarray] = {}
    for name in frame.columns:
        if name in ("day", "date"):
            continue
        values = pd.to_numeric(frame[name], errors="coerce").to_numpy(dtype=float)
        bad = ~np.isfinite(values)
        low, high = WEATHER_COLUMNS.get(name, (-1e12, 1e12))
        bad |= (values < low) | (values > high)
        if bad.any():
            row = int(np.flatnonzero(bad)[0])
            raise _fail(source, f"row {row + 2}, column {name}", f"{_shown(frame[name].iloc[row])} is missing or out of range",
                        f"numbers from {low:g} to {high:g}")
        columns[name] = values
    if "mean_air_temperature_c" not in columns:
        if "min_air_temperature_c" in columns and "max_air_temperature_c" in columns:
            columns["mean_air_temperature_c"] = 0.5 * (columns["min_air_temperature_c"]
                                                       + columns["max_air_temperature_c"])
        else:
            raise _fail(source, "columns", "'mean_air_temperature_c' is missing",
                        "mean_air_temperature_c, or both min_air_temperature_c and max_air_temperature_c")
    if "min_air_temperature_c" in columns and "max_air_temperature_c" in columns:
        swapped = columns["min_air_temperature_c"] > columns["max_air_temperature_c"]
        if swapped.any():
            row = int(np.flatnonzero(swapped)[0])
            raise _fail(source, f"row {row + 2}, column min_air_temperature_c", "minimum above maximum",
                        "min_air_temperature_c <= max_air_temperature_c")
    return WeatherTable(source=source, day=day, columns=columns)


def read_weather_table(path: str | os.PathLike) -> WeatherTable:
    """Read and validate a daily weather CSV (see the module docstring for its columns).

    Raises
    ------
    WeatherError
        The file is missing, unreadable, not CSV, or breaks a rule (one line naming file, row and column).
    """
    import pandas as pd

    path = Path(path)
    source = str(path)
    if path.is_dir():
        raise WeatherError(f"{source}: is a folder (allowed: a daily weather CSV file)")
    try:
        if path.stat().st_size > 50_000_000:
            raise _fail(source, "file", "larger than 50 MB", "a daily table")
        frame = pd.read_csv(path, comment="#", skipinitialspace=True)
    except FileNotFoundError:
        raise WeatherError(f"{source}: file not found") from None
    except (OSError, UnicodeDecodeError, pd.errors.ParserError, pd.errors.EmptyDataError) as exc:
        raise WeatherError(f"{source}: cannot read as CSV ({' '.join(str(exc).split())[:120]})") from None
    return weather_table_from_frame(frame, source=source)
