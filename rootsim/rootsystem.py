"""The root-system object: stored columns plus cached derived values.

:class:`RootSystem` holds the segment table as a dict of numpy arrays (struct of arrays,
layout in :mod:`rootsim.segment_table`) and table-level metadata (stand layout, container,
run settings). Derived values (tips, continuation flags) are computed once and cached.
Analyses live in their own modules as pure functions over the columns; the methods here
only forward to them.
"""

from __future__ import annotations

import functools
import html
import os
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from .segment_table import COLUMNS, as_categorical, read_segments, validate_columns, write_segments

__all__ = ["RootSystem", "tip_mask", "continuation_mask"]


def continuation_mask(parent_id: np.ndarray, root_id: np.ndarray) -> np.ndarray:
    """Boolean mask, shape (n,): True where a segment continues its parent's root (not a branch, not a start).

    Parameters
    ----------
    parent_id, root_id : ndarray of int, shape (n,)
    """
    parent_id = np.asarray(parent_id)
    has_parent = parent_id >= 0
    out = np.zeros(parent_id.shape, dtype=bool)
    idx = np.flatnonzero(has_parent)
    out[idx] = root_id[parent_id[idx]] == root_id[idx]
    return out


def tip_mask(parent_id: np.ndarray, root_id: np.ndarray) -> np.ndarray:
    """Boolean mask, shape (n,): True for the apical (last) segment of each root, i.e. no segment continues it."""
    parent_id = np.asarray(parent_id)
    cont = continuation_mask(parent_id, root_id)
    continued = np.zeros(parent_id.shape, dtype=bool)
    continued[parent_id[cont]] = True
    return ~continued


def count_distinct(ids: np.ndarray) -> int:
    """Number of distinct integers in ``ids`` without sorting them.

    Ids in 0 .. 4n (as the engine and the RSML reader write them) are counted with one ``bincount`` pass,
    O(n); other ids fall back to ``numpy.unique``.
    """
    ids = np.asarray(ids)
    if ids.size == 0:
        return 0
    low, high = int(ids.min()), int(ids.max())
    if low >= 0 and high <= 4 * ids.size + 1024:
        return int(np.count_nonzero(np.bincount(ids, minlength=0)))
    return int(np.unique(ids).size)


