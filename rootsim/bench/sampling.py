"""Bench stage ``cores``: a grid of virtual soil cores over the bench stand, using the spatial index.

Floor: one full vectorized scan of the horizontal distance of every segment midpoint to one
core axis (``numpy.hypot`` and a comparison over all segments), timed once and multiplied
by the number of cores, i.e. what a full scan per core would cost before doing any clipping.
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


def _full_scan(mid_x: np.ndarray, mid_y: np.ndarray, core) -> int:
    return int(np.count_nonzero(np.hypot(mid_x - core.x_cm, mid_y - core.y_cm) <= core.radius_cm))


def run(system, *, workdir) -> dict[str, dict]:
    """Time :func:`rootsim.sampling.sample_cores` on a grid of cores against a full-scan floor."""
    from ..sampling import sample_cores

    cores = bench_cores(system)
    seconds, table = timed(sample_cores, system, cores=cores, check_container=False, repeat=2)
    mid_x = 0.5 * (system["x0"] + system["x1"])
    mid_y = 0.5 * (system["y0"] + system["y1"])
    scan_seconds, _ = timed(_full_scan, mid_x, mid_y, cores[len(cores) // 2], repeat=3)
    return {
        NAME: make_entry(
            segments=len(system["x0"]),
            seconds=seconds,
            floor_seconds=scan_seconds * len(cores),
            floor="one full vectorized scan of midpoint-to-core horizontal distance, timed once, x number of cores",
            cores=len(cores),
            increments=int(len(table)),
            full_scan_one_core_seconds=scan_seconds,
            sampled_root_length_cm=float(table["root_length_cm"].sum()),
        )
    }
