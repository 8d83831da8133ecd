"""Thermal time: development driven by temperature from a daily weather table.

The daily *temperature response* ``r(T)`` is 0 at or below the base temperature, rises to 1.0 at the optimum and
falls back to 0 at the maximum. Two published shapes, chosen by name:

* ``"beta"``: Yan & Hunt's (1999) beta function of the cardinal temperatures,
  ``r = ((T_max - T) / (T_max - T_opt)) * ((T - T_base) / (T_opt - T_base)) ** ((T_opt - T_base) / (T_max - T_opt))``
  (Yan, W. & Hunt, L. A. 1999. An equation for modelling the temperature response of plants using only the
  cardinal temperatures. Annals of Botany 84: 607-614, doi:10.1006/anbo.1999.0955).
* ``"broken_linear"``: linear from the base to the optimum and from the optimum to the maximum (the classic
  degree-day rule with a ceiling; McMaster & Wilhelm 1997, Agric. For. Meteorol. 87: 291-300,
  doi:10.1016/S0168-1923(97)00027-0, describe the degree-day methods).

*Effective days* are the sum over days of ``r(T_day)``: one effective day is a day at the optimum, so rates in a
parameter file stay "per day at the optimum". *Degree-days* are ``(T_opt - T_base) * r`` summed over days; with the
broken-linear response below the optimum they are the classic ``sum(max(0, T - T_base))``, so a rate per degree-day
``q`` is a rate per effective day ``q * (T_opt - T_base)``.

With ``time_unit = "degree_day"`` the file's times and rates are per degree-day instead: the engine then runs on
degree-days (effective days × (optimum − base)).

Growth on a thermal clock does not change the growth engine: :func:`grow_on_thermal_clock` runs
:func:`rootsim.grow` for the season's effective days (every time in the file - emergence days, intervals,
lifespans, the time step - is then in effective days) and maps each segment's ``birth_day`` back to the first
calendar time at which that much effective time had passed. Weather row ``day = d`` covers the calendar interval
``[d, d + 1)`` days after sowing, within which effective time accrues uniformly.
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np

from ..errors import RootsimError
from .weather import WeatherTable, read_weather_table

__all__ = ["beta_temperature_response", "broken_linear_temperature_response", "temperature_response",
           "daily_effective_days", "cumulative_effective_days", "calendar_days_from_effective_days",
           "degree_days", "thermal_run", "on_calendar", "grow_on_thermal_clock", "grow_for_spec",
           "weather_table_for_spec"]


def _check_cardinal(base_c: float, optimum_c: float, maximum_c: float) -> None:
    if not (base_c < optimum_c < maximum_c):
        raise RootsimError(f"cardinal temperatures must satisfy base < optimum < maximum "
                           f"(got {base_c:g}, {optimum_c:g}, {maximum_c:g} °C)")


def beta_temperature_response(temperature_c, *, base_c: float, optimum_c: float, maximum_c: float) -> np.ndarray:
    """Yan & Hunt (1999) beta response, 0 outside (base, maximum), 1.0 at the optimum.

    Parameters
    ----------
    temperature_c : array_like
        Temperatures (°C).
    base_c, optimum_c, maximum_c : float, keyword-only
        Cardinal temperatures, ``base < optimum < maximum``.
    """
    _check_cardinal(base_c, optimum_c, maximum_c)
    t = np.asarray(temperature_c, dtype=float)
    inside = (t > base_c) & (t < maximum_c)
    tt = np.where(inside, t, optimum_c)
    shape = (optimum_c - base_c) / (maximum_c - optimum_c)
    r = ((maximum_c - tt) / (maximum_c - optimum_c)) * ((tt - base_c) / (optimum_c - base_c)) ** shape
    return np.where(inside, r, 0.0)


def broken_linear_temperature_response(temperature_c, *, base_c: float, optimum_c: float,
                                       maximum_c: float) -> np.ndarray:
    """Linear rise from 0 at the base to 1.0 at the optimum, linear fall to 0 at the maximum."""
    _check_cardinal(base_c, optimum_c, maximum_c)
    t = np.asarray(temperature_c, dtype=float)
    rise = (t - base_c) / (optimum_c - base_c)
    fall = (maximum_c - t) / (maximum_c - optimum_c)
    return np.clip(np.where(t <= optimum_c, rise, fall), 0.0, 1.0)


_RESPONSES = {"beta": beta_temperature_response, "broken_linear": broken_linear_temperature_response}


def temperature_response(temperature_c, *, shape: str, base_c: float, optimum_c: float,
                         maximum_c: float) -> np.ndarray:
    """The named response (``"beta"`` or ``"broken_linear"``) at ``temperature_c``."""
    if shape not in _RESPONSES:
        raise RootsimError(f"temperature response {shape!r} is not known (allowed: {', '.join(_RESPONSES)})")
    return _RESPONSES[shape](temperature_c, base_c=base_c, optimum_c=optimum_c, maximum_c=maximum_c)


def daily_effective_days(weather: WeatherTable, *, shape: str, base_c: float, optimum_c: float, maximum_c: float,
                         temperature_column: str = "mean_air_temperature_c") -> np.ndarray:
    """Effective days accrued on each day of the table, shape (n_days,), each in [0, 1]."""
    return temperature_response(weather.column(temperature_column), shape=shape, base_c=base_c,
                                optimum_c=optimum_c, maximum_c=maximum_c)


def degree_days(weather: WeatherTable, *, shape: str = "broken_linear", base_c: float, optimum_c: float,
                maximum_c: float, temperature_column: str = "mean_air_temperature_c") -> np.ndarray:
    """Degree-days (°C·day) of each day: ``(optimum_c - base_c) * r(T)``, shape (n_days,)."""
    return (optimum_c - base_c) * daily_effective_days(weather, shape=shape, base_c=base_c, optimum_c=optimum_c,
                                                       maximum_c=maximum_c, temperature_column=temperature_column)


def cumulative_effective_days(daily: np.ndarray, calendar_days) -> np.ndarray:
    """Effective time passed after ``calendar_days`` (array) since the table's first day.

    ``daily[k]`` accrues uniformly over calendar ``[k, k + 1)`` (days counted from the table's first row).
    """
    daily = np.asarray(daily, float)
    cum = np.concatenate([[0.0], np.cumsum(daily)])
    t = np.asarray(calendar_days, float)
    return np.interp(t, np.arange(cum.size, dtype=float), cum)


def calendar_days_from_effective_days(daily: np.ndarray, effective_days) -> np.ndarray:
    """The first calendar time (days since the table's first row) at which ``effective_days`` had passed.

    Inverse of :func:`cumulative_effective_days`; days with no development (response 0) are skipped, so a time
    falls at the start of the day it is reached in.
    """
    daily = np.asarray(daily, float)
    cum = np.concatenate([[0.0], np.cumsum(daily)])
    e = np.asarray(effective_days, float)
    idx = np.searchsorted(cum, e, side="left")
    k = np.clip(idx - 1, 0, daily.size - 1)
    rate = np.where(daily[k] > 0, daily[k], 1.0)
    t = k + (e - cum[k]) / rate
    return np.where(idx <= 0, 0.0, np.where(idx > daily.size, float(daily.size), t))


def weather_table_for_spec(spec) -> WeatherTable:
    """Read the spec's ``[weather] file`` (relative to the parameter file); one-line error naming the key."""
    from ..errors import SpecError

    if spec.weather is None:
        raise SpecError(spec.source, "weather.file", "a thermal clock needs a weather table",
                        "[weather] file = \"season.csv\"")
    path = resolve_input_path(spec.source, spec.weather.file)
    try:
        return read_weather_table(path)
    except RootsimError as exc:
        raise SpecError(spec.source, "weather.file", exc.cli_message()) from None


def resolve_input_path(spec_source: str, name: str | os.PathLike) -> Path:
    """An input file named in a parameter file: relative paths are relative to the parameter file's folder."""
    path = Path(name)
    if path.is_absolute() or spec_source.startswith("<"):
        return path
    return Path(spec_source).parent / path


def thermal_run(spec, weather: WeatherTable):
    """The spec that grows ``spec`` on effective days from ``weather``, with what maps it back to the calendar.

    Returns
    -------
    thermal_spec : Spec
        ``spec`` with ``run.duration_days`` (and the step, if longer) in the file's time unit: effective days, or
        degree-days when ``development.time_unit = "degree_day"``.
    clock : dict
        ``daily`` (effective days accrued on each calendar day from day 0, ndarray), ``unit`` (the file's time
        unit in effective days: 1, or optimum - base for degree-days), ``effective_days`` of the run and its
        ``time_step`` (for :func:`thermal_metadata`).
    """
    from pydantic import ValidationError

    from ..errors import SpecError
    from ..spec import Run, _check_run

    dev = spec.development
    duration = spec.run.duration_days
    weather.covering(0, duration, what=f"a {duration:g}-day run")
    first = -weather.first_day  # row of day 0
    daily = daily_effective_days(weather, shape=dev.temperature_response, base_c=dev.base_temperature_c,
                                 optimum_c=dev.optimum_temperature_c, maximum_c=dev.maximum_temperature_c,
                                 temperature_column=dev.temperature_column)[first:]
    effective = float(cumulative_effective_days(daily, duration))
    unit = dev.optimum_temperature_c - dev.base_temperature_c if dev.time_unit == "degree_day" else 1.0
    if effective <= 0:
        raise RootsimError(f"{weather.source}: no development in the run: every day is at or below "
                           f"{dev.base_temperature_c:g} °C or at or above {dev.maximum_temperature_c:g} °C "
                           "(allowed: a season with some days between the base and maximum temperatures)")
    thermal_duration = effective * unit  # in the file's time unit
    step = min(spec.run.time_step_days, thermal_duration)
    try:
        run = Run(**{**spec.run.model_dump(), "duration_days": thermal_duration, "time_step_days": step})
    except ValidationError:
        raise SpecError(spec.source, "run.duration_days", f"the season gives {thermal_duration:.4g} "
                        f"{dev.time_unit.replace('_', ' ')}s of development", "at most 3650 in the file's time unit") \
            from None
    _check_run(run, spec.source)
    return spec.model_copy(update={"run": run}), {"daily": daily, "unit": unit, "effective_days": effective,
                                                  "time_step": step, "weather_source": weather.source}


def on_calendar(system, spec, clock: dict):
    """A system grown on the thermal clock (:func:`thermal_run`) with ``birth_day`` (and ``death_day``) in
    calendar days since sowing and ``metadata["development"]`` recording the clock."""
    from ..rootsystem import RootSystem

    dev = spec.development
    daily, unit = clock["daily"], clock["unit"]
    columns = {name: system[name] for name in system.columns}
    for name in ("birth_day", "death_day"):
        if name in columns:
            values = np.asarray(columns[name], dtype=np.float64)
            finite = np.isfinite(values)
            converted = values.copy()
            converted[finite] = calendar_days_from_effective_days(daily, values[finite] / unit)
            columns[name] = converted
    metadata = dict(system.metadata)
    metadata["run"] = {**metadata.get("run", {}), "duration_days": spec.run.duration_days}
    metadata["development"] = {
        "clock": "thermal", "weather_file": clock["weather_source"], "temperature_response": dev.temperature_response,
        "base_temperature_c": dev.base_temperature_c, "optimum_temperature_c": dev.optimum_temperature_c,
        "maximum_temperature_c": dev.maximum_temperature_c, "effective_days": clock["effective_days"],
        "time_unit": dev.time_unit, "time_step": clock["time_step"],
        "degree_days": clock["effective_days"] * (dev.optimum_temperature_c - dev.base_temperature_c),
    }
    return RootSystem(columns, metadata, validate=False)


def grow_on_thermal_clock(spec, weather: WeatherTable, *, progress: bool | None = None,
                          keep_dead_roots: bool = False):
    """Grow ``spec`` on effective days from ``weather`` and give ``birth_day`` in calendar days.

    Parameters
    ----------
    spec : Spec
        ``run.duration_days`` is the calendar length of the run; every other time in the spec is in effective
        days (days at the optimum temperature). ``spec.development`` holds the cardinal temperatures.
    weather : WeatherTable
        Must cover days 0 .. ceil(duration) - 1 after sowing.
    keep_dead_roots : bool
        As :func:`rootsim.growth.engine.grow` (``death_day`` also in calendar days).

    Returns
    -------
    RootSystem
        ``birth_day`` in calendar days since sowing; ``metadata["development"]`` records the clock, the
        effective days and degree-days of the run.
    """
    from ..growth import grow

    thermal_spec, clock = thermal_run(spec, weather)
    system = grow(thermal_spec, progress=progress, keep_dead_roots=keep_dead_roots)
    return on_calendar(system, spec, clock)


def grow_for_spec(spec, *, seed: int | None = None, days: float | None = None, step_days: float | None = None,
                  max_segments: int | None = None, progress: bool | None = None, keep_dead_roots: bool = False):
    """Grow ``spec`` on the clock its ``[development]`` section names (calendar by default).

    The one entry point for growing a parameter file (``rootsim.grow``, ``rootsim grow``, studies, batches and
    fits all use it). ``seed``, ``days``, ``step_days`` and ``max_segments`` override ``run.seed``,
    ``run.duration_days`` (calendar days), ``run.time_step_days`` and ``run.max_segments``.
    """
    from ..growth import grow

    if any(v is not None for v in (seed, days, step_days, max_segments)):
        spec = spec.with_overrides(duration_days=days, time_step_days=step_days, seed=seed, max_segments=max_segments)
    dev = getattr(spec, "development", None)
    if dev is None or dev.clock == "calendar":
        return grow(spec, progress=progress, keep_dead_roots=keep_dead_roots)
    return grow_on_thermal_clock(spec, weather_table_for_spec(spec), progress=progress,
                                 keep_dead_roots=keep_dead_roots)
