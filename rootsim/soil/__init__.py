"""The soil and the season the roots grow in: weather tables, soil fields, strength, biopores."""

from .weather import WEATHER_COLUMNS, WeatherTable, read_weather_table, weather_table_from_frame

__all__ = ["WEATHER_COLUMNS", "WeatherTable", "read_weather_table", "weather_table_from_frame"]
