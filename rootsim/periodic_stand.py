"""Field stands as the unit cell of an infinite periodic field.

A field stand of ``rows`` rows with ``plants_per_row`` plants is taken as one cell of a field
in which the same plants repeat every ``rows × row spacing`` across the rows and every
``plants_per_row × plant spacing`` along them. The cell is the rectangle centred on the
stand's plants, reaching half a row spacing beyond the outer rows and half a plant spacing
beyond the end plants, so its area is the stand's ground area.

The segment table keeps unwrapped coordinates (every plant's roots around its own seed,
reaching past the cell as they grew). A sampler or the voxel RLD adds the periodic images
of the roots wherever its geometry reaches past the cell: a root at (x, y) also lies at
(x + i Lx, y + j Ly) for all integers i, j. So a core midway between two plants gets roots
from both sides, and the RLD of the stand's footprint equals the stand RLD. Tables whose
``container.kind`` is a pot or rhizobox, or whose ``stand.boundary`` is ``"bordered"``, are
finite plots (no images); samplers take ``periodic=False`` for a bordered plot in which
only the inner plants are sampled.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping

import numpy as np

__all__ = ["PeriodicCell", "stand_cell", "segment_images", "segment_images_of_columns", "rows_along_y", "BOUNDARY_PERIODIC", "BOUNDARY_BORDERED"]

BOUNDARY_PERIODIC = "periodic"
BOUNDARY_BORDERED = "bordered"
_MAX_IMAGES = 50_000_000
#: Rows whose periodic images :func:`segment_images_of_columns` builds at a time.
IMAGE_CHUNK_ROWS = 1 << 17


@dataclass(frozen=True)
class PeriodicCell:
    """The unit cell of a periodic field stand, cm.

    Parameters
    ----------
    x_min_cm, x_max_cm, y_min_cm, y_max_cm : float
        Cell extent; the field repeats with periods ``x_max - x_min`` and ``y_max - y_min``.
    """

    x_min_cm: float
    x_max_cm: float
    y_min_cm: float
    y_max_cm: float

    @property
    def period_x_cm(self) -> float:
        return self.x_max_cm - self.x_min_cm

    @property
    def period_y_cm(self) -> float:
        return self.y_max_cm - self.y_min_cm

    def as_list(self) -> list[float]:
        return [self.x_min_cm, self.x_max_cm, self.y_min_cm, self.y_max_cm]


def stand_cell(metadata: Mapping | None) -> PeriodicCell | None:
    """The periodic cell of a field stand from table metadata, or None for containers and finite plots.

    Parameters
    ----------
    metadata : mapping or None
        Segment-table metadata with ``stand`` (``rows``, ``plants_per_row``, ``row_spacing_cm``,
        ``plant_spacing_cm``, ``plant_positions_cm``) and ``container``.

    Returns
    -------
    PeriodicCell or None
        None when the table is a pot or rhizobox, says ``stand.boundary = "bordered"``, or lacks
        the stand layout. Rows run along y (plants spaced in y, rows in x) unless the plant
        positions show rows along x.
    """
    meta = dict(metadata or {})
    kind = str((meta.get("container") or {}).get("kind", "field"))
    stand = meta.get("stand") or {}
    if kind != "field" or stand.get("boundary", BOUNDARY_PERIODIC) != BOUNDARY_PERIODIC:
        return None
    try:
        pos = np.asarray(stand["plant_positions_cm"], dtype=np.float64).reshape(-1, 3)[:, :2]
        row_sp = float(stand["row_spacing_cm"])
        plant_sp = float(stand["plant_spacing_cm"])
    except (KeyError, TypeError, ValueError):
        return None
    if pos.size == 0 or not (row_sp > 0 and plant_sp > 0):
        return None
    along_y = rows_along_y(pos, plant_spacing_cm=plant_sp, row_spacing_cm=row_sp)
    across = np.unique(np.round(pos[:, 0 if along_y else 1], 6))
    along = np.unique(np.round(pos[:, 1 if along_y else 0], 6))
    rows = int(stand.get("rows") or len(across))
    per_row = int(stand.get("plants_per_row") or len(along))
    span_x = rows * row_sp if along_y else per_row * plant_sp
    span_y = per_row * plant_sp if along_y else rows * row_sp
    cx = 0.5 * (pos[:, 0].min() + pos[:, 0].max())
    cy = 0.5 * (pos[:, 1].min() + pos[:, 1].max())
    return PeriodicCell(float(cx - span_x / 2), float(cx + span_x / 2), float(cy - span_y / 2), float(cy + span_y / 2))


def rows_along_y(positions: np.ndarray, *, plant_spacing_cm: float, row_spacing_cm: float) -> bool:
    """True when the rows run along y: the gaps between distinct plant coordinates match the spacings best so.

    Parameters
    ----------
    positions : ndarray, shape (n, 2)
        Plant (x, y), cm.
    plant_spacing_cm, row_spacing_cm : float
        Spacings, cm.

    Returns
    -------
    bool
        Ties (a single plant, or equal spacings) go to rows along y, the growth engine's layout.
    """
    def gap(values: np.ndarray) -> float:
        u = np.unique(np.round(values, 6))
        return float(np.diff(u).min()) if u.size > 1 else float("nan")

    gx, gy = gap(positions[:, 0]), gap(positions[:, 1])

    def score(along_gap: float, across_gap: float) -> float:
        return sum(abs(g - want) for g, want in ((along_gap, plant_spacing_cm), (across_gap, row_spacing_cm))
                   if np.isfinite(g))

    return score(gy, gx) <= score(gx, gy)


def segment_images(p0: np.ndarray, p1: np.ndarray, cell: PeriodicCell | None,
                   box: tuple[float, float, float, float]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Every periodic image of every segment whose horizontal bounding box meets a box.

    Parameters
    ----------
    p0, p1 : ndarray, shape (n, 3)
        Segment end points, cm (unwrapped coordinates).
    cell : PeriodicCell or None
        The stand's cell; None returns the segments unchanged (no images).
    box : (xmin, xmax, ymin, ymax)
        Horizontal region the sampler can reach, cm.

    Returns
    -------
    q0, q1 : ndarray, shape (m, 3)
        End points of the images (translated by whole periods in x and y).
    source : ndarray of int64, shape (m,)
        Row of the original segment of each image (for radius, length and other columns).

    Notes
    -----
    Shifts are found per segment in closed form: image ``i`` along x meets the box when
    ``ceil((xmin - seg_xmax) / Lx) <= i <= floor((xmax - seg_xmin) / Lx)``; all images are
    built with one ``repeat`` (no Python loop over segments). Images whose bounding box misses
    the box are not returned, so a box inside the cell gives about as many images as segments.
    """
    n = len(p0)
    if cell is None:
        return p0, p1, np.arange(n, dtype=np.int64)
    lx, ly = cell.period_x_cm, cell.period_y_cm
    bounds_f, total_f = _shift_bounds(p0[:, 0], p1[:, 0], p0[:, 1], p1[:, 1], cell, box)
    _check_image_total(total_f, box)
    i_lo, i_hi, j_lo, j_hi = (b.astype(np.int64) for b in bounds_f)
    del bounds_f
    ni = np.maximum(i_hi - i_lo + 1, 0)
    nj = np.maximum(j_hi - j_lo + 1, 0)
    del i_hi, j_hi
    count = ni * nj
    del ni
    total = int(count.sum())
    if total == n and np.all(count == 1) and not np.any(i_lo) and not np.any(j_lo):
        return p0, p1, np.arange(n, dtype=np.int64)
    source = np.repeat(np.arange(n, dtype=np.int64), count)
    k = np.arange(total, dtype=np.int64) - np.repeat(np.cumsum(count) - count, count)
    nj_s = np.maximum(nj[source], 1)
    del nj, count
    shift_i = i_lo[source] + k // nj_s
    shift_j = j_lo[source] + k % nj_s
    del k, nj_s, i_lo, j_lo
    # the same sums as adding a (total, 3) shift with zero z, without that array
    shift_x, shift_y = shift_i * lx, shift_j * ly
    del shift_i, shift_j
    q0, q1 = p0[source], p1[source]
    for q in (q0, q1):
        q[:, 0] += shift_x
        q[:, 1] += shift_y
    return q0, q1, source


