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

__all__ = ["Polylines", "polylines_from_segments", "polyline_segments", "polyline_subset", "polyline_chunks",
           "polyline_points", "sorted_positions",
           "run_duration_days", "root_class_codes"]

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


def polyline_segments(system, *, tolerance_cm: float = JOIN_TOLERANCE_CM) -> tuple[np.ndarray, np.ndarray]:
    """Segment rows in polyline order and where each polyline begins, without the points.

    The grouping of :func:`polylines_from_segments` (same rules) for writers that gather the points of a
    few polylines at a time (:func:`polyline_subset`), so no point array of the whole system exists.

    Parameters
    ----------
    system : RootSystem or mapping of str to ndarray
        Segment table (columns ``parent_id``, ``root_id``, ``x0`` .. ``z1``).
    tolerance_cm : float
        A segment starting farther than this from its predecessor's end starts a new polyline.

    Returns
    -------
    segment_order : ndarray of int64, shape (n,)
        Segment rows in polyline order.
    segment_offsets : ndarray of int64, shape (p + 1,)
        Polyline ``i`` holds ``segment_order[segment_offsets[i]:segment_offsets[i + 1]]``.
    """
    root = np.asarray(system["root_id"], dtype=np.int64)
    parent = np.asarray(system["parent_id"], dtype=np.int64)
    n = len(root)
    grouped = n < 2 or bool(np.all(root[1:] >= root[:-1]))
    # already grouped by root, in row order; else by root with row order kept within a root
    order = np.arange(n, dtype=np.int64) if grouped else np.argsort(root, kind="stable")
    begins = np.ones(n, dtype=bool)
    if n > 1:
        root_s, parent_s = root[order], parent[order]
        chained = (root_s[1:] == root_s[:-1]) & (parent_s[1:] == order[:-1])
        del root_s, parent_s
        for a, b in _ENDS:
            s0, e0 = _sorted_column(system, a, order, grouped), _sorted_column(system, b, order, grouped)
            chained &= np.abs(s0[1:] - e0[:-1]) <= tolerance_cm
            del s0, e0
        begins[1:] = ~chained
        del chained
    segment_offsets = np.append(np.flatnonzero(begins), n).astype(np.int64)
    return order, segment_offsets


_ENDS = (("x0", "x1"), ("y0", "y1"), ("z0", "z1"))


def _sorted_column(system, name: str, order: np.ndarray, grouped: bool) -> np.ndarray:
    """One coordinate column in polyline order (no sorted copy of the whole table)."""
    values = np.asarray(system[name], dtype=np.float64)
    return values if grouped else values[order]


def polyline_subset(system, segment_order: np.ndarray, segment_offsets: np.ndarray, first: int,
                    stop: int) -> Polylines:
    """Polylines ``first .. stop - 1`` of a :func:`polyline_segments` grouping, with their points.

    Parameters
    ----------
    system : RootSystem or mapping of str to ndarray
    segment_order, segment_offsets : ndarray of int64
        From :func:`polyline_segments`.
    first, stop : int
        Range of polylines.

    Returns
    -------
    Polylines
        Offsets start at 0 for polyline ``first``; ``segment_order`` and ``point_segment`` hold rows of
        the whole table. Point coordinates are the same numbers as in :func:`polylines_from_segments`.
    """
    lo, hi = int(segment_offsets[first]), int(segment_offsets[stop])
    order = segment_order[lo:hi]
    offsets = segment_offsets[first:stop + 1] - lo
    n, n_poly = hi - lo, stop - first
    begins = np.zeros(n, dtype=bool)
    begins[offsets[:-1]] = True
    point_offsets = offsets + np.arange(n_poly + 1, dtype=np.int64)
    # Segment k (in polyline order) ends at point k + (number of polylines begun at or before k).
    end_point = np.arange(n, dtype=np.int64) + np.cumsum(begins)
    del begins
    first_point = point_offsets[:-1]
    first_rows = order[offsets[:-1]]
    points = np.empty((n + n_poly, 3), dtype=np.float64)
    for axis, (a, b) in enumerate(_ENDS):
        out = points[:, axis]
        out[end_point] = np.asarray(system[b], dtype=np.float64)[order]
        out[first_point] = np.asarray(system[a], dtype=np.float64)[first_rows]
    point_segment = np.empty(n + n_poly, dtype=np.int64)
    point_segment[end_point] = order
    point_segment[first_point] = first_rows
    return Polylines(order, offsets, point_offsets, points, point_segment)


def polyline_points(system, segment_order: np.ndarray, segment_offsets: np.ndarray,
                    polylines: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Points of some polylines of a :func:`polyline_segments` grouping, one polyline after the other.

    Parameters
    ----------
    system : RootSystem or mapping of str to ndarray
    segment_order, segment_offsets : ndarray of int64
        From :func:`polyline_segments`.
    polylines : ndarray of int, shape (q,)
        Polylines to gather, in any order.

    Returns
    -------
    points : ndarray of float64, shape (m, 3)
        For each listed polyline its ``k + 1`` points (start of its first segment, then the end of
        each segment), cm: the same numbers as its rows of :attr:`Polylines.points`.
    point_segment : ndarray of int64, shape (m,)
        Segment row whose data each point carries.
    """
    polylines = np.asarray(polylines, dtype=np.int64)
    begin = segment_offsets[polylines]
    counts = segment_offsets[polylines + 1] - begin + 1  # points per polyline
    starts = np.cumsum(counts) - counts
    m = int(counts.sum())
    # point j of a polyline takes the end of its segment j - 1, point 0 the start of segment 0
    position = np.arange(m, dtype=np.int64) + np.repeat(begin - starts - 1, counts)
    position[starts] = begin
    point_segment = segment_order[position]
    del position
    points = np.empty((m, 3), dtype=np.float64)
    for axis, (a, b) in enumerate(_ENDS):
        points[:, axis] = np.asarray(system[b], dtype=np.float64)[point_segment]
        points[starts, axis] = np.asarray(system[a], dtype=np.float64)[point_segment[starts]]
    return points, point_segment


def sorted_positions(segment_order: np.ndarray, *, block: int = 1 << 20) -> np.ndarray:
    """Inverse of ``segment_order``: the position of every segment row in polyline order, shape (n,)."""
    n = len(segment_order)
    out = np.empty(n, dtype=np.int64)
    for start in range(0, n, block):  # no arange of the whole table beside the result
        stop = min(start + block, n)
        out[segment_order[start:stop]] = np.arange(start, stop, dtype=np.int64)
    return out


def polyline_chunks(segment_offsets: np.ndarray, chunk_segments: int) -> list[tuple[int, int]]:
    """Consecutive ranges ``(first, stop)`` of polylines holding about ``chunk_segments`` segments each.

    A range ends at the first polyline end at or after a multiple of ``chunk_segments``; a polyline is
    never split. An empty grouping gives no range.
    """
    n_poly = len(segment_offsets) - 1
    if n_poly <= 0:
        return []
    n = int(segment_offsets[-1])
    marks = np.arange(max(int(chunk_segments), 1), n, max(int(chunk_segments), 1))
    cuts = np.unique(np.searchsorted(segment_offsets, marks, side="left"))
    cuts = cuts[(cuts > 0) & (cuts < n_poly)]
    edges = [0, *cuts.tolist(), n_poly]
    return list(zip(edges[:-1], edges[1:]))


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
    order, segment_offsets = polyline_segments(system, tolerance_cm=tolerance_cm)
    return polyline_subset(system, order, segment_offsets, 0, len(segment_offsets) - 1)


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
