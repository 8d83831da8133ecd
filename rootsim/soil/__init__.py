"""The soil and the season the roots grow in: weather tables, soil fields, strength, biopores, thermal time.

Modules (heavy parts import lazily): :mod:`.weather` (daily weather CSV), :mod:`.fields` (named 3D fields,
compiled arrays, numba kernels), :mod:`.strength` (pedotransfer, elongation responses), :mod:`.biopores`,
:mod:`.thermal` (temperature responses, effective days, growth on a thermal clock), :mod:`.build` (from the
parameter file), :mod:`.vti` (soil fields as VTK image data).
"""

from .weather import WEATHER_COLUMNS, WeatherTable, read_weather_table, weather_table_from_frame

__all__ = ["WEATHER_COLUMNS", "WeatherTable", "read_weather_table", "weather_table_from_frame"]
