"""A season of soil water in a pot or rhizobox: the 3D voxel column under a grown root system.

The container's soil (:func:`rootsim.capture.richards3d.container_grid`) takes the soil-water file's horizons
layer by layer (its ``column.cell_cm`` is the voxels' thickness and its ``column.depth_cm`` must be the
container's depth). Each day the root length in every voxel is that of the segments born by the end of the day
(and, with a ``death_day`` column, not yet dead), clipped exactly at the voxel planes
(:func:`rootsim.analysis.voxels.grid_crossing_pieces`); root water uptake is the Feddes et al. (1978) reduction
of each voxel's share of the demand (potential transpiration per unit surface x the pot's surface, spread by root
length, as in 1D), so roots on one side of a pot dry that side. Outputs have the 1D season's form: a daily table
(mm over the container's surface), a layers table (per depth layer: mean water content and head, uptake and root
length summed over the layer) and the same traits, so figures, the soil-state VTK and studies read them alike.
Nitrate moves in lockstep with the water (:func:`rootsim.capture.nitrate3d.voxel_nitrate_step` on each accepted
step's face and bottom flows; fertilizer enters the surface cells at the start of its day, as in 1D), filling the
1D season's daily nitrate columns (kg N/ha over the container's surface) and per-layer nitrate columns.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..analysis.inputs import float_column
from ..analysis.voxels import grid_crossing_pieces
from .errors import CaptureError
from .nitrate import KG_PER_HA_TO_MG_PER_CM2
from .nitrate3d import voxel_nitrate_step
from .richards3d import VoxelGrid, _faces, advance_voxel_water, container_grid, soil_on_grid
from .season import add_nitrate_columns, capture_traits, potential_transpiration_mm
from .soil_file import SoilWaterSetup
from .uptake import feddes_reduction

__all__ = ["run_voxel_water_season", "root_length_by_day_on_grid", "season_for_system"]


def root_length_by_day_on_grid(system, grid: VoxelGrid, *, first_day: int, n_days: int) -> np.ndarray:
    """Root length in each active voxel present on each day, shape (n_days, n_active), cm.

    Row j holds the segments with ``birth_day <= first_day + j`` and, with a ``death_day`` column,
    ``death_day > first_day + j`` (as :func:`rootsim.capture.uptake.root_length_by_day`), cut exactly at the
    voxel planes; pieces outside the active cells are not counted.
    """
    p0 = np.column_stack([float_column(system, c) for c in ("x0", "y0", "z0")])
    p1 = np.column_stack([float_column(system, c) for c in ("x1", "y1", "z1")])
    length = float_column(system, "length_cm")
    birth = float_column(system, "birth_day")
    n = len(length)
    dx, dy, dz = grid.cell_cm
    origin = np.array([grid.origin_cm[0], grid.origin_cm[1], 0.0])
    owner, t0, t1 = grid_crossing_pieces(p0, p1, np.zeros(n), np.ones(n), origin, np.array([dx, dy, dz]))
    mid = p0[owner] + (0.5 * (t0 + t1))[:, None] * (p1[owner] - p0[owner])
    i = np.floor((mid[:, 0] - origin[0]) / dx).astype(np.int64)
    j = np.floor((mid[:, 1] - origin[1]) / dy).astype(np.int64)
    k = np.floor(-mid[:, 2] / dz).astype(np.int64)
    nx, ny, nz = grid.shape
    inside = (i >= 0) & (i < nx) & (j >= 0) & (j < ny) & (k >= 0) & (k < nz)
    index = np.full(grid.shape, -1, dtype=np.int64)
    index[grid.active] = np.arange(grid.n_active)
    cell = np.full(owner.size, -1, dtype=np.int64)
    cell[inside] = index[i[inside], j[inside], k[inside]]
    keep = cell >= 0
    owner, cell, piece = owner[keep], cell[keep], ((t1 - t0) * length[owner])[keep]
    n_active = grid.n_active

    def grouped(day):
        group = np.clip(np.ceil(day - 1e-9).astype(np.int64) - first_day, 0, n_days)
        counts = np.bincount(group[owner] * n_active + cell, weights=piece, minlength=(n_days + 1) * n_active)
        return np.cumsum(counts.reshape(n_days + 1, n_active)[:n_days], axis=0)

    present = grouped(birth)
    columns = system.columns if hasattr(system, "columns") else system
    if "death_day" in columns:
        death = np.asarray(system["death_day"], dtype=np.float64)
        if np.isnan(death).any():
            raise CaptureError("segment table: column death_day has NaN (allowed: a day, or +inf while alive)")
        present = np.maximum(present - grouped(np.where(np.isfinite(death), death, 1e18)), 0.0)
    return present


def run_voxel_water_season(system, setup: SoilWaterSetup, weather, container, *, cell_cm: float | None = None,
                           last_day: int | None = None) -> dict:
    """Simulate soil water day by day in the container under ``system`` (see the module docstring).

    Parameters
    ----------
    system : RootSystem, DataFrame or mapping
        Grown segment table (``x0 y0 z0 x1 y1 z1 length_cm birth_day``, optional ``death_day``).
    setup : SoilWaterSetup
        The soil-water file; ``column.depth_cm`` must equal the container's depth.
    weather : WeatherTable
    container : rootsim.spec.Container
        A pot or rhizobox.
    cell_cm : float, optional
        Horizontal voxel edge, cm (default: the column's ``cell_cm``).

    Returns
    -------
    dict
        ``daily``, ``layers`` and ``traits`` as :func:`rootsim.capture.season.run_water_season` (with its nitrate
        columns; no soil-evaporation columns) and ``grid`` (the :class:`VoxelGrid`).
    """
    if abs(float(container.depth_cm) - setup.depth_cm) > 1e-9 * setup.depth_cm:
        raise CaptureError(f"{setup.source}: column.depth_cm: {setup.depth_cm:g} differs from the "
                           f"{container.kind}'s depth {float(container.depth_cm):g} cm (allowed: the container's depth)")
    grid = container_grid(container, cell_cm=float(cell_cm) if cell_cm is not None else setup.cell_cm,
                          layer_cm=setup.cell_cm)
    soil = soil_on_grid(setup.soil, grid)
    layer = grid.layer_of_active()
    n_layers = grid.shape[2]
    days = weather.day if last_day is None else weather.day[weather.day <= last_day]
    if days.size == 0:
        raise CaptureError(f"{weather.source}: day: no day up to {last_day} (allowed: a table covering the run)")
    n_days = days.size
    rain = weather.column("rain_mm", default=0.0)[:n_days]
    irrigation = weather.column("irrigation_mm", default=0.0)[:n_days]
    potential = potential_transpiration_mm(weather, crop_coefficient=setup.crop_coefficient,
                                           latitude_deg=setup.latitude_deg, first_day_of_year=setup.first_day_of_year,
                                           soil_source=setup.source)[:n_days]
    roots = root_length_by_day_on_grid(system, grid, first_day=int(days[0]), n_days=n_days)
    area = grid.surface_area_cm2()
    volume = grid.cell_volume_cm3
    feddes = setup.feddes
    head = np.asarray(setup.initial_head_cm, dtype=np.float64)[layer]
    dt = 0.05
    to_mm = 10.0 / area
    rows, theta_rows, head_rows, uptake_rows, root_rows = [], [], [], [], []
    per_layer = lambda values: np.bincount(layer, weights=values, minlength=n_layers)  # noqa: E731
    cells_per_layer = per_layer(np.ones(layer.size))
    geometry = _faces(grid)
    surface_cells = geometry[1]
    nitrate = setup.nitrate
    fertilizer = weather.column("nitrate_fertilizer_kg_n_per_ha", default=0.0)[:n_days]
    top_area = grid.cell_cm[0] * grid.cell_cm[1]
    mass = nitrate.initial_nitrate_n_mg_per_l * 1e-3 * soil.water_content(head) * volume   # mg N per voxel
    initial_mass = float(mass.sum())
    nitrate_rows, nitrate_cells, nitrate_uptake_cells = [], [], []
    for d in range(n_days):
        root_length = roots[d]
        total = float(root_length.sum())
        demand_cm3 = potential[d] / 10.0 * area

        def sink(h, root_length=root_length, total=total, demand_cm3=demand_cm3, mm=potential[d]):
            if total <= 0.0 or demand_cm3 <= 0.0:
                return np.zeros(h.size)
            share = demand_cm3 * root_length / (total * volume)
            out = feddes_reduction(h, feddes, potential_mm_per_day=mm) * share
            cap = feddes.max_uptake_cm3_per_cm_root_per_day
            return out if cap is None else np.minimum(out, cap * root_length / volume)

        mass[surface_cells] += fertilizer[d] * KG_PER_HA_TO_MG_PER_CM2 * top_area
        nitrate_before = float(mass.sum())
        day_n = {"mass": mass, "uptake": np.zeros(mass.size), "leached": 0.0}

        def on_step(step_dt, theta_before, step, root_length=root_length, day_n=day_n):
            day_n["mass"], taken, leached = voxel_nitrate_step(
                day_n["mass"], step_dt, grid=grid, theta_old=theta_before, theta_new=step.water_content,
                saturated=soil.saturated, face_flow_cm3_per_day=step.face_flow_cm3_per_day,
                drainage_cm3_per_day=step.bottom_flow_cm3_per_day, root_length_cm=root_length,
                parameters=nitrate, _geometry=geometry)
            day_n["uptake"] += taken
            day_n["leached"] += leached

        before = float(soil.water_content(head).sum()) * volume
        head, totals, dt, uptake = advance_voxel_water(head, 1.0, grid=grid, soil=soil, sink=sink, dt_days=dt,
                                                       supply_cm_per_day=(rain[d] + irrigation[d]) / 10.0,
                                                       bottom="free_drainage", sink_floor_head_cm=feddes.wilting_head_cm,
                                                       on_step=on_step)
        mass = day_n["mass"]
        n_error = (float(mass.sum()) - nitrate_before) + float(day_n["uptake"].sum()) + day_n["leached"]
        to_kg = 1.0 / (KG_PER_HA_TO_MG_PER_CM2 * area)
        nitrate_rows.append((fertilizer[d], to_kg * float(day_n["uptake"].sum()), to_kg * day_n["leached"],
                             to_kg * float(mass.sum()), to_kg * n_error))
        nitrate_cells.append(per_layer(mass) / area)
        nitrate_uptake_cells.append(per_layer(day_n["uptake"]) / area)
        theta = soil.water_content(head)
        after = float(theta.sum()) * volume
        error = (after - before) - (totals.infiltration_cm3 - totals.drainage_cm3 - totals.uptake_cm3)
        rows.append((int(days[d]), rain[d], irrigation[d], potential[d], to_mm * totals.uptake_cm3,
                     to_mm * totals.infiltration_cm3, 0.0, to_mm * totals.drainage_cm3, to_mm * after, to_mm * error,
                     total, totals.steps))
        theta_rows.append(per_layer(theta) / cells_per_layer)
        head_rows.append(per_layer(head) / cells_per_layer)
        uptake_rows.append(to_mm * per_layer(uptake))
        root_rows.append(per_layer(root_length))
    daily = pd.DataFrame(rows, columns=["day", "rain_mm", "irrigation_mm", "potential_transpiration_mm",
                                        "actual_transpiration_mm", "infiltration_mm", "runoff_mm", "drainage_mm",
                                        "soil_water_storage_mm", "water_balance_error_mm", "root_length_cm",
                                        "solver_steps"])
    nitrate_frame = pd.DataFrame(nitrate_rows, columns=[
        "nitrate_fertilizer_kg_n_per_ha", "nitrate_uptake_kg_n_per_ha", "nitrate_leached_kg_n_per_ha",
        "nitrate_storage_kg_n_per_ha", "nitrate_balance_error_kg_n_per_ha"])
    daily = pd.concat([daily, nitrate_frame], axis=1)
    daily.attrs["initial_nitrate_kg_n_per_ha"] = initial_mass / (KG_PER_HA_TO_MG_PER_CM2 * area)
    top = np.arange(n_layers) * setup.cell_cm
    layers = pd.DataFrame({
        "day": np.repeat(days, n_layers),
        "depth_top_cm": np.tile(top, n_days),
        "depth_bottom_cm": np.tile(top + setup.cell_cm, n_days),
        "water_content": np.concatenate(theta_rows),
        "pressure_head_cm": np.concatenate(head_rows),
        "water_uptake_mm": np.concatenate(uptake_rows),
        "root_length_cm": np.concatenate(root_rows),
    })
    layers = add_nitrate_columns(layers, np.concatenate(nitrate_cells), np.concatenate(nitrate_uptake_cells),
                                 cell_cm=setup.cell_cm)
    return {"daily": daily, "layers": layers, "grid": grid,
            "traits": capture_traits(daily, layers, setup=setup, ground_area_cm2=area)}


def season_for_system(system, setup: SoilWaterSetup, weather, *, cell_cm: float | None = None) -> dict:
    """The season a grown system calls for: the 3D voxel column when its container (``metadata["container"]``)
    is a pot or rhizobox, else the 1D layered column (:func:`rootsim.capture.season.run_water_season`).
    The result's ``column`` says which (``"3d_voxels_pot"``, ``"3d_voxels_rhizobox"`` or ``"1d_layers"``)."""
    from ..spec import Container
    from .season import run_water_season

    metadata = getattr(system, "metadata", None) or {}
    container = metadata.get("container") if isinstance(metadata, dict) else None
    if isinstance(container, dict) and container.get("kind") in ("pot", "rhizobox"):
        return {**run_voxel_water_season(system, setup, weather, Container(**container), cell_cm=cell_cm),
                "column": f"3d_voxels_{container['kind']}"}
    return {**run_water_season(system, setup, weather), "column": "1d_layers"}
