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

**The face prepared as in the field** (all off by default): the face is smoothed and a thin
layer of soil (``scraped_cm``, e.g. 0.5 cm) is removed from it with a knife, brush or water
jet so that the roots cut by the face protrude and can be counted (Böhm 1979, "Methods of
Studying Root Systems", Springer, doi:10.1007/978-3-642-67282-8, chapter on the profile wall
method; from memory). A root crossing the face at an angle θ to its normal protrudes by
``scraped_cm / |cos θ|`` (the root is taken as straight over the scraped layer); only roots
protruding at least ``min_protruding_cm`` are counted, and only roots at least
``detection_limit_cm`` thick are seen. For isotropic roots the crossings have ``|cos θ|``
distributed with density ``2 c`` on [0, 1] (common practice in stereology), so the counted
fraction is ``min(1, (scraped / min_protruding)²)``: short protrusions of roots crossing
squarely are the ones lost.

Walls given relative to the stand (``POSITION,DEPTH,CELL``, see
:mod:`rootsim.sampling.stand_positions`) are faces across the rows through that position
(a trench dug across the rows, as field teams do), spanning the stand from its first to its
last inter-row midline. When the rows run along x such a face is the plane ``x = X``
(``normal_axis = "x"``; the output's ``x_*`` columns then hold y).
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
from .stand_positions import is_position_word, parse_position

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
    scraped_cm : float
        Soil layer removed from the face to expose the roots, cm (module docstring; 0 = none).
    min_protruding_cm : float
        Shortest protruding root piece that is counted, cm (0 = every crossing).
    detection_limit_cm : float
        Thinnest root diameter seen, cm (0 = all).
    normal_axis : {"y", "x"}
        Axis normal to the face; ``"x"`` swaps the roles of x and y (faces across rows along x).
    placement : str
        ``"given"`` or the stand position the face passes through.
    plant_id : int
        Plant the placement refers to, or -1.
    """

    y_cm: float
    x_min_cm: float
    x_max_cm: float
    depth_cm: float
    cell_cm: float
    slab_thickness_cm: float | None = None
    scraped_cm: float = 0.0
    min_protruding_cm: float = 0.0
    detection_limit_cm: float = 0.0
    normal_axis: str = "y"
    placement: str = "given"
    plant_id: int = -1

    @property
    def slab_cm(self) -> float:
        return self.cell_cm if self.slab_thickness_cm is None else self.slab_thickness_cm

    def resolve(self, metadata, *, label: str = "wall") -> "Wall":
        """This wall with a stand-relative position turned into a face across the rows (module docstring)."""
        if not math.isnan(self.y_cm):
            return self
        from dataclasses import replace

        from .stand_positions import stand_layout, stand_position

        x, y, plant = stand_position(metadata, self.placement, self.plant_id, option=label)
        pos, along, _, row_sp = stand_layout(metadata, option=label)
        across = pos[:, 1 - along]
        low, high = float(across.min()) - row_sp / 2, float(across.max()) + row_sp / 2
        return replace(self, y_cm=(x, y)[along], x_min_cm=low, x_max_cm=high, normal_axis="xy"[along], plant_id=plant)

    def footprint(self) -> tuple[float, float, float, float]:
        """Horizontal extent (xmin, xmax, ymin, ymax) of the face and its slab, cm."""
        half = 0.5 * self.slab_cm
        if self.normal_axis == "x":
            return (self.y_cm - half, self.y_cm + half, self.x_min_cm, self.x_max_cm)
        return (self.x_min_cm, self.x_max_cm, self.y_cm - half, self.y_cm + half)


def parse_wall(text: str, *, option: str = "--wall") -> Wall:
    """Parse ``"Y,XMIN,XMAX,DEPTH,CELL"`` or ``"POSITION,DEPTH,CELL"`` (cm) into a checked :class:`Wall`."""
    head, _, rest = str(text).partition(",")
    if is_position_word(head):
        placement, plant = parse_position(head, option=f"{option} {text!r}")
        v = parse_numbers(rest, option=f"{option} {text!r} (form POSITION,DEPTH,CELL)", names=("depth", "cell"))
        wall = Wall(y_cm=math.nan, x_min_cm=0.0, x_max_cm=1.0, depth_cm=v["depth"], cell_cm=v["cell"],
                    placement=placement, plant_id=plant)
    else:
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
    for name, value in (("scraped layer", wall.scraped_cm), ("minimum protruding length", wall.min_protruding_cm),
                        ("detection limit", wall.detection_limit_cm)):
        if not (math.isfinite(value) and value >= 0):
            raise SamplingError(f"{label}: {name} must be >= 0 cm, got {value:g}")
    if wall.normal_axis not in ("x", "y"):
        raise SamplingError(f"{label}: normal axis must be 'x' or 'y', got {wall.normal_axis!r}")
    if metadata is not None and not math.isnan(wall.y_cm):
        for x in (wall.x_min_cm, wall.x_max_cm):
            px, py = (wall.y_cm, x) if wall.normal_axis == "x" else (x, wall.y_cm)
            check_point_in_soil(label, x_cm=px, y_cm=py, depth_cm=wall.depth_cm, margin_cm=0.0, metadata=metadata)


def cell_edges(start: float, stop: float, step: float) -> np.ndarray:
    """Edges ``start, start + step, ..., stop`` (last interval shorter if needed), shape (k + 1,)."""
    from ..limits import check_cell_count

    check_cell_count((stop - start) / step, what=f"cells or windows of {step:g} cm")
    k = max(1, math.ceil((stop - start) / step - 1e-9))
    return np.minimum(start + step * np.arange(k + 1), stop)


def _crossings(p0: np.ndarray, p1: np.ndarray, y_cm: float) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """x, depth, |cos θ| to the face normal and the row of segments crossing ``y = y_cm`` (half-open rule)."""
    side0 = p0[:, 1] < y_cm
    side1 = p1[:, 1] < y_cm
    idx = np.flatnonzero(side0 != side1)
    a, b = p0[idx], p1[idx]
    d = b - a
    t = (y_cm - a[:, 1]) / d[:, 1]
    x = a[:, 0] + t * d[:, 0]
    depth = -(a[:, 2] + t * d[:, 2])
    cos_normal = np.abs(d[:, 1]) / np.linalg.norm(d, axis=1)
    return x, depth, cos_normal, idx


def counted_crossings(cos_normal: np.ndarray, diameter: np.ndarray | None, wall: Wall) -> np.ndarray:
    """Which crossings a field team counts on a prepared face (module docstring), bool array.

    Parameters
    ----------
    cos_normal : ndarray, shape (k,)
        |cos| of the angle between each crossing root and the face normal.
    diameter : ndarray, shape (k,), or None
        Root diameters, cm (None: all visible).
    wall : Wall
    """
    with np.errstate(divide="ignore"):
        protruding = np.where(cos_normal > 0, wall.scraped_cm / cos_normal, np.inf)
    keep = protruding >= wall.min_protruding_cm
    if diameter is not None:
        keep &= diameter >= wall.detection_limit_cm
    return keep


def _bin(values: np.ndarray, edges: np.ndarray) -> np.ndarray:
    """Cell index of each value on ``edges`` (half-open cells, the last one closed); -1 outside."""
    i = np.searchsorted(edges, values, side="right") - 1
    i = np.where(values == edges[-1], len(edges) - 2, i)
    return np.where((values >= edges[0]) & (values <= edges[-1]), i, -1)


def sample_wall(system: Any, *, walls: Iterable[Any], check_container: bool = True, periodic: bool = True):
    """Intersections per cell of profile walls and the RLD estimated from them, beside the true RLD.

    Parameters
    ----------
    system : RootSystem or pandas.DataFrame
        Segment table (cm).
    walls : iterable of Wall or str
        The walls; strings are ``"Y,XMIN,XMAX,DEPTH,CELL"`` (cm).
    check_container : bool
        Refuse walls outside a pot or rhizobox named in the metadata (default).
    periodic : bool
        In a field stand, see the roots of neighbouring cells (:mod:`rootsim.periodic_stand`);
        False for a bordered plot.

    Returns
    -------
    pandas.DataFrame
        One row per cell: ``x_left_cm, x_right_cm, depth_top_cm, depth_bottom_cm,
        intersections, rld_estimate_cm_per_cm3`` (``2 × intersections / cell area``, Smith &
        Guttman 1953), ``rld_true_cm_per_cm3`` (exact length in the slab behind the cell over
        its volume), ``slab_thickness_cm``, then ``cell_area_cm2``, ``slab_root_length_cm``,
        ``wall_id``, ``y_cm``, ``normal_axis``, ``placement``. ``intersections`` are the
        crossings counted on the prepared face (all crossings with the defaults).
    """
    import pandas as pd

    walls, q0, q1, radius = sampling_inputs(
        system, walls, kind=Wall, noun="wall", form="Y,XMIN,XMAX,DEPTH,CELL or POSITION,DEPTH,CELL",
        parse=parse_wall, validate=validate_wall, describe=lambda w: f"{w.normal_axis} = {w.y_cm:g}",
        check_container=check_container, periodic=periodic)
    frames = []
    for wall_id, wall in enumerate(walls):
        p0, p1 = (q0[:, [1, 0, 2]], q1[:, [1, 0, 2]]) if wall.normal_axis == "x" else (q0, q1)
        x_edges = cell_edges(wall.x_min_cm, wall.x_max_cm, wall.cell_cm)
        d_edges = cell_edges(0.0, wall.depth_cm, wall.cell_cm)
        nx, nd = len(x_edges) - 1, len(d_edges) - 1
        x, depth, cos_normal, rows = _crossings(p0, p1, wall.y_cm)
        ix, idp = _bin(x, x_edges), _bin(depth, d_edges)
        ok = (ix >= 0) & (idp >= 0) & counted_crossings(cos_normal, None if radius is None else 2.0 * radius[rows], wall)
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
            "normal_axis": np.full(nx * nd, wall.normal_axis, dtype=object),
            "placement": np.full(nx * nd, wall.placement, dtype=object),
        }))
    return pd.concat(frames, ignore_index=True)


#: Segments whose bounding boxes are tested against a wall's slab at a time.
_NEAR_BLOCK = 1 << 16


def _slab_lengths(p0: np.ndarray, p1: np.ndarray, wall: Wall, x_edges: np.ndarray, d_edges: np.ndarray) -> np.ndarray:
    """Exact root length in each slab box behind the wall cells, shape (n_depth_cells, n_x_cells), cm.

    Loops over depth rows of cells (few); within a row, candidate segments x cells are broadcast in blocks.
    """
    half = wall.slab_cm / 2
    ylo, yhi = wall.y_cm - half, wall.y_cm + half
    parts = []
    for start in range(0, len(p0), _NEAR_BLOCK):  # bounding boxes a block at a time (memory per segment)
        a, b = p0[start:start + _NEAR_BLOCK], p1[start:start + _NEAR_BLOCK]
        near = ((np.maximum(a[:, 1], b[:, 1]) >= ylo) & (np.minimum(a[:, 1], b[:, 1]) <= yhi)
                & (np.maximum(a[:, 0], b[:, 0]) >= x_edges[0]) & (np.minimum(a[:, 0], b[:, 0]) <= x_edges[-1]))
        parts.append(np.flatnonzero(near) + start)
    near = np.concatenate(parts) if parts else np.zeros(0, dtype=np.int64)
    del parts
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
