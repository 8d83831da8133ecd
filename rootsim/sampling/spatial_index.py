"""A uniform grid over segment midpoints (x, y) for finding the segments near vertical cylinders.

Midpoints are bucketed into square cells and sorted by cell key once (one ``argsort``);
the candidates of a query disc are then a few contiguous slices of the sorted order, one per
grid column the disc overlaps. A segment can reach a point at most half its horizontal
extent away from its midpoint, so searching within ``radius + half the largest horizontal
extent`` and then keeping segments with ``|midpoint - centre| <= radius + own half extent``
finds every segment that can touch the disc, and only a few more.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["MidpointGrid"]

_MAX_CELLS = 4_000_000
_KEY_BLOCK = 1 << 18  # midpoints turned into cell keys at a time
_SHORT_QUANTILE = 0.999  # segments longer than this quantile of horizontal extent are checked directly


class MidpointGrid:
    """Segments bucketed by the (x, y) cell of their midpoints.

    Parameters
    ----------
    p0, p1 : ndarray, shape (n, 3)
        Segment end points, cm.
    query_radius_cm : float
        Largest radius that will be queried, cm; the cell side is this plus the search reach
        (widened if the grid would exceed a few million cells).
    """

    def __init__(self, p0: np.ndarray, p1: np.ndarray, *, query_radius_cm: float):
        self.mid = 0.5 * (p0[:, :2] + p1[:, :2])
        self.half_extent = 0.5 * np.hypot(p1[:, 0] - p0[:, 0], p1[:, 1] - p0[:, 1])
        if len(p0) == 0:
            self.reach = 0.0
            self.long = np.zeros(0, dtype=np.int64)
            self.lo = np.zeros(2)
            self.cell = max(float(query_radius_cm), 1e-6)
            self.shape = (1, 1)
            self.order = np.zeros(0, dtype=np.int64)
            self.keys = np.zeros(0, dtype=np.int64)
            return
        self.reach = float(np.quantile(self.half_extent, _SHORT_QUANTILE))
        self.long = np.flatnonzero(self.half_extent > self.reach)
        short = np.flatnonzero(self.half_extent <= self.reach)
        self.lo = self.mid.min(axis=0)
        span = np.maximum(self.mid.max(axis=0) - self.lo, 1e-9)
        cell = max(float(query_radius_cm) + self.reach, 1e-6)
        if (span[0] / cell + 1) * (span[1] / cell + 1) > _MAX_CELLS:
            cell = math.sqrt(span[0] * span[1] / _MAX_CELLS) + max(span) / _MAX_CELLS
        self.cell = cell
        self.shape = (int(span[0] // cell) + 1, int(span[1] // cell) + 1)
        # cell keys of the short segments, a block at a time (int32: the grid has at most a few million cells)
        keys = np.empty(len(short), dtype=np.int32 if self.shape[0] * self.shape[1] < 2**31 else np.int64)
        for start in range(0, len(short), _KEY_BLOCK):
            mid = self.mid[short[start:start + _KEY_BLOCK]]
            ij = np.minimum(((mid - self.lo) // cell).astype(np.int64), np.array(self.shape) - 1)
            keys[start:start + _KEY_BLOCK] = ij[:, 0] * self.shape[1] + ij[:, 1]
            del mid, ij
        order = np.argsort(keys, kind="stable")
        self.order = short[order]
        del short
        self.keys = keys[order]

    def candidates(self, x_cm: float, y_cm: float, radius_cm: float) -> np.ndarray:
        """Indices of segments that may come within ``radius_cm`` of the vertical line through (x, y), sorted."""
        search = radius_cm + self.reach
        i_lo, j_lo = np.floor((np.array([x_cm, y_cm]) - search - self.lo) / self.cell).astype(np.int64)
        i_hi, j_hi = np.floor((np.array([x_cm, y_cm]) + search - self.lo) / self.cell).astype(np.int64)
        i_lo, i_hi = max(i_lo, 0), min(i_hi, self.shape[0] - 1)
        j_lo, j_hi = max(j_lo, 0), min(j_hi, self.shape[1] - 1)
        pieces = [self.long]
        if i_lo <= i_hi and j_lo <= j_hi:
            columns = np.arange(i_lo, i_hi + 1) * self.shape[1]
            starts = np.searchsorted(self.keys, columns + j_lo, side="left")
            stops = np.searchsorted(self.keys, columns + j_hi, side="right")
            pieces += [self.order[a:b] for a, b in zip(starts, stops)]
        idx = np.concatenate(pieces)
        d = np.hypot(self.mid[idx, 0] - x_cm, self.mid[idx, 1] - y_cm)
        return np.sort(idx[d <= radius_cm + self.half_extent[idx] + 1e-9 * (1 + radius_cm)])