def _shift_bounds(x0, x1, y0, y1, cell: PeriodicCell, box) -> tuple[tuple, float]:
    """Lowest and highest image shift along x and y per segment (as floats) and the number of images."""
    xmin, xmax, ymin, ymax = (float(v) for v in box)
    lx, ly = cell.period_x_cm, cell.period_y_cm
    with np.errstate(over="ignore", invalid="ignore"):
        bounds_f = (np.ceil((xmin - np.maximum(x0, x1)) / lx), np.floor((xmax - np.minimum(x0, x1)) / lx),
                    np.ceil((ymin - np.maximum(y0, y1)) / ly), np.floor((ymax - np.minimum(y0, y1)) / ly))
        total_f = float(np.sum(np.maximum(bounds_f[1] - bounds_f[0] + 1, 0) * np.maximum(bounds_f[3] - bounds_f[2] + 1, 0)))
    return bounds_f, total_f


def _check_image_total(total_f: float, box) -> None:
    if not (np.isfinite(total_f) and total_f <= _MAX_IMAGES):
        from .errors import SamplingError

        xmin, xmax, ymin, ymax = (float(v) for v in box)
        raise SamplingError(f"sampling region x {xmin:g} to {xmax:g}, y {ymin:g} to {ymax:g} cm needs more than "
                            f"{_MAX_IMAGES} periodic root images; sample a smaller region")


