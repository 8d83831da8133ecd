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
    # Spans below 1e-9 cm count as horizontal (a step): a density of length / 1e-19 would swamp the running
    # sums below in rounding error.
    steep = span > 1e-9
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


def quantile_depths(depth0: np.ndarray, depth1: np.ndarray, length: np.ndarray, fractions, *,
                    n_bins: int = 128) -> list[float]:
    """Exact depths above which each fraction of the root length lies, cm (NaN if there is no root length).

    Same result as :meth:`CumulativeDepth.quantile_depth` of :func:`cumulative_depth`, but without
    sorting all segments: the exact layer lengths of ``n_bins`` thin layers locate the layer holding
    each quantile, and only the segments reaching into that layer are sorted.

    Parameters
    ----------
    depth0, depth1, length : ndarray, shape (n,)
        Segment end depths (cm, positive downward) and lengths (cm).
    fractions : sequence of float
        Fractions of the root length, 0-1.
    n_bins : int
        Number of thin layers of the first pass.
    """
    from .profile import depth_layer_lengths

    total = float(length.sum())
    if not length.size or total <= 0:
        return [float("nan") for _ in fractions]
    shallowest = float(min(depth0.min(), depth1.min()))
    span = float(max(depth0.max(), depth1.max())) - shallowest
    if span <= 0:
        return [shallowest for _ in fractions]
    h = span / n_bins
    s0 = depth0 - shallowest
    s1 = depth1 - shallowest
    layers = depth_layer_lengths(s0, s1, length, layer_cm=h, n_layers=n_bins, bottom_cm=span)[:, 0]
    cum = np.cumsum(layers)
    top = np.minimum(s0, s1)
    base = np.maximum(s0, s1)
    out = []
    for fraction in fractions:
        layer = quantile_layer(cum, fraction, layer_cm=h, span_cm=span)
        near = np.flatnonzero((top <= layer.bottom_cm) & (base >= layer.top_cm))
        out.append(shallowest + depth_in_quantile_layer(top[near], base[near], length[near], layer))
    return out


@dataclass(frozen=True)
class QuantileLayer:
    """The thin layer holding a quantile of the root length (depths from the shallowest point, cm)."""

    index: int
    top_cm: float
    bottom_cm: float
    layer_cm: float
    n_layers: int
    length_needed_cm: float  # root length of the quantile that lies inside this layer


def quantile_layer(cumulative_cm: np.ndarray, fraction: float, *, layer_cm: float, span_cm: float) -> QuantileLayer:
    """The thin layer where the cumulative root length reaches ``fraction`` of the total.

    Parameters
    ----------
    cumulative_cm : ndarray, shape (n_layers,)
        Cumulative root length at the bottom of each thin layer, cm.
    fraction : float
        Fraction of the root length, 0-1.
    layer_cm, span_cm : float
        Thickness of the thin layers and depth span they cover (the last layer ends at ``span_cm``), cm.
    """
    n_layers = len(cumulative_cm)
    target = float(fraction) * float(cumulative_cm[-1])
    k = min(int(np.searchsorted(cumulative_cm, target, side="left")), n_layers - 1)
    above = float(cumulative_cm[k - 1]) if k > 0 else 0.0
    bottom = span_cm if k == n_layers - 1 else (k + 1) * layer_cm
    return QuantileLayer(index=k, top_cm=k * layer_cm, bottom_cm=bottom, layer_cm=layer_cm, n_layers=n_layers,
                         length_needed_cm=target - above)


def depth_in_quantile_layer(top: np.ndarray, base: np.ndarray, length: np.ndarray, layer: QuantileLayer) -> float:
    """Exact depth inside ``layer`` where the quantile's root length is reached, cm from the shallowest point.

    Parameters
    ----------
    top, base : ndarray, shape (m,)
        Upper and lower end depths of the segments reaching into the layer (from the shallowest point), cm.
    length : ndarray, shape (m,)
        Their lengths, cm (spread evenly over depth; a horizontal segment lies at its depth).
    layer : QuantileLayer
    """
    a, b = layer.top_cm, layer.bottom_cm
    steep = base > top
    with np.errstate(divide="ignore", invalid="ignore"):
        density = np.where(steep, length / np.where(steep, base - top, 1.0), 0.0)
    lo, hi = np.maximum(top, a), np.minimum(base, b)
    # Horizontal segments belong to the layer their depth falls in (as in depth_layer_lengths).
    flat_here = ~steep & (np.minimum(np.floor(top / layer.layer_cm), layer.n_layers - 1) == layer.index)
    piece = np.where(steep, np.clip(hi - lo, 0.0, None) * density, np.where(flat_here, length, 0.0))
    keep = piece > 0
    sub = cumulative_depth(lo[keep], np.where(steep, hi, lo)[keep], piece[keep])
    if sub.total_cm <= 0:
        return a
    remaining = min(max(layer.length_needed_cm / sub.total_cm, 0.0), 1.0)
    return sub.quantile_depth(remaining)
