"""A season of soil water coupled both ways with the growth of a stand.

Each day of the weather table (days since sowing, as the growth run counts them):

1. every plant grows up to the start of the day (plants in index order; each plant's compiled generator,
   :func:`rootsim.growth.step.grow_plant`, pauses at the day and resumes the next day with its state kept);
   every new segment adds its length to the soil-column cell(s) its depth span crosses inside the compiled step
   (an accumulator, exact split at cell boundaries), so the root length per cell is never recounted from the table;
2. the column advances one day (:class:`rootsim.capture.season.WaterSeason`: Richards' equation with Feddes
   uptake spread by that root length, nitrate, FAO-56 soil evaporation when configured);
3. the column's water content and matric potential (pressure head x 0.0980665 kPa/cm) at the cell centres are
   written in place into the depth-table sources of the soil fields ``volumetric_water_content`` and
   ``matric_potential_kpa`` that the growth step reads.

So a penetration resistance given as Busscher's (1990) power law of water content and bulk density
(``pedotransfer`` in ``[soil.fields.penetration_resistance_mpa]``) rises as the topsoil dries and slows the
roots there, and a ``field_tropism`` toward ``volumetric_water_content`` turns them toward wetter soil. In a
coupled run these two fields come from the column, whatever the spec gives for them (the spec must define
``volumetric_water_content`` when something reads it, e.g. with a constant for plain growth); between cell
centres the values are linear in depth, above the first and below the last centre constant.

With ``couple=False`` the plants grow in the spec's own (static) soil: the segment table is byte-identical to
:func:`rootsim.grow`'s and the water season equals :func:`rootsim.capture.run_water_season` run on that table.
The result depends on the inputs alone (each plant's own random stream, plants advanced in index order).
Simulated capture is a research aid, not agronomic advice.
"""

from __future__ import annotations

import numpy as np

from ..errors import SegmentBudgetError
from ..soil.fields import depth_table_source
from .errors import CaptureError
from .season import WaterSeason, season_days
from .soil_file import SoilWaterSetup

__all__ = ["run_coupled_season", "COUPLED_FIELDS", "KPA_PER_CM_OF_WATER"]

#: Soil fields a coupled run takes from the soil-water column.
COUPLED_FIELDS = ("volumetric_water_content", "matric_potential_kpa")
#: 1 cm of water head in kPa (rho_w g = 1000 kg/m3 x 9.80665 m/s2 x 0.01 m; common practice).
KPA_PER_CM_OF_WATER = 0.0980665


def _field_values_view(fields, name: str, n_cells: int) -> np.ndarray:
    """The values of the single depth-table source of field ``name``: a view into the compiled data array."""
    compiled = fields.compiled
    f = fields.names.index(name)
    first, last = int(compiled.field_first[f]), int(compiled.field_first[f + 1])
    if last - first != 1:  # pragma: no cover - built here with one source
        raise CaptureError(f"soil field {name!r}: expected one source in a coupled run")
    offset, n = int(compiled.ints[first, 0]), int(compiled.ints[first, 1])
    if n != n_cells:  # pragma: no cover
        raise CaptureError(f"soil field {name!r}: {n} rows for {n_cells} cells")
    view = compiled.data[offset + n: offset + 2 * n]
    if not np.shares_memory(view, compiled.data):  # pragma: no cover
        raise CaptureError("soil fields: the compiled data cannot be updated in place")
    return view


def _ground_area(inputs) -> float:
    from ..growth.engine import _metadata

    return float(_metadata(inputs.spec, inputs.positions, inputs.classes.names)["stand"]["ground_area_cm2"])


