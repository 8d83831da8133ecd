"""Synthetic root systems with known geometry, for checking sampling methods.

Stereological estimators are exact only in expectation for isotropic lines; these
generators build such test fields (and straight roots at chosen positions) as valid
:class:`~rootsim.rootsystem.RootSystem` objects, so any sampler can be checked against an
analytic answer.
"""

from __future__ import annotations

from typing import Mapping

import numpy as np

from ..errors import SamplingError

__all__ = ["lines_system", "isotropic_lines", "random_walk_roots"]


def lines_system(p0: np.ndarray, p1: np.ndarray, *, radius_cm: float = 0.02, metadata: Mapping | None = None,
                 parent_id: np.ndarray | None = None, root_id: np.ndarray | None = None):
    """A RootSystem whose segments are the given straight lines.

    Parameters
    ----------
    p0, p1 : array_like, shape (n, 3)
        End points, cm.
    radius_cm : float
        Radius given to every segment, cm.
    metadata : mapping, optional
        Table metadata (stand, container).
    parent_id, root_id : ndarray of int, shape (n,), optional
        Topology; default every segment is its own root (parent -1).

    Returns
    -------
    RootSystem
    """
    from ..rootsystem import RootSystem

    p0 = np.asarray(p0, dtype=np.float64).reshape(-1, 3)
    p1 = np.asarray(p1, dtype=np.float64).reshape(-1, 3)
    n = len(p0)
    ids = np.arange(n, dtype=np.int64)
    columns = {
        "segment_id": ids,
        "parent_id": np.full(n, -1, dtype=np.int64) if parent_id is None else np.asarray(parent_id, dtype=np.int64),
        "plant_id": np.zeros(n, dtype=np.int64),
        "root_id": ids.copy() if root_id is None else np.asarray(root_id, dtype=np.int64),
        "order": np.zeros(n, dtype=np.int64),
        "root_class": np.full(n, "test_line", dtype=object),
        "x0": p0[:, 0], "y0": p0[:, 1], "z0": p0[:, 2],
        "x1": p1[:, 0], "y1": p1[:, 1], "z1": p1[:, 2],
        "radius_cm": np.full(n, radius_cm),
        "length_cm": np.linalg.norm(p1 - p0, axis=1),
        "birth_day": np.zeros(n),
    }
    return RootSystem(columns, metadata)


def isotropic_lines(n: int, *, box_lo, box_hi, length_cm: float, rng: np.random.Generator,
                    dimensions: int = 3) -> tuple[np.ndarray, np.ndarray]:
    """Segments of fixed length, midpoints uniform in a box, directions uniform on the sphere (or circle).

    Parameters
    ----------
    n : int
        Number of segments.
    box_lo, box_hi : array_like, shape (3,)
        Box of the midpoints, cm.
    length_cm : float
        Segment length, cm.
    rng : numpy.random.Generator
        Source of randomness.
    dimensions : {3, 2}
        3: directions uniform on the unit sphere (normalised Gaussian vectors); 2: uniform
        angles in the x-z plane (y constant), for projection tests.

    Returns
    -------
    p0, p1 : ndarray, shape (n, 3)
    """
    lo = np.asarray(box_lo, dtype=np.float64)
    hi = np.asarray(box_hi, dtype=np.float64)
    mid = lo + (hi - lo) * rng.random((n, 3))
    if dimensions == 3:
        u = rng.standard_normal((n, 3))
        u /= np.linalg.norm(u, axis=1, keepdims=True)
    elif dimensions == 2:
        ang = rng.uniform(0.0, 2 * np.pi, n)
        u = np.column_stack([np.cos(ang), np.zeros(n), np.sin(ang)])
    else:
        raise SamplingError(f"isotropic_lines: dimensions must be 2 or 3, got {dimensions}")
    half = 0.5 * length_cm * u
    return mid - half, mid + half


def random_walk_roots(n_segments: int, *, n_roots: int, segment_cm: float, rng: np.random.Generator,
                      spread_cm: float = 30.0, metadata: Mapping | None = None):
    """A root system of downward-biased random walks starting at the surface (benchmark stand-in).

    Parameters
    ----------
    n_segments : int
        Total number of segments (split evenly between roots).
    n_roots : int
        Number of roots; each starts at a random surface point within ``±spread_cm``.
    segment_cm : float
        Length of every segment, cm.
    rng : numpy.random.Generator
    spread_cm : float
        Half-width of the square the roots start in, cm.
    metadata : mapping, optional

    Returns
    -------
    RootSystem
        Continuation topology (each segment's parent is the previous one of its root).
    """
    per_root = max(1, n_segments // n_roots)
    steps = rng.standard_normal((n_roots, per_root, 3))
    steps[:, :, 2] -= 1.5
    steps /= np.linalg.norm(steps, axis=2, keepdims=True)
    steps *= segment_cm
    start = np.zeros((n_roots, 1, 3))
    start[:, 0, :2] = rng.uniform(-spread_cm, spread_cm, (n_roots, 2))
    path = np.concatenate([start, start + np.cumsum(steps, axis=1)], axis=1)
    path[:, :, 2] = np.minimum(path[:, :, 2], 0.0)
    p0 = path[:, :-1].reshape(-1, 3)
    p1 = path[:, 1:].reshape(-1, 3)
    n = len(p0)
    ids = np.arange(n, dtype=np.int64)
    parent = ids - 1
    parent[::per_root] = -1
    root = np.repeat(np.arange(n_roots, dtype=np.int64), per_root)
    return lines_system(p0, p1, metadata=metadata, parent_id=parent, root_id=root)
