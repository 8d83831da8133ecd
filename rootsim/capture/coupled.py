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

In a pot or rhizobox (``[container]``) the column is the 3D voxel column of
:mod:`rootsim.capture.season3d` instead: step 1 collects each plant's segments made since the last day from
its paused generator and cuts them exactly at the voxel planes (one vectorized pass per day,
:func:`rootsim.capture.season3d.voxel_root_length`), so each voxel's uptake follows its own root length; step 2
advances the voxel column; step 3 writes the water content and matric potential of every voxel into grid
sources of the two fields with values at the voxel centres (trilinear between centres, the nearest centre
beyond the outermost ones: :func:`rootsim.capture.season3d.voxel_node_layout`), so a root reads the water of
its side of the pot. ``supply_share`` waters the surface unevenly (a side of a pot kept wet).

With ``couple=False`` the plants grow in the spec's own (static) soil: the segment table is byte-identical to
:func:`rootsim.grow`'s and the water season equals :func:`rootsim.capture.run_water_season` (pots and
rhizoboxes: :func:`rootsim.capture.season3d.run_voxel_water_season`) run on that table.
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
#: Most values (days x soil voxels) of the per-voxel root length kept for every day of a 3D coupled season.
_MAX_VOXEL_HISTORY_VALUES = 20_000_000
#: 1 cm of water head in kPa (rho_w g = 1000 kg/m3 x 9.80665 m/s2 x 0.01 m; common practice).
KPA_PER_CM_OF_WATER = 0.0980665


def _field_values_view(fields, name: str, n_cells: int) -> np.ndarray:
    """The values of the single depth-table or grid source of field ``name``: a view into the compiled data array
    (a grid's values flat in C order of its (nx, ny, nz) nodes)."""
    from ..soil.fields import DEPTH_TABLE

    compiled = fields.compiled
    f = fields.names.index(name)
    first, last = int(compiled.field_first[f]), int(compiled.field_first[f + 1])
    if last - first != 1:  # pragma: no cover - built here with one source
        raise CaptureError(f"soil field {name!r}: expected one source in a coupled run")
    offset = int(compiled.ints[first, 0])
    if int(compiled.kind[first]) == DEPTH_TABLE:
        n = int(compiled.ints[first, 1])
        offset += n  # depths first, then the values
    else:
        n = int(np.prod(compiled.ints[first, 1:4]))
    if n != n_cells:  # pragma: no cover
        raise CaptureError(f"soil field {name!r}: {n} rows for {n_cells} cells")
    view = compiled.data[offset: offset + n]
    if not np.shares_memory(view, compiled.data):  # pragma: no cover
        raise CaptureError("soil fields: the compiled data cannot be updated in place")
    return view


def _ground_area(inputs) -> float:
    from ..growth.engine import _metadata

    return float(_metadata(inputs.spec, inputs.positions, inputs.classes.names)["stand"]["ground_area_cm2"])


class _LayeredColumn:
    """The 1D column: root length per cell counted inside the compiled step, depth-table fields."""

    def __init__(self, setup: SoilWaterSetup, weather, *, area: float, days: np.ndarray):
        self.setup = setup
        self.season = WaterSeason(setup, weather, ground_area_cm2=area, days=days)
        self.length_per_cell = np.zeros(setup.n_cells)
        self.views = {}

    @staticmethod
    def initial_sources(setup: SoilWaterSetup) -> dict:
        centres = (np.arange(setup.n_cells) + 0.5) * setup.cell_cm
        head = setup.initial_head_cm.astype(np.float64)
        return {"volumetric_water_content": [depth_table_source(centres, setup.soil.water_content(head))],
                "matric_potential_kpa": [depth_table_source(centres, KPA_PER_CM_OF_WATER * head)]}

    def bind(self, fields) -> None:
        self.views = {name: _field_values_view(fields, name, self.setup.n_cells) for name in COUPLED_FIELDS
                      if name in fields.names}

    def step_arguments(self) -> dict:
        return {"length_cell_cm": self.setup.cell_cm, "length_per_cell": self.length_per_cell}

    def collect(self, out, first_row: int) -> None:
        """Nothing to do: the compiled step counted the new segments' length."""

    def advance_day(self, j: int) -> None:
        self.season.advance_day(j, self.length_per_cell.copy())
        if "volumetric_water_content" in self.views:
            self.views["volumetric_water_content"][:] = self.season.water_content
        if "matric_potential_kpa" in self.views:
            self.views["matric_potential_kpa"][:] = KPA_PER_CM_OF_WATER * self.season.head

    def result(self) -> dict:
        return {**self.season.result(), "column": "1d_layers"}


