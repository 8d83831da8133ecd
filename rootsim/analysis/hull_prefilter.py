"""Exact reduction of a point cloud to the points that can lie on its convex hull.

The convex hull of a root system's end points is spanned by a few hundred of its hundreds of
thousands of points. Before Qhull sees them, points strictly inside a small polytope spanned by
extreme points of the cloud are dropped (the Akl–Toussaint heuristic: Akl & Toussaint 1978, "A fast
convex hull algorithm", Information Processing Letters 7:219-222, doi:10.1016/0020-0190(78)90003-0).
Such points are interior points of the full hull, and so are their horizontal projections interior
to the projected hull (a ball around the point lies in the hull; its projection is a disc around the
projected point), so the 3D hull volume and the horizontal diameter are the same with or without them.
Points within a small tolerance of the polytope's faces are kept.

Both passes are compiled with numba (one pass over the points for the extremes, one for the
inside test with an early exit), O(points x directions) and O(points x faces).
"""

from __future__ import annotations

import numpy as np
from numba import njit

__all__ = ["hull_candidates", "EXTREME_DIRECTIONS"]

#: Directions whose extreme points (both ways) span the inner polytope: the axes, the face
#: diagonals and the cube diagonals (26 extreme points at most).
EXTREME_DIRECTIONS = np.array([
    [1, 0, 0], [0, 1, 0], [0, 0, 1],
    [1, 1, 0], [1, -1, 0], [1, 0, 1], [1, 0, -1], [0, 1, 1], [0, 1, -1],
    [1, 1, 1], [1, 1, -1], [1, -1, 1], [-1, 1, 1],
], dtype=np.float64)


@njit(cache=True)
def _extreme_rows(x, y, z, directions):  # pragma: no cover - compiled
    k = directions.shape[0]
    low = np.full(k, np.inf)
    high = np.full(k, -np.inf)
    low_row = np.zeros(k, dtype=np.int64)
    high_row = np.zeros(k, dtype=np.int64)
    for i in range(x.size):
        for d in range(k):
            dot = directions[d, 0] * x[i] + directions[d, 1] * y[i] + directions[d, 2] * z[i]
            if dot < low[d]:
                low[d] = dot
                low_row[d] = i
            if dot > high[d]:
                high[d] = dot
                high_row[d] = i
    return low_row, high_row


@njit(cache=True)
def _outside_or_near(x, y, z, equations, tolerance):  # pragma: no cover - compiled
    keep = np.zeros(x.size, dtype=np.bool_)
    faces = equations.shape[0]
    for i in range(x.size):
        for f in range(faces):
            if (equations[f, 0] * x[i] + equations[f, 1] * y[i] + equations[f, 2] * z[i]
                    + equations[f, 3]) > -tolerance:
                keep[i] = True
                break
    return keep


def hull_candidates(x: np.ndarray, y: np.ndarray, z: np.ndarray) -> np.ndarray:
    """Rows of the points that may lie on the convex hull of the points ``(x, y, z)``.

    Parameters
    ----------
    x, y, z : ndarray of float64, shape (m,)
        Point coordinates, cm.

    Returns
    -------
    ndarray of int, shape (k,)
        Sorted rows of every point not strictly inside the polytope spanned by the extreme points in
        :data:`EXTREME_DIRECTIONS` (all rows if that polytope spans no volume). The convex hull, its
        volume and the hull of the horizontal projections are those of the full set.
    """
    from scipy.spatial import ConvexHull, QhullError

    x, y, z = (np.ascontiguousarray(a, dtype=np.float64) for a in (x, y, z))
    m = x.size
    if m < 64:
        return np.arange(m)
    low, high = _extreme_rows(x, y, z, EXTREME_DIRECTIONS)
    rows = np.unique(np.r_[low, high])
    corners = np.column_stack([x[rows], y[rows], z[rows]])
    try:
        equations = ConvexHull(corners).equations  # outward unit normals: n . p + offset <= 0 inside
    except (QhullError, ValueError):
        return np.arange(m)  # flat or degenerate: nothing is strictly inside
    scale = float(np.abs(corners).max()) + float(np.ptp(corners, axis=0).max())
    keep = _outside_or_near(x, y, z, np.ascontiguousarray(equations), 1e-9 * max(scale, 1.0))
    keep[rows] = True
    return np.flatnonzero(keep)
