"""Soil water in a pot or rhizobox: Richards' equation on a regular 3D voxel grid, implicit, mass-conservative.

The same mixed form and modified Picard iteration as the 1D column (:mod:`rootsim.capture.richards`; Celia,
Bouloutas & Zarba 1990, doi:10.1029/WR026i007p01483) with the same van Genuchten-Mualem functions
(:mod:`rootsim.capture.hydraulics`), on cell-centred finite volumes of ``dx x dy x dz`` cm. Index ``(i, j, k)``:
x, y and depth (k = 0 at the surface, depth positive downward). Only *active* cells hold soil (the cells whose
centre lies inside the container); every face between an active and an inactive cell, and the box's sides, carry
no flow (container walls). Per active cell, volume V = dx dy dz::

    V (theta_c^{t+dt} - theta_c^t) / dt = sum over faces of Q_in - S_c V
    Q (a -> b, horizontal) = K_f A_f (h_a - h_b) / d_f                  (Darcy, cm³/day)
    Q (u -> l, downward)   = K_f A_z ((h_u - h_l) / dz + 1)

with the interface conductivity K_f the arithmetic mean of the two cells (as in 1D). Each Picard iteration is one
sparse linear solve (``scipy.sparse``, SuperLU). Top: rain and irrigation enter every active surface cell as a flux
(cm/day over its top face, the same everywhere or given per surface cell; ponding is not modelled in
3D: the supply should not exceed what the surface takes).
Bottom: ``free_drainage`` (unit gradient, Q = K(h) A_z out of every active bottom cell; a pot with drainage holes)
or ``no_flow`` (a closed container). With one column of cells (or a laterally uniform state) the scheme is the
1D scheme cell for cell, which the tests check.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from .errors import CaptureError
from .hydraulics import VanGenuchtenMualem

__all__ = ["VoxelGrid", "container_grid", "soil_on_grid", "voxel_water_step", "advance_voxel_water",
           "VOXEL_BOTTOM_CONDITIONS"]

VOXEL_BOTTOM_CONDITIONS = ("free_drainage", "no_flow")
_MIN_HEAD_CM = -1e7
_CAPACITY_FLOOR_PER_CM = 1e-8
#: Most active cells of a voxel column (one sparse factorisation per Picard iteration).
MAX_ACTIVE_CELLS = 2_000_000


@dataclass(frozen=True)
class VoxelGrid:
    """A box of ``shape = (nx, ny, nz)`` cells of ``cell_cm = (dx, dy, dz)``; ``active`` marks the soil cells.

    ``origin_cm`` is the (x, y) of the box's corner (z: the soil surface is the top of layer k = 0).
    """

    shape: tuple[int, int, int]
    cell_cm: tuple[float, float, float]
    origin_cm: tuple[float, float]
    active: np.ndarray              # bool, shape (nx, ny, nz)

    @property
    def n_active(self) -> int:
        """Number of soil cells."""
        return int(self.active.sum())

    @property
    def cell_volume_cm3(self) -> float:
        """Volume of one cell, cm³."""
        return float(np.prod(self.cell_cm))

    def layer_of_active(self) -> np.ndarray:
        """Depth index k of each active cell (C order of the box), shape (n_active,)."""
        return np.nonzero(self.active)[2]

    def surface_area_cm2(self) -> float:
        """Area of the soil surface (active cells of layer 0), cm²."""
        return float(self.active[:, :, 0].sum() * self.cell_cm[0] * self.cell_cm[1])


#: Fewest cells across a pot: with 4 the active cells cover the round surface to within 5 % (300 of 314 cm² for a
#: 20 cm pot); with 1-3 they make the square around it (+27 %).
MIN_POT_CELLS_ACROSS = 4


def container_grid(container, *, cell_cm: float, layer_cm: float) -> VoxelGrid:
    """The voxel grid of a pot (cylinder of ``diameter_cm``) or rhizobox (``width_cm`` x ``thickness_cm``).

    Parameters
    ----------
    container : rootsim.spec.Container
        Centred on x = y = 0; ``depth_cm`` is the soil depth.
    cell_cm : float
        Horizontal cell edge, cm (x and y).
    layer_cm : float
        Vertical cell thickness, cm; must divide ``depth_cm``.

    Returns
    -------
    VoxelGrid
        Cells whose centre lies inside the container are active (a pot's round wall is followed in steps).
    """
    kind = getattr(container, "kind", None)
    if kind not in ("pot", "rhizobox"):
        raise CaptureError(f"container: {kind!r} has no walls (allowed: a pot or a rhizobox for a 3D soil-water "
                           "column; a field uses the 1D column)")
    if not (cell_cm > 0 and layer_cm > 0 and np.isfinite(cell_cm) and np.isfinite(layer_cm)):
        raise CaptureError(f"container: cell_cm {cell_cm!r}, layer_cm {layer_cm!r} (allowed: numbers > 0, cm)")
    depth = float(container.depth_cm)
    nz = int(round(depth / layer_cm))
    if nz < 1 or abs(nz * layer_cm - depth) > 1e-9 * depth:
        raise CaptureError(f"container: layer_cm {layer_cm:g} does not divide depth_cm {depth:g} "
                           "(allowed: a divisor of the container depth)")
    if kind == "pot":
        half_x = half_y = float(container.diameter_cm) / 2.0
    else:
        half_x, half_y = float(container.width_cm) / 2.0, float(container.thickness_cm) / 2.0
    nx, ny = max(int(np.ceil(2 * half_x / cell_cm - 1e-9)), 1), max(int(np.ceil(2 * half_y / cell_cm - 1e-9)), 1)
    if kind == "pot" and nx < MIN_POT_CELLS_ACROSS:
        raise CaptureError(f"container: cell_cm {cell_cm:g} leaves {nx} cell(s) across a pot of diameter "
                           f"{2 * half_x:g} cm, whose round wall then becomes a square (allowed: at most "
                           f"{2 * half_x / MIN_POT_CELLS_ACROSS:g} cm, {MIN_POT_CELLS_ACROSS} cells across; set by "
                           "--container-cell-cm or the soil file's column.cell_cm)")
    if nx * ny * nz > MAX_ACTIVE_CELLS:
        raise CaptureError(f"container: {nx} x {ny} x {nz} cells (allowed: at most {MAX_ACTIVE_CELLS:,}; a "
                           "larger cell_cm or layer_cm)")
    x = -half_x + (np.arange(nx) + 0.5) * (2 * half_x / nx)
    y = -half_y + (np.arange(ny) + 0.5) * (2 * half_y / ny)
    dx, dy = 2 * half_x / nx, 2 * half_y / ny
    if kind == "pot":
        inside = (x[:, None] ** 2 + y[None, :] ** 2) <= half_x ** 2
    else:
        inside = np.ones((nx, ny), dtype=bool)
    active = np.repeat(inside[:, :, None], nz, axis=2)
    return VoxelGrid((nx, ny, nz), (dx, dy, float(layer_cm)), (-half_x, -half_y), active)


def soil_on_grid(soil: VanGenuchtenMualem, grid: VoxelGrid) -> VanGenuchtenMualem:
    """The 1D column's properties (one entry per layer k) given to every active cell of layer k."""
    k = grid.layer_of_active()
    if soil.ks.size != grid.shape[2]:
        raise CaptureError(f"soil: {soil.ks.size} layers for a grid of {grid.shape[2]} layers "
                           "(allowed: the column's cell_cm equal to the grid's layer thickness)")
    take = lambda a: np.asarray(a, dtype=np.float64)[k] if np.ndim(a) else np.full(k.size, float(a))  # noqa: E731
    return VanGenuchtenMualem(take(soil.residual), take(soil.saturated), take(soil.alpha), take(soil.n),
                              take(soil.ks), take(soil.pore_connectivity), take(soil.air_entry))


@dataclass(frozen=True)
class _Faces:
    first: np.ndarray      # (m,) active index of the cell on the low side (upper cell for vertical faces)
    second: np.ndarray     # (m,) active index of the other cell
    area_over_distance: np.ndarray  # (m,) A_f / d_f, cm
    area: np.ndarray       # (m,) A_f, cm² (used for the gravity term of vertical faces)
    vertical: np.ndarray   # (m,) bool


def _faces(grid: VoxelGrid) -> tuple[_Faces, np.ndarray, np.ndarray]:
    """Interior faces between active cells, and the active indices of the surface and bottom cells."""
    index = np.full(grid.shape, -1, dtype=np.int64)
    index[grid.active] = np.arange(grid.n_active)
    dx, dy, dz = grid.cell_cm
    parts = []
    for axis, (area, distance) in enumerate(((dy * dz, dx), (dx * dz, dy), (dx * dy, dz))):
        low = [slice(None)] * 3
        high = [slice(None)] * 3
        low[axis], high[axis] = slice(None, -1), slice(1, None)
        a, b = index[tuple(low)], index[tuple(high)]
        both = (a >= 0) & (b >= 0)
        m = int(both.sum())
        parts.append((a[both], b[both], np.full(m, area / distance), np.full(m, area), np.full(m, axis == 2)))
    faces = _Faces(*(np.concatenate([p[f] for p in parts]) for f in range(5)))
    surface = index[:, :, 0][grid.active[:, :, 0]]
    bottom = index[:, :, -1][grid.active[:, :, -1]]
    return faces, surface, bottom


@dataclass
class VoxelStep:
    """One accepted step: heads, water contents and the boundary flows (cm³/day) of the whole container."""

    head_cm: np.ndarray
    water_content: np.ndarray
    infiltration_cm3_per_day: float
    drainage_cm3_per_day: float
    iterations: int
    converged: bool
    #: Water flow across each interior face of ``_faces(grid)``, first -> second cell, cm³/day (None if not converged).
    face_flow_cm3_per_day: np.ndarray | None = None
    #: Water leaving each bottom cell across the bottom, cm³/day (None if not converged).
    bottom_flow_cm3_per_day: np.ndarray | None = None
    #: The sink applied in the step, cm³ water / cm³ soil / day (None if not converged).
    sink_per_day: np.ndarray | None = None


def voxel_water_step(head_cm: np.ndarray, dt_days: float, *, grid: VoxelGrid, soil, supply_cm_per_day: float,
                     sink_per_day: np.ndarray, bottom: str = "free_drainage", head_tolerance_cm: float = 1e-3,
                     water_tolerance_cm: float = 1e-9, max_iterations: int = 40, _geometry=None) -> VoxelStep:
    """Advance the active cells by one backward-Euler step (see the module docstring).

    Parameters
    ----------
    head_cm : ndarray, shape (n_active,)
        Pressure head of the active cells (C order of the box), cm.
    soil : VanGenuchtenMualem
        Properties per active cell (:func:`soil_on_grid`).
    supply_cm_per_day : float or ndarray, shape (n_surface,)
        Rain + irrigation per unit surface area, cm/day: one value for every surface cell, or one per surface
        cell (in the order of ``_faces(grid)[1]``; a side of a pot watered more than the other).
    sink_per_day : ndarray, shape (n_active,)
        Root water uptake, cm³ water / cm³ soil / day.
    bottom : {"free_drainage", "no_flow"}
    water_tolerance_cm : float
        Largest water-volume residual of a cell per step, as a depth over the cell's top face (cm).
    """
    from scipy.sparse import csc_matrix
    from scipy.sparse.linalg import splu

    if bottom not in VOXEL_BOTTOM_CONDITIONS:
        raise CaptureError(f"bottom condition {bottom!r} is unknown (allowed: {', '.join(VOXEL_BOTTOM_CONDITIONS)})")
    faces, surface, bottom_cells = _geometry if _geometry is not None else _faces(grid)
    n = head_cm.size
    volume = grid.cell_volume_cm3
    top_area = grid.cell_cm[0] * grid.cell_cm[1]
    theta_old = soil.water_content(head_cm)
    storage = volume / dt_days
    h = np.asarray(head_cm, dtype=np.float64).copy()
    a, b = faces.first, faces.second
    rows = np.concatenate([a, b, a, b])
    cols = np.concatenate([a, b, b, a])
    uniform = np.ndim(supply_cm_per_day) == 0
    if uniform:
        supply = float(supply_cm_per_day) * top_area
    else:
        supply = np.asarray(supply_cm_per_day, dtype=np.float64) * top_area
        if supply.shape != surface.shape:
            raise CaptureError(f"surface supply: {supply.size} values for {surface.size} surface cells "
                               "(allowed: one per surface cell, or one for all)")
    infiltration = supply * surface.size if uniform else float(supply.sum())
    for it in range(1, max_iterations + 1):
        theta_m = soil.water_content(h)
        cap = np.maximum(soil.capacity(h), _CAPACITY_FLOOR_PER_CM)
        k = soil.conductivity(h)
        k_face = 0.5 * (k[a] + k[b])
        transfer = k_face * faces.area_over_distance
        gravity = np.where(faces.vertical, k_face * faces.area, 0.0)   # downward, cm³/day
        diag = cap * storage
        rhs = diag * h - (theta_m - theta_old) * storage - sink_per_day * volume
        np.add.at(rhs, a, -gravity)
        np.add.at(rhs, b, gravity)
        rhs[surface] += supply
        drain = k[bottom_cells] * top_area if bottom == "free_drainage" else np.zeros(bottom_cells.size)
        rhs[bottom_cells] -= drain
        values = np.concatenate([transfer, transfer, -transfer, -transfer])
        matrix = csc_matrix((np.concatenate([values, diag]), (np.concatenate([rows, np.arange(n)]),
                                                              np.concatenate([cols, np.arange(n)]))), shape=(n, n))
        try:
            new = splu(matrix).solve(rhs)
        except RuntimeError:
            break
        if not np.isfinite(new).all():
            break
        if it > 12:  # under-relax a slowly oscillating iteration (as in 1D)
            new = h + 0.5 * (new - h)
        np.maximum(new, _MIN_HEAD_CM, out=new)
        change = float((np.abs(new - h) / (1.0 + 1e-2 * np.abs(new))).max())
        h = new
        theta_new = soil.water_content(h)
        flow = transfer * (h[a] - h[b]) + gravity                      # a -> b, cm³/day
        net_in = np.zeros(n)
        np.add.at(net_in, a, -flow)
        np.add.at(net_in, b, flow)
        net_in[surface] += supply
        net_in[bottom_cells] -= drain
        balance = (theta_new - theta_old) * storage - net_in + sink_per_day * volume
        if change < head_tolerance_cm and float(np.abs(balance).max()) * dt_days / top_area < water_tolerance_cm:
            return VoxelStep(h, theta_new, infiltration, float(drain.sum()), it, True, flow, drain, sink_per_day)
    return VoxelStep(head_cm, theta_old, 0.0, 0.0, max_iterations, False)


@dataclass
class VoxelTotals:
    """Water (cm³) moved during an interval; ``balance_error_cm3`` = change in storage - (in - out)."""

    infiltration_cm3: float = 0.0
    drainage_cm3: float = 0.0
    uptake_cm3: float = 0.0
    balance_error_cm3: float = 0.0
    steps: int = 0


def advance_voxel_water(head_cm: np.ndarray, duration_days: float, *, grid: VoxelGrid, soil,
                        supply_cm_per_day: float, sink: Callable[[np.ndarray], np.ndarray],
                        bottom: str = "free_drainage", dt_days: float = 0.05, min_dt_days: float = 1e-7,
                        max_dt_days: float = 0.25, max_water_content_change: float = 0.02,
                        head_tolerance_cm: float = 1e-3, sink_floor_head_cm: float | None = None,
                        on_step: Callable | None = None) -> tuple[np.ndarray, VoxelTotals, float, np.ndarray]:
    """Advance the container over ``duration_days`` in adaptive implicit steps (the 1D rules of
    :func:`rootsim.capture.richards.advance_water`: halve on failure or a water-content change above
    ``max_water_content_change``, grow by 1.3 after easy steps; with ``sink_floor_head_cm`` uptake in a step
    never takes a cell below the water content at that head). ``on_step(dt_days, water_content_before, step)``
    is called after each accepted step (:class:`VoxelStep` with its face and bottom flows; used by nitrate).

    Returns
    -------
    head_cm : ndarray, shape (n_active,)
    totals : VoxelTotals
    dt_days : float
        Step to start the next interval with.
    uptake_cm3 : ndarray, shape (n_active,)
        Water taken up from each cell over the interval, cm³.
    """
    geometry = _faces(grid)
    totals = VoxelTotals()
    volume = grid.cell_volume_cm3
    h = np.asarray(head_cm, dtype=np.float64).copy()
    theta = soil.water_content(h)
    uptake = np.zeros(h.size)
    floor = None if sink_floor_head_cm is None else soil.water_content(np.full(h.size, float(sink_floor_head_cm)))
    elapsed, dt = 0.0, min(max(dt_days, min_dt_days), max_dt_days)
    while elapsed < duration_days * (1.0 - 1e-12):
        step_dt = min(dt, duration_days - elapsed)
        s = np.asarray(sink(h), dtype=np.float64)
        if floor is not None:
            s = np.minimum(s, np.maximum(theta - floor, 0.0) * (0.5 / step_dt))
        step = voxel_water_step(h, step_dt, grid=grid, soil=soil, supply_cm_per_day=supply_cm_per_day,
                                sink_per_day=s, bottom=bottom, head_tolerance_cm=head_tolerance_cm,
                                _geometry=geometry)
        if not step.converged or np.abs(step.water_content - theta).max() > max_water_content_change:
            if step_dt <= min_dt_days:
                raise CaptureError(f"soil water (3D): the solver cannot advance (step {step_dt:.3g} days); check "
                                   "the hydraulic parameters and inputs (allowed: physically plausible soils)")
            dt = max(step_dt * 0.5, min_dt_days)
            continue
        change = float((step.water_content - theta).sum()) * volume
        taken = s * volume * step_dt
        totals.infiltration_cm3 += step.infiltration_cm3_per_day * step_dt
        totals.drainage_cm3 += step.drainage_cm3_per_day * step_dt
        totals.uptake_cm3 += float(taken.sum())
        totals.balance_error_cm3 += change - (step.infiltration_cm3_per_day - step.drainage_cm3_per_day) * step_dt \
            + float(taken.sum())
        totals.steps += 1
        uptake += taken
        if on_step is not None:
            on_step(step_dt, theta, step)
        h, theta = step.head_cm, step.water_content
        elapsed += step_dt
        if step_dt >= dt * (1.0 - 1e-9):
            dt = min(dt * 1.3, max_dt_days) if step.iterations <= 6 else dt
    return h, totals, dt, uptake
