"""Profile wall (trench face): root intersections counted on a grid of square cells.

On a vertical trench face ``y = Y`` the roots cut by the face are counted per cell. For
lines oriented isotropically in space, the number of intersections per unit area of a
section plane ``Q_A`` and the length density ``L_V`` satisfy ``L_V = 2 Q_A`` (Smith &
Guttman 1953, "Measurement of internal boundaries in three-dimensional structures by random
sectioning", Trans. AIME 197:81-87). Root systems are not isotropic, so the estimate is
biased by orientation: roots parallel to the face are never counted, roots normal to it
give ``Q_A = L_V`` (estimate twice the truth). The true RLD of the slab
``|y - Y| <= thickness/2`` behind each cell is reported beside the estimate, by exact
segment/box clipping (:func:`rootsim.geometry.segment_box_length`); a root lying exactly in the
plane between two cells is given to one of them (half-open cells).

A segment is counted as crossing when its end points lie on different sides of the plane
under the half-open rule ``y < Y`` versus ``y >= Y``, so a root made of several segments that
meets the plane at a shared end point is counted once.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Iterable

import numpy as np

from ..errors import SamplingError
from ..geometry import segment_box_length
from .columns import sampling_inputs
from .container import check_point_in_soil
from .geometry_strings import parse_numbers

__all__ = ["Wall", "parse_wall", "sample_wall", "cell_edges", "WALL_COLUMNS"]

_BROADCAST_ELEMENTS = 1_000_000  # segment x cell pairs per vectorized block (bounds memory)
WALL_COLUMNS = ("x_left_cm", "x_right_cm", "depth_top_cm", "depth_bottom_cm", "intersections",
                "rld_estimate_cm_per_cm3", "rld_true_cm_per_cm3", "slab_thickness_cm")


@dataclass(frozen=True)
class Wall:
    """A vertical profile wall on the plane ``y = y_cm``, from ``x_min_cm`` to ``x_max_cm`` and 0 to ``depth_cm``.

    Parameters
    ----------
    y_cm, x_min_cm, x_max_cm, depth_cm : float
        Wall position and extent, cm (depth positive downward).
    cell_cm : float
        Side of the square counting cells, cm; cells at the right and bottom edges are cut
        short when the extent is not a multiple of it.
    slab_thickness_cm : float, optional
        Thickness of the slab centred on the wall whose true RLD is reported; default ``cell_cm``.
    """

    y_cm: float
    x_min_cm: float
    x_max_cm: float
    depth_cm: float
    cell_cm: float
    slab_thickness_cm: float | None = None

    @property
    def slab_cm(self) -> float:
        return self.cell_cm if self.slab_thickness_cm is None else self.slab_thickness_cm


def parse_wall(text: str, *, option: str = "--wall") -> Wall:
    """Parse ``"Y,XMIN,XMAX,DEPTH,CELL"`` (cm) into a checked :class:`Wall`."""
    v = parse_numbers(text, option=option, names=("y", "xmin", "xmax", "depth", "cell"))
    wall = Wall(y_cm=v["y"], x_min_cm=v["xmin"], x_max_cm=v["xmax"], depth_cm=v["depth"], cell_cm=v["cell"])
    validate_wall(wall, label=f"{option} {text}")
    return wall


def validate_wall(wall: Wall, *, label: str, metadata=None) -> None:
    """Raise :class:`SamplingError` for an empty or inverted wall, bad cell size, or a wall outside the container."""
    if not wall.x_min_cm < wall.x_max_cm:
        raise SamplingError(f"{label}: XMIN ({wall.x_min_cm:g}) must be less than XMAX ({wall.x_max_cm:g})")
    if not wall.depth_cm > 0:
        raise SamplingError(f"{label}: DEPTH must be > 0 cm, got {wall.depth_cm:g}")
    if not wall.cell_cm > 0:
        raise SamplingError(f"{label}: CELL must be > 0 cm, got {wall.cell_cm:g}")
    if not wall.slab_cm > 0:
        raise SamplingError(f"{label}: slab thickness must be > 0 cm, got {wall.slab_cm:g}")
    if metadata is not None:
        for x in (wall.x_min_cm, wall.x_max_cm):
            check_point_in_soil(label, x_cm=x, y_cm=wall.y_cm, depth_cm=wall.depth_cm, margin_cm=0.0, metadata=metadata)


def cell_edges(start: float, stop: float, step: float) -> np.ndarray:
    """Edges ``start, start + step, ..., stop`` (last interval shorter if needed), shape (k + 1,)."""
    from ..limits import check_cell_count

    check_cell_count((stop - start) / step, what=f"cells or windows of {step:g} cm")
    k = max(1, math.ceil((stop - start) / step - 1e-9))
    return np.minimum(start + step * np.arange(k + 1), stop)


def _crossings(p0: np.ndarray, p1: np.ndarray, y_cm: float) -> tuple[np.ndarray, np.ndarray]:
    """x and depth where segments cross the plane ``y = y_cm`` (half-open side rule), cm."""
    side0 = p0[:, 1] < y_cm
    side1 = p1[:, 1] < y_cm
    idx = np.flatnonzero(side0 != side1)
    a, b = p0[idx], p1[idx]
    t = (y_cm - a[:, 1]) / (b[:, 1] - a[:, 1])
    x = a[:, 0] + t * (b[:, 0] - a[:, 0])
    depth = -(a[:, 2] + t * (b[:, 2] - a[:, 2]))
    return x, depth


def _bin(values: np.ndarray, edges: np.ndarray) -> np.ndarray:
    """Cell index of each value on ``edges`` (half-open cells, the last one closed); -1 outside."""
    i = np.searchsorted(edges, values, side="right") - 1
    i = np.where(values == edges[-1], len(edges) - 2, i)
    return np.where((values >= edges[0]) & (values <= edges[-1]), i, -1)


def sample_wall(system: Any, *, walls: Iterable[Any], check_container: bool = True):
    """Intersections per cell of profile walls and the RLD estimated from them, beside the true RLD.

    Parameters
    ----------
    system : RootSystem or pandas.DataFrame
        Segment table (cm).
    walls : iterable of Wall or str
        The walls; strings are ``"Y,XMIN,XMAX,DEPTH,CELL"`` (cm).
    check_container : bool
        Refuse walls outside a pot or rhizobox named in the metadata (default).

    Returns
    -------
    pandas.DataFrame
        One row per cell: ``x_left_cm, x_right_cm, depth_top_cm, depth_bottom_cm,
        intersections, rld_estimate_cm_per_cm3`` (``2 × intersections / cell area``, Smith &
        Guttman 1953), ``rld_true_cm_per_cm3`` (exact length in the slab behind the cell over
        its volume), ``slab_thickness_cm``, then ``cell_area_cm2``, ``slab_root_length_cm``,
        ``wall_id``, ``y_cm``.
    """
    import pandas as pd

    walls, p0, p1 = sampling_inputs(system, walls, kind=Wall, noun="wall", form="Y,XMIN,XMAX,DEPTH,CELL",
                                    parse=parse_wall, validate=validate_wall,
                                    describe=lambda w: f"y = {w.y_cm:g}", check_container=check_container)
    frames = []
    for wall_id, wall in enumerate(walls):
        x_edges = cell_edges(wall.x_min_cm, wall.x_max_cm, wall.cell_cm)
        d_edges = cell_edges(0.0, wall.depth_cm, wall.cell_cm)
        nx, nd = len(x_edges) - 1, len(d_edges) - 1
        x, depth = _crossings(p0, p1, wall.y_cm)
        ix, idp = _bin(x, x_edges), _bin(depth, d_edges)
        ok = (ix >= 0) & (idp >= 0)
        counts = np.bincount(idp[ok] * nx + ix[ok], minlength=nx * nd).reshape(nd, nx)
        slab_length = _slab_lengths(p0, p1, wall, x_edges, d_edges)
        widths = np.diff(x_edges)[None, :]
        heights = np.diff(d_edges)[:, None]
        area = widths * heights
        grid_x_left = np.broadcast_to(x_edges[None, :-1], (nd, nx))
        grid_x_right = np.broadcast_to(x_edges[None, 1:], (nd, nx))
        grid_top = np.broadcast_to(d_edges[:-1, None], (nd, nx))
        grid_bottom = np.broadcast_to(d_edges[1:, None], (nd, nx))
        frames.append(pd.DataFrame({
            "x_left_cm": grid_x_left.ravel(),
            "x_right_cm": grid_x_right.ravel(),
            "depth_top_cm": grid_top.ravel(),
            "depth_bottom_cm": grid_bottom.ravel(),
            "intersections": counts.ravel().astype(np.int64),
            "rld_estimate_cm_per_cm3": (2.0 * counts / area).ravel(),
            "rld_true_cm_per_cm3": (slab_length / (area * wall.slab_cm)).ravel(),
            "slab_thickness_cm": np.full(nx * nd, wall.slab_cm),
            "cell_area_cm2": area.ravel(),
            "slab_root_length_cm": slab_length.ravel(),
            "wall_id": np.full(nx * nd, wall_id, dtype=np.int64),
            "y_cm": np.full(nx * nd, wall.y_cm),
        }))
    return pd.concat(frames, ignore_index=True)


def _slab_lengths(p0: np.ndarray, p1: np.ndarray, wall: Wall, x_edges: np.ndarray, d_edges: np.ndarray) -> np.ndarray:
    """Exact root length in each slab box behind the wall cells, shape (n_depth_cells, n_x_cells), cm.

    Loops over depth rows of cells (few); within a row, candidate segments x cells are broadcast in blocks.
    """
    half = wall.slab_cm / 2
    ylo, yhi = wall.y_cm - half, wall.y_cm + half
    ymin = np.minimum(p0[:, 1], p1[:, 1])
    ymax = np.maximum(p0[:, 1], p1[:, 1])
    xmin = np.minimum(p0[:, 0], p1[:, 0])
    xmax = np.maximum(p0[:, 0], p1[:, 0])
    near = np.flatnonzero((ymax >= ylo) & (ymin <= yhi) & (xmax >= x_edges[0]) & (xmin <= x_edges[-1]))
    a, b = p0[near], p1[near]
    zmin = np.minimum(a[:, 2], b[:, 2])
    zmax = np.maximum(a[:, 2], b[:, 2])
    nx = len(x_edges) - 1
    out = np.zeros((len(d_edges) - 1, nx))
    lo = np.empty((nx, 3))
    hi = np.empty((nx, 3))
    lo[:, 0], hi[:, 0] = x_edges[:-1], x_edges[1:]
    lo[:, 1], hi[:, 1] = ylo, yhi
    for row, (top, bottom) in enumerate(zip(d_edges[:-1], d_edges[1:])):
        sel = np.flatnonzero((zmax >= -bottom) & (zmin <= -top))
        if sel.size == 0:
            continue
        lo[:, 2], hi[:, 2] = -bottom, -top
        # Roots lying exactly in a plane between two cells belong to one of them (half-open cells,
        # as for the intersection counts): drop flat segments from rows and columns they only touch.
        flat_z = a[sel, 2] == b[sel, 2]
        sel = sel[~flat_z | (_bin(-a[sel, 2], d_edges) == row)]
        chunk = max(1, _BROADCAST_ELEMENTS // nx)
        for start in range(0, sel.size, chunk):
            part = sel[start:start + chunk]
            lengths = segment_box_length(a[part, None, :], b[part, None, :], lo[None], hi[None])
            flat_x = np.flatnonzero(a[part, 0] == b[part, 0])
            owner = _bin(a[part[flat_x], 0], x_edges)
            keep = np.zeros((flat_x.size, nx), dtype=bool)
            keep[np.flatnonzero(owner >= 0), owner[owner >= 0]] = True
            lengths[flat_x] *= keep
            out[row] += lengths.sum(axis=0)
    return out
