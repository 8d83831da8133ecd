"""A season of soil water under a grown root system: daily Richards steps with root water uptake.

One growth run is coupled day by day with the soil: each day the root length per cell is that of the segments
born by the end of the day (``birth_day``), so the sink follows the growing root system. Here the coupling is
one-way; :mod:`rootsim.capture.coupled` grows the stand alongside, with the column's water feeding the soil fields
the roots respond to. Segments of roots that died (``lifespan_days``) are absent from the final table and so are
not counted before death. Rain and irrigation enter at the surface, transpiration leaves by the roots, and with
``[evaporation]`` in the soil-water file the soil evaporates by FAO-56's two stages
(:mod:`rootsim.capture.evaporation`) from the top cells.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..analysis.profile import profile_area
from .errors import CaptureError
from .evaporation import (depletion_after_day, evaporation_coefficient, evaporation_reduction,
                          evaporation_weights)
from .nitrate import KG_PER_HA_TO_MG_PER_CM2, nitrate_step
from .reference_et import hargreaves_reference_evapotranspiration_mm
from .richards import advance_water
from .soil_file import SoilWaterSetup
from .uptake import root_length_by_day, uptake_sink

__all__ = ["run_water_season", "potential_transpiration_mm", "capture_traits", "WaterSeason", "season_days",
           "reference_evapotranspiration_for_evaporation_mm", "evaporation_forcing", "water_forcing",
           "evaporation_demand_cm"]


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


#: Columns of the daily table of a season (water, then nitrate, then soil evaporation when it is modelled); the 1D
#: and the 3D columns write the same.
DAILY_WATER_COLUMNS = ["day", "rain_mm", "irrigation_mm", "potential_transpiration_mm", "actual_transpiration_mm",
                       "infiltration_mm", "runoff_mm", "drainage_mm", "soil_water_storage_mm",
                       "water_balance_error_mm", "root_length_cm", "solver_steps"]
DAILY_NITRATE_COLUMNS = ["nitrate_fertilizer_kg_n_per_ha", "nitrate_uptake_kg_n_per_ha",
                         "nitrate_leached_kg_n_per_ha", "nitrate_storage_kg_n_per_ha",
                         "nitrate_balance_error_kg_n_per_ha"]
DAILY_EVAPORATION_COLUMNS = ["reference_evapotranspiration_mm", "crop_cover_fraction",
                             "evaporation_reduction_coefficient", "soil_evaporation_demand_mm", "soil_evaporation_mm",
                             "evaporable_water_depletion_mm"]


def reference_evapotranspiration_for_evaporation_mm(weather, setup: SoilWaterSetup) -> np.ndarray:
    """Daily reference ET (mm) that drives soil evaporation: the weather column
    ``reference_evapotranspiration_mm``; else Hargreaves & Samani (FAO-56 eq. 52) from air temperatures; else
    ``potential_transpiration_mm`` / crop coefficient (the coefficient that turned reference ET into
    transpiration). A one-line :class:`CaptureError` when none can be had."""
    if weather.has("reference_evapotranspiration_mm"):
        return weather.column("reference_evapotranspiration_mm")
    if weather.has("min_air_temperature_c") and weather.has("max_air_temperature_c") \
            and setup.latitude_deg is not None and setup.first_day_of_year is not None:
        return _hargreaves(weather, setup)
    if weather.has("potential_transpiration_mm") and setup.crop_coefficient > 0:
        return weather.column("potential_transpiration_mm") / setup.crop_coefficient
    raise CaptureError(f"{setup.source}: evaporation: needs reference ET (allowed: a weather column "
                       "reference_evapotranspiration_mm, air temperatures with latitude_deg and first_day_of_year, or "
                       "potential_transpiration_mm with transpiration.crop_coefficient > 0)")


def water_forcing(weather, setup: SoilWaterSetup, n_days: int) -> tuple:
    """(rain, irrigation, potential transpiration) in mm per day of the season from the weather table
    (rain and irrigation 0 where the table has no column; :func:`potential_transpiration_mm`)."""
    rain = weather.column("rain_mm", default=0.0)[:n_days]
    irrigation = weather.column("irrigation_mm", default=0.0)[:n_days]
    potential = potential_transpiration_mm(weather, crop_coefficient=setup.crop_coefficient,
                                           latitude_deg=setup.latitude_deg, first_day_of_year=setup.first_day_of_year,
                                           soil_source=setup.source)[:n_days]
    return rain, irrigation, potential


def evaporation_forcing(weather, setup: SoilWaterSetup, n_days: int) -> tuple:
    """(reference ET in mm, crop cover fraction) per day of the season for soil evaporation: reference ET by
    :func:`reference_evapotranspiration_for_evaporation_mm`, cover from the weather column
    ``crop_cover_fraction`` or the soil file's ``[evaporation] crop_cover_fraction``. A one-line
    :class:`CaptureError` for a cover outside [0, 1)."""
    reference = reference_evapotranspiration_for_evaporation_mm(weather, setup)[:n_days]
    cover = (weather.column("crop_cover_fraction")[:n_days] if weather.has("crop_cover_fraction")
             else np.full(n_days, setup.evaporation.crop_cover_fraction))
    if not (np.all(cover >= 0.0) and np.all(cover < 1.0)):
        raise CaptureError(f"{weather.source}: crop_cover_fraction: a value outside [0, 1) "
                           "(allowed: 0 <= fraction < 1)")
    return reference, cover


def evaporation_demand_cm(parameters, depletion_mm: float, *, crop_coefficient: float, cover_fraction: float,
                          reference_mm: float) -> tuple:
    """(K_r, soil evaporation demand in cm/day) of one day by FAO-56's two stages (Allen et al. 1998, ch. 7;
    :mod:`rootsim.capture.evaporation`): ``parameters`` the soil file's ``[evaporation]``, ``depletion_mm`` the
    evaporable water already gone, ``reference_mm`` the day's reference ET."""
    reduction = float(evaporation_reduction(depletion_mm, readily_mm=parameters.readily_evaporable_water_mm,
                                            total_mm=parameters.total_evaporable_water_mm))
    coefficient = float(evaporation_coefficient(reduction, basal_crop_coefficient=crop_coefficient,
                                                maximum_crop_coefficient=parameters.maximum_crop_coefficient,
                                                cover_fraction=cover_fraction))
    return reduction, max(coefficient, 0.0) * reference_mm / 10.0