def segment_images_of_columns(columns, cell: PeriodicCell | None, box, *,
                              chunk_rows: int | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """:func:`segment_images` of the segments in the columns ``x0 y0 z0 x1 y1 z1``, built a chunk at a time.

    The same arrays as ``segment_images(p0, p1, cell, box)`` with ``p0``, ``p1`` the stacked columns,
    without that stacked copy of the whole table beside the images: a first pass counts the images of
    each chunk of rows, a second fills them in.

    Parameters
    ----------
    columns : mapping of str to ndarray, shape (n,)
        End point coordinates, cm.
    cell, box
        As for :func:`segment_images`.
    chunk_rows : int, optional
        Rows per chunk (default :data:`IMAGE_CHUNK_ROWS`).
    """
    chunk_rows = IMAGE_CHUNK_ROWS if chunk_rows is None else max(int(chunk_rows), 1)
    names = ("x0", "y0", "z0", "x1", "y1", "z1")
    cols = [np.asarray(columns[name], dtype=np.float64) for name in names]
    n = len(cols[0])

    def stacked(lo: int, hi: int) -> tuple[np.ndarray, np.ndarray]:
        return np.column_stack([c[lo:hi] for c in cols[:3]]), np.column_stack([c[lo:hi] for c in cols[3:]])

    if cell is None or n == 0:
        p0, p1 = stacked(0, n)
        return p0, p1, np.arange(n, dtype=np.int64)
    if n <= chunk_rows:  # one chunk: the images need no copying
        p0, p1 = stacked(0, n)
        return segment_images(p0, p1, cell, box)
    chunks = [(lo, min(lo + chunk_rows, n)) for lo in range(0, n, chunk_rows)]
    counts, total_f, plain = [], 0.0, True
    for lo, hi in chunks:
        bounds_f, chunk_total = _shift_bounds(cols[0][lo:hi], cols[3][lo:hi], cols[1][lo:hi], cols[4][lo:hi], cell, box)
        total_f += chunk_total
        if np.isfinite(chunk_total):
            counts.append(int(chunk_total))
            plain = plain and chunk_total == hi - lo and not (np.any(bounds_f[0]) or np.any(bounds_f[1])
                                                              or np.any(bounds_f[2]) or np.any(bounds_f[3]))
        del bounds_f
    _check_image_total(total_f, box)
    if plain:  # every segment is its own only image: the table's segments
        p0, p1 = stacked(0, n)
        return p0, p1, np.arange(n, dtype=np.int64)
    total = sum(counts)
    q0, q1 = np.empty((total, 3)), np.empty((total, 3))
    source = np.empty(total, dtype=np.int64)
    at = 0
    for (lo, hi), count in zip(chunks, counts):
        p0, p1 = stacked(lo, hi)
        c0, c1, c_source = segment_images(p0, p1, cell, box)
        del p0, p1
        q0[at:at + count], q1[at:at + count] = c0, c1
        source[at:at + count] = c_source + lo
        at += count
        del c0, c1, c_source
    return q0, q1, source