def run_coupled_season(spec, setup: SoilWaterSetup, weather, *, couple: bool = True, last_day: int | None = None,
                       progress: bool | None = None) -> dict:
    """Grow ``spec``'s stand and run the soil-water season together, day by day (module docstring).

    Parameters
    ----------
    spec : Spec
        Growth parameters. ``run.duration_days`` sets how long the roots grow (calendar days); the season runs
        over the weather table's days (or up to ``last_day``). On a thermal clock (``[development]``) the
        plants grow on effective days from the spec's own weather table and pause at the effective time each
        calendar day of the season has reached; ``birth_day`` comes back in calendar days.
    setup : SoilWaterSetup
        The soil-water column (:func:`rootsim.capture.read_soil_water_file`).
    weather : WeatherTable
        Daily weather; ``day`` counts days since sowing.
    couple : bool, keyword-only
        Feed the column's water into the soil fields the roots respond to (False: growth in the spec's soil).
    last_day : int, optional
    progress : bool, optional
        A progress bar on stderr (default: when stderr is a terminal).

    Returns
    -------
    dict
        ``system`` (the grown :class:`~rootsim.rootsystem.RootSystem`, as :func:`rootsim.grow` returns it),
        ``daily``, ``layers``, ``traits`` (as :func:`rootsim.capture.run_water_season`); ``traits`` add
        ``coupled`` and ``growth_days``.

    Raises
    ------
    CaptureError
        Bad soil-water / weather input.
    SegmentBudgetError
        The stand would pass ``run.max_segments``: the plants' segments together are checked at every day (each
        plant alone never passes the budget; within a day the plants together may hold more before the check).
    """
    from ..growth.engine import growth_inputs, plant_result, plant_steps, root_system
    from ..growth.step import STATUS_CHECKPOINT
    from ..progress import progress_bar

    days = season_days(weather, last_day=last_day)
    calendar_spec, clock = spec, None
    if spec.development.clock != "calendar":  # grow on effective days; pause at each calendar day's start
        from ..soil.thermal import cumulative_effective_days, on_calendar, thermal_run, weather_table_for_spec

        spec, clock = thermal_run(calendar_spec, weather_table_for_spec(calendar_spec))
    n_cells, cell = setup.n_cells, setup.cell_cm
    centres = (np.arange(n_cells) + 0.5) * cell
    initial_water_content = setup.soil.water_content(setup.initial_head_cm.astype(np.float64))
    replace = None
    if couple:
        replace = {"volumetric_water_content": [depth_table_source(centres, initial_water_content)],
                   "matric_potential_kpa": [depth_table_source(centres, KPA_PER_CM_OF_WATER
                                                               * setup.initial_head_cm.astype(np.float64))]}
    inputs = growth_inputs(spec, replace_fields=replace)
    views = {}
    if couple and inputs.fields.names:
        views = {name: _field_values_view(inputs.fields, name, n_cells) for name in COUPLED_FIELDS
                 if name in inputs.fields.names}
    area = _ground_area(inputs)
    duration = float(calendar_spec.run.duration_days)  # calendar days
    budget = int(spec.run.max_segments)
    checkpoints = np.asarray([d for d in days if d <= duration + 1e-9], dtype=np.float64)
    if clock is not None:  # the same days in the growth's time unit (nondecreasing; equal on days too cold to grow)
        checkpoints = clock["unit"] * cumulative_effective_days(clock["daily"], checkpoints)
    length_per_cell = np.zeros(n_cells)
    stops = [np.zeros(3) for _ in range(inputs.n_plants)]
    plants_running = [plant_steps(inputs, k, segment_limit=budget, root_limit=budget, stop_out=stops[k],
                                  checkpoint_days=checkpoints, length_cell_cm=cell, length_per_cell=length_per_cell)
                      for k in range(inputs.n_plants)]
    finished: list = [None] * inputs.n_plants
    segments_now = np.zeros(inputs.n_plants, dtype=np.int64)

    def advance(k: int, day: float) -> None:
        """Plant ``k`` to its next checkpoint, or to the end."""
        out = next(plants_running[k], None)
        if out is not None:
            segments_now[k] = out[4]
            if out[8] == STATUS_CHECKPOINT:
                return
        finished[k] = plant_result(out, k, stop_out=stops[k], budget=budget)
        plants_running[k] = None
        if int(segments_now.sum()) > budget:
            raise SegmentBudgetError(budget, int(segments_now.sum()), day, store="segments", plant=k)

    season = WaterSeason(setup, weather, ground_area_cm2=area, days=days)
    with progress_bar(total=days.size, desc="coupled season", enabled=progress) as bar:
        for j, day in enumerate(days):
            if day <= duration + 1e-9:
                for k in range(inputs.n_plants):
                    if plants_running[k] is not None:
                        advance(k, float(day))
                if int(segments_now.sum()) > budget:
                    raise SegmentBudgetError(budget, int(segments_now.sum()), float(day), store="segments")
            else:
                for k in range(inputs.n_plants):  # growth ended before this day: finish it
                    while plants_running[k] is not None:
                        advance(k, duration)
            season.advance_day(j, length_per_cell.copy())
            if views:
                if "volumetric_water_content" in views:
                    views["volumetric_water_content"][:] = season.water_content
                if "matric_potential_kpa" in views:
                    views["matric_potential_kpa"][:] = KPA_PER_CM_OF_WATER * season.head
            bar.update(1)
    for k in range(inputs.n_plants):  # the rest of the run after the last day of the season
        while plants_running[k] is not None:
            advance(k, duration)
    result = season.result()
    system = root_system(inputs, finished)
    result["system"] = system if clock is None else on_calendar(system, calendar_spec, clock)
    result["traits"].update({"coupled": bool(couple), "growth_days": duration})
    return result
