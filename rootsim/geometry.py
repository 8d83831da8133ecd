"""Exact geometry of straight segments against axis-aligned boxes.

Used by the analyzers and virtual sampling to clip root segments exactly at layer, voxel
and slab boundaries (Liang & Barsky 1984, "A new concept and method for line clipping",
ACM Trans. Graph. 3:1-22, doi:10.1145/357332.357333).
"""

from __future__ import annotations

import numpy as np

__all__ = ["segment_box_parameters", "segment_box_length"]


def segment_box_parameters(p0: np.ndarray, p1: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Parameter interval [t_enter, t_exit] of each segment inside each box (Liang–Barsky).

    Parameters
    ----------
    p0, p1 : ndarray, shape (..., 3)
        Segment end points, cm. Broadcast against ``lo`` and ``hi``.
    lo, hi : ndarray, shape (..., 3)
        Box corners, cm (``lo <= hi`` component-wise).

    Returns
    -------
    t_enter, t_exit : ndarray, shape (...)
        Where the segment ``p0 + t (p1 - p0)``, ``0 <= t <= 1``, is inside the box. Empty
        intersections have ``t_exit <= t_enter``.
    """
    p0 = np.asarray(p0, dtype=np.float64)
    d = np.asarray(p1, dtype=np.float64) - p0
    lo = np.asarray(lo, dtype=np.float64)
    hi = np.asarray(hi, dtype=np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        ta = (lo - p0) / d
        tb = (hi - p0) / d
    t_near = np.minimum(ta, tb)
    t_far = np.maximum(ta, tb)
    # Axis-parallel components: inside the slab on that axis means no constraint, outside means empty.
    parallel = d == 0
    inside = (p0 >= lo) & (p0 <= hi)
    t_near = np.where(parallel, np.where(inside, -np.inf, np.inf), t_near)
    t_far = np.where(parallel, np.where(inside, np.inf, -np.inf), t_far)
    t_enter = np.maximum(np.max(t_near, axis=-1), 0.0)
    t_exit = np.minimum(np.min(t_far, axis=-1), 1.0)
    return t_enter, t_exit


def segment_box_length(p0: np.ndarray, p1: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Exact length of each segment inside each axis-aligned box, cm.

    Parameters
    ----------
    p0, p1 : ndarray, shape (..., 3)
        Segment end points, cm.
    lo, hi : ndarray, shape (..., 3)
        Box corners, cm; broadcast against the segments.

    Returns
    -------
    ndarray, shape (...)
        Length inside the box (0 where the segment misses it).
    """
    t_enter, t_exit = segment_box_parameters(p0, p1, lo, hi)
    seg_len = np.linalg.norm(np.asarray(p1, dtype=np.float64) - np.asarray(p0, dtype=np.float64), axis=-1)
    return np.clip(t_exit - t_enter, 0.0, None) * seg_len
