"""Phosphorus exploration: the soil within a stated radius of any root (depletion zones), overlap, by depth.

Immobile nutrients such as phosphate reach a root only from a thin cylinder of soil around it (the depletion
zone; common practice, e.g. Barber 1995, *Soil Nutrient Bioavailability*, Wiley). The explored soil is the union
of capsules of radius ``radius_cm`` around the segments (a straight root of length L explores pi r² L plus two
half-balls at its ends). It is measured on a voxel grid of edge ``voxel_cm``: a voxel counts when its centre lies
within ``radius_cm`` of a segment (exact point-to-segment distance), so the error is that of counting voxel
centres (about the surface area x voxel_cm / 2 at worst, shrinking with the voxel). Only voxels near roots are
visited (sparse keys, segments in chunks), so memory follows the explored volume, not the stand's box.

Overlap (competition): voxels within the radius of two or more roots of one plant, and of roots of two or more
plants.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..analysis.inputs import float_column, int_column
from .errors import CaptureError

__all__ = ["explored_volume"]


def _ball_offsets(reach: float) -> np.ndarray:
    k = int(np.ceil(reach))
    grid = np.arange(-k, k + 1)
    o = np.stack(np.meshgrid(grid, grid, grid, indexing="ij"), axis=-1).reshape(-1, 3)
    return o[np.linalg.norm(o, axis=1) <= reach]


def explored_volume(system, *, radius_cm: float, voxel_cm: float, layer_cm: float = 10.0,
                    chunk_points: int = 200_000) -> dict:
    """Soil volume within ``radius_cm`` of any root, and overlap between roots, total and by depth layer.

    Parameters
    ----------
    system : RootSystem, DataFrame or mapping
        Segment table (``x0 y0 z0 x1 y1 z1 plant_id root_id``).
    radius_cm : float
        Depletion-zone radius measured from the root axis, cm (> 0).
    voxel_cm : float
        Voxel edge, cm; at most ``radius_cm`` (a quarter of it or less for a few-% volume error).
    layer_cm : float
        Depth layer thickness of the profile table, cm.

    Returns
    -------
    dict
        ``explored_cm3``, ``overlap_same_plant_cm3``, ``overlap_between_plants_cm3`` and ``profile`` (DataFrame:
        ``depth_top_cm``, ``depth_bottom_cm`` and the three volumes per layer), ``voxel_cm``, ``radius_cm``.
    """
    r, v = float(radius_cm), float(voxel_cm)
    if not (np.isfinite(r) and r > 0 and np.isfinite(v) and 0 < v <= r):
        raise CaptureError(f"phosphorus: radius_cm {radius_cm!r}, voxel_cm {voxel_cm!r} "
                           "(allowed: radius > 0 and 0 < voxel <= radius, cm)")
    p0 = np.column_stack([float_column(system, c) for c in ("x0", "y0", "z0")])
    p1 = np.column_stack([float_column(system, c) for c in ("x1", "y1", "z1")])
    plant = int_column(system, "plant_id")
    root = int_column(system, "root_id")
    _, root_key = np.unique(np.column_stack([plant, root]), axis=0, return_inverse=True)
    root_key = root_key.ravel().astype(np.int64)
    low = np.minimum(p0, p1).min(axis=0) - r - 2 * v
    size = np.ceil((np.maximum(p0, p1).max(axis=0) + r + 2 * v - low) / v).astype(np.int64) + 1
    if float(np.prod(size.astype(float))) > 9e18:
        raise CaptureError("phosphorus: the voxel grid is too fine for this stand (allowed: a larger voxel_cm)")
    offsets = _ball_offsets(r / v + 0.5 + np.sqrt(3.0))
    direction = p1 - p0
    length = np.linalg.norm(direction, axis=1)
    n_points = np.maximum(np.ceil(length / v).astype(np.int64), 0) + 1
    pairs = []
    seg_start = 0
    cum = np.cumsum(n_points)
    while seg_start < len(length):
        base = cum[seg_start - 1] if seg_start else 0
        seg_end = int(np.searchsorted(cum, base + max(chunk_points // len(offsets), 1), side="right"))
        seg_end = max(seg_end, seg_start + 1)
        idx = np.arange(seg_start, seg_end)
        counts = n_points[idx]
        seg = np.repeat(idx, counts)
        t = (np.arange(counts.sum()) - np.repeat(np.cumsum(counts) - counts, counts)) / np.repeat(
            np.maximum(counts - 1, 1), counts)
        points = p0[seg] + t[:, None] * direction[seg]
        cell = np.floor((points - low) / v).astype(np.int64)
        cand = (cell[:, None, :] + offsets[None, :, :]).reshape(-1, 3)
        cand_seg = np.repeat(seg, len(offsets))
        centre = low + (cand + 0.5) * v
        a, d = p0[cand_seg], direction[cand_seg]
        dd = np.einsum("ij,ij->i", d, d)
        s = np.clip(np.einsum("ij,ij->i", centre - a, d) / np.where(dd > 0, dd, 1.0), 0.0, 1.0)
        gap = centre - a - s[:, None] * d
        keep = np.einsum("ij,ij->i", gap, gap) <= r * r
        key = (cand[keep, 0] * size[1] + cand[keep, 1]) * size[2] + cand[keep, 2]
        pairs.append(np.unique(np.column_stack([key, root_key[cand_seg[keep]]]), axis=0))
        seg_start = seg_end
    pairs = np.unique(np.concatenate(pairs) if pairs else np.zeros((0, 2), np.int64), axis=0)
    voxel, first = np.unique(pairs[:, 0], return_index=True)
    roots_per_voxel = np.diff(np.append(first, len(pairs)))
    plant_of_root = np.zeros(root_key.max() + 1 if root_key.size else 1, dtype=np.int64)
    plant_of_root[root_key] = plant
    plants = plant_of_root[pairs[:, 1]]
    plant_pairs = np.unique(np.column_stack([pairs[:, 0], plants]), axis=0)
    _, plant_first = np.unique(plant_pairs[:, 0], return_index=True)
    plants_per_voxel = np.diff(np.append(plant_first, len(plant_pairs)))
    # same-plant overlap: some plant has >= 2 roots in the voxel
    root_plant = np.column_stack([pairs[:, 0], plants])
    _, group_start, group_count = np.unique(root_plant, axis=0, return_index=True, return_counts=True)
    same_plant_voxels = np.unique(root_plant[group_start[group_count >= 2], 0])
    iz = voxel % size[2]
    depth = -(low[2] + (iz + 0.5) * v)
    n_layers = max(int(np.ceil(max(depth.max(initial=0.0), 0.0) / layer_cm)), 1)
    layer = np.clip(np.floor(np.maximum(depth, 0.0) / layer_cm).astype(np.int64), 0, n_layers - 1)
    cube = v ** 3
    same_mask = np.isin(voxel, same_plant_voxels)
    profile = pd.DataFrame({
        "depth_top_cm": np.arange(n_layers) * layer_cm,
        "depth_bottom_cm": (np.arange(n_layers) + 1) * layer_cm,
        "explored_cm3": np.bincount(layer, minlength=n_layers) * cube,
        "overlap_same_plant_cm3": np.bincount(layer[same_mask], minlength=n_layers) * cube,
        "overlap_between_plants_cm3": np.bincount(layer[plants_per_voxel >= 2], minlength=n_layers) * cube,
    })
    return {"explored_cm3": voxel.size * cube, "overlap_same_plant_cm3": float(same_mask.sum() * cube),
            "overlap_between_plants_cm3": float((plants_per_voxel >= 2).sum() * cube),
            "overlap_any_roots_cm3": float((roots_per_voxel >= 2).sum() * cube),
            "profile": profile, "voxel_cm": v, "radius_cm": r}