class _VoxelColumn:
    """The 3D voxel column of a pot or rhizobox: each day's new segments cut at the voxel planes, grid fields."""

    def __init__(self, setup: SoilWaterSetup, weather, *, grid, days: np.ndarray, kind: str, supply_share=None):
        from .season3d import VoxelWaterSeason, _nearest_soil_cell, voxel_node_layout

        self.grid, self.kind = grid, kind
        self.season = VoxelWaterSeason(setup, weather, grid=grid, days=days, supply_share=supply_share)
        self.index = _nearest_soil_cell(grid)
        self.gather, self.origin, self.spacing = voxel_node_layout(grid)
        self.length_per_voxel = np.zeros(grid.n_active)
        self.keep_days = days.size * grid.n_active <= _MAX_VOXEL_HISTORY_VALUES
        self.daily_length = []
        self.views = {}

    def initial_sources(self) -> dict:
        from ..soil.fields import grid_source

        season = self.season
        theta, head = season.water_content, season.head
        node = lambda values: grid_source(values[self.gather], self.origin, self.spacing, at="nodes",  # noqa: E731
                                          outside="clamp")
        return {"volumetric_water_content": [node(theta)], "matric_potential_kpa": [node(KPA_PER_CM_OF_WATER * head)]}

    def bind(self, fields) -> None:
        self.views = {name: _field_values_view(fields, name, self.gather.size).reshape(self.gather.shape)
                      for name in COUPLED_FIELDS if name in fields.names}

    def step_arguments(self) -> dict:
        return {}

    def collect(self, out, first_row: int) -> None:
        """Add the length of the plant's segments from row ``first_row`` on (the item ``out`` of its generator)."""
        from .season3d import voxel_root_length

        p0, p1, length = _segments_since(out, first_row)
        if length.size:
            self.length_per_voxel += voxel_root_length(p0, p1, length, self.grid, index=self.index)

    def advance_day(self, j: int) -> None:
        today = self.length_per_voxel.copy()
        if self.keep_days:
            self.daily_length.append(today)
        self.season.advance_day(j, today)
        if "volumetric_water_content" in self.views:
            self.views["volumetric_water_content"][...] = self.season.water_content[self.gather]
        if "matric_potential_kpa" in self.views:
            self.views["matric_potential_kpa"][...] = (KPA_PER_CM_OF_WATER * self.season.head)[self.gather]

    def result(self) -> dict:
        out = {**self.season.result(), "column": f"3d_voxels_{self.kind}",
               "voxel_water_content": self.season.water_content,
               "voxel_pressure_head_cm": self.season.head.copy()}
        if self.keep_days:
            out["voxel_root_length_cm"] = np.asarray(self.daily_length).reshape(-1, self.grid.n_active)
        return out


def _segments_since(out, first_row: int):
    """(p0 (m, 3), p1 (m, 3), length (m,)) of a plant's segments ``first_row`` .. ``out[4] - 1``, read from the
    chunks of a generator item ``out`` of :func:`rootsim.growth.step.grow_plant` (rows used per chunk: ``out[3]``)."""
    from ..growth.step import SEGMENT_FLOAT_FIELDS, chunk_item

    float_chunks, counts, n_segments = out[0], np.asarray(out[3]), int(out[4])
    if int(counts.sum()) != n_segments:  # pragma: no cover - the step yields the rows used so far
        raise CaptureError(f"growth: chunks hold {int(counts.sum())} rows for {n_segments} segments")
    n_fields = len(SEGMENT_FLOAT_FIELDS)
    wanted = [SEGMENT_FLOAT_FIELDS.index(c) for c in ("x0", "y0", "z0", "x1", "y1", "z1", "length_cm")]
    parts = [[] for _ in wanted]
    start = 0
    for c, used in enumerate(counts):
        end = start + int(used)
        if end > first_row:
            low = max(first_row, start) - start
            for slot, f in enumerate(wanted):
                parts[slot].append(chunk_item(float_chunks, n_fields * c + f)[low:int(used)])
        start = end
    if not parts[0]:
        return np.zeros((0, 3)), np.zeros((0, 3)), np.zeros(0)
    x0, y0, z0, x1, y1, z1, length = (np.concatenate(part) for part in parts)
    return np.column_stack([x0, y0, z0]), np.column_stack([x1, y1, z1]), length