def _hargreaves(weather, setup):
    day_of_year = (setup.first_day_of_year - 1 + (weather.day - weather.first_day)) % 365 + 1
    return hargreaves_reference_evapotranspiration_mm(
        weather.column("min_air_temperature_c"), weather.column("max_air_temperature_c"),
        latitude_deg=setup.latitude_deg, day_of_year=day_of_year)


class WaterSeason:
    """The soil column over a season, advanced one day at a time (:meth:`advance_day`).

    Each day: fertilizer enters the top cell, then the Richards column (with Feddes uptake spread by the
    root length given for the day, soil evaporation when ``setup.evaporation`` is set, and nitrate transport in
    lockstep) advances one day. :func:`run_water_season` drives it with the root length of a grown table;
    :mod:`rootsim.capture.coupled` with the root length of a stand growing alongside.

    Parameters
    ----------
    setup : SoilWaterSetup
    weather : WeatherTable
    ground_area_cm2 : float
    days : ndarray of int, shape (n_days,)
        The weather days to run (the table's first rows).
    """

    def __init__(self, setup: SoilWaterSetup, weather, *, ground_area_cm2: float, days: np.ndarray):
        self.setup = setup
        self.area = float(ground_area_cm2)
        self.days = days
        n_days = days.size
        self.rain, self.irrigation, self.potential = water_forcing(weather, setup, n_days)
        self.head = setup.initial_head_cm.astype(np.float64).copy()
        self.dt = 0.05
        self.fertilizer = weather.column("nitrate_fertilizer_kg_n_per_ha", default=0.0)[:n_days]
        soil, cell = setup.soil, setup.cell_cm
        self.mass = setup.nitrate.initial_nitrate_n_mg_per_l * 1e-3 * soil.water_content(self.head) * cell
        self.initial_nitrate = float(self.mass.sum())
        self.evaporation = setup.evaporation
        if self.evaporation is not None:
            self.reference, self.cover = evaporation_forcing(weather, setup, n_days)
            self.depletion = self.evaporation.initial_depletion_mm
            self.weights = evaporation_weights(cell_cm=cell, n_cells=setup.n_cells,
                                               layer_cm=self.evaporation.evaporating_layer_cm)
        self.rows, self.nitrate_rows, self.evaporation_rows = [], [], []
        self.theta_rows, self.head_rows, self.uptake_rows, self.root_rows = [], [], [], []
        self.nitrate_cells, self.nitrate_uptake_cells = [], []  # mg N / cm² per cell at the end of each day, taken up

    @property
    def water_content(self) -> np.ndarray:
        """Volumetric water content per cell now, shape (n_cells,)."""
        return self.setup.soil.water_content(self.head)

    def _evaporation_demand_cm(self, j: int) -> tuple:
        """(K_r, demand in cm/day) of day ``j`` (FAO-56, :mod:`rootsim.capture.evaporation`)."""
        return evaporation_demand_cm(self.evaporation, self.depletion, crop_coefficient=self.setup.crop_coefficient,
                                     cover_fraction=float(self.cover[j]), reference_mm=float(self.reference[j]))

    def advance_day(self, j: int, root_length: np.ndarray) -> None:
        """Advance the column over day ``j`` with ``root_length`` (cm per cell over the ground area)."""
        setup, soil, cell, area = self.setup, self.setup.soil, self.setup.cell_cm, self.area
        n_cells = setup.n_cells
        nitrate = setup.nitrate
        head = self.head
        before = float(soil.water_content(head).sum()) * cell
        tp_cm = self.potential[j] / 10.0
        evaporating = self.evaporation is not None
        if evaporating:
            reduction, demand_cm = self._evaporation_demand_cm(j)
            evaporation_sink = demand_cm * self.weights / cell
            requested = {"evaporation": evaporation_sink, "total": None}
            evaporated = np.zeros(n_cells)

            def sink(h, root_length=root_length, tp_cm=tp_cm):
                total = uptake_sink(h, root_length, parameters=setup.feddes, potential_cm_per_day=tp_cm,
                                    cell_cm=cell, ground_area_cm2=area) + evaporation_sink
                requested["total"] = total
                return total
        else:
            def sink(h, root_length=root_length, tp_cm=tp_cm):
                return uptake_sink(h, root_length, parameters=setup.feddes, potential_cm_per_day=tp_cm,
                                   cell_cm=cell, ground_area_cm2=area)

        self.mass[0] += self.fertilizer[j] * KG_PER_HA_TO_MG_PER_CM2
        nitrate_before = float(self.mass.sum())
        day_n = {"uptake": np.zeros(n_cells), "leached": 0.0}

        def on_step(step_dt, theta_before, step, root_length=root_length, day_n=day_n):
            self.mass, taken, leached = nitrate_step(self.mass, step_dt, theta_old=theta_before,
                                                     theta_new=step.water_content,
                                                     face_flux_cm_per_day=step.face_flux_cm_per_day,
                                                     saturated=soil.saturated, cell_cm=cell,
                                                     root_length_cm=root_length, ground_area_cm2=area,
                                                     parameters=nitrate)
            day_n["uptake"] += taken
            day_n["leached"] += leached
            if evaporating:  # the evaporation share of the sink actually applied (after the wilting floor)
                total = requested["total"]
                with np.errstate(invalid="ignore", divide="ignore"):
                    share = np.where(total > 0, requested["evaporation"] / np.where(total > 0, total, 1.0), 0.0)
                evaporated[:] += share * step.sink_per_day * cell * step_dt

        head, totals, self.dt, uptake = advance_water(head, 1.0, soil=soil, cell_cm=cell, on_step=on_step,
                                                      supply_cm_per_day=(self.rain[j] + self.irrigation[j]) / 10.0,
                                                      sink=sink, bottom=setup.bottom, dt_days=self.dt,
                                                      max_dt_days=0.25,
                                                      sink_floor_head_cm=setup.feddes.wilting_head_cm)
        self.head = head
        after = float(soil.water_content(head).sum()) * cell
        error = (after - before) - (totals.infiltration_cm - totals.drainage_cm - totals.uptake_cm)
        evaporation_cm = float(evaporated.sum()) if evaporating else 0.0
        transpiration_cm = totals.uptake_cm - evaporation_cm
        self.rows.append((int(self.days[j]), self.rain[j], self.irrigation[j], self.potential[j],
                          10 * transpiration_cm, 10 * totals.infiltration_cm, 10 * totals.runoff_cm,
                          10 * totals.drainage_cm, 10 * after, 10 * error, float(root_length.sum()), totals.steps))
        n_error = (float(self.mass.sum()) - nitrate_before) + float(day_n["uptake"].sum()) + day_n["leached"]
        to_kg = 1.0 / KG_PER_HA_TO_MG_PER_CM2
        self.nitrate_rows.append((self.fertilizer[j], to_kg * float(day_n["uptake"].sum()),
                                  to_kg * day_n["leached"], to_kg * float(self.mass.sum()), to_kg * n_error))
        if evaporating:
            p = self.evaporation
            self.evaporation_rows.append((float(self.reference[j]), float(self.cover[j]), reduction,
                                          10 * demand_cm, 10 * evaporation_cm, self.depletion))
            self.depletion = depletion_after_day(self.depletion, infiltration_mm=10 * totals.infiltration_cm,
                                                 evaporation_mm=10 * evaporation_cm,
                                                 cover_fraction=float(self.cover[j]),
                                                 total_mm=p.total_evaporable_water_mm)
        else:
            self.evaporation_rows.append((np.nan, np.nan, np.nan, 0.0, 0.0, np.nan))
        self.theta_rows.append(soil.water_content(head))
        self.head_rows.append(head.copy())
        uptake_cells = 10.0 * uptake
        if evaporating:
            uptake_cells = uptake_cells - 10.0 * evaporated
        self.uptake_rows.append(uptake_cells)
        self.root_rows.append(np.array(root_length, dtype=np.float64))
        self.nitrate_cells.append(self.mass.copy())
        self.nitrate_uptake_cells.append(day_n["uptake"].copy())

    def result(self) -> dict:
        """``daily``, ``layers`` and ``traits`` of the days run so far (see :func:`run_water_season`)."""
        n_days = len(self.rows)
        days = self.days[:n_days]
        n_cells, cell = self.setup.n_cells, self.setup.cell_cm
        daily = pd.DataFrame(self.rows, columns=DAILY_WATER_COLUMNS)
        nitrate_frame = pd.DataFrame(self.nitrate_rows, columns=DAILY_NITRATE_COLUMNS)
        evaporation_frame = pd.DataFrame(self.evaporation_rows, columns=DAILY_EVAPORATION_COLUMNS)
        daily = pd.concat([daily, nitrate_frame, evaporation_frame], axis=1)
        daily.attrs["initial_nitrate_kg_n_per_ha"] = self.initial_nitrate / KG_PER_HA_TO_MG_PER_CM2
        top = np.arange(n_cells) * cell
        layers = pd.DataFrame({
            "day": np.repeat(days, n_cells),
            "depth_top_cm": np.tile(top, n_days),
            "depth_bottom_cm": np.tile(top + cell, n_days),
            "water_content": np.concatenate(self.theta_rows),
            "pressure_head_cm": np.concatenate(self.head_rows),
            "water_uptake_mm": np.concatenate(self.uptake_rows),
            "root_length_cm": np.concatenate(self.root_rows),
        })
        layers = add_nitrate_columns(layers, np.concatenate(self.nitrate_cells),
                                     np.concatenate(self.nitrate_uptake_cells), cell_cm=cell)
        return {"daily": daily, "layers": layers,
                "traits": capture_traits(daily, layers, setup=self.setup, ground_area_cm2=self.area)}


def season_days(weather, *, last_day: int | None = None) -> np.ndarray:
    """The weather days a season runs (all, or up to ``last_day``); a one-line error when none."""
    days = weather.day if last_day is None else weather.day[weather.day <= last_day]
    if days.size == 0:
        raise CaptureError(f"{weather.source}: day: no day up to {last_day} (allowed: a table covering the run)")
    return days


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
    days = season_days(weather, last_day=last_day)
    n_days = days.size
    season = WaterSeason(setup, weather, ground_area_cm2=area, days=days)
    roots = root_length_by_day(system, cell_cm=setup.cell_cm, n_cells=setup.n_cells, first_day=int(days[0]),
                               n_days=n_days)
    for j in range(n_days):
        season.advance_day(j, roots[j])
    return season.result()


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
    if "soil_evaporation_mm" in daily:
        traits["seasonal_soil_evaporation_mm"] = float(daily["soil_evaporation_mm"].sum())
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
