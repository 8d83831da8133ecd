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
With ``[evaporation]`` in the soil-water file the top voxels evaporate by FAO-56's two stages as the 1D column's
top cells do (the same demand per unit surface, spread over the evaporating layer of every soil column of voxels).
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
from .evaporation import depletion_after_day, evaporation_weights
from .season import (DAILY_EVAPORATION_COLUMNS, DAILY_NITRATE_COLUMNS, DAILY_WATER_COLUMNS, add_nitrate_columns,
                     capture_traits, evaporation_demand_cm, evaporation_forcing, season_days, water_forcing)
from .soil_file import SoilWaterSetup
from .uptake import feddes_reduction

__all__ = ["run_voxel_water_season", "root_length_by_day_on_grid", "season_for_system", "VoxelWaterSeason",
           "voxel_root_length", "voxel_grid_for", "surface_supply_weights", "voxel_node_layout"]


def _active_index(grid: VoxelGrid) -> np.ndarray:
    """Active index of every box cell (-1: not soil), shape ``grid.shape``."""
    index = np.full(grid.shape, -1, dtype=np.int64)
    index[grid.active] = np.arange(grid.n_active)
    return index


def _nearest_soil_cell(grid: VoxelGrid) -> np.ndarray:
    """Active index of every box cell, a cell outside the soil (a corner of a pot's box) taking that of the nearest
    soil cell of its layer (Euclidean distance transform, :func:`scipy.ndimage.distance_transform_edt`),
    shape ``grid.shape``."""
    from scipy.ndimage import distance_transform_edt

    index = _active_index(grid)
    near_i, near_j = distance_transform_edt(~grid.active[:, :, 0], return_distances=False, return_indices=True)
    return index[near_i, near_j, :]


def _pieces_on_grid(p0: np.ndarray, p1: np.ndarray, length: np.ndarray, grid: VoxelGrid, index: np.ndarray):
    """Segments cut exactly at the voxel planes: (segment of each piece, active cell, piece length in cm) of the
    pieces inside the box (:func:`rootsim.analysis.voxels.grid_crossing_pieces`); a piece on the box's far
    planes (a root sliding along a wall, or on the bottom) belongs to the cell inside, and ``index`` maps box
    cells to active cells (-1: not counted)."""
    n = len(length)
    dx, dy, dz = grid.cell_cm
    origin = np.array([grid.origin_cm[0], grid.origin_cm[1], 0.0])
    owner, t0, t1 = grid_crossing_pieces(p0, p1, np.zeros(n), np.ones(n), origin, np.array([dx, dy, dz]))
    mid = p0[owner] + (0.5 * (t0 + t1))[:, None] * (p1[owner] - p0[owner])
    nx, ny, nz = grid.shape
    tolerance = 1e-9
    u = (mid[:, 0] - origin[0]) / dx
    v = (mid[:, 1] - origin[1]) / dy
    w = -mid[:, 2] / dz
    i = np.floor(u).astype(np.int64)
    j = np.floor(v).astype(np.int64)
    k = np.floor(w).astype(np.int64)
    i[(i == nx) & (u <= nx + tolerance)] = nx - 1  # on the far wall: the cell inside
    j[(j == ny) & (v <= ny + tolerance)] = ny - 1
    k[(k == nz) & (w <= nz + tolerance)] = nz - 1
    inside = (i >= 0) & (i < nx) & (j >= 0) & (j < ny) & (k >= 0) & (k < nz)
    cell = np.full(owner.size, -1, dtype=np.int64)
    cell[inside] = index[i[inside], j[inside], k[inside]]
    keep = cell >= 0
    return owner[keep], cell[keep], ((t1 - t0) * length[owner])[keep]