class RootSystem:
    """A grown or imported root system as columnar arrays.

    Parameters
    ----------
    columns : mapping of str to array_like
        Columns in the segment-table layout (validated on construction).
    metadata : mapping, optional
        Table facts: ``stand`` (``n_plants``, ``ground_area_cm2``, ``plant_positions_cm``, ...),
        ``container``, ``run`` and ``spec_file``.
    validate : bool
        Validate the columns (default). The growth engine, which builds valid columns, skips this.

    Connector rows (``is_connector``, see :mod:`rootsim.connectors`) are kept aside: the system's columns are
    the traced segments only, so analyzers and samplers never count them; :meth:`write` and
    :meth:`with_connectors` (for drawings) put them back.
    """

    def __init__(self, columns: Mapping[str, Any], metadata: Mapping | None = None, *, validate: bool = True):
        if validate:
            self._columns = validate_columns(columns)
        else:  # root_class is always dictionary-encoded (a pandas Categorical): one small code per segment
            self._columns = {k: as_categorical(v) if k == "root_class" else np.asarray(v) for k, v in columns.items()}
        self._with_connectors = None
        if "is_connector" in self._columns:
            from .connectors import split_connectors

            self._columns, self._with_connectors = split_connectors(self._columns)
        self.metadata: dict = dict(metadata or {})

    # -- stored data -------------------------------------------------------------------------
    def __getitem__(self, name: str) -> np.ndarray:
        return self._columns[name]

    def __contains__(self, name: str) -> bool:
        return name in self._columns

    def __len__(self) -> int:
        return len(self._columns["segment_id"])

    @property
    def columns(self) -> list[str]:
        """Column names, required layout first."""
        return list(self._columns)

    @property
    def n_segments(self) -> int:
        return len(self)

    @property
    def n_plants(self) -> int:
        stand = self.metadata.get("stand", {})
        if "n_plants" in stand:
            return int(stand["n_plants"])
        return int(np.unique(self["plant_id"]).size)

    @property
    def ground_area_cm2(self) -> float | None:
        """Ground area of the stand (plant spacing x row spacing x plants), cm², if known."""
        value = self.metadata.get("stand", {}).get("ground_area_cm2")
        return None if value is None else float(value)

    # -- cached derived values ----------------------------------------------------------------
    @functools.cached_property
    def is_tip(self) -> np.ndarray:
        """Boolean mask, shape (n,): apical segment of each root."""
        return tip_mask(self["parent_id"], self["root_id"])

    @functools.cached_property
    def is_continuation(self) -> np.ndarray:
        """Boolean mask, shape (n,): segment continues its parent's root."""
        return continuation_mask(self["parent_id"], self["root_id"])

    @property
    def n_tips(self) -> int:
        return int(self.is_tip.sum())

    # -- conversion ---------------------------------------------------------------------------
    def to_dataframe(self):
        """The segment table as a :class:`pandas.DataFrame` (``root_class`` categorical)."""
        import pandas as pd

        df = pd.DataFrame(dict(self._columns))
        df.attrs["rootsim"] = self.metadata
        return df

    @classmethod
    def from_dataframe(cls, df, metadata: Mapping | None = None) -> "RootSystem":
        """Build from a DataFrame in the segment-table layout (validated).

        Rows of a larger table (``df[df["order"] == 1]``) are accepted: strictly increasing
        ``segment_id`` values are renumbered 0..m-1 and parents left out become -1 (as
        :meth:`select` does, which also keeps the stand metadata right for chosen plants).
        """
        meta = dict(df.attrs.get("rootsim", {})) if metadata is None else dict(metadata)
        columns = {c: df[c] for c in df.columns}
        if "segment_id" in columns and "parent_id" in columns:
            columns = _renumbered_rows(columns)
        return cls(columns, meta)

    def select(self, *, order=None, root_class=None, plant=None) -> "RootSystem":
        """The segments of some root orders, root classes and/or plants, with the stand metadata.

        ``system.select(order=1)``, ``system.select(root_class="nodal", plant=[0, 2])``; see
        :func:`rootsim.subsets.select_segments`. Profiles and traits of the result use the
        stand's ground area (for chosen plants: their share of it).
        """
        from .subsets import select_segments

        return select_segments(self, order=order, root_class=root_class, plant=plant)

    def to_networkx(self):
        """A :class:`networkx.DiGraph` of segments, edges parent -> child.

        Node attributes: ``root_id``, ``plant_id``, ``order``, ``root_class``, ``length_cm``,
        ``radius_cm``, ``birth_day``. Edge attribute ``kind`` is ``"continuation"`` or ``"branch"``.
        """
        import networkx as nx

        g = nx.DiGraph()
        ids = self["segment_id"].tolist()
        attrs = {k: self[k].tolist() for k in ("root_id", "plant_id", "order", "root_class", "length_cm", "radius_cm", "birth_day")}
        g.add_nodes_from((i, {k: attrs[k][j] for k in attrs}) for j, i in enumerate(ids))
        parent = self["parent_id"]
        child = np.flatnonzero(parent >= 0)
        kinds = np.where(self.is_continuation[child], "continuation", "branch")
        g.add_edges_from((int(p), int(c), {"kind": str(k)}) for p, c, k in zip(parent[child], child, kinds))
        return g

    # -- persistence --------------------------------------------------------------------------
    @classmethod
    def read(cls, path: str | os.PathLike) -> "RootSystem":
        """Read ``segments.parquet`` (or a directory holding it)."""
        columns, metadata = read_segments(path)
        return cls(columns, metadata, validate=False)

    def write(self, path: str | os.PathLike) -> Path:
        """Write the segment table to Parquet atomically (connector rows included, marked ``is_connector``)."""
        return write_segments(self._with_connectors or self._columns, path, metadata=self.metadata)

    @property
    def n_connectors(self) -> int:
        """Connector segments kept aside (drawn links of imported laterals to their parents; not roots)."""
        return 0 if self._with_connectors is None else len(self._with_connectors["segment_id"]) - len(self)

    def with_connectors(self) -> "RootSystem":
        """The system with its connector rows, for drawings (VTK, renders); itself when it has none.

        Its columns hold the connectors (``is_connector`` true, ``length_cm`` 0) between the traced segments:
        give it to drawing code only, never to analyzers.
        """
        if self._with_connectors is None:
            return self
        drawn = RootSystem.__new__(RootSystem)
        drawn._columns, drawn._with_connectors, drawn.metadata = dict(self._with_connectors), None, self.metadata
        return drawn

    # -- summaries ----------------------------------------------------------------------------
    def summary(self) -> dict:
        """Headline numbers: plants, segments, tips, total length, maximum depth, length by order."""
        length = self["length_cm"]
        order = self["order"]
        by_order = np.bincount(order, weights=length) if len(self) else np.zeros(0)
        depth = -np.minimum(self["z0"], self["z1"]) if len(self) else np.zeros(0)
        return {
            "n_plants": self.n_plants,
            "n_segments": self.n_segments,
            "n_roots": count_distinct(self["root_id"]),
            "n_tips": self.n_tips,
            "total_length_cm": float(length.sum()),
            "max_depth_cm": float(depth.max()) if len(self) else 0.0,
            "length_by_order_cm": {str(i): float(v) for i, v in enumerate(by_order)},
        }

    def __repr__(self) -> str:
        s = self.summary()
        return (
            f"<RootSystem {s['n_plants']} plant(s), {s['n_segments']:,} segments, {s['n_tips']:,} tips, "
            f"{s['total_length_cm']:.1f} cm, max depth {s['max_depth_cm']:.1f} cm>"
        )

    def _repr_html_(self) -> str:
        s = self.summary()
        rows = [
            ("plants", f"{s['n_plants']}"),
            ("segments", f"{s['n_segments']:,}"),
            ("roots", f"{s['n_roots']:,}"),
            ("tips", f"{s['n_tips']:,}"),
            ("total length", f"{s['total_length_cm']:.1f} cm"),
            ("maximum depth", f"{s['max_depth_cm']:.1f} cm"),
        ]
        rows += [(f"length, order {k}", f"{v:.1f} cm") for k, v in s["length_by_order_cm"].items()]
        body = "".join(f"<tr><th style='text-align:left'>{html.escape(k)}</th><td>{html.escape(v)}</td></tr>" for k, v in rows)
        return f"<table><caption>RootSystem</caption>{body}</table>"

    # -- thin forwards to analyzers, exporters and renderers ----------------------------------
    def profile(self, **kwargs):
        """RLD profile by depth layer; see :func:`rootsim.analysis.layer_profile`."""
        from .analysis import layer_profile

        return layer_profile(self, **kwargs)

    def traits(self, **kwargs):
        """Root traits; see :func:`rootsim.analysis.root_traits`."""
        from .analysis import root_traits

        return root_traits(self, **kwargs)

    def export(self, path: str | os.PathLike, **kwargs):
        """Write to a file whose suffix picks the format; see :func:`rootsim.formats.export_file`."""
        from .formats import export_file

        return export_file(self, path, **kwargs)

    def render(self, **kwargs):
        """Offscreen 3D render as an RGB array; see :func:`rootsim.render.render_image`."""
        from .render import render_image

        return render_image(self, **kwargs)


