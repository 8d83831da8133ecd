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
Nitrate is not transported in 3D (the 1D column does that).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..analysis.inputs import float_column
from ..analysis.voxels import grid_crossing_pieces
from .errors import CaptureError
from .richards3d import VoxelGrid, advance_voxel_water, container_grid, soil_on_grid
from .season import capture_traits, potential_transpiration_mm
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
        ``daily``, ``layers`` and ``traits`` as :func:`rootsim.capture.season.run_water_season` (without the
        nitrate columns) and ``grid`` (the :class:`VoxelGrid`).
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

        before = float(soil.water_content(head).sum()) * volume
        head, totals, dt, uptake = advance_voxel_water(head, 1.0, grid=grid, soil=soil, sink=sink, dt_days=dt,
                                                       supply_cm_per_day=(rain[d] + irrigation[d]) / 10.0,
                                                       bottom="free_drainage", sink_floor_head_cm=feddes.wilting_head_cm)
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