def voxel_root_length(p0: np.ndarray, p1: np.ndarray, length: np.ndarray, grid: VoxelGrid, *,
                      index: np.ndarray | None = None) -> np.ndarray:
    """Root length of straight segments in each active voxel, cut exactly at the voxel planes, shape (n_active,), cm.

    Parameters
    ----------
    p0, p1 : ndarray, shape (n, 3)
        Segment ends, cm (z up, soil surface at z = 0).
    length : ndarray, shape (n,)
        Segment lengths, cm.
    grid : VoxelGrid
    index : ndarray, optional
        Active index per box cell (default: :func:`_nearest_soil_cell`, so that a piece in a box cell outside the
        soil, next to a pot's round wall, counts in the nearest soil voxel of its layer).

    Pieces outside the box are not counted.
    """
    index = _nearest_soil_cell(grid) if index is None else index
    _owner, cell, piece = _pieces_on_grid(np.asarray(p0, dtype=np.float64).reshape(-1, 3),
                                          np.asarray(p1, dtype=np.float64).reshape(-1, 3),
                                          np.asarray(length, dtype=np.float64), grid, index)
    return np.bincount(cell, weights=piece, minlength=grid.n_active)


def root_length_by_day_on_grid(system, grid: VoxelGrid, *, first_day: int, n_days: int) -> np.ndarray:
    """Root length in each active voxel present on each day, shape (n_days, n_active), cm.

    Row j holds the segments with ``birth_day <= first_day + j`` and, with a ``death_day`` column,
    ``death_day > first_day + j`` (as :func:`rootsim.capture.uptake.root_length_by_day`), cut exactly at the
    voxel planes (:func:`voxel_root_length`: a piece next to a pot's round wall counts in the nearest soil voxel
    of its layer, one on a wall or the bottom in the cell inside); pieces outside the box are not counted.
    """
    p0 = np.column_stack([float_column(system, c) for c in ("x0", "y0", "z0")])
    p1 = np.column_stack([float_column(system, c) for c in ("x1", "y1", "z1")])
    length = float_column(system, "length_cm")
    birth = float_column(system, "birth_day")
    owner, cell, piece = _pieces_on_grid(p0, p1, length, grid, _nearest_soil_cell(grid))
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


def voxel_node_layout(grid: VoxelGrid) -> tuple[np.ndarray, tuple, tuple]:
    """How per-voxel values become a soil-field grid with values at the nodes (:func:`rootsim.soil.fields.grid_source`).

    The nodes are the voxel centres; the field's z axis points up, so its node k is voxel layer ``nz - 1 - k``.
    A box cell outside the container's soil (the corners of a pot) takes the value of the nearest soil cell of
    its layer (Euclidean distance transform, :func:`scipy.ndimage.distance_transform_edt`), so trilinear values
    next to a round wall come from soil cells only.

    Returns
    -------
    gather : ndarray of int64, shape (nx, ny, nz)
        Active index whose value each node takes: ``values[gather]`` is the field's node array.
    origin_cm, spacing_cm : 3-tuples of float
        Position of node (0, 0, 0) (the deepest voxel centre at the low x, y corner) and the node spacing, cm.
    """
    nx, ny, nz = grid.shape
    dx, dy, dz = grid.cell_cm
    gather = np.ascontiguousarray(_nearest_soil_cell(grid)[:, :, ::-1])
    origin = (grid.origin_cm[0] + 0.5 * dx, grid.origin_cm[1] + 0.5 * dy, -(nz - 0.5) * dz)
    return gather, origin, (float(dx), float(dy), float(dz))


def voxel_grid_for(setup: SoilWaterSetup, container, *, cell_cm: float | None = None) -> VoxelGrid:
    """The voxel grid of ``container`` for the soil-water file ``setup`` (its ``column.depth_cm`` must be the
    container's depth; its ``cell_cm`` is the voxels' thickness and, unless ``cell_cm`` is given, their edge)."""
    if abs(float(container.depth_cm) - setup.depth_cm) > 1e-9 * setup.depth_cm:
        raise CaptureError(f"{setup.source}: column.depth_cm: {setup.depth_cm:g} differs from the "
                           f"{container.kind}'s depth {float(container.depth_cm):g} cm (allowed: the container's depth)")
    if cell_cm is not None and not (np.isfinite(cell_cm) and cell_cm > 0):
        raise CaptureError(f"container cell_cm: {cell_cm!r} (allowed: a number > 0, cm)")
    return container_grid(container, cell_cm=float(cell_cm) if cell_cm is not None else setup.cell_cm,
                          layer_cm=setup.cell_cm)


