"""Small growth specs and measurements on grown segment tables, shared by the growth tests.

The specs are built as dictionaries (the parsed form of a TOML parameter file) and validated with
:func:`rootsim.spec.parse_spec`; every root class starts "quiet" (no tropism, no random turning, no
branching) so that a test switches on only the process it checks.
"""

from __future__ import annotations

import hashlib

import numpy as np
import pandas as pd

import rootsim
from rootsim.spec import parse_spec

QUIET_CLASS = {
    "random_turning_deg_per_sqrt_cm": 0.0,
    "gravitropism_per_cm": 0.0,
    "plagiotropism_per_cm": 0.0,
    "exotropism_per_cm": 0.0,
    "initial_angle_from_vertical_deg": 0.0,
    "elongation_rate_cm_per_day": 1.0,
    "max_length_cm": 1000.0,
}


def root_class(**values) -> dict:
    """A root-class table: quiet defaults overridden by ``values``."""
    return {**QUIET_CLASS, **values}


def make_spec(classes: dict, *, emergence=None, days: float = 10.0, step_days: float = 0.5, seed: int = 0,
              stand=None, soil=None, container=None, sowing_depth_cm: float = 3.0):
    """A validated :class:`rootsim.spec.Spec` from root-class tables.

    ``emergence`` defaults to one root of the first class at day 0.
    """
    first = next(iter(classes))
    data = {
        "run": {"duration_days": days, "time_step_days": step_days, "seed": seed},
        "stand": {"sowing_depth_cm": sowing_depth_cm, **(stand or {})},
        "emergence": emergence if emergence is not None else [{"root_class": first}],
        "root_classes": classes,
    }
    if soil is not None:
        data["soil"] = soil
    if container is not None:
        data["container"] = container
    return parse_spec(data, source="<test spec>")


def grow_frame(spec, **overrides) -> pd.DataFrame:
    """Grow ``spec`` (keyword overrides go to :func:`rootsim.grow`) and return the segment table."""
    return rootsim.grow(spec, progress=False, **overrides).to_dataframe()


def directions(df: pd.DataFrame) -> np.ndarray:
    """Unit chord directions of the segments, shape (n, 3)."""
    d = df[["x1", "y1", "z1"]].to_numpy() - df[["x0", "y0", "z0"]].to_numpy()
    return d / np.linalg.norm(d, axis=1)[:, None]


def angle_from_vertical_deg(unit: np.ndarray) -> np.ndarray:
    """Angle (deg) between vectors (n, 3) and the downward vertical (arctan2: accurate near 0 and 180)."""
    return np.degrees(np.arctan2(np.hypot(unit[:, 0], unit[:, 1]), -unit[:, 2]))


def root_matrix(df: pd.DataFrame, column_values: np.ndarray) -> np.ndarray:
    """Values of equal-length roots as a matrix (roots, segments along the root from the base).

    Requires every root to have the same number of segments; checks that each segment continues the
    previous one of its root (its ``parent_id``), so that the order along the root is certain.
    """
    order = np.lexsort((df["segment_id"].to_numpy(), df["root_id"].to_numpy()))
    roots = df["root_id"].to_numpy()[order]
    _, counts = np.unique(roots, return_counts=True)
    assert np.all(counts == counts[0]), "roots differ in segment count"
    ids = df["segment_id"].to_numpy()[order].reshape(len(counts), counts[0])
    parents = df["parent_id"].to_numpy()[order].reshape(len(counts), counts[0])
    np.testing.assert_array_equal(parents[:, 1:], ids[:, :-1])
    values = np.asarray(column_values)[order]
    return values.reshape((len(counts), counts[0]) + values.shape[1:])


def length_below(df: pd.DataFrame, depth_cm: float) -> float:
    """Root length (cm) deeper than ``depth_cm``: each straight segment clipped at the plane (linear
    interpolation along the segment)."""
    z0, z1 = df["z0"].to_numpy(), df["z1"].to_numpy()
    length = df["length_cm"].to_numpy()
    plane = -depth_cm
    lo, hi = np.minimum(z0, z1), np.maximum(z0, z1)
    span = hi - lo
    frac = np.where(span > 0, np.clip((plane - lo) / np.where(span > 0, span, 1.0), 0.0, 1.0),
                    (lo < plane).astype(float))
    return float(np.sum(length * frac))


def first_segments(df: pd.DataFrame) -> pd.DataFrame:
    """The first segment of every root (its parent is on another root, or it starts at the plant),
    with the parent segment's chord direction in columns ``parent_dx, parent_dy, parent_dz``."""
    ids = df["segment_id"].to_numpy()
    assert np.array_equal(ids, np.arange(len(df))), "segment ids must be 0..n-1 in row order"
    parent = df["parent_id"].to_numpy()
    root = df["root_id"].to_numpy()
    has_parent = parent >= 0
    first = ~has_parent
    first[has_parent] = root[parent[has_parent]] != root[has_parent]
    out = df[first].copy()
    d = directions(df)
    p = out["parent_id"].to_numpy()
    pd_ = np.where((p >= 0)[:, None], d[np.maximum(p, 0)], np.nan)
    out["parent_dx"], out["parent_dy"], out["parent_dz"] = pd_.T
    return out


def insertion_angles_deg(df: pd.DataFrame, firsts: pd.DataFrame) -> np.ndarray:
    """Angle (deg) between each lateral's first segment and its parent segment (common practice)."""
    d = directions(firsts)
    p = firsts[["parent_dx", "parent_dy", "parent_dz"]].to_numpy()
    cross = np.linalg.norm(np.cross(d, p), axis=1)
    return np.degrees(np.arctan2(cross, np.sum(d * p, axis=1)))


def column_digests(system) -> dict:
    """SHA-256 of every column's bytes of a system's segment table (categorical columns by their codes): equal
    digests mean byte-identical tables."""
    frame = system.to_dataframe()
    out = {}
    for name in frame.columns:
        column = frame[name]
        values = column.cat.codes.to_numpy() if isinstance(column.dtype, pd.CategoricalDtype) else column.to_numpy()
        out[name] = hashlib.sha256(np.ascontiguousarray(values).tobytes()).hexdigest()
    return out
