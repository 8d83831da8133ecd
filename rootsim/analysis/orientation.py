"""Root orientation by depth: the length-weighted distribution of the angle from the vertical per layer.

Orientation is what biases field sampling: a vertical trench face counts horizontal roots
well and misses vertical ones, a horizontal core-break face does the opposite, and the
line-intersect and minirhizotron conversions assume random orientation (Smith & Guttman
1953; Newman 1966; see :mod:`rootsim.sampling`). For isotropic roots the angle θ from the
vertical has density ``sin θ`` on [0°, 90°] (common practice in stereology), so the
length-weighted mean ``|cos θ|`` is 1/2 and the shares of length at 0-30°, 30-60° and 60-90°
are 0.134, 0.366 and 0.5; larger ``mean_abs_cos`` means steeper roots.

Segments are split exactly at layer boundaries (:func:`rootsim.analysis.voxels.grid_crossing_pieces`
along depth); each piece keeps its segment's direction.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from ..errors import RootsimError
from .inputs import float_column
from .voxels import grid_crossing_pieces

__all__ = ["orientation_by_depth", "ISOTROPIC_SHARES", "ORIENTATION_CHUNK_SEGMENTS"]

#: Segments per chunk of :func:`orientation_by_depth` by default. A chunk holds about 300 bytes of temporaries
#: per segment (endpoints, directions, the pieces split at layer boundaries and their keys), so 100,000 segments
#: bound it at about 30 MB: the orientation pass then adds far less than the rest of ``rootsim analyze``
#: (500,000-segment chunks added about 120 bytes per segment of the 1.13 million-segment bench stand).
ORIENTATION_CHUNK_SEGMENTS = 100_000

_CLASS_EDGES_DEG = (0.0, 30.0, 60.0, 90.0)
ISOTROPIC_SHARES = tuple(math.cos(math.radians(a)) - math.cos(math.radians(b))
                         for a, b in zip(_CLASS_EDGES_DEG[:-1], _CLASS_EDGES_DEG[1:]))


def orientation_by_depth(system: Any, *, layer_cm: float = 10.0, bin_deg: float = 15.0,
                         max_depth_cm: float | None = None, chunk_segments: int | None = None):
    """Length-weighted distribution of root angle from the vertical in each depth layer.

    Parameters
    ----------
    system : RootSystem, DataFrame or mapping
        Segment table (columns ``x0 y0 z0 x1 y1 z1 length_cm``; cm, z up).
    layer_cm : float
        Layer thickness, cm (> 0).
    bin_deg : float
        Width of the angle classes of the detailed distribution, degrees (a divisor of 90).
    max_depth_cm : float, optional
        Bottom of the deepest layer, cm; default the deepest root, rounded up to a layer.
    chunk_segments : int, optional
        Segments handled at once (default :data:`ORIENTATION_CHUNK_SEGMENTS`), so memory stays bounded for
        tables of tens of millions of segments; the result does not depend on it (up to round-off).

    Returns
    -------
    pandas.DataFrame
        One row per layer: ``depth_top_cm, depth_bottom_cm, root_length_cm``,
        ``mean_abs_cos`` (length-weighted mean |cos θ|; 0.5 for isotropic roots),
        ``mean_angle_from_vertical_deg``, ``share_steep_0_30_deg``, ``share_oblique_30_60_deg``,
        ``share_flat_60_90_deg`` and ``share_<a>_<b>_deg`` for each ``bin_deg`` class (length
        shares, NaN in empty layers).
    """
    import pandas as pd

    if not (isinstance(layer_cm, (int, float)) and math.isfinite(layer_cm) and layer_cm > 0):
        raise RootsimError(f"orientation layer {layer_cm!r}: must be a number > 0 (cm)")
    n_bins = 90.0 / bin_deg if bin_deg and bin_deg > 0 else float("nan")
    if not (math.isfinite(n_bins) and abs(n_bins - round(n_bins)) < 1e-9):
        raise RootsimError(f"orientation angle class {bin_deg!r} degrees: must divide 90 (e.g. 5, 10, 15, 30)")
    n_bins = int(round(n_bins))

    z0, z1 = float_column(system, "z0"), float_column(system, "z1")
    n = len(z0)
    deepest = float(max(-z0.min(), -z1.min(), 0.0)) if n else 0.0
    bottom = max_depth_cm if max_depth_cm is not None else max(layer_cm, math.ceil(deepest / layer_cm - 1e-9) * layer_cm)
    n_layers = max(1, int(math.ceil(bottom / layer_cm - 1e-9)))
    total = np.zeros(n_layers)
    weighted_cos = np.zeros(n_layers)
    weighted_angle = np.zeros(n_layers)
    by_bin = np.zeros((n_layers, n_bins))
    by_class = np.zeros((n_layers, 3))
    step = int(chunk_segments or ORIENTATION_CHUNK_SEGMENTS)
    columns = {c: float_column(system, c) for c in ("x0", "y0", "z0", "x1", "y1", "z1", "length_cm")}
    for start in range(0, n, step):
        part = {c: v[start:start + step] for c, v in columns.items()}
        _accumulate(part, layer_cm, n_layers, bin_deg, n_bins, total, weighted_cos, weighted_angle, by_bin, by_class)
    with np.errstate(invalid="ignore", divide="ignore"):
        share = lambda values: values / total[:, None]  # noqa: E731
        out = {
            "depth_top_cm": layer_cm * np.arange(n_layers),
            "depth_bottom_cm": layer_cm * np.arange(1, n_layers + 1),
            "root_length_cm": total,
            "mean_abs_cos": weighted_cos / total,
            "mean_angle_from_vertical_deg": weighted_angle / total,
            "share_steep_0_30_deg": share(by_class)[:, 0],
            "share_oblique_30_60_deg": share(by_class)[:, 1],
            "share_flat_60_90_deg": share(by_class)[:, 2],
        }
        detailed = share(by_bin)
    for k in range(n_bins):
        out[f"share_{k * bin_deg:g}_{(k + 1) * bin_deg:g}_deg"] = detailed[:, k]
    return pd.DataFrame(out)


def _accumulate(part: dict, layer_cm: float, n_layers: int, bin_deg: float, n_bins: int, total, weighted_cos,
                weighted_angle, by_bin, by_class) -> None:
    """Add one chunk of segments to the per-layer sums of :func:`orientation_by_depth` (in place)."""
    p0 = np.column_stack([part["x0"], part["y0"], part["z0"]])
    p1 = np.column_stack([part["x1"], part["y1"], part["z1"]])
    length = part["length_cm"]
    d = p1 - p0
    chord = np.linalg.norm(d, axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        cos_v = np.where(chord > 0, np.abs(d[:, 2]) / chord, 1.0)
    angle = np.degrees(np.arccos(np.clip(cos_v, 0.0, 1.0)))
    spacing = np.array([1.0, 1.0, layer_cm])
    owner, ta, tb = grid_crossing_pieces(p0, p1, np.zeros(len(p0)), np.ones(len(p0)), np.zeros(3), spacing, axes=(2,))
    mid_depth = -(p0[owner, 2] + 0.5 * (ta + tb) * d[owner, 2])
    layer = np.floor(mid_depth / layer_cm).astype(np.int64)
    keep = (mid_depth >= 0) & (layer < n_layers)
    owner, layer, piece = owner[keep], layer[keep], ((tb - ta) * length[owner])[keep]
    total += np.bincount(layer, weights=piece, minlength=n_layers)
    weighted_cos += np.bincount(layer, weights=piece * cos_v[owner], minlength=n_layers)
    weighted_angle += np.bincount(layer, weights=piece * angle[owner], minlength=n_layers)
    bins = np.minimum((angle[owner] / bin_deg).astype(np.int64), n_bins - 1)
    by_bin += np.bincount(layer * n_bins + bins, weights=piece, minlength=n_layers * n_bins).reshape(n_layers, n_bins)
    classes = np.minimum(np.searchsorted(_CLASS_EDGES_DEG, angle[owner], side="right") - 1, 2)
    by_class += np.bincount(layer * 3 + classes, weights=piece, minlength=n_layers * 3).reshape(n_layers, 3)
