"""Bench stage ``profile``: exact RLD layer profile and voxel RLD grid of the bench stand.

Floors, measured in the same run on the same arrays (midpoints computed inside the timing):

* ``profile``: ``numpy.bincount`` of the segments' midpoint layers (integer division of the midpoint
  depth by the 5 cm layer), weighted by segment length – the approximate profile that ignores where
  segments cross layer boundaries, done the fastest simple way (no sorting).
* ``voxel_rld``: ``numpy.bincount`` of the flat index of each midpoint's 2 cm voxel, weighted by length.
"""

from __future__ import annotations

import numpy as np

from . import make_entry, timed

NAME = "profile"
ORDER = 30

LAYER_CM = 5.0
VOXEL_CM = 2.0


def midpoint_layer_lengths(z0: np.ndarray, z1: np.ndarray, length: np.ndarray, layer_cm: float) -> np.ndarray:
    """Root length per layer, shape (n_layers,), counting each segment in its midpoint's layer."""
    layer = (-0.5 * (z0 + z1) // layer_cm).astype(np.intp)
    return np.bincount(np.maximum(layer, 0), weights=length)


def midpoint_voxel_lengths(system, origin, spacing, shape) -> np.ndarray:
    """Root length per voxel, shape ``shape``, counting each segment in its midpoint's voxel."""
    flat = np.zeros(len(system["x0"]), dtype=np.intp)
    for axis, name in enumerate("xyz"):
        mid = 0.5 * (system[f"{name}0"] + system[f"{name}1"])
        index = np.clip(((mid - origin[axis]) // spacing[axis]).astype(np.intp), 0, shape[axis] - 1)
        flat = flat * shape[axis] + index
    return np.bincount(flat, weights=system["length_cm"], minlength=int(np.prod(shape))).reshape(shape)


def run(system, *, workdir) -> dict[str, dict]:
    """Time :func:`rootsim.analysis.layer_profile` and :func:`rootsim.analysis.rld_voxel_grid` against their floors."""
    from ..analysis import layer_profile, rld_voxel_grid

    n = len(system["x0"])
    area = system.ground_area_cm2 or 1.0
    seconds, profile = timed(layer_profile, system, layer_cm=LAYER_CM, area_cm2=area, repeat=5)
    floor_seconds, approx = timed(midpoint_layer_lengths, system["z0"], system["z1"], system["length_cm"], LAYER_CM,
                                  repeat=5)
    exact = profile["root_length_cm"].to_numpy()
    m = min(len(exact), len(approx))
    results = {
        NAME: make_entry(
            segments=n, seconds=seconds, floor_seconds=floor_seconds,
            floor="numpy.bincount of length-weighted segment midpoint layers (depth // 5 cm)",
            layers=int(len(profile)),
            root_length_cm=float(exact.sum()),
            max_layer_difference_to_midpoint_layers_cm=float(np.abs(exact[:m] - approx[:m]).max()) if m else 0.0,
        )
    }
    voxel_seconds, (rld, origin, spacing) = timed(rld_voxel_grid, system, voxel_cm=VOXEL_CM, repeat=3)
    voxel_floor, _ = timed(midpoint_voxel_lengths, system, origin, spacing, rld.shape, repeat=3)
    results["voxel_rld"] = make_entry(
        segments=n, seconds=voxel_seconds, floor_seconds=voxel_floor,
        floor="numpy.bincount of the flat 2 cm voxel index of length-weighted segment midpoints",
        voxels=int(rld.size),
        root_length_cm=float(rld.sum() * np.prod(spacing)),
    )
    return results
