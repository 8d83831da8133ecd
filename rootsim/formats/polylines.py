"""Root polylines: the segment table regrouped as one chain of shared points per root.

Every exporter (VTK, tube meshes, RSML) works on the same decomposition. Segments are sorted
by ``(root_id, segment_id)``; a polyline runs over consecutive sorted segments while each one
continues the previous (same root, its ``parent_id`` is the previous segment, and it starts
where the previous one ends). A lateral's polyline therefore starts at its branch point, the
``x0`` of its first segment, which lies on its parent segment.

A polyline of ``k`` segments has ``k + 1`` points: the start of its first segment, then the
end of each segment. Point ``j >= 1`` carries the data of the segment ending there, point 0
that of the first segment.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["Polylines", "polylines_from_segments", "run_duration_days", "root_class_codes"]

#: Largest gap (cm) between a segment's start and its predecessor's end still treated as shared.
JOIN_TOLERANCE_CM = 1e-6


@dataclass(frozen=True)
class Polylines:
    """Segments grouped into polylines with shared points.

    Attributes
    ----------
    segment_order : ndarray of int64, shape (n,)
        Segment row indices in polyline order (polyline 0's segments first, tip last).
    segment_offsets : ndarray of int64, shape (p + 1,)
        Polyline ``i`` holds ``segment_order[segment_offsets[i]:segment_offsets[i + 1]]``.
    point_offsets : ndarray of int64, shape (p + 1,)
        Polyline ``i`` holds points ``point_offsets[i]:point_offsets[i + 1]``
        (``segment_offsets + arange(p + 1)``).
    points : ndarray of float64, shape (n + p, 3)
        Point coordinates, cm.
    point_segment : ndarray of int64, shape (n + p,)
        Segment row whose data each point carries.
    """

    segment_order: np.ndarray
    segment_offsets: np.ndarray
    point_offsets: np.ndarray
    points: np.ndarray
    point_segment: np.ndarray

    @property
    def n_polylines(self) -> int:
        return len(self.segment_offsets) - 1

    @property
    def first_segment(self) -> np.ndarray:
        """Row index of each polyline's first segment, shape (p,)."""
        return self.segment_order[self.segment_offsets[:-1]]

    @property
    def segment_counts(self) -> np.ndarray:
        """Segments per polyline, shape (p,)."""
        return np.diff(self.segment_offsets)

    def polyline_of_segment(self) -> np.ndarray:
        """Polyline index of every segment row, shape (n,)."""
        out = np.empty(len(self.segment_order), dtype=np.int64)
        out[self.segment_order] = np.repeat(np.arange(self.n_polylines), self.segment_counts)
        return out


def polylines_from_segments(system, *, tolerance_cm: float = JOIN_TOLERANCE_CM) -> Polylines:
    """Group segments into one polyline per root (more if a root's chain is broken).

    Parameters
    ----------
    system : RootSystem or mapping of str to ndarray
        Segment table (columns ``segment_id``, ``parent_id``, ``root_id``, ``x0`` .. ``z1``).
    tolerance_cm : float
        A segment starting farther than this from its predecessor's end starts a new polyline.

    Returns
    -------
    Polylines
    """
    root = np.asarray(system["root_id"], dtype=np.int64)
    parent = np.asarray(system["parent_id"], dtype=np.int64)
    n = len(root)
    names = (("x0", "x1"), ("y0", "y1"), ("z0", "z1"))
    grouped = n < 2 or bool(np.all(root[1:] >= root[:-1]))
    # already grouped by root, in row order; else by root with row order kept within a root
    order = np.arange(n, dtype=np.int64) if grouped else np.argsort(root, kind="stable")
    # one coordinate column gathered at a time (no sorted copy of the whole table)
    def column(name: str) -> np.ndarray:
        values = np.asarray(system[name], dtype=np.float64)
        return values if grouped else values[order]

    begins = np.ones(n, dtype=bool)
    if n > 1:
        root_s, parent_s = root[order], parent[order]
        chained = (root_s[1:] == root_s[:-1]) & (parent_s[1:] == order[:-1])
        del root_s, parent_s
        for a, b in names:
            s0, e0 = column(a), column(b)
            chained &= np.abs(s0[1:] - e0[:-1]) <= tolerance_cm
            del s0, e0
        begins[1:] = ~chained
        del chained
    first_pos = np.flatnonzero(begins)
    segment_offsets = np.append(first_pos, n).astype(np.int64)
    n_poly = len(first_pos)
    point_offsets = segment_offsets + np.arange(n_poly + 1, dtype=np.int64)
    # Sorted segment k ends at point k + (number of polylines begun at or before k).
    end_point = np.arange(n, dtype=np.int64) + np.cumsum(begins)
    first_point = point_offsets[:-1]
    points = np.empty((n + n_poly, 3), dtype=np.float64)
    for axis, (a, b) in enumerate(names):
        out = points[:, axis]
        out[end_point] = column(b)
        out[first_point] = np.asarray(system[a], dtype=np.float64)[order[first_pos]]
    point_segment = np.empty(n + n_poly, dtype=np.int64)
    point_segment[end_point] = order
    point_segment[first_point] = order[first_pos]
    return Polylines(order, segment_offsets, point_offsets, points, point_segment)


def run_duration_days(system) -> float:
    """Length of the run in days: metadata ``run.duration_days``, else the latest ``birth_day`` (0 if empty)."""
    meta = getattr(system, "metadata", None) or {}
    run = meta.get("run") if isinstance(meta, dict) else None
    if isinstance(run, dict) and run.get("duration_days") is not None:
        try:
            return float(run["duration_days"])
        except (TypeError, ValueError):
            pass
    birth = np.asarray(system["birth_day"], dtype=np.float64)
    return float(birth.max()) if birth.size else 0.0


def root_class_codes(system) -> tuple[np.ndarray, list[str]]:
    """Integer code per segment, shape (n,), and the class names the codes index (sorted)."""
    import pandas as pd

    codes, names = pd.factorize(np.asarray(system["root_class"]), sort=True)
    return codes.astype(np.int32), [str(s) for s in names]
