"""Capture outcomes of study runs: the soil-water season under every run's roots, as columns of ``runs.parquet``.

A study file asks for it with ``[measure.capture]`` (paths relative to the study file)::

    [measure.capture]
    soil_water_file = "../capture/soil_water_loam.toml"   # column, horizons, Feddes heads, nitrate, trait depth
    weather_file = "../capture/weather_drying_season.csv" # rain, irrigation, potential transpiration, fertilizer
    phosphorus_radius_cm = 0.2                            # optional: depletion-zone volume and overlap
    phosphorus_voxel_cm = 0.05                            # optional: voxel edge (default radius / 4)

Both files are read and validated once, when the study is planned (a bad file stops the study before any run,
with one line naming the study file, the key and the problem), and travel to the workers with the plan, so a
Dask cluster needs no shared disk. Each run's grown system drives
:func:`rootsim.capture.season.run_water_season` (or, for a pot or rhizobox, the 3D voxel column of
:mod:`rootsim.capture.season3d`, whose soil file must then be as deep as the container) over the weather
table's days (roots grow day by day through
their ``birth_day``; after the growth run ends the root system stays as it was) and its traits join the run's
row under the names of :data:`CAPTURE_TRAITS`; the daily table is kept as ``capture_daily.parquet`` in the run
folder. Roots that die during the run (``lifespan_days``) take up water and nitrate while they live: the run
is grown keeping them (:func:`grow_for_capture`), the season counts each segment from its ``birth_day`` to its
``death_day``, and every other measurement sees the usual table without them (on a thermal clock dead roots
are left out, as before). The season depends on the segments and the files alone, so results are identical on any number of
workers. Simulated capture is a research aid, not agronomic advice.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import RootsimError, SpecError

__all__ = ["StudyCapture", "load_study_capture", "capture_outcomes", "grow_for_capture", "CAPTURE_TRAITS"]

#: Columns added to a run's row (the water-uptake depth is written into its name, e.g.
#: ``water_uptake_below_60cm_mm``); phosphorus columns only with ``phosphorus_radius_cm``.
CAPTURE_TRAITS = ("seasonal_transpiration_mm", "transpiration_fraction_of_potential", "water_uptake_below_{depth}cm_mm",
                  "water_stress_days", "drainage_mm", "nitrate_uptake_kg_n_per_ha", "nitrate_leached_kg_n_per_ha",
                  "nitrate_uptake_fraction_of_applied", "phosphorus_explored_cm3",
                  "phosphorus_overlap_same_plant_cm3", "phosphorus_overlap_between_plants_cm3")


@dataclass(frozen=True)
class StudyCapture:
    """Validated capture inputs of a study (picklable: sent to workers with each task).

    Attributes
    ----------
    setup : rootsim.capture.soil_file.SoilWaterSetup
    weather : rootsim.soil.weather.WeatherTable
    phosphorus_radius_cm, phosphorus_voxel_cm : float or None
    digest : str
        SHA-256 of both files' bytes and the options (part of the plan's fingerprint, so a changed soil or
        weather file is a different study).
    """

    setup: object
    weather: object
    phosphorus_radius_cm: float | None
    phosphorus_voxel_cm: float | None
    digest: str


def load_study_capture(capture, root: Path, source: str) -> StudyCapture:
    """Read and validate ``[measure.capture]`` of a study file.

    Parameters
    ----------
    capture : rootsim.study.schema.CaptureMeasure
    root : Path
        Folder of the study file (paths are relative to it).
    source : str
        The study file, for messages.

    Raises
    ------
    SpecError
        A missing or invalid file: one line naming the study file, ``measure.capture.<key>`` and the problem.
    """
    from ..capture.season import potential_transpiration_mm
    from ..capture.soil_file import read_soil_water_file
    from ..soil.weather import read_weather_table

    loaded = {}
    digest = hashlib.sha256()
    for key, reader in (("soil_water_file", read_soil_water_file), ("weather_file", read_weather_table)):
        name = getattr(capture, key)
        path = root / name
        where = f"measure.capture.{key}"
        if path.is_dir():
            raise SpecError(source, where, f"{name!r} is a folder", "a file, its path relative to the study file")
        if not path.is_file():
            raise SpecError(source, where, f"file {name!r} does not exist",
                            "a path relative to the study file")
        try:
            loaded[key] = reader(path)
        except RootsimError as exc:
            raise SpecError(source, where, str(exc).splitlines()[0]) from None
        digest.update(path.read_bytes())
    setup, weather = loaded["soil_water_file"], loaded["weather_file"]
    try:  # a weather table without transpiration (or what Hargreaves needs) stops the plan, not every run
        potential_transpiration_mm(weather, crop_coefficient=setup.crop_coefficient,
                                   latitude_deg=setup.latitude_deg, first_day_of_year=setup.first_day_of_year,
                                   soil_source=setup.source)
    except RootsimError as exc:
        raise SpecError(source, "measure.capture.weather_file", str(exc).splitlines()[0]) from None
    voxel = capture.phosphorus_voxel_cm
    if capture.phosphorus_radius_cm is not None and voxel is None:
        voxel = capture.phosphorus_radius_cm / 4.0
    digest.update(repr((capture.phosphorus_radius_cm, voxel)).encode())
    return StudyCapture(setup, weather, capture.phosphorus_radius_cm, voxel, digest.hexdigest())


def grow_for_capture(spec, *, seed: int):
    """Grow one run for the capture season: (system for the season, system for every other measurement).

    With root lifespans the season's system keeps the roots that died, with their ``death_day`` (calendar
    days, on either clock: :func:`rootsim.soil.thermal.grow_for_spec` with ``keep_dead_roots``), and the other
    is the same table without them (exactly what growing without keeping them gives); otherwise both are the
    same system.
    """
    from ..growth.classes import ClassTable
    from ..growth.engine import drop_dead_roots
    from ..soil.thermal import grow_for_spec

    if ClassTable(spec).has_lifespan:
        full = grow_for_spec(spec, seed=seed, progress=False, keep_dead_roots=True)
        return full, drop_dead_roots(full)
    system = grow_for_spec(spec, seed=seed, progress=False)
    return system, system


def capture_outcomes(system, capture: StudyCapture) -> tuple[dict, "object"]:
    """Capture traits (one row's columns) and the daily table of one grown run.

    Returns
    -------
    traits : dict
        Columns named in :data:`CAPTURE_TRAITS` (float; NaN where undefined, e.g. the fraction of applied N
        without fertilizer).
    daily : pandas.DataFrame
        :func:`rootsim.capture.season.run_water_season`'s daily table (one row per day).
    """
    from ..capture.season3d import season_for_system

    result = season_for_system(system, capture.setup, capture.weather)  # a pot or rhizobox: the 3D column
    t = result["traits"]
    potential = t["seasonal_potential_transpiration_mm"]

    def number(value):
        return np.nan if value is None else float(value)

    row = {
        "seasonal_transpiration_mm": float(t["seasonal_transpiration_mm"]),
        "transpiration_fraction_of_potential": (float(t["seasonal_transpiration_mm"]) / potential
                                                if potential > 0 else np.nan),
        f"water_uptake_below_{t['deep_water_below_cm']:g}cm_mm": float(t["water_uptake_below_depth_mm"]),
        "water_stress_days": float(t["days_of_water_stress"]),
        "drainage_mm": float(t["drainage_mm"]),
        "nitrate_uptake_kg_n_per_ha": number(t.get("nitrate_uptake_kg_n_per_ha")),
        "nitrate_leached_kg_n_per_ha": number(t.get("nitrate_leached_kg_n_per_ha")),
        "nitrate_uptake_fraction_of_applied": number(t.get("nitrate_uptake_fraction_of_applied")),
    }
    if capture.phosphorus_radius_cm is not None:
        from ..capture.phosphorus import explored_volume

        p = explored_volume(system, radius_cm=capture.phosphorus_radius_cm, voxel_cm=capture.phosphorus_voxel_cm)
        row.update(phosphorus_explored_cm3=float(p["explored_cm3"]),
                   phosphorus_overlap_same_plant_cm3=float(p["overlap_same_plant_cm3"]),
                   phosphorus_overlap_between_plants_cm3=float(p["overlap_between_plants_cm3"]))
    return row, result["daily"]
