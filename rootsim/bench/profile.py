"""Bench stage ``profile``: exact RLD layer profile and voxel RLD grid of the bench stand.

Floors, measured in the same run on the same arrays:

* ``profile``: ``numpy.histogram`` of segment midpoint depths, weighted by segment length,
  with the same 5 cm layer edges (midpoints computed inside the timing) – the common
  approximate profile that ignores where segments cross layer boundaries.
* ``voxel_rld``: ``numpy.histogramdd`` of segment midpoints, weighted by length, on the same
  2 cm voxel grid.
"""

from __future__ import annotations

import numpy as np

from . import make_entry, timed

NAME = "profile"
ORDER = 30

LAYER_CM = 5.0
VOXEL_CM = 2.0


def _midpoint_histogram(z0: np.ndarray, z1: np.ndarray, length: np.ndarray, edges: np.ndarray) -> np.ndarray:
    return np.histogram(-0.5 * (z0 + z1), bins=edges, weights=length)[0]


def _midpoint_histogramdd(system, edges) -> np.ndarray:
    mid = np.column_stack([0.5 * (system[f"{a}0"] + system[f"{a}1"]) for a in "xyz"])
    return np.histogramdd(mid, bins=edges, weights=system["length_cm"])[0]


def run(system, *, workdir) -> dict[str, dict]:
    """Time :func:`rootsim.analysis.layer_profile` and :func:`rootsim.analysis.rld_voxel_grid` against their floors."""
    from ..analysis import layer_profile, rld_voxel_grid

    n = len(system["x0"])
    area = system.ground_area_cm2 or 1.0
    seconds, profile = timed(layer_profile, system, layer_cm=LAYER_CM, area_cm2=area, repeat=3)
    edges = np.r_[profile["depth_top_cm"].to_numpy(), profile["depth_bottom_cm"].to_numpy()[-1]]
    floor_seconds, approx = timed(_midpoint_histogram, system["z0"], system["z1"], system["length_cm"], edges, repeat=3)
    exact = profile["root_length_cm"].to_numpy()
    results = {
        NAME: make_entry(
            segments=n, seconds=seconds, floor_seconds=floor_seconds,
            floor="numpy.histogram of length-weighted segment midpoint depths, same 5 cm layers",
            layers=int(len(profile)),
            root_length_cm=float(exact.sum()),
            max_layer_difference_to_midpoint_histogram_cm=float(np.abs(exact - approx).max()),
        )
    }
    voxel_seconds, (rld, origin, spacing) = timed(rld_voxel_grid, system, voxel_cm=VOXEL_CM, repeat=2)
    grid_edges = [origin[a] + spacing[a] * np.arange(rld.shape[a] + 1) for a in range(3)]
    voxel_floor, _ = timed(_midpoint_histogramdd, system, grid_edges, repeat=2)
    results["voxel_rld"] = make_entry(
        segments=n, seconds=voxel_seconds, floor_seconds=voxel_floor,
        floor="numpy.histogramdd of length-weighted segment midpoints, same 2 cm voxels",
        voxels=int(rld.size),
        root_length_cm=float(rld.sum() * np.prod(spacing)),
    )
    return results