def surface_supply_weights(grid: VoxelGrid, supply_share) -> np.ndarray:
    """Weights (mean 1) of the day's rain and irrigation over the surface cells of ``grid``, shape (n_surface,).

    ``supply_share(x_cm, y_cm)`` gives a non-negative weight for each surface cell's centre; the weights are
    scaled to a mean of 1, so the container receives the day's whole supply, shared in those proportions
    (e.g. ``lambda x, y: x > 0`` waters only the +x half of a pot: a side kept wet).
    """
    surface = _faces(grid)[1]
    i, j, _k = np.nonzero(grid.active)
    dx, dy, _dz = grid.cell_cm
    x = grid.origin_cm[0] + (i[surface] + 0.5) * dx
    y = grid.origin_cm[1] + (j[surface] + 0.5) * dy
    weights = np.asarray(supply_share(x, y), dtype=np.float64) * np.ones(surface.size)
    if weights.shape != (surface.size,) or not np.isfinite(weights).all() or (weights < 0).any() \
            or weights.sum() <= 0:
        raise CaptureError("supply share: needs a finite weight >= 0 for every surface cell, not all 0 "
                           "(allowed: a function of x_cm, y_cm giving such weights)")
    return weights / weights.mean()


class VoxelWaterSeason:
    """The 3D voxel column of a pot or rhizobox over a season, advanced one day at a time (:meth:`advance_day`).

    Each day: fertilizer enters the surface cells, then the voxel Richards column (Feddes uptake spread by the root
    length given per voxel for the day, nitrate in lockstep) advances one day. :func:`run_voxel_water_season`
    drives it with the root length of a grown table; :mod:`rootsim.capture.coupled` with the root length of
    a stand growing alongside.

    Parameters
    ----------
    setup : SoilWaterSetup
    weather : WeatherTable
    grid : VoxelGrid
        :func:`voxel_grid_for` of the container.
    days : ndarray of int, shape (n_days,)
        The weather days to run (the table's first rows).
    supply_share : callable, optional
        ``supply_share(x_cm, y_cm)``: how the day's rain and irrigation are shared over the surface
        (:func:`surface_supply_weights`); default: evenly.
    """

    def __init__(self, setup: SoilWaterSetup, weather, *, grid: VoxelGrid, days: np.ndarray, supply_share=None):
        self.setup, self.grid, self.days = setup, grid, days
        n_days = days.size
        self.soil = soil_on_grid(setup.soil, grid)
        self.layer = grid.layer_of_active()
        self.n_layers = grid.shape[2]
        self.rain, self.irrigation, self.potential = water_forcing(weather, setup, n_days)
        self.area = grid.surface_area_cm2()
        self.volume = grid.cell_volume_cm3
        self.head = np.asarray(setup.initial_head_cm, dtype=np.float64)[self.layer]
        self.dt = 0.05
        self.cells_per_layer = self._per_layer(np.ones(self.layer.size))
        self.geometry = _faces(grid)
        self.surface_cells = self.geometry[1]
        self.supply_weights = None if supply_share is None else surface_supply_weights(grid, supply_share)
        self.fertilizer = weather.column("nitrate_fertilizer_kg_n_per_ha", default=0.0)[:n_days]
        self.top_area = grid.cell_cm[0] * grid.cell_cm[1]
        self.mass = (setup.nitrate.initial_nitrate_n_mg_per_l * 1e-3 * self.soil.water_content(self.head)
                     * self.volume)   # mg N per voxel
        self.initial_mass = float(self.mass.sum())
        self.rows, self.theta_rows, self.head_rows, self.uptake_rows, self.root_rows = [], [], [], [], []
        self.nitrate_rows, self.nitrate_cells, self.nitrate_uptake_cells = [], [], []
        self.evaporation = setup.evaporation
        if self.evaporation is not None:  # FAO-56 two-stage soil evaporation from the top voxels, as in 1D
            self.reference, self.cover = evaporation_forcing(weather, setup, n_days)
            self.depletion = self.evaporation.initial_depletion_mm
            self.weights = evaporation_weights(cell_cm=setup.cell_cm, n_cells=self.n_layers,
                                               layer_cm=self.evaporation.evaporating_layer_cm)[self.layer]
            self.evaporation_rows = []

    def _per_layer(self, values):
        return np.bincount(self.layer, weights=values, minlength=self.n_layers)

    @property
    def water_content(self) -> np.ndarray:
        """Volumetric water content per active voxel now, shape (n_active,)."""
        return self.soil.water_content(self.head)

    def advance_day(self, d: int, root_length: np.ndarray) -> None:
        """Advance the container over day ``d`` with ``root_length`` (cm per active voxel)."""
        grid, soil, volume, area, feddes = self.grid, self.soil, self.volume, self.area, self.setup.feddes
        potential, nitrate, geometry = self.potential, self.setup.nitrate, self.geometry
        total = float(root_length.sum())
        demand_cm3 = potential[d] / 10.0 * area

        def sink(h, root_length=root_length, total=total, demand_cm3=demand_cm3, mm=potential[d]):
            if total <= 0.0 or demand_cm3 <= 0.0:
                return np.zeros(h.size)
            share = demand_cm3 * root_length / (total * volume)
            out = feddes_reduction(h, feddes, potential_mm_per_day=mm) * share
            cap = feddes.max_uptake_cm3_per_cm_root_per_day
            return out if cap is None else np.minimum(out, cap * root_length / volume)

        evaporating = self.evaporation is not None
        if evaporating:
            reduction, demand_cm = evaporation_demand_cm(self.evaporation, self.depletion,
                                                         crop_coefficient=self.setup.crop_coefficient,
                                                         cover_fraction=float(self.cover[d]),
                                                         reference_mm=float(self.reference[d]))
            evaporation_sink = demand_cm * self.weights / grid.cell_cm[2]
            requested = {"evaporation": evaporation_sink, "total": None}
            evaporated = np.zeros(self.layer.size)
            root_sink = sink

            def sink(h, root_sink=root_sink):
                total_sink = root_sink(h) + evaporation_sink
                requested["total"] = total_sink
                return total_sink

        self.mass[self.surface_cells] += self.fertilizer[d] * KG_PER_HA_TO_MG_PER_CM2 * self.top_area
        nitrate_before = float(self.mass.sum())
        day_n = {"mass": self.mass, "uptake": np.zeros(self.mass.size), "leached": 0.0}

        def on_step(step_dt, theta_before, step, root_length=root_length, day_n=day_n):
            day_n["mass"], taken, leached = voxel_nitrate_step(
                day_n["mass"], step_dt, grid=grid, theta_old=theta_before, theta_new=step.water_content,
                saturated=soil.saturated, face_flow_cm3_per_day=step.face_flow_cm3_per_day,
                drainage_cm3_per_day=step.bottom_flow_cm3_per_day, root_length_cm=root_length,
                parameters=nitrate, _geometry=geometry)
            day_n["uptake"] += taken
            day_n["leached"] += leached
            if evaporating:  # the evaporation share of the sink actually applied (after the wilting floor)
                total_sink = requested["total"]
                with np.errstate(invalid="ignore", divide="ignore"):
                    part = np.where(total_sink > 0, requested["evaporation"]
                                    / np.where(total_sink > 0, total_sink, 1.0), 0.0)
                evaporated[:] += part * step.sink_per_day * volume * step_dt

        head = self.head
        before = float(soil.water_content(head).sum()) * volume
        supply = (self.rain[d] + self.irrigation[d]) / 10.0
        if self.supply_weights is not None:
            supply = supply * self.supply_weights
        head, totals, self.dt, uptake = advance_voxel_water(head, 1.0, grid=grid, soil=soil, sink=sink,
                                                            dt_days=self.dt, supply_cm_per_day=supply,
                                                            bottom="free_drainage",
                                                            sink_floor_head_cm=feddes.wilting_head_cm,
                                                            on_step=on_step)
        self.head = head
        mass = self.mass = day_n["mass"]
        n_error = (float(mass.sum()) - nitrate_before) + float(day_n["uptake"].sum()) + day_n["leached"]
        to_kg = 1.0 / (KG_PER_HA_TO_MG_PER_CM2 * area)
        self.nitrate_rows.append((self.fertilizer[d], to_kg * float(day_n["uptake"].sum()),
                                  to_kg * day_n["leached"], to_kg * float(mass.sum()), to_kg * n_error))
        self.nitrate_cells.append(self._per_layer(mass) / area)
        self.nitrate_uptake_cells.append(self._per_layer(day_n["uptake"]) / area)
        theta = soil.water_content(head)
        after = float(theta.sum()) * volume
        error = (after - before) - (totals.infiltration_cm3 - totals.drainage_cm3 - totals.uptake_cm3)
        to_mm = 10.0 / area
        transpiration_cm3 = totals.uptake_cm3 - float(evaporated.sum()) if evaporating else totals.uptake_cm3
        self.rows.append((int(self.days[d]), self.rain[d], self.irrigation[d], potential[d],
                          to_mm * transpiration_cm3, to_mm * totals.infiltration_cm3, 0.0,
                          to_mm * totals.drainage_cm3, to_mm * after, to_mm * error, total, totals.steps))
        self.theta_rows.append(self._per_layer(theta) / self.cells_per_layer)
        self.head_rows.append(self._per_layer(head) / self.cells_per_layer)
        self.uptake_rows.append(to_mm * self._per_layer(uptake - evaporated if evaporating else uptake))
        self.root_rows.append(self._per_layer(root_length))
        if evaporating:
            evaporation_mm = to_mm * float(evaporated.sum())
            self.evaporation_rows.append((float(self.reference[d]), float(self.cover[d]), reduction,
                                          10 * demand_cm, evaporation_mm, self.depletion))
            self.depletion = depletion_after_day(self.depletion, infiltration_mm=to_mm * totals.infiltration_cm3,
                                                 evaporation_mm=evaporation_mm, cover_fraction=float(self.cover[d]),
                                                 total_mm=self.evaporation.total_evaporable_water_mm)

    def result(self) -> dict:
        """``daily``, ``layers``, ``traits`` and ``grid`` of the days run so far (:func:`run_voxel_water_season`)."""
        n_days, n_layers, setup, area = len(self.rows), self.n_layers, self.setup, self.area
        days = self.days[:n_days]
        daily = pd.DataFrame(self.rows, columns=DAILY_WATER_COLUMNS)
        nitrate_frame = pd.DataFrame(self.nitrate_rows, columns=DAILY_NITRATE_COLUMNS)
        frames = [daily, nitrate_frame]
        if self.evaporation is not None:
            frames.append(pd.DataFrame(self.evaporation_rows, columns=DAILY_EVAPORATION_COLUMNS))
        daily = pd.concat(frames, axis=1)
        daily.attrs["initial_nitrate_kg_n_per_ha"] = self.initial_mass / (KG_PER_HA_TO_MG_PER_CM2 * area)
        top = np.arange(n_layers) * setup.cell_cm
        layers = pd.DataFrame({
            "day": np.repeat(days, n_layers),
            "depth_top_cm": np.tile(top, n_days),
            "depth_bottom_cm": np.tile(top + setup.cell_cm, n_days),
            "water_content": np.concatenate(self.theta_rows),
            "pressure_head_cm": np.concatenate(self.head_rows),
            "water_uptake_mm": np.concatenate(self.uptake_rows),
            "root_length_cm": np.concatenate(self.root_rows),
        })
        layers = add_nitrate_columns(layers, np.concatenate(self.nitrate_cells),
                                     np.concatenate(self.nitrate_uptake_cells), cell_cm=setup.cell_cm)
        return {"daily": daily, "layers": layers, "grid": self.grid,
                "traits": capture_traits(daily, layers, setup=setup, ground_area_cm2=area)}


def run_voxel_water_season(system, setup: SoilWaterSetup, weather, container, *, cell_cm: float | None = None,
                           last_day: int | None = None, supply_share=None) -> dict:
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
    supply_share : callable, optional
        How rain and irrigation are shared over the surface (:func:`surface_supply_weights`; default evenly).

    Returns
    -------
    dict
        ``daily``, ``layers`` and ``traits`` as :func:`rootsim.capture.season.run_water_season` (with its nitrate
        columns, and its soil-evaporation columns when the soil file has ``[evaporation]``) and ``grid`` (the
        :class:`VoxelGrid`).
    """
    grid = voxel_grid_for(setup, container, cell_cm=cell_cm)
    days = season_days(weather, last_day=last_day)
    season = VoxelWaterSeason(setup, weather, grid=grid, days=days, supply_share=supply_share)
    roots = root_length_by_day_on_grid(system, grid, first_day=int(days[0]), n_days=days.size)
    for d in range(days.size):
        season.advance_day(d, roots[d])
    return season.result()


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
