"""Connector segments: drawn links from a lateral's branch point on its parent to its first traced point.

Traced root systems (RSML files from image-tracing tools) often start a lateral a little away from its parent's
centre line. ``rootsim import-rsml --connectors`` adds, for each such lateral, one *connector* segment from the
branch point (the lateral's first traced point projected onto the parent segment it branches from) to the first
traced point, so that drawings show the lateral joined to its parent. A connector is no root: it is marked in the
boolean column ``is_connector`` and carries ``length_cm = 0``.

In a segment table a connector row sits just before the lateral's first traced segment, belongs to the lateral's
root, has the parent segment as its ``parent_id`` and is the ``parent_id`` of the lateral's first traced segment.
:class:`rootsim.RootSystem` keeps connector rows aside when it is built (:func:`split_connectors`), so every
analyzer and sampler sees only the traced segments (zero connector length by construction); writing the system,
and drawings (:meth:`rootsim.RootSystem.with_connectors`), put them back.
"""

from __future__ import annotations

from typing import Any, Mapping

import numpy as np

from .errors import SegmentTableError

__all__ = ["CONNECTOR_COLUMN", "split_connectors", "insert_connectors"]

#: Boolean column marking connector rows.
CONNECTOR_COLUMN = "is_connector"


def split_connectors(columns: Mapping[str, Any]) -> tuple[dict, dict | None]:
    """The traced segments of a table with connector rows, renumbered, and the full table.

    Parameters
    ----------
    columns : mapping of str to ndarray, each shape (n,)
        A valid segment table, possibly with an ``is_connector`` column.

    Returns
    -------
    traced : dict
        The table without connector rows and without ``is_connector``: ``segment_id`` 0..m-1, and the lateral's
        first traced segment has the connector's parent (the parent segment) as its ``parent_id``.
    full : dict or None
        ``columns`` as given when it has connector rows, else None (``traced`` is then ``columns`` without an
        all-false ``is_connector`` column).
    """
    if CONNECTOR_COLUMN not in columns:
        return dict(columns), None
    mask = np.asarray(columns[CONNECTOR_COLUMN])
    if mask.dtype != np.bool_:
        raise SegmentTableError(f"segment table: column {CONNECTOR_COLUMN} must be true/false (got {mask.dtype})")
    traced = {k: v for k, v in columns.items() if k != CONNECTOR_COLUMN}
    if not mask.any():
        return traced, None
    keep = ~mask
    parent = np.asarray(columns["parent_id"], dtype=np.int64)
    rows = np.flatnonzero(mask)
    bad = (parent[rows] < 0) | (np.asarray(columns["length_cm"])[rows] != 0)
    bad[~bad] = mask[parent[rows[~bad]]]  # a connector hanging from a connector
    if bad.any():
        raise SegmentTableError(f"segment table: {CONNECTOR_COLUMN}: row {int(rows[np.flatnonzero(bad)[0]])} is not a "
                                "connector (allowed: a segment with length_cm 0 whose parent is a traced segment)")
    through = parent.copy()
    linked = through >= 0
    linked[linked] = mask[through[linked]]
    through[linked] = parent[through[linked]]  # a connector's child now hangs from the connector's parent
    new_index = np.cumsum(keep, dtype=np.int64) - 1
    out = {}
    for name, values in traced.items():
        out[name] = values[keep]
    kept_parent = through[keep]
    out["parent_id"] = np.where(kept_parent >= 0, new_index[np.maximum(kept_parent, 0)], -1).astype(np.int64)
    out["segment_id"] = np.arange(int(keep.sum()), dtype=np.int64)
    return out, dict(columns)


def insert_connectors(columns: Mapping[str, Any], first_segment: np.ndarray, start_points: np.ndarray,
                      parent_segment: np.ndarray) -> dict:
    """A traced segment table with one connector row inserted before each given lateral's first segment.

    Parameters
    ----------
    columns : mapping of str to ndarray, each shape (n,)
        Traced segment table (``segment_id`` = row number, parents before children).
    first_segment : ndarray of int, shape (k,)
        Row of each connected lateral's first traced segment (increasing).
    start_points : ndarray, shape (k, 3)
        Branch point on the parent of each lateral, cm: the connector's start. Its end is the ``x0, y0, z0`` of
        the lateral's first segment.
    parent_segment : ndarray of int, shape (k,)
        Row of the parent segment each lateral branches from (before ``first_segment``).

    Returns
    -------
    dict
        ``n + k`` rows with ``is_connector``; a connector copies its lateral's plant, root, order, class, radius
        and birth day, and has ``length_cm = 0``.
    """
    first_segment = np.asarray(first_segment, dtype=np.int64)
    n, k = len(columns["segment_id"]), len(first_segment)
    shift = np.zeros(n, dtype=np.int64)
    shift[first_segment] = 1
    new_row = np.arange(n, dtype=np.int64) + np.cumsum(shift)  # traced row -> row in the new table
    connector_row = new_row[first_segment] - 1
    total = n + k
    is_traced = np.ones(total, dtype=bool)
    is_traced[connector_row] = False
    out = {}
    for name, values in columns.items():
        values = np.asarray(values)
        merged = np.empty(total, dtype=values.dtype)
        merged[new_row] = values
        merged[connector_row] = values[first_segment]
        out[name] = merged
    for axis, column in enumerate(("x0", "y0", "z0")):
        out[column][connector_row] = start_points[:, axis]
    for axis, column in enumerate(("x1", "y1", "z1")):
        out[column][connector_row] = np.asarray(columns[("x0", "y0", "z0")[axis]], dtype=np.float64)[first_segment]
    out["length_cm"][connector_row] = 0.0
    parent = np.asarray(columns["parent_id"], dtype=np.int64)
    merged_parent = np.where(parent >= 0, new_row[np.maximum(parent, 0)], -1)
    out["parent_id"][new_row] = merged_parent
    out["parent_id"][new_row[first_segment]] = connector_row
    out["parent_id"][connector_row] = new_row[np.asarray(parent_segment, dtype=np.int64)]
    out["segment_id"] = np.arange(total, dtype=np.int64)
    out[CONNECTOR_COLUMN] = ~is_traced
    return out