def run_coupled_season(spec, setup: SoilWaterSetup, weather, *, couple: bool = True, last_day: int | None = None,
                       progress: bool | None = None, container_cell_cm: float | None = None,
                       supply_share=None, column: str = "auto") -> dict:
    """Grow ``spec``'s stand and run the soil-water season together, day by day (module docstring).

    Parameters
    ----------
    spec : Spec
        Growth parameters. ``run.duration_days`` sets how long the roots grow (calendar days); the season runs
        over the weather table's days (or up to ``last_day``). On a thermal clock (``[development]``) the
        plants grow on effective days from the spec's own weather table and pause at the effective time each
        calendar day of the season has reached; ``birth_day`` comes back in calendar days.
    setup : SoilWaterSetup
        The soil-water column (:func:`rootsim.capture.read_soil_water_file`); for a pot or rhizobox its
        ``column.depth_cm`` must be the container's depth.
    weather : WeatherTable
        Daily weather; ``day`` counts days since sowing.
    couple : bool, keyword-only
        Feed the column's water into the soil fields the roots respond to (False: growth in the spec's soil).
    last_day : int, optional
    progress : bool, optional
        A progress bar on stderr (default: when stderr is a terminal).
    container_cell_cm : float, optional
        Pot or rhizobox: horizontal voxel edge, cm (default: the soil-water file's ``cell_cm``).
    supply_share : callable, optional
        Pot or rhizobox: ``supply_share(x_cm, y_cm)`` shares each day's rain and irrigation over the surface
        (:func:`rootsim.capture.season3d.surface_supply_weights`); default: evenly.
    column : {"auto", "layers"}, keyword-only
        ``"auto"``: the 3D voxel column in a pot or rhizobox, else the 1D layered column; ``"layers"``: the 1D
        column whatever the container (over the container's area; to compare the two).

    Returns
    -------
    dict
        ``system`` (the grown :class:`~rootsim.rootsystem.RootSystem`, as :func:`rootsim.grow` returns it),
        ``daily``, ``layers``, ``traits`` (as :func:`rootsim.capture.run_water_season`; ``traits`` add
        ``coupled`` and ``growth_days``) and ``column`` (``"1d_layers"``, ``"3d_voxels_pot"`` or
        ``"3d_voxels_rhizobox"``). A pot or rhizobox adds ``grid`` (the
        :class:`~rootsim.capture.richards3d.VoxelGrid`), ``voxel_water_content`` and ``voxel_pressure_head_cm``
        (shape (n_active,), at the end of the season) and, when days x voxels are at most 20 million,
        ``voxel_root_length_cm`` (shape (n_days, n_active): the root length in each soil voxel each day).
        ``soil_fields``: the compiled :class:`~rootsim.soil.fields.SoilFields` the roots read (coupled: holding
        the last day's water).

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
    if column not in ("auto", "layers"):
        raise CaptureError(f"soil column {column!r} (allowed: auto, layers)")
    kind = calendar_spec.container.kind
    voxels = column == "auto" and kind in ("pot", "rhizobox")
    if voxels:
        from .season3d import voxel_grid_for

        grid = voxel_grid_for(setup, calendar_spec.container, cell_cm=container_cell_cm)
        water = _VoxelColumn(setup, weather, grid=grid, days=days, kind=kind, supply_share=supply_share)
        replace = water.initial_sources() if couple else None
    else:
        if supply_share is not None:
            raise CaptureError("supply share: the surface can be watered unevenly only in the 3D column of a pot "
                               f"or rhizobox (container {kind!r}, column {column!r}; allowed: no supply share)")
        replace = _LayeredColumn.initial_sources(setup) if couple else None
    inputs = growth_inputs(spec, replace_fields=replace)
    if not voxels:
        water = _LayeredColumn(setup, weather, area=_ground_area(inputs), days=days)
    if couple and inputs.fields.names:
        water.bind(inputs.fields)
    duration = float(calendar_spec.run.duration_days)  # calendar days
    season_end = float(days[-1]) + 1.0 if days.size else 0.0
    if couple and duration > season_end + 1e-9:
        raise CaptureError(f"run.duration_days: the roots would grow {duration:g} days, past the end of the "
                           f"{season_end:g}-day season of {weather.source} (allowed: at most {season_end:g} days "
                           "in a coupled run; --days shortens the growth)")
    budget = int(spec.run.max_segments)
    checkpoints = np.asarray([d for d in days if d <= duration + 1e-9], dtype=np.float64)
    if clock is not None:  # the same days in the growth's time unit (nondecreasing; equal on days too cold to grow)
        checkpoints = clock["unit"] * cumulative_effective_days(clock["daily"], checkpoints)
    stops = [np.zeros(3) for _ in range(inputs.n_plants)]
    plants_running = [plant_steps(inputs, k, segment_limit=budget, root_limit=budget, stop_out=stops[k],
                                  checkpoint_days=checkpoints, **water.step_arguments())
                      for k in range(inputs.n_plants)]
    finished: list = [None] * inputs.n_plants
    segments_now = np.zeros(inputs.n_plants, dtype=np.int64)

    def advance(k: int, day: float) -> None:
        """Plant ``k`` to its next checkpoint, or to the end."""
        out = next(plants_running[k], None)
        if out is not None:
            water.collect(out, int(segments_now[k]))
            segments_now[k] = out[4]
            if out[8] == STATUS_CHECKPOINT:
                return
        finished[k] = plant_result(out, k, stop_out=stops[k], budget=budget)
        plants_running[k] = None
        if int(segments_now.sum()) > budget:
            raise SegmentBudgetError(budget, int(segments_now.sum()), day, store="segments", plant=k)

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
            water.advance_day(j)
            bar.update(1)
    for k in range(inputs.n_plants):  # the rest of the run after the last day of the season
        while plants_running[k] is not None:
            advance(k, duration)
    result = water.result()
    system = root_system(inputs, finished)
    result["system"] = system if clock is None else on_calendar(system, calendar_spec, clock)
    result["traits"].update({"coupled": bool(couple), "growth_days": duration})
    result["soil_fields"] = inputs.fields
    return result
