"""Bench stage ``cores``: a grid of virtual soil cores over the bench stand, using the spatial index.

Floor: the best simple numpy way to find the root length near every core: build a uniform grid index
of segment midpoints (cells one core diameter wide; a stable argsort of the cell key and the start of
each cell), then one vectorized query for all cores at once (the 3 x 3 cells around each core, the
midpoints within its radius, summed per core with ``numpy.bincount``). It neither clips segments at the
core wall nor splits them by depth, which the measured stage does.
"""

from __future__ import annotations

import numpy as np

from . import make_entry, timed

NAME = "cores"
ORDER = 40

GRID_SIDE = 8
CORE_DIAMETER_CM = 5.0
INCREMENT_CM = 10.0


def bench_cores(system, *, grid_side: int = GRID_SIDE) -> list:
    """``grid_side²`` cores on a regular grid over the central 80% of the stand's horizontal extent, to its full depth."""
    from ..sampling import Core

    mid_x = 0.5 * (system["x0"] + system["x1"])
    mid_y = 0.5 * (system["y0"] + system["y1"])
    depth = float(max(-np.min(system["z0"]), -np.min(system["z1"]), INCREMENT_CM))
    xs = np.linspace(*np.quantile(mid_x, [0.1, 0.9]), grid_side)
    ys = np.linspace(*np.quantile(mid_y, [0.1, 0.9]), grid_side)
    return [Core(x_cm=float(x), y_cm=float(y), diameter_cm=CORE_DIAMETER_CM, depth_cm=depth, increment_cm=INCREMENT_CM)
            for x in xs for y in ys]


def indexed_midpoint_query(mid_x: np.ndarray, mid_y: np.ndarray, length: np.ndarray, cores) -> np.ndarray:
    """Root length (cm) with its midpoint inside each core's circle, shape (n_cores,): grid index + one query."""
    cell = max(core.diameter_cm for core in cores)
    x0, y0 = mid_x.min(), mid_y.min()
    ix = ((mid_x - x0) // cell).astype(np.intp)
    iy = ((mid_y - y0) // cell).astype(np.intp)
    nx, ny = int(ix.max()) + 1, int(iy.max()) + 1
    order = np.argsort(ix * ny + iy, kind="stable")
    starts = np.searchsorted((ix * ny + iy)[order], np.arange(nx * ny + 1))
    cx = np.array([core.x_cm for core in cores])
    cy = np.array([core.y_cm for core in cores])
    radius = np.array([core.radius_cm for core in cores])
    kx = ((cx - x0) // cell).astype(np.intp)[:, None] + np.array([-1, -1, -1, 0, 0, 0, 1, 1, 1])
    ky = ((cy - y0) // cell).astype(np.intp)[:, None] + np.array([-1, 0, 1, -1, 0, 1, -1, 0, 1])
    valid = (kx >= 0) & (kx < nx) & (ky >= 0) & (ky < ny)
    key = np.where(valid, kx * ny + ky, 0)
    first, last = starts[key], np.where(valid, starts[key + 1], starts[key])
    counts = (last - first).ravel()
    core_of = np.repeat(np.repeat(np.arange(len(cores)), 9), counts)
    within = np.arange(counts.sum()) - np.repeat(np.cumsum(counts) - counts, counts)
    candidate = order[np.repeat(first.ravel(), counts) + within]
    inside = np.hypot(mid_x[candidate] - cx[core_of], mid_y[candidate] - cy[core_of]) <= radius[core_of]
    return np.bincount(core_of[inside], weights=length[candidate[inside]], minlength=len(cores))


def run(system, *, workdir) -> dict[str, dict]:
    """Time :func:`rootsim.sampling.sample_cores` on a grid of cores against a full-scan floor."""
    from ..sampling import sample_cores

    cores = bench_cores(system)
    seconds, table = timed(sample_cores, system, cores=cores, check_container=False, repeat=3)

    def floor_job():
        mid_x = 0.5 * (system["x0"] + system["x1"])
        mid_y = 0.5 * (system["y0"] + system["y1"])
        return indexed_midpoint_query(mid_x, mid_y, system["length_cm"], cores)

    floor_seconds, near = timed(floor_job, repeat=3)
    return {
        NAME: make_entry(
            segments=len(system["x0"]),
            seconds=seconds,
            floor_seconds=floor_seconds,
            floor="numpy: build a grid index of segment midpoints (argsort of cell keys) and query all cores at "
                  "once (3 x 3 cells, midpoints within the radius, bincount per core)",
            cores=len(cores),
            increments=int(len(table)),
            sampled_root_length_cm=float(table["root_length_cm"].sum()),
            floor_midpoint_root_length_cm=float(near.sum()),
        )
    }
