"""A season of soil water under a grown root system: daily Richards steps with root water uptake.

One growth run is coupled day by day with the soil: each day the root length per cell is that of the segments
born by the end of the day (``birth_day``), so the sink follows the growing root system. The coupling is one-way:
dry soil does not yet slow growth or steer roots (that needs the soil fields and the compiled engine). Segments
of roots that died (``lifespan_days``) are absent from the final table and so are not counted before death.
Soil evaporation is not modelled: rain and irrigation enter at the surface, transpiration leaves by the roots.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..analysis.profile import profile_area
from .errors import CaptureError
from .nitrate import KG_PER_HA_TO_MG_PER_CM2, nitrate_step
from .reference_et import hargreaves_reference_evapotranspiration_mm
from .richards import advance_water
from .soil_file import SoilWaterSetup
from .uptake import root_length_by_day, uptake_sink

__all__ = ["run_water_season", "potential_transpiration_mm", "capture_traits"]


def potential_transpiration_mm(weather, *, crop_coefficient: float, latitude_deg: float | None = None,
                               first_day_of_year: int | None = None, soil_source: str = "<soil>") -> np.ndarray:
    """Daily potential transpiration, mm, shape (n_days,).

    In order of preference: the weather column ``potential_transpiration_mm``; else crop coefficient x the column
    ``reference_evapotranspiration_mm`` (FAO-56, Allen et al. 1998, single crop coefficient); else crop coefficient x
    Hargreaves & Samani (1985) reference ET from ``min_air_temperature_c`` and ``max_air_temperature_c`` (FAO-56
    eq. 52, see :mod:`rootsim.capture.reference_et`), which needs ``latitude_deg`` and ``first_day_of_year`` (the
    calendar day of year of the table's first row; later rows count on, wrapping after day 365). A one-line
    :class:`CaptureError` names what is missing.
    """
    if weather.has("potential_transpiration_mm"):
        return weather.column("potential_transpiration_mm")
    if weather.has("reference_evapotranspiration_mm"):
        return crop_coefficient * weather.column("reference_evapotranspiration_mm")
    missing = [c for c in ("min_air_temperature_c", "max_air_temperature_c") if not weather.has(c)]
    if missing:
        raise CaptureError(f"{weather.source}: columns: neither 'potential_transpiration_mm' nor "
                           f"'reference_evapotranspiration_mm' is present, and {' and '.join(map(repr, missing))} "
                           "for Hargreaves reference ET is missing (allowed: one of the two, mm/day, or both "
                           "min_air_temperature_c and max_air_temperature_c)")
    if latitude_deg is None or first_day_of_year is None:
        key = "latitude_deg" if latitude_deg is None else "first_day_of_year"
        raise CaptureError(f"{soil_source}: transpiration.{key}: missing, needed for Hargreaves reference ET "
                           f"because {weather.source} has no potential_transpiration_mm or "
                           "reference_evapotranspiration_mm (allowed: latitude_deg -90..90 and first_day_of_year "
                           "1..366 in [transpiration])")
    day_of_year = (first_day_of_year - 1 + (weather.day - weather.first_day)) % 365 + 1
    reference = hargreaves_reference_evapotranspiration_mm(
        weather.column("min_air_temperature_c"), weather.column("max_air_temperature_c"),
        latitude_deg=latitude_deg, day_of_year=day_of_year)
    return crop_coefficient * reference


def run_water_season(system, setup: SoilWaterSetup, weather, *, ground_area_cm2: float | None = None,
                     last_day: int | None = None) -> dict:
    """Simulate soil water day by day under ``system`` over the weather table's days.

    Parameters
    ----------
    system : RootSystem, DataFrame or mapping
        Grown segment table (``z0 z1 length_cm birth_day``).
    setup : SoilWaterSetup
        Column, horizons and uptake parameters (:func:`rootsim.capture.read_soil_water_file`).
    weather : WeatherTable
        Daily rain_mm, irrigation_mm (missing: 0) and potential transpiration (or reference ET).
    ground_area_cm2 : float, optional
        Ground area of the roots (default: the stand's).
    last_day : int, optional
        Stop after this day (default: the last day of the table).

    Returns
    -------
    dict
        ``daily`` (DataFrame, one row per day, mm), ``layers`` (DataFrame, one row per day and cell) and
        ``traits`` (dict, see :func:`capture_traits`).
    """
    area = float(ground_area_cm2) if ground_area_cm2 is not None else profile_area(system)
    days = weather.day if last_day is None else weather.day[weather.day <= last_day]
    if days.size == 0:
        raise CaptureError(f"{weather.source}: day: no day up to {last_day} (allowed: a table covering the run)")
    n_days, n_cells, cell = days.size, setup.n_cells, setup.cell_cm
    rain = weather.column("rain_mm", default=0.0)[:n_days]
    irrigation = weather.column("irrigation_mm", default=0.0)[:n_days]
    potential = potential_transpiration_mm(weather, crop_coefficient=setup.crop_coefficient,
                                           latitude_deg=setup.latitude_deg,
                                           first_day_of_year=setup.first_day_of_year,
                                           soil_source=setup.source)[:n_days]
    roots = root_length_by_day(system, cell_cm=cell, n_cells=n_cells, first_day=int(days[0]), n_days=n_days)
    head = setup.initial_head_cm.astype(np.float64).copy()
    soil = setup.soil
    dt = 0.05
    fertilizer = weather.column("nitrate_fertilizer_kg_n_per_ha", default=0.0)[:n_days]
    nitrate = setup.nitrate
    mass = nitrate.initial_nitrate_n_mg_per_l * 1e-3 * soil.water_content(head) * cell   # mg N / cm²
    initial_nitrate = float(mass.sum())
    nitrate_rows = []
    rows, theta_rows, head_rows, uptake_rows = [], [], [], []
    nitrate_cells, nitrate_uptake_cells = [], []   # mg N / cm² per cell at the end of each day, and taken up
    for j in range(n_days):
        before = float(soil.water_content(head).sum()) * cell
        tp_cm = potential[j] / 10.0
        root_length = roots[j]

        def sink(h, root_length=root_length, tp_cm=tp_cm):
            return uptake_sink(h, root_length, parameters=setup.feddes, potential_cm_per_day=tp_cm, cell_cm=cell,
                               ground_area_cm2=area)

        mass[0] += fertilizer[j] * KG_PER_HA_TO_MG_PER_CM2
        nitrate_before = float(mass.sum())
        day_n = {"uptake": np.zeros(n_cells), "leached": 0.0}

        def on_step(step_dt, theta_before, step, root_length=root_length, day_n=day_n):
            nonlocal mass
            mass, taken, leached = nitrate_step(mass, step_dt, theta_old=theta_before, theta_new=step.water_content,
                                                face_flux_cm_per_day=step.face_flux_cm_per_day,
                                                saturated=soil.saturated, cell_cm=cell, root_length_cm=root_length,
                                                ground_area_cm2=area, parameters=nitrate)
            day_n["uptake"] += taken
            day_n["leached"] += leached

        head, totals, dt, uptake = advance_water(head, 1.0, soil=soil, cell_cm=cell, on_step=on_step,
                                                 supply_cm_per_day=(rain[j] + irrigation[j]) / 10.0, sink=sink,
                                                 bottom=setup.bottom, dt_days=dt, max_dt_days=0.25,
                                                 sink_floor_head_cm=setup.feddes.wilting_head_cm)
        after = float(soil.water_content(head).sum()) * cell
        error = (after - before) - (totals.infiltration_cm - totals.drainage_cm - totals.uptake_cm)
        rows.append((int(days[j]), rain[j], irrigation[j], potential[j], 10 * totals.uptake_cm,
                     10 * totals.infiltration_cm, 10 * totals.runoff_cm, 10 * totals.drainage_cm, 10 * after,
                     10 * error, float(root_length.sum()), totals.steps))
        n_error = (float(mass.sum()) - nitrate_before) + float(day_n["uptake"].sum()) + day_n["leached"]
        to_kg = 1.0 / KG_PER_HA_TO_MG_PER_CM2
        nitrate_rows.append((fertilizer[j], to_kg * float(day_n["uptake"].sum()), to_kg * day_n["leached"],
                             to_kg * float(mass.sum()), to_kg * n_error))
        theta_rows.append(soil.water_content(head))
        head_rows.append(head.copy())
        uptake_rows.append(10.0 * uptake)
        nitrate_cells.append(mass.copy())
        nitrate_uptake_cells.append(day_n["uptake"].copy())
    daily = pd.DataFrame(rows, columns=["day", "rain_mm", "irrigation_mm", "potential_transpiration_mm",
                                        "actual_transpiration_mm", "infiltration_mm", "runoff_mm", "drainage_mm",
                                        "soil_water_storage_mm", "water_balance_error_mm", "root_length_cm",
                                        "solver_steps"])
    nitrate_frame = pd.DataFrame(nitrate_rows, columns=["nitrate_fertilizer_kg_n_per_ha", "nitrate_uptake_kg_n_per_ha",
                                                        "nitrate_leached_kg_n_per_ha", "nitrate_storage_kg_n_per_ha",
                                                        "nitrate_balance_error_kg_n_per_ha"])
    daily = pd.concat([daily, nitrate_frame], axis=1)
    daily.attrs["initial_nitrate_kg_n_per_ha"] = initial_nitrate / KG_PER_HA_TO_MG_PER_CM2
    top = np.arange(n_cells) * cell
    layers = pd.DataFrame({
        "day": np.repeat(days, n_cells),
        "depth_top_cm": np.tile(top, n_days),
        "depth_bottom_cm": np.tile(top + cell, n_days),
        "water_content": np.concatenate(theta_rows),
        "pressure_head_cm": np.concatenate(head_rows),
        "water_uptake_mm": np.concatenate(uptake_rows),
        "root_length_cm": roots.ravel(),
    })
    layers = add_nitrate_columns(layers, np.concatenate(nitrate_cells), np.concatenate(nitrate_uptake_cells),
                                 cell_cm=cell)
    return {"daily": daily, "layers": layers,
            "traits": capture_traits(daily, layers, setup=setup, ground_area_cm2=area)}


def add_nitrate_columns(layers: pd.DataFrame, mass_mg_per_cm2: np.ndarray, uptake_mg_per_cm2: np.ndarray, *,
                        cell_cm: float) -> pd.DataFrame:
    """The layers table with nitrate per cell and day: amount, concentration and uptake.

    Parameters
    ----------
    layers : DataFrame, shape (n_days * n_cells, ...)
        Rows day-major, cells from the surface down, with ``water_content``.
    mass_mg_per_cm2, uptake_mg_per_cm2 : ndarray, shape (n_days * n_cells,)
        Nitrate-N in each cell at the end of the day and taken up from it during the day, mg N per cm² of ground.

    Returns
    -------
    DataFrame
        ``layers`` plus ``nitrate_n_kg_per_ha`` (so a day's cells sum to the daily table's
        ``nitrate_storage_kg_n_per_ha``), ``nitrate_n_mg_per_l`` (in the soil solution: amount / (theta dz))
        and ``nitrate_uptake_kg_n_per_ha``.
    """
    to_kg = 1.0 / KG_PER_HA_TO_MG_PER_CM2
    theta = layers["water_content"].to_numpy()
    return layers.assign(nitrate_n_kg_per_ha=to_kg * mass_mg_per_cm2,
                         nitrate_n_mg_per_l=1e3 * mass_mg_per_cm2 / (theta * cell_cm),
                         nitrate_uptake_kg_n_per_ha=to_kg * uptake_mg_per_cm2)


def capture_traits(daily: pd.DataFrame, layers: pd.DataFrame, *, setup: SoilWaterSetup,
                   ground_area_cm2: float) -> dict:
    """Season traits: transpiration, water from below ``deep_water_below_cm``, stress days, drainage, balance."""
    potential = daily["potential_transpiration_mm"].to_numpy()
    actual = daily["actual_transpiration_mm"].to_numpy()
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = np.where(potential > 0, actual / np.where(potential > 0, potential, 1.0), 1.0)
    deep = layers["depth_top_cm"].to_numpy() >= setup.deep_water_below_cm - 1e-9
    traits = {
        "days": int(len(daily)),
        "ground_area_cm2": float(ground_area_cm2),
        "seasonal_potential_transpiration_mm": float(potential.sum()),
        "seasonal_transpiration_mm": float(actual.sum()),
        "deep_water_below_cm": float(setup.deep_water_below_cm),
        "water_uptake_below_depth_mm": float(layers["water_uptake_mm"].to_numpy()[deep].sum()),
        "stress_ratio_below": float(setup.stress_ratio_below),
        "days_of_water_stress": int(((ratio < setup.stress_ratio_below) & (potential > 0)).sum()),
        "rain_and_irrigation_mm": float((daily["rain_mm"] + daily["irrigation_mm"]).sum()),
        "runoff_mm": float(daily["runoff_mm"].sum()),
        "drainage_mm": float(daily["drainage_mm"].sum()),
        "largest_daily_water_balance_error_mm": float(np.abs(daily["water_balance_error_mm"]).max()),
    }
    if "nitrate_uptake_kg_n_per_ha" in daily:
        applied = float(daily["nitrate_fertilizer_kg_n_per_ha"].sum())
        taken = float(daily["nitrate_uptake_kg_n_per_ha"].sum())
        available = applied + float(daily.attrs.get("initial_nitrate_kg_n_per_ha", 0.0))
        traits.update({
            "nitrate_applied_kg_n_per_ha": applied,
            "nitrate_uptake_kg_n_per_ha": taken,
            "nitrate_leached_kg_n_per_ha": float(daily["nitrate_leached_kg_n_per_ha"].sum()),
            "nitrate_uptake_fraction_of_applied": taken / applied if applied > 0 else None,
            "nitrate_uptake_fraction_of_available": taken / available if available > 0 else None,
            "largest_daily_nitrate_balance_error_kg_n_per_ha": float(
                np.abs(daily["nitrate_balance_error_kg_n_per_ha"]).max()),
        })
    return traits
