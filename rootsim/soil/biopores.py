"""Biopores and cracks: straight channels of low resistance (vertical or inclined cylinders).

Each biopore is a cylinder of ``radius_cm`` around the axis from its top point to its bottom point. They come
from an explicit list or are drawn at a density per m² over a rectangular ground area, with the run's seed: the
generator is ``numpy.random.default_rng(SeedSequence(seed, spawn_key=(BIOPORE_STREAM,)))``, a child stream that
does not overlap the per-plant growth streams (``SeedSequence(seed).spawn(n_plants)``), so adding biopores
changes no plant's own draws. Counts are Poisson with mean ``density * area`` (a spatially random, i.e. Poisson,
point pattern of pore tops; common practice), tops uniform over the area, radius and inclination drawn per pore
and the azimuth uniform.

:func:`biopore_at` is a numba kernel answering "which biopore is this point in (or -1)"; the pore's unit axis
(pointing down the channel) is ``compiled.axis[index]``. Candidates come from a uniform grid of bins over x, y, so
a query reads only the pores whose footprint overlaps the point's bin.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import NamedTuple

import numpy as np
from numba import njit

from ..errors import RootsimError

__all__ = ["BIOPORE_STREAM", "Biopores", "CompiledBiopores", "biopores_from_list", "draw_biopores",
           "biopore_at", "biopores_at"]

#: Spawn key of the biopore stream within the run's SeedSequence (far above any plant index).
BIOPORE_STREAM = 0x42696F70


class CompiledBiopores(NamedTuple):
    """Biopores as plain arrays (numba-friendly).

    Attributes
    ----------
    top : ndarray, shape (n, 3)
        Top point of each axis (x, y, z cm; z = -depth).
    axis : ndarray, shape (n, 3)
        Unit axis pointing from the top down the channel.
    length_cm, radius_cm : ndarray, shape (n,)
    bin_float : ndarray, shape (4,)
        x and y of the bin grid's low corner, bin size (cm) and its inverse (1/cm).
    bin_int : ndarray of int64, shape (2,)
        Bins along x and y.
    bin_first : ndarray of int64, shape (n_bins + 1,)
    bin_items : ndarray of int64
        Pores of bin ``b`` are ``bin_items[bin_first[b]:bin_first[b + 1]]`` (bin ``b = i * n_y + j``).
    """

    top: np.ndarray
    axis: np.ndarray
    length_cm: np.ndarray
    radius_cm: np.ndarray
    bin_float: np.ndarray
    bin_int: np.ndarray
    bin_first: np.ndarray
    bin_items: np.ndarray


@dataclass(frozen=True)
class Biopores:
    """A set of biopores and their compiled arrays.

    Attributes
    ----------
    top_cm, bottom_cm : ndarray, shape (n, 3)
        Axis end points (x, y, z; z = -depth).
    radius_cm : ndarray, shape (n,)
    resistance_mpa : float
        Penetration resistance inside a biopore.
    compiled : CompiledBiopores
    """

    top_cm: np.ndarray
    bottom_cm: np.ndarray
    radius_cm: np.ndarray
    resistance_mpa: float
    compiled: CompiledBiopores

    @property
    def count(self) -> int:
        return int(self.radius_cm.size)

    def lookup(self, x, y, z):
        """Biopore index (or -1) and unit axis at points; see :func:`biopores_at`."""
        return biopores_at(self.compiled, x, y, z)


def biopores_from_list(top_cm, bottom_cm, radius_cm, *, resistance_mpa: float = 0.0) -> Biopores:
    """Biopores from explicit axes.

    Parameters
    ----------
    top_cm, bottom_cm : array_like, shape (n, 3)
        Axis end points (x, y, z in cm, z = -depth); the top must be above the bottom.
    radius_cm : array_like, shape (n,) or scalar
    """
    top = np.asarray(top_cm, float).reshape(-1, 3)
    bottom = np.asarray(bottom_cm, float).reshape(-1, 3)
    radius = np.broadcast_to(np.asarray(radius_cm, float), (top.shape[0],)).copy()
    if top.shape != bottom.shape:
        raise RootsimError("biopores: top_cm and bottom_cm need the same number of points")
    if not (np.isfinite(top).all() and np.isfinite(bottom).all() and np.isfinite(radius).all()):
        raise RootsimError("biopores: coordinates and radii must be finite numbers")
    if (radius <= 0).any():
        raise RootsimError("biopores: radius_cm must be > 0")
    if (bottom[:, 2] >= top[:, 2]).any():
        k = int(np.flatnonzero(bottom[:, 2] >= top[:, 2])[0])
        raise RootsimError(f"biopores: channel {k} does not go down (its bottom must be deeper than its top)")
    return Biopores(top, bottom, radius, float(resistance_mpa), _compile(top, bottom, radius))


def draw_biopores(*, seed: int, density_per_m2: float, x_range_cm, y_range_cm, depth_top_cm: float,
                  depth_bottom_cm: float, radius_cm, inclination_from_vertical_deg=(0.0, 0.0),
                  resistance_mpa: float = 0.0) -> Biopores:
    """Draw biopores at ``density_per_m2`` over the ground rectangle ``x_range_cm`` × ``y_range_cm``.

    Parameters
    ----------
    seed : int, keyword-only
        The run's seed; the biopore stream is its child ``SeedSequence(seed, spawn_key=(BIOPORE_STREAM,))``.
    density_per_m2 : float
        Mean number of pores per m² of ground.
    x_range_cm, y_range_cm : (low, high)
    depth_top_cm, depth_bottom_cm : float
        Depth range every pore spans (measured along the vertical).
    radius_cm, inclination_from_vertical_deg : float or (low, high)
        Fixed, or uniform between low and high, per pore.

    Returns
    -------
    Biopores
    """
    if not (depth_bottom_cm > depth_top_cm >= 0):
        raise RootsimError("biopores: needs 0 <= depth_top_cm < depth_bottom_cm")
    rng = np.random.default_rng(np.random.SeedSequence(int(seed), spawn_key=(BIOPORE_STREAM,)))
    (x0, x1), (y0, y1) = x_range_cm, y_range_cm
    area_m2 = (x1 - x0) * (y1 - y0) / 1e4
    n = int(rng.poisson(density_per_m2 * area_m2))
    x = rng.uniform(x0, x1, n)
    y = rng.uniform(y0, y1, n)
    radius = _uniform(rng, radius_cm, n)
    tilt = np.radians(_uniform(rng, inclination_from_vertical_deg, n))
    azimuth = rng.uniform(0.0, 2 * math.pi, n)
    depth_span = depth_bottom_cm - depth_top_cm
    reach = depth_span * np.tan(tilt)
    top = np.stack([x, y, np.full(n, -float(depth_top_cm))], axis=1)
    bottom = np.stack([x + reach * np.cos(azimuth), y + reach * np.sin(azimuth), np.full(n, -float(depth_bottom_cm))],
                      axis=1)
    return biopores_from_list(top, bottom, radius, resistance_mpa=resistance_mpa)


def _uniform(rng, value, n) -> np.ndarray:
    low, high = (value, value) if np.isscalar(value) else value
    return rng.uniform(float(low), float(high), n) if high > low else np.full(n, float(low))


def _compile(top: np.ndarray, bottom: np.ndarray, radius: np.ndarray) -> CompiledBiopores:
    n = top.shape[0]
    vec = bottom - top
    length = np.linalg.norm(vec, axis=1)
    axis = vec / np.where(length > 0, length, 1.0)[:, None]
    lo = np.minimum(top[:, :2], bottom[:, :2]) - radius[:, None]
    hi = np.maximum(top[:, :2], bottom[:, :2]) + radius[:, None]
    if n:
        origin = lo.min(axis=0)
        extent = hi.max(axis=0) - origin
        # about 16 bins per pore: most bins are empty, so most look-ups end at the bin (no candidate to test)
        size = max(float(np.sqrt(extent[0] * extent[1] / (16 * n))), float(2 * radius.max()), 1e-6)
        shape = np.maximum(np.ceil(extent / size).astype(np.int64), 1)
        shape = np.minimum(shape, 4096)
        size = max(size, float(extent.max() / 4096) * (1 + 1e-9))
    else:
        origin, size, shape = np.zeros(2), 1.0, np.ones(2, np.int64)
    # look-ups scale by 1 / size (a product): a pore also goes into a neighbouring bin when its box ends within
    # a millionth of a bin of the shared face, so the product's rounding can never pick a bin without it
    i0 = np.clip(np.floor((lo - origin) / size - 1e-6).astype(np.int64), 0, shape - 1)
    i1 = np.clip(np.floor((hi - origin) / size + 1e-6).astype(np.int64), 0, shape - 1)
    counts_x = i1[:, 0] - i0[:, 0] + 1
    counts_y = i1[:, 1] - i0[:, 1] + 1
    per_pore = counts_x * counts_y
    owner = np.repeat(np.arange(n), per_pore)
    local = np.arange(per_pore.sum()) - np.repeat(np.cumsum(per_pore) - per_pore, per_pore)
    bx = i0[owner, 0] + local // counts_y[owner]
    by = i0[owner, 1] + local % counts_y[owner]
    bins = bx * shape[1] + by
    order = np.argsort(bins, kind="stable")
    first = np.zeros(int(shape[0] * shape[1]) + 1, np.int64)
    np.add.at(first, bins + 1, 1)
    return CompiledBiopores(
        top=np.ascontiguousarray(top, np.float64), axis=np.ascontiguousarray(axis, np.float64),
        length_cm=np.ascontiguousarray(length), radius_cm=np.ascontiguousarray(radius),
        bin_float=np.array([origin[0], origin[1], size, 1.0 / size], np.float64), bin_int=shape.astype(np.int64),
        bin_first=np.cumsum(first).astype(np.int64), bin_items=owner[order].astype(np.int64))


@njit(cache=True, inline="always")
def biopore_at(compiled, x, y, z):
    """Index of a biopore containing the point (x, y, z) cm, or -1 (scalar numba kernel).

    A point is inside pore ``k`` when its projection on the axis falls within ``[0, length_cm[k]]`` and its
    distance from the axis is at most ``radius_cm[k]``. Where pores overlap, the lowest index is returned.
    """
    b = compiled
    if b.radius_cm.size == 0:
        return -1
    i = int(math.floor((x - b.bin_float[0]) * b.bin_float[3]))
    j = int(math.floor((y - b.bin_float[1]) * b.bin_float[3]))
    if i < 0 or j < 0 or i >= b.bin_int[0] or j >= b.bin_int[1]:
        return -1
    cell = i * b.bin_int[1] + j
    best = -1
    for m in range(b.bin_first[cell], b.bin_first[cell + 1]):
        k = b.bin_items[m]
        if best >= 0 and k > best:
            continue
        rx = x - b.top[k, 0]
        ry = y - b.top[k, 1]
        rz = z - b.top[k, 2]
        t = rx * b.axis[k, 0] + ry * b.axis[k, 1] + rz * b.axis[k, 2]
        if t < 0.0 or t > b.length_cm[k]:
            continue
        d2 = rx * rx + ry * ry + rz * rz - t * t
        if d2 <= b.radius_cm[k] * b.radius_cm[k]:
            best = k
    return best


@njit(cache=True)
def _lookup_loop(b, x, y, z, index, axis):
    for n in range(x.size):
        k = biopore_at(b, x[n], y[n], z[n])
        index[n] = k
        if k >= 0:
            axis[n, 0] = b.axis[k, 0]
            axis[n, 1] = b.axis[k, 1]
            axis[n, 2] = b.axis[k, 2]


def biopores_at(compiled: CompiledBiopores, x, y, z):
    """Biopore index (or -1) and unit axis (zeros where none) at many points.

    Returns
    -------
    index : ndarray of int64, broadcast shape of x, y, z
    axis : ndarray of float64, shape (*broadcast shape, 3)
    """
    bx, by, bz = np.broadcast_arrays(np.asarray(x, float), np.asarray(y, float), np.asarray(z, float))
    shape = bx.shape
    px, py, pz = (np.ascontiguousarray(a.ravel()) for a in (bx, by, bz))
    index = np.empty(px.size, np.int64)
    axis = np.zeros((px.size, 3))
    _lookup_loop(compiled, px, py, pz, index, axis)
    return index.reshape(shape), axis.reshape(shape + (3,))
