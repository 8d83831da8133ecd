"""Exact cumulative root length against depth.

Each segment's length is spread uniformly over its depth range (a horizontal segment puts
all its length at one depth). The cumulative root length above depth d is then a
piecewise-linear, non-decreasing function of d (with steps at horizontal segments),
exactly known from the segment end points; rooting-depth quantiles such as D50 and D95
(the depths above which 50 % and 95 % of the root length lie; common practice) are read
from it without rounding to layers.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["CumulativeDepth", "cumulative_depth"]


@dataclass(frozen=True)
class CumulativeDepth:
    """Cumulative root length above each depth.

    Attributes
    ----------
    depth_cm : ndarray, shape (k,)
        Sorted distinct breakpoints (segment end depths), cm.
    length_cm : ndarray, shape (k,)
        Root length above or at each breakpoint (steps included), cm.
    slope : ndarray, shape (k,)
        Root length per cm of depth just below each breakpoint.
    total_cm : float
        Total root length.
    """

    depth_cm: np.ndarray
    length_cm: np.ndarray
    slope: np.ndarray
    total_cm: float

    def at(self, depth_cm) -> np.ndarray:
        """Root length above ``depth_cm`` (array_like, cm), cm."""
        d = np.asarray(depth_cm, dtype=np.float64)
        if not self.depth_cm.size:
            return np.zeros_like(d)
        k = np.searchsorted(self.depth_cm, d, side="right") - 1
        inside = k >= 0
        kk = np.maximum(k, 0)
        value = self.length_cm[kk] + self.slope[kk] * (d - self.depth_cm[kk])
        return np.where(inside, np.minimum(value, self.total_cm), 0.0)

    def quantile_depth(self, fraction: float) -> float:
        """Shallowest depth above which ``fraction`` (0-1) of the root length lies, cm (NaN if no roots)."""
        if not self.depth_cm.size or self.total_cm <= 0:
            return float("nan")
        target = float(fraction) * self.total_cm
        k = int(np.searchsorted(self.length_cm, target, side="left"))  # first breakpoint reaching it
        k = min(k, self.depth_cm.size - 1)
        if k == 0:
            return float(self.depth_cm[0])
        before = self.length_cm[k - 1] + self.slope[k - 1] * (self.depth_cm[k] - self.depth_cm[k - 1])
        if before < target or self.slope[k - 1] <= 0:
            return float(self.depth_cm[k])  # reached by a step at this breakpoint
        return float(self.depth_cm[k - 1] + (target - self.length_cm[k - 1]) / self.slope[k - 1])


def cumulative_depth(depth0: np.ndarray, depth1: np.ndarray, length: np.ndarray) -> CumulativeDepth:
    """Build the exact cumulative root length against depth.

    Parameters
    ----------
    depth0, depth1 : ndarray, shape (n,)
        Depths of the segment end points, cm (positive downward).
    length : ndarray, shape (n,)
        Segment lengths, cm.
    """
    top = np.minimum(depth0, depth1)
    base = np.maximum(depth0, depth1)
    span = base - top
    steep = span > 0
    with np.errstate(divide="ignore", invalid="ignore"):
        density = np.where(steep, length / np.where(steep, span, 1.0), 0.0)
    events = np.concatenate([top, base])
    depth, inverse = np.unique(events, return_inverse=True)
    n = len(top)
    slope_change = np.bincount(inverse, weights=np.concatenate([density, -density]), minlength=depth.size)
    step = np.bincount(inverse[:n], weights=np.where(steep, 0.0, length), minlength=depth.size)
    slope = np.cumsum(slope_change)
    np.maximum(slope, 0.0, out=slope)  # rounding guard: slopes never go negative
    rise = np.r_[0.0, slope[:-1] * np.diff(depth)] if depth.size else np.zeros(0)
    cumulative = np.cumsum(rise + step)
    total = float(length.sum())
    return CumulativeDepth(depth_cm=depth, length_cm=np.minimum(cumulative, total) if depth.size else cumulative,
                           slope=slope, total_cm=total)