def _renumbered_rows(columns: dict) -> dict:
    """``columns`` with segment ids renumbered 0..m-1 if they are a strictly increasing subset of a
    larger table's ids (parents outside the rows become -1); otherwise unchanged (validation then
    reports what is wrong)."""
    ids = np.asarray(columns["segment_id"].to_numpy() if hasattr(columns["segment_id"], "to_numpy")
                     else columns["segment_id"])
    if ids.size == 0 or not np.issubdtype(ids.dtype, np.integer) or np.array_equal(ids, np.arange(ids.size)):
        return columns
    if ids[0] < 0 or np.any(np.diff(ids) <= 0):
        return columns
    parent = columns["parent_id"]
    parent = np.asarray(parent.to_numpy() if hasattr(parent, "to_numpy") else parent)
    if not np.issubdtype(parent.dtype, np.integer):
        return columns
    position = np.minimum(np.searchsorted(ids, parent), ids.size - 1)
    kept = (parent >= 0) & (ids[position] == parent)
    new_parent = np.where(kept, position, -1).astype(np.int64)
    return {**columns, "segment_id": np.arange(ids.size, dtype=np.int64), "parent_id": new_parent}


def empty_columns() -> dict[str, np.ndarray]:
    """Columns of a root system with no segments."""
    out = {}
    for name in COLUMNS:
        out[name] = np.zeros(0, dtype=object if name == "root_class" else (np.int64 if name in ("segment_id", "parent_id", "plant_id", "root_id", "order") else np.float64))
    return out
