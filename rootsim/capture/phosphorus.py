"""Phosphorus exploration: the soil within a stated radius of any root (depletion zones), overlap, by depth.

Immobile nutrients such as phosphate reach a root only from a thin cylinder of soil around it (the depletion
zone; common practice, e.g. Barber 1995, *Soil Nutrient Bioavailability*, Wiley). The explored soil is the union
of capsules of radius ``radius_cm`` around the segments (a straight root of length L explores pi r² L plus two
half-balls at its ends). It is measured on a voxel grid of edge ``voxel_cm`` aligned with the
soil surface: a voxel counts when its centre lies within ``radius_cm`` of a segment (exact point-to-segment
distance), so the error is that of counting voxel centres (about the surface area x voxel_cm / 2 at worst,
shrinking with the voxel). Only soil voxels near roots are visited, by a compiled kernel over dense tiles
(:mod:`rootsim.capture.depletion_kernel`), so memory is bounded by one tile, not the stand's box.

Overlap (competition): voxels within the radius of two or more roots of one plant, and of roots of two or more
plants.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..analysis.inputs import float_column, int_column
from .errors import CaptureError

__all__ = ["explored_volume"]


#: Most tiles of the kernel's voxel grid (about 3 GB of tile lists at worst); finer grids are refused.
MAX_TILES = 20_000_000


def _has_column(system, name: str) -> bool:
    try:
        return name in system.columns if hasattr(system, "columns") else name in system
    except TypeError:
        return False


def explored_volume(system, *, radius_cm: float, voxel_cm: float, layer_cm: float = 10.0) -> dict:
    """Soil volume within ``radius_cm`` of any root, and overlap between roots, total and by depth layer.

    Parameters
    ----------
    system : RootSystem, DataFrame or mapping
        Segment table (``x0 y0 z0 x1 y1 z1 plant_id root_id``).
    radius_cm : float
        Depletion-zone radius measured from the root axis, cm (> 0).
    voxel_cm : float
        Voxel edge, cm; at most ``radius_cm`` (a quarter of it or less for a few-% volume error). The grid is
        aligned with x = y = 0 and the soil surface (see :mod:`rootsim.capture.depletion_kernel`); only soil
        (voxel centres at or below the surface) counts.
    layer_cm : float
        Depth layer thickness of the profile table, cm.

    Returns
    -------
    dict
        ``explored_cm3``, ``overlap_same_plant_cm3``, ``overlap_between_plants_cm3``, ``overlap_any_roots_cm3``
        and ``profile`` (DataFrame: ``depth_top_cm``, ``depth_bottom_cm`` and the three volumes per layer),
        ``voxel_cm``, ``radius_cm``.
    """
    from .depletion_kernel import MAX_ROOTS, TILE_EDGE_VOXELS, depletion_counts

    r, v = float(radius_cm), float(voxel_cm)
    if not (np.isfinite(r) and r > 0 and np.isfinite(v) and 0 < v <= r):
        raise CaptureError(f"phosphorus: radius_cm {radius_cm!r}, voxel_cm {voxel_cm!r} "
                           "(allowed: radius > 0 and 0 < voxel <= radius, cm)")
    if not (np.isfinite(layer_cm) and layer_cm > 0):
        raise CaptureError(f"phosphorus: layer_cm {layer_cm!r} (allowed: a number > 0, cm)")
    p0 = np.column_stack([float_column(system, c) for c in ("x0", "y0", "z0")])
    p1 = np.column_stack([float_column(system, c) for c in ("x1", "y1", "z1")])
    plant = int_column(system, "plant_id")
    root = int_column(system, "root_id")
    if p0.shape[0]:
        span = np.maximum(p0, p1).max(axis=0) - np.minimum(p0, p1).min(axis=0) + 2 * r
        tiles = np.prod(np.ceil(span / (v * TILE_EDGE_VOXELS)) + 1)
        if tiles > MAX_TILES:
            raise CaptureError(f"phosphorus: voxel_cm {v:g} is too fine for roots spanning "
                               f"{span[0]:.0f} x {span[1]:.0f} x {span[2]:.0f} cm (allowed: a larger voxel_cm)")
    plant = plant.astype(np.int64)
    root = root.astype(np.int64)
    span_root = int(root.max() - root.min()) + 1 if root.size else 1
    keys, seg_root = np.unique((plant - (plant.min() if plant.size else 0)) * span_root + root
                               - (root.min() if root.size else 0), return_inverse=True)
    root_plant = np.empty(keys.size, dtype=np.int64)
    root_plant[seg_root.ravel()] = plant
    if keys.size > MAX_ROOTS:
        raise CaptureError(f"phosphorus: {keys.size:,} roots (allowed: at most {MAX_ROOTS:,})")
    previous = int_column(system, "parent_id") if _has_column(system, "parent_id") else None
    counts = depletion_counts(p0, p1, seg_root.ravel().astype(np.int32), root_plant.astype(np.int32),
                              radius_cm=r, voxel_cm=v, layer_cm=float(layer_cm), previous_segment=previous)
    cube = v ** 3
    n_layers = counts.shape[1]
    volumes = counts * cube
    profile = pd.DataFrame({
        "depth_top_cm": np.arange(n_layers) * layer_cm,
        "depth_bottom_cm": (np.arange(n_layers) + 1) * layer_cm,
        "explored_cm3": volumes[0],
        "overlap_same_plant_cm3": volumes[1],
        "overlap_between_plants_cm3": volumes[2],
    })
    return {"explored_cm3": float(volumes[0].sum()), "overlap_same_plant_cm3": float(volumes[1].sum()),
            "overlap_between_plants_cm3": float(volumes[2].sum()),
            "overlap_any_roots_cm3": float(volumes[3].sum()),
            "profile": profile, "voxel_cm": v, "radius_cm": r}
